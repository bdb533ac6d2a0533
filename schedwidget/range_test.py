"""Reading a learning-rate range test: the smoothed loss over log10(rate), two readings of a peak, a design.

A range test (Smith 2017, "Cyclical Learning Rates for Training Neural Networks", section 3.3) trains for a few
hundred updates while the rate grows from very low to very high and logs the loss at each rate.  This module
smooths that log and reads it two ways:

* **published reading** (Smith 2017, section 3.3, which reads *accuracy*: "note the learning rate value when the
  accuracy starts to increase and when the accuracy slows, becomes ragged, or starts to fall"; wording checked
  against a summary of the paper, not the paper itself).  For a *loss* we read it as: the rate where the smoothed
  loss **starts to fall** (the lower bound), and the rate where it **stops falling or turns ragged** (the upper
  bound, the suggested peak).  The rate where it **falls fastest** is reported beside them as evidence (the
  steepest point most range-test tools mark: common practice, no source).
* **common-practice reading**: a tenth of the rate at the minimum smoothed loss (common practice, no source).

The thresholds that turn "starts to fall" and "turns ragged" into numbers are ours (``onset``, ``ragged``) and
are stated in ``read_range_test``'s docstring.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

import numpy as np

from .combine import warmup
from .params import complain
from .pieces import one_cycle
from .range_input import OWNER, RangeLog, check_log
from .schedule import Schedule
from .shapes import cosine

#: Default smoothing window in decades of the rate (full width); widened to at least 8 log spacings.
DEFAULT_WINDOW = 0.25

#: Mean of |second difference| of unit Gaussian noise: sqrt(6) * sqrt(2 / pi) (turns roughness into a sigma).
_ROUGH_PER_SIGMA = float(np.sqrt(6.0) * np.sqrt(2.0 / np.pi))

#: Median of |second difference| of unit Gaussian noise: 0.6745 * sqrt(6) (a robust sigma from roughness).
_MEDIAN_ROUGH_PER_SIGMA = float(0.6744897501960817 * np.sqrt(6.0))

#: A fall counts when it exceeds this many sigma / sqrt(k + 1) (the standard error of the fit at the end of the
#: log, where it is largest).  Ours, calibrated on flat logs of pure noise (300 seeds each of Gaussian and
#: Student-t(3) noise, 20 to 3,000 points): a fall this large was seen in about 1 % of them or fewer.
FALL_NOISE = 10.0

METHOD = ("centred local linear least squares in log10(rate): at each point a straight line is fitted to the "
          "2k+1 points around it (equal weights; cut at the ends of the log) and read at that point, its slope "
          "being the loss change per decade")


def smooth(x: np.ndarray, y: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """(smoothed values, slopes) of ``y`` over ``x`` by a centred straight-line fit over 2k+1 points.

    Why this smoother: it has no lag (an exponential moving average moves every feature of the curve towards
    higher rates by about its time constant), the slope comes from the same fit, and on an evenly spaced log a
    curve whose slope is symmetric about its steepest point keeps its steepest point where it is (the fitted
    slope is a symmetric average of the slope).  Work is O(n) (running sums).
    """
    n = x.size
    i = np.arange(n)
    lo = np.maximum(i - k, 0)
    hi = np.minimum(i + k + 1, n)
    xc = x - x[n // 2]
    yc = y - np.median(y)

    def run(v: np.ndarray) -> np.ndarray:
        c = np.concatenate(([0.0], np.cumsum(v)))
        return c[hi] - c[lo]

    m = (hi - lo).astype(np.float64)
    sx, sy, sxx, sxy = run(xc), run(yc), run(xc * xc), run(xc * yc)
    den = m * sxx - sx * sx
    slope = (m * sxy - sx * sy) / den
    level = sy / m + slope * (xc - sx / m) + np.median(y)
    return level, slope


def _rough(y: np.ndarray, level: np.ndarray, k: int) -> np.ndarray:
    """|second difference| of the loss minus its smoothed curve, per point, and its mean over each window.

    Taking the smoothed curve off first leaves the noise, not the curve's own bend (a sparse log of a steep
    fall has large second differences without any noise).
    """
    d2 = np.abs(np.diff(y - level, 2))
    d2 = np.concatenate(([d2[0]], d2, [d2[-1]]))
    n = y.size
    i = np.arange(n)
    lo, hi = np.maximum(i - k, 0), np.minimum(i + k + 1, n)
    c = np.concatenate(([0.0], np.cumsum(d2)))
    return d2, (c[hi] - c[lo]) / (hi - lo)


@dataclass(frozen=True, eq=False)
class RangeReading:
    """What a range test says: the smoothed curve, the readings, their evidence, and a starting design.

    Rates are absolute.  ``low``/``peak`` are the published reading's bounds (Smith 2017, section 3.3), ``peak_common``
    the common-practice reading (a tenth of ``minimum``; common practice, no source); each is None when the loss
    never falls by more than its noise.  ``evidence`` maps each reading (``start``, ``steepest``, ``stop``,
    ``minimum``) to ``(tick, rate)``: the row of the log as given and the logged rate there.
    """

    rates: np.ndarray
    losses: np.ndarray
    smoothed: np.ndarray
    slope: np.ndarray
    ticks: np.ndarray
    method: str
    window: float
    half_points: int
    diverged_at: float | None
    dropped: int
    reordered: bool
    noise: float
    fell: bool
    start: float | None
    steepest: float | None
    stop: float | None
    stop_reason: str | None
    minimum: float
    evidence: Mapping[str, tuple[int, float]]

    @property
    def still_falling(self) -> bool:
        """True when the lowest smoothed loss is the log's last point: the sweep ended too low."""
        return bool(self.fell and self.evidence["minimum"][1] == self.rates[-1])

    @property
    def low(self) -> float | None:
        """Published lower bound: where the smoothed loss starts to fall (Smith 2017, section 3.3)."""
        return self.start

    @property
    def peak(self) -> float | None:
        """Published peak: where the smoothed loss stops falling or turns ragged (Smith 2017, section 3.3)."""
        return self.stop

    @property
    def peak_common(self) -> float | None:
        """A tenth of the rate at the minimum smoothed loss (common practice, no source); None without a fall."""
        return self.minimum / 10.0 if self.fell else None

    def design(self, steps: int, reading: str = "published", shape: str = "one_cycle",
               warmup_share: float = 0.05) -> Schedule:
        """A starting design around the suggested peak, ``steps`` ticks long.

        ``shape="one_cycle"``: ``one_cycle(peak, steps, low=...)`` (Smith 2018's policy), whose low rate is the
        published lower bound with ``reading="published"`` (the two bounds of Smith 2017, section 3.3) and
        ``one_cycle``'s own default (a tenth of the peak) with ``reading="common"``.  ``shape="cosine"``: a
        linear warmup over ``warmup_share`` of the steps (5 %: common practice, no source) into a cosine to 0.

        >>> import numpy as np
        >>> r = np.geomspace(1e-5, 10.0, 200)
        >>> x = np.log10(r)
        >>> loss = 2.0 - 1.5 / (1 + np.exp(-(x + 2) / 0.3)) + 0.5 * np.exp(3 * (x - 0.5))
        >>> print(read_range_test(r, loss).design(1000, shape="cosine").length)
        1000
        """
        owner = "RangeReading.design"
        if reading not in ("published", "common"):
            raise complain(owner, "reading", reading, "'published' or 'common'")
        if shape not in ("one_cycle", "cosine"):
            raise complain(owner, "shape", shape, "'one_cycle' or 'cosine'")
        peak = self.peak if reading == "published" else self.peak_common
        if peak is None:
            raise complain(owner, "reading", reading, "a reading that found a peak",
                           "the smoothed loss never fell by more than its noise; sweep a wider range of rates")
        if shape == "one_cycle":
            low = self.low if reading == "published" and self.low is not None and self.low < peak else None
            return one_cycle(peak, steps, low=low)
        if not (isinstance(warmup_share, (int, float)) and not isinstance(warmup_share, bool)
                and 0.0 < warmup_share < 1.0):
            raise complain(owner, "warmup_share", warmup_share, "a share in (0, 1)")
        if not (isinstance(steps, (int, np.integer)) and not isinstance(steps, bool) and steps >= 2):
            raise complain(owner, "steps", steps, "a whole number >= 2", "a warmup and a cosine need a tick each")
        w = min(max(1, round(warmup_share * int(steps))), int(steps) - 1)
        return warmup(cosine(peak, 0.0, int(steps) - w), w)

    def __str__(self) -> str:
        def tick(name: str) -> str:
            t, r = self.evidence[name]
            if name == "steepest" and self.steepest is not None:
                r = self.steepest  # refined between the logged rates
            return f"{r:.3g} (tick {t})"

        n = self.rates.size
        head = f"range test: {n} points, rates {self.rates[0]:.3g} .. {self.rates[-1]:.3g}"
        if self.diverged_at is not None:
            head += f"; the loss turned nan/inf at {self.diverged_at:.3g} ({self.dropped} row(s) cut)"
        lines = [head, f"smoothing: straight-line fit over {2 * self.half_points + 1} points "
                       f"({self.window:.3g} decades of the rate), centred"]
        if self.reordered:
            lines.append("the rates did not increase in the order logged: read sorted by rate")
        if not self.fell:
            lines.append("the smoothed loss never falls by more than its noise: no peak suggested "
                         "(the sweep starts too high or ends too low)")
            return "\n".join(lines)
        why = {"slows": "stops falling", "ragged": "turns ragged"}
        lines.append(f"published reading (Smith 2017, sec. 3.3): the loss starts to fall at {tick('start')}, "
                     f"falls fastest at {tick('steepest')}, {why[str(self.stop_reason)]} at {tick('stop')}")
        lines.append(f"  -> peak {self.peak:.3g}, bounds {self.low:.3g} .. {self.peak:.3g}")
        lines.append(f"common practice, no source: lowest smoothed loss at {tick('minimum')} -> peak "
                     f"{self.peak_common:.3g}")
        if self.evidence["steepest"][1] == self.rates[0]:
            lines.append("caution: the loss falls fastest at the first logged rate; sweep from lower rates")
        if self.still_falling:
            lines.append("caution: the loss was still falling at the end of the log; sweep to higher rates")
        return "\n".join(lines)


