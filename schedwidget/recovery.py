"""Recover a compact design from a logged rate trace: find the joins, fit each stage with one of our shapes.

``recover(trace)`` walks the trace from its first tick.  At each stage start it fits every shape family to the
points ahead (flat, linear / geometric / half-cosine ramps, cosine annealing, polynomial decay, staircase
exponential decay, drops, triangles, inverse square root), keeps the one that explains the most points to the
tolerance, and starts the next stage where it stops.  Stages of one shape that repeat with growing lengths and
decaying peaks become one ``restarts``; a first linear or half-cosine ramp into the next stage's starting rate
becomes a ``warmup``.  Where no shape explains more than a couple of points, the points go into a ``knots``
stage (the fallback), and the result says which ticks it covers.

Every fit is checked by evaluating the design it builds (our own classes) at the logged ticks, so the tolerance
the result states is the one the returned design meets.  The work is bounded: at most ``MAX_STAGES`` stages are
fitted (the rest of a longer trace goes into one knots stage), each candidate is checked in growing chunks that
stop at its first miss, and a trace holds at most ``trace.MAX_TRACE_POINTS`` points.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .combine import stages
from .recover_shapes import FAMILIES
from .recover_tidy import _tidy, node_count
from .schedule import MAX_RATE, MAX_TICKS, Schedule, ScheduleError, complain
from .shapes import flat, knots, ramp
from .trace import as_trace

__all__ = ["recover", "Recovery", "node_count", "MAX_STAGES"]

#: Most stages fitted one by one; the rest of the trace becomes one knots stage.
MAX_STAGES = 200

#: A stage whose best shape explains at most this many points is left to the knots fallback.
_WEAK = 2

#: Points a richer shape must explain beyond a simpler one to be preferred.
_MARGIN = 2

#: Most clock origins tried for a stage when the trace is logged every k > 1 ticks.
_MAX_ORIGINS = 16


@dataclass(frozen=True)
class Recovery:
    """The design ``recover`` found, how well it reproduces the trace and what went into the fallback.

    ``design`` reproduces every logged rate to ``rtol`` (relative) plus ``atol``; its ``knots`` stages, if any,
    cover the tick ranges listed in ``fallback``.  ``compact`` is the same design with each fallback range
    replaced by a straight ramp, and ``residual`` is ``compact``'s largest relative error over the trace (0 when
    nothing needed the fallback, then ``compact`` is ``design``).
    """

    design: Schedule
    compact: Schedule
    residual: float
    rtol: float
    atol: float
    fallback: tuple[tuple[int, int], ...]
    points: int

    @property
    def exact(self) -> bool:
        """Whether the compact design alone (no knots fallback) reproduces the trace to the tolerance."""
        return not self.fallback

    def __str__(self) -> str:
        tol = f"a relative tolerance of {self.rtol:g}"
        if not self.fallback:
            return (f"Recovered a design of {node_count(self.design)} node(s) that reproduces all {self.points:,} "
                    f"logged rates to {tol}: {self.design!r}")
        spans = ", ".join(f"{a:,}..{b:,}" for a, b in self.fallback[:4]) + (" ..." if len(self.fallback) > 4 else "")
        return (f"No shape fits ticks {spans}; those are kept as knots, so the design reproduces all "
                f"{self.points:,} logged rates to {tol}. Without them the best compact design is off by "
                f"{self.residual:.3g} (relative) at worst.")


# ------------------------------------------------------------------ the walk
@dataclass
class _Stage:
    origin: int         # the stage's first tick on the run's clock
    end: int            # the next stage's first tick (for the last stage: the trace's last tick + 1)
    i0: int             # index of its first logged point
    i1: int             # one past its last logged point
    shape: Schedule | None   # None: left to the knots fallback
    fixed: bool = False      # its length is its shape's own (a cosine, a polynomial decay)


def recover(trace: Any, *, rtol: float | None = None, atol: float | None = None) -> Recovery:
    """A compact design that reproduces a logged rate trace.

    Parameters
    ----------
    trace
        A ``Trace`` or anything ``read_trace`` reads: rates at ticks 0, 1, 2, ... or (tick, rate) pairs,
        possibly logged every k ticks.
    rtol, atol
        The tolerance the design must meet at every logged tick: ``|design(t) - r| <= rtol * r + atol``.
        ``rtol`` defaults to 1e-9, or 1e-6 when every rate is a float32 value (a run that logged float32);
        ``atol`` to 1e-12 times the largest rate.

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> d = warmup(cosine(0.1, 0.001, steps=900), 100)
    >>> recover(d(np.arange(1000))).design
    warmup(target=cosine(peak=0.1, floor=0.001, steps=900), steps=100, start=0.0, curve='linear')
    """
    tr = as_trace(trace, "recover")
    t, r = tr.ticks, tr.rates
    if rtol is None:
        rtol = 1e-6 if _float32_logged(r) else 1e-9
    rtol = _number("rtol", rtol, 0.0, 0.5)
    top = float(np.max(r))
    if top > MAX_RATE:
        i = int(np.argmax(r))
        raise complain("recover", f"trace rates[{i}]", top, "a rate <= 1e100 (the highest rate a design may reach)",
                       f"at tick {int(t[i])}; no learning rate comes near 1e100")
    atol = 1e-12 * top if atol is None else _number("atol", atol, 0.0, math.inf)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):  # inf/nan fail the fits
        return _recover(t, r, rtol, atol)


def _recover(t: np.ndarray, r: np.ndarray, rtol: float, atol: float) -> Recovery:
    walk = _Walk(t, r, rtol, atol)
    parts = walk.run()
    parts = _merge_weak(parts)
    design = _assemble(parts, t, r, fallback=True)
    compact = _assemble(parts, t, r, fallback=False)
    design, compact = _tidy(design, t, r, rtol, atol), _tidy(compact, t, r, rtol, atol)
    spans = tuple((int(p.origin), int(p.end - 1)) for p in parts if p.shape is None)
    if not np.all(np.abs(design(t) - r) <= rtol * np.abs(r) + atol):
        # never state a tolerance the design does not meet: the whole trace as knots meets any
        pts = [(int(a), float(b)) for a, b in zip(t, r)]
        if pts[0][0] != 0:
            pts.insert(0, (0, pts[0][1]))
        design, spans = knots(pts, interp="linear", steps=min(int(t[-1]) + 1, MAX_TICKS)), ((0, int(t[-1])),)
    err = _relative_error(compact, t, r, atol)
    return Recovery(design, compact, 0.0 if not spans else err, rtol, atol, spans, int(t.size))


def _float32_logged(r: np.ndarray) -> bool:
    """Whether every rate is a float32 value and some are a short decimal rounded to float32: 0.10000000149011612
    is 0.1 as float32, a logged 0.1.  A long decimal that is no short float32 either (2 ** -18 = 3.814697265625e-06,
    float32 3.8146973e-06; 2 ** -20, float32 9.536743e-07) is an exact rate of a design, such as 0.5 ** t, and is
    read to 1e-9."""
    with np.errstate(over="ignore"):  # a rate beyond float32's range is not a float32 log
        if not np.array_equal(r.astype(np.float32).astype(np.float64), r):
            return False
    sample = r[:: max(1, r.size // 1000)]
    return any(_digits(repr(float(x))) > 12 and _digits(str(np.float32(x))) <= 5 for x in sample)


def _digits(text: str) -> int:
    """Significant digits of a number's shortest repr (``'3.8146973e-06'`` -> 8)."""
    return len(text.replace("-", "").replace(".", "").split("e")[0].lstrip("0").rstrip("0") or "0")


def _number(name: str, value: Any, lo: float, hi: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not lo <= float(value) <= hi:
        raise complain("recover", name, value, f"a number in [{lo:g}, {hi:g}]")
    return float(value)


def _relative_error(s: Schedule, t: np.ndarray, r: np.ndarray, atol: float) -> float:
    e = s(t)
    return float(np.max(np.maximum(np.abs(e - r) - atol, 0.0) / np.maximum(np.abs(r), 1e-300)))


class _Walk:
    """The greedy walk over the trace: one stage at a time, the shape that explains the most points."""

    def __init__(self, t: np.ndarray, r: np.ndarray, rtol: float, atol: float) -> None:
        self.t, self.r, self.rtol, self.atol = t, r, rtol, atol
        self.end = min(int(t[-1]) + 1, MAX_TICKS)  # a design's length stays <= 2**53; past it, it holds
        self.memo: dict[tuple[int, int], Any] = {}
        self.stages: list[int] = []

    def close(self, e: np.ndarray, y: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", over="ignore"):
            return np.abs(e - y) <= self.rtol * np.abs(y) + self.atol

    def reach(self, s: Schedule, origin: int, i0: int, stop: int | None = None) -> int:
        """How many points from ``i0`` on ``s`` explains in a row (on its clock from ``origin``)."""
        n = self.t.size if stop is None else stop
        i, chunk = i0, 16
        try:
            while i < n:
                j = min(n, i + chunk)
                ok = self.close(s(self.t[i:j] - origin), self.r[i:j])
                if not ok.all():
                    return i - i0 + int(np.argmin(ok))
                i, chunk = j, chunk * 4
        except ScheduleError:
            return 0
        return n - i0

    def run(self) -> list[_Stage]:
        t = self.t
        parts: list[_Stage] = []
        self.stages = []
        origin, i0 = int(t[0]), 0
        if origin > 0:  # the run logged from a later tick: the ticks before it hold the first rate
            parts.append(_Stage(0, origin, 0, 0, flat(float(self.r[0]), steps=origin)))
        while i0 < t.size:
            if len(parts) >= MAX_STAGES:
                parts.append(_Stage(origin, self.end, i0, t.size, None))
                break
            self.stages.append(i0)
            best = self.best(origin, i0)
            if best is None:   # nothing explains even one point at this origin: knots until the next
                parts.append(_Stage(origin, int(t[i0]) + 1, i0, i0 + 1, None))
                origin, i0 = int(t[i0]) + 1, i0 + 1
                continue
            shape, count, length = best
            i1 = i0 + count
            if i1 >= t.size:
                end = origin + length if length is not None else self.end
                parts.append(_Stage(origin, end, i0, i1, shape, length is not None))
                break
            if length is not None:
                parts.append(_Stage(origin, origin + length, i0, i1, shape, True))
                origin, i0 = origin + length, i1
            else:
                nxt, j0 = self.next_origin(i1)
                parts.append(_Stage(origin, nxt, i0, max(i1 if j0 == i1 else j0, i0 + 1), shape))
                origin, i0 = nxt, j0
        return parts

    def next_origin(self, i1: int) -> tuple[int, int]:
        """Where the next stage starts, and its first point: just after the last point explained, or on it
        (a join's point often lies on both stages), or between two logged ticks, whichever lets the next
        stage explain the most of what follows."""
        lo, hi = int(self.t[i1 - 1]) + 1, int(self.t[i1])
        cands = [(a, i1) for a in np.unique(np.linspace(lo, hi, min(_MAX_ORIGINS, hi - lo + 1)).round()
                                            .astype(np.int64)).tolist()]
        if i1 - 1 > 0 and (not self.stages or self.stages[-1] < i1 - 1):
            cands.append((lo - 1, i1 - 1))
        scored = []
        for a, j in cands:
            b = self.best(int(a), j)
            if b is not None:
                scored.append((j + b[1], j < i1, int(a), j))  # on a tie, the join on the shared point
        if not scored:
            return lo, i1
        _, _, a, j = max(scored)
        return a, j

    def best(self, origin: int, i0: int) -> tuple[Schedule, int, int | None] | None:
        """The shape that explains the most points from ``i0`` on, with the count and its own length (or None)."""
        key = (origin, i0)
        if key not in self.memo:
            self.memo[key] = self._best(origin, i0)
        return self.memo[key]

    def _best(self, origin: int, i0: int) -> tuple[Schedule, int, int | None] | None:
        best: tuple[Schedule, int, int | None] | None = None
        best_make = None
        for make in FAMILIES:
            for shape, length in make(self, origin, i0):
                stop = None
                if length is not None:
                    stop = int(np.searchsorted(self.t, origin + length, side="left"))
                    if stop <= i0:
                        continue
                count = self.reach(shape, origin, i0, stop)
                if length is not None and count < stop - i0:
                    continue  # a shape with its own length must explain every point up to its end
                if length is not None and stop >= self.t.size:
                    count = self.reach(shape, origin, i0)  # the last stage holds its end value past its length
                # a later (richer) family must explain clearly more than a simpler one: a point or two more is
                # usually the next stage's first points, taken by a shape that merely bends there
                margin = (_MARGIN if best is not None and make is not best_make and best[1] >= 8
                          and i0 + count < self.t.size else 0)  # a shape that explains all the rest wins outright
                if count and (best is None or count > best[1] + margin):
                    best, best_make = (shape, count, length), make
        return best

    # helpers for the families
    def ahead(self, origin: int, i0: int, k: int) -> tuple[np.ndarray, np.ndarray]:
        j = min(self.t.size, i0 + k)
        return (self.t[i0:j] - origin).astype(np.float64), self.r[i0:j]


# ------------------------------------------------------------------ assembling the design
def _merge_weak(parts: list[_Stage]) -> list[_Stage]:
    """Runs of two or more stages that explain at most ``_WEAK`` points each become one fallback stage."""
    def weak(p: _Stage) -> bool:
        return p.shape is None or p.i1 - p.i0 <= _WEAK

    out: list[_Stage] = []
    k = 0
    while k < len(parts):
        j = k
        while j < len(parts) and weak(parts[j]):
            j += 1
        if j - k >= 2 or (j - k == 1 and parts[k].shape is None):
            out.append(_Stage(parts[k].origin, parts[j - 1].end, parts[k].i0, parts[j - 1].i1, None))
            k = j
        else:
            out.append(parts[k])
            k += 1
    return out


def _sized(shape: Schedule, length: int) -> Schedule:
    """``shape`` made to last ``length`` ticks (its ``steps``), if its length is not its own."""
    if shape.length == length:
        return shape
    if shape.kind == "ramp":  # the same line (or curve) cut at the new length: its end is its value there
        if length > shape.steps:  # it held its end for the last points: not a ramp of this length
            raise ScheduleError(f"recover: a ramp of {shape.steps} ticks cannot fill a stage of {length}")
        return replace(shape, end=float(shape(length)), steps=length)
    if shape.kind == "drops":  # drops at or past the cut belong to the next stage
        at = tuple(a for a in shape.at if a < length)
        return replace(shape, at=at, steps=length) if at else flat(shape.peak, steps=length)
    return replace(shape, steps=length)


def _assemble(parts: list[_Stage], t: np.ndarray, r: np.ndarray, fallback: bool) -> Schedule:
    built: list[Schedule] = []
    for k, p in enumerate(parts):
        L = max(p.end - p.origin, 1)
        if p.shape is not None:
            last = k == len(parts) - 1
            try:  # the last stage may end before the trace does: past its length it holds its end value
                keep = p.fixed or (last and p.shape.length is not None and p.shape.length < L)
                built.append(p.shape if keep else _sized(p.shape, L))
                continue
            except ScheduleError:  # the shape cannot be cut to its stage: keep its points as knots
                pass
        u, y = t[p.i0:p.i1] - p.origin, r[p.i0:p.i1]
        if y.size == 0:
            built.append(flat(float(r[min(p.i0, r.size - 1)]), steps=L))
        elif fallback:
            pts = [(int(a), float(b)) for a, b in zip(u, y)]
            if pts[0][0] != 0:
                pts.insert(0, (0, pts[0][1]))
            built.append(knots(pts, interp="linear", steps=max(L, pts[-1][0])))
        else:
            built.append(ramp(float(y[0]), float(y[-1]), L))
    return stages(*built) if len(built) > 1 else built[0]