def _checked(name: str, value: Any, lo: float, hi: float, allowed: str) -> float:
    ok = isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool)
    if ok and isinstance(value, int) and abs(value) > 10 ** 300:  # float() of a huge int overflows: refuse it first
        ok = False
    if not ok or not (lo < float(value) < hi):
        raise complain(OWNER, name, value, allowed)
    return float(value)


def read_range_test(source: Any, losses: Any = None, *, rate_column: str | int | None = None,
                    loss_column: str | int | None = None, window: float | None = None, onset: float = 0.1,
                    ragged: float = 3.0) -> RangeReading:
    """Read a learning-rate range test's log: smoothed loss, published and common-practice peaks, evidence.

    Parameters
    ----------
    source, losses
        The rates and the losses as two sequences, arrays or pandas Series; or ``source`` alone as (rate, loss)
        pairs (an (n, 2) array or a sequence of pairs), a pandas DataFrame, a CSV path or the bytes of a CSV
        file.  Rows in the order of the updates; nan/inf losses at the end are the divergence (cut and
        reported); rates must be finite and > 0 (sorted if they do not increase); see ``range_input``.
    rate_column, loss_column
        Columns of a CSV file or DataFrame; by default the one whose name holds "lr" or "rate" and the one whose
        name holds "loss" (the first two columns of a file without a header).
    window
        Smoothing window, full width in decades of the rate; default ``max(0.25, 8 median spacings)``.  It is
        turned into k points each side (at least 2); see ``smooth`` for the method and why.
    onset
        Share of the whole fall of the smoothed loss that counts as "starts to fall" at its top and as "slows"
        at its bottom (0.1: ours, no source); below one half, so the start comes before the stop.
    ragged
        The loss "turns ragged" where its roughness exceeds ``ragged`` times its level before the fall (3: ours,
        no source).  Roughness: |second difference| of (raw loss - smoothed loss), averaged over the window;
        its level before the fall is its mean from the first point to the onset (at least 2k+1 points), and
        it is never taken below a thousandth of the fall (so a noise-free log is not ragged by rounding).

    Readings, on the smoothed curve S (per point of the log, so each reading is a logged rate):

    * the fall: from the highest S before its lowest point down to that lowest point; it counts only if it is
      larger than ``FALL_NOISE`` (10) sigma / sqrt(k + 1), sigma the loss's noise (from the median roughness
      over the whole log); else ``fell`` is False and no peak is suggested;
    * start: the first point of the fall where S is ``onset`` of the fall below its top (Smith 2017, 3.3);
    * steepest: the most negative slope of S from the top of the fall to the lowest point or, when the loss
      turns ragged before that, to where it does; refined between points by a parabola through three slopes
      (reported as evidence; common practice, no source);
    * stop: Smith 2017 (3.3) reads "slows, becomes ragged, or starts to fall" (for accuracy); for a loss: the
      first point from the steepest one on where S is within the last ``onset`` share of the fall ("slows";
      it comes at or before the lowest point, where the loss starts to rise), or the first point after the
      onset where the loss turns ragged, whichever is first (``stop_reason`` "slows" or "ragged");
      ``still_falling`` says the lowest point is the log's last (the sweep ended too low);
    * minimum: the rate at the lowest S; the common-practice peak is a tenth of it (common practice, no source).

    Resolution: a reading is a logged rate, so it is exact to one spacing of the log, and the smoothing can move
    it by up to half the window more; the steepest point of a fall whose slope is symmetric about it does not
    move (the fitted slope is a symmetric average), so on an evenly spaced log it is exact to one spacing.
    Noise adds its own error: widen ``window`` for a noisy log.

    >>> import numpy as np
    >>> r = np.geomspace(1e-5, 10.0, 301)
    >>> x = np.log10(r)
    >>> loss = 2.0 - 1.5 / (1 + np.exp(-(x + 2) / 0.3)) + 0.5 * np.exp(3 * (x - 0.5))
    >>> reading = read_range_test(r, loss)
    >>> round(float(np.log10(reading.steepest)), 2)
    -2.0
    """
    onset = _checked("onset", onset, 0.0, 0.5, "a share in (0, 0.5)")
    ragged = _checked("ragged", ragged, 1.0, 1e6, "a factor in (1, 1e6)")
    log = check_log(source, losses, rate_column, loss_column)
    x = np.log10(log.rates)
    n = x.size
    spacing = float(np.median(np.diff(x)))
    if window is None:
        width = max(DEFAULT_WINDOW, 8.0 * spacing)
    else:
        span = float(x[-1] - x[0])
        number = isinstance(window, (int, float, np.floating, np.integer)) and not isinstance(window, bool)
        if not (number and 0.0 < float(window) <= span):
            raise complain(OWNER, "window", window, f"a width in decades in (0, {span:.6g}] (the log's span)",
                           "the full width of the smoothing window, in decades of the rate")
        width = float(window)
    k = int(min(max(2, round(width / 2.0 / spacing)), (n - 1) // 2))
    level, slope = smooth(x, log.losses, k)
    return _read(log, x, level, slope, k, k * 2 * spacing, onset, ragged)


def _read(log: RangeLog, x: np.ndarray, level: np.ndarray, slope: np.ndarray, k: int, width: float,
          onset: float, ragged: float) -> RangeReading:
    n = x.size
    m = int(np.argmin(level))
    a = int(np.argmax(level[:m + 1]))
    fall = float(level[a] - level[m])
    d2, rough = _rough(log.losses, level, k)
    # the onset needs only the fall; the noise is measured from the start of the log up to it (at least 2k+1
    # points): the part of the log before the rate does anything
    i0 = a + int(np.argmax(level[a:m + 1] <= level[a] - onset * fall))
    base = float(np.mean(d2[:max(i0, 2 * k) + 1]))
    noise = float(np.median(d2)) / _MEDIAN_ROUGH_PER_SIGMA
    fell = m > a and fall > 0.0 and fall > FALL_NOISE * noise / np.sqrt(k + 1)
    ev: dict[str, tuple[int, float]] = {"minimum": (int(log.ticks[m]), float(log.rates[m]))}
    start = steep = stop = None
    reason = None
    if fell:
        limit = ragged * max(base, 1e-3 * fall * _ROUGH_PER_SIGMA / np.sqrt(2 * k + 1))
        rough_at = np.flatnonzero(rough[i0 + 1:m + 1] > limit)
        j_rough = i0 + 1 + int(rough_at[0]) if rough_at.size else None
        end = m if j_rough is None else j_rough  # the steepest fall is sought before the loss turns ragged
        s = a + int(np.argmin(slope[a:end + 1]))
        steep = _refine(x, slope, s, a, end)
        # the first point at or after the steepest one within the last onset share of the fall (m qualifies)
        j_slow = s + int(np.argmax(level[s:m + 1] <= level[m] + onset * fall))
        if j_rough is not None and j_rough < j_slow:
            j, reason = j_rough, "ragged"
        else:
            j, reason = j_slow, "slows"
        start, stop = float(log.rates[i0]), float(log.rates[j])
        ev.update(start=(int(log.ticks[i0]), start), steepest=(int(log.ticks[s]), float(log.rates[s])),
                  stop=(int(log.ticks[j]), stop))
    for arr in (level, slope):
        arr.setflags(write=False)
    return RangeReading(rates=log.rates, losses=log.losses, smoothed=level, slope=slope, ticks=log.ticks,
                        method=METHOD, window=width, half_points=k, diverged_at=log.diverged_at,
                        dropped=log.dropped, reordered=log.reordered, noise=noise, fell=bool(fell), start=start,
                        steepest=steep, stop=stop, stop_reason=reason, minimum=float(log.rates[m]),
                        evidence=MappingProxyType(ev))


def _refine(x: np.ndarray, slope: np.ndarray, s: int, a: int, m: int) -> float:
    """The rate of the steepest point, between log points: the vertex of a parabola through three slopes."""
    if s <= a or s >= m or s <= 0 or s >= x.size - 1:
        return float(10.0 ** x[s])
    x0, x1, x2 = x[s - 1], x[s], x[s + 1]
    y0, y1, y2 = slope[s - 1], slope[s], slope[s + 1]
    d01, d12 = (y1 - y0) / (x1 - x0), (y2 - y1) / (x2 - x1)
    curv = (d12 - d01) / (x2 - x0)
    if not curv > 0:
        return float(10.0 ** x1)
    # vertex of y0 + d01 (x - x0) + curv (x - x0)(x - x1)
    v = (x0 + x1) / 2.0 - d01 / (2.0 * curv)
    return float(10.0 ** min(max(v, x0), x2))
