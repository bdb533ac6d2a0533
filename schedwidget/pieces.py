"""Piecewise and cyclic leaf shapes: triangle cycles, the one-cycle policy and knots.

Like ``shapes``, each is a frozen value whose parameters are declared once; every formula is written for a
real-valued clock ``u`` and sampled at integer ticks.
"""

from __future__ import annotations

import math
from dataclasses import field
from typing import ClassVar, Sequence

import numpy as np

from .codegen import num, plus
from .leaf import TICK_SOFT, _Leaf, _rate, _steps, node
from .schedule import EDGE_CAP, MAX_TICKS, Schedule, as_whole, check_top, complain, monotone_range, param

__all__ = ["triangle", "one_cycle", "knots"]


@node
class Triangle(_Leaf):
    """Triangular cycles between ``low`` and ``high`` (Smith 2017); amplitude times ``shrink`` each cycle.

    A cycle rises for ``half_period`` ticks and falls for ``fall`` ticks (``half_period`` when None: the
    symmetric cycle of Smith 2017, eq. (1)-(3)).
    """

    kind: ClassVar[str] = "triangle"
    low: float = _rate("rate at the start of every cycle")
    high: float = _rate("rate at the apex of the first cycle")
    half_period: int = param(kind="ticks", lo=1, soft=(1, 20_000), doc="ticks from low to apex (the rise)")
    shrink: float = param(1.0, kind="ratio", lo=0.0, lo_open=True, hi=1.0, soft=(0.3, 1.0),
                          doc="amplitude multiplier per cycle; 0.5 halves it each cycle")
    steps: int | None = _steps(optional=True)
    fall: int | None = param(None, kind="ticks", lo=1, soft=(1, 20_000), optional=True,
                             doc="ticks from the apex back to low; None: half_period (a symmetric cycle)")

    def __post_init__(self) -> None:
        self._validate()
        if self.low > self.high:
            raise complain("triangle", "low", self.low, f"<= high = {self.high!r}")
        if self.fall is not None and self.half_period + self.fall > MAX_TICKS:
            raise complain("triangle", "fall", self.fall, f"a whole number <= {MAX_TICKS - self.half_period}",
                           "a cycle (half_period + fall) must stay within 2**53 ticks")

    def __repr__(self) -> str:
        text = Schedule.__repr__(self)  # fall=None (the default) is left out, so older reprs read the same
        return text.replace(", fall=None)", ")") if self.fall is None else text

    def _even(self) -> bool:
        return self.fall is None or self.fall == self.half_period

    def _period(self) -> float:
        return float(self.half_period) * 2.0 if self._even() else float(self.half_period + self.fall)

    def _cycle(self, u):
        return np.floor(1.0 + u / (2.0 * self.half_period))

    def _source(self, w, u, bound, ind, sink):
        h = float(self.half_period)
        c, x = w.fresh("c"), w.fresh("x")
        amp = "" if self.shrink == 1.0 else f" * {num(self.shrink)} ** ({c} - 1.0)"
        if self._even():
            w.put(ind, f"{c} = math.floor(1.0 + {u} / {num(2.0 * h)})  # cycle number, from 1")
            w.put(ind, f"{x} = abs({u} / {num(h)} - 2.0 * {c} + 1.0)")
            w.put(ind, sink(plus(self.low, self.high - self.low, f"max(0.0, 1.0 - {x})" + amp)))
            return
        p, d = self._period(), float(self.fall)
        w.put(ind, f"{c} = math.floor(1.0 + {u} / {num(p)})  # cycle number, from 1")
        w.put(ind, f"{x} = {u} - ({c} - 1.0) * {num(p)}  # ticks into the cycle")
        w.put(ind, f"{x} = {x} / {num(h)} if {x} < {num(h)} else ({num(p)} - {x}) / {num(d)}")
        w.put(ind, sink(plus(self.low, self.high - self.low, f"max(0.0, {x})" + amp)))

    def _at(self, u):
        h = float(self.half_period)
        if self._even():
            c = self._cycle(u)
            x = np.abs(u / h - 2.0 * c + 1.0)
            return self.low + (self.high - self.low) * np.maximum(0.0, 1.0 - x) * np.power(self.shrink, c - 1.0)
        p, d = self._period(), float(self.fall)
        c = np.floor(1.0 + u / p)
        x = u - (c - 1.0) * p
        x = np.where(x < h, x / h, (p - x) / d)
        return self.low + (self.high - self.low) * np.maximum(0.0, x) * np.power(self.shrink, c - 1.0)

    def _range(self, a, b):
        h, p = float(self.half_period), self._period()
        fa, fb = self._at(a), self._at(b)
        trough = np.ceil(a / p) * p <= b
        lo = np.where(trough, self.low, np.minimum(fa, fb))
        c0 = np.ceil((a - h) / p) + 1.0  # the first cycle whose apex, at (c - 1) * p + h, is at or after a
        apex = (c0 - 1.0) * p + h <= b
        top = self.low + (self.high - self.low) * np.power(self.shrink, c0 - 1.0)
        hi = np.maximum(np.maximum(fa, fb), np.where(apex, top, -np.inf))
        return lo, hi

    def _window(self) -> int:  # three cycles
        return int(3 * self._period())


def _piecewise(xs: np.ndarray, ys: np.ndarray, u: np.ndarray, curve: str) -> np.ndarray:
    if curve == "linear":
        return np.interp(u, xs, ys)
    i = np.clip(np.searchsorted(xs, u, side="right") - 1, 0, len(xs) - 2)
    frac = (u - xs[i]) / (xs[i + 1] - xs[i])
    if curve == "cosine":
        return ys[i] + (ys[i + 1] - ys[i]) * (1.0 - np.cos(np.pi * frac)) / 2.0
    return np.exp(np.interp(u, xs, np.log(ys)))


def _piecewise_range(f, xs: np.ndarray, ys: np.ndarray, a, b):
    """Bounds of a curve that is monotone between the knots ``xs``: ends plus knots inside.

    The knots inside ``[a, b]`` are the run ``xs[i0:i1]``; one ``reduceat`` per side reads every run (a Python loop
    over 100,000 knots cost 0.7 s a call). Intervals are taken in order of ``i0`` so the stretches between runs,
    which ``reduceat`` also reduces, add up to at most the knots once.
    """
    lo, hi = monotone_range(f, a, b)
    shape = np.shape(lo)
    lo, hi = np.array(lo, dtype=float).reshape(-1), np.array(hi, dtype=float).reshape(-1)
    af = np.broadcast_to(np.asarray(a, dtype=float), shape).reshape(-1)
    bf = np.broadcast_to(np.asarray(b, dtype=float), shape).reshape(-1)
    i0 = np.searchsorted(xs, af, side="left")
    i1 = np.searchsorted(xs, bf, side="right")
    some = np.flatnonzero(i1 > i0)
    if some.size:
        some = some[np.argsort(i0[some], kind="stable")]
        idx = np.empty(2 * some.size, dtype=np.intp)
        idx[0::2], idx[1::2] = i0[some], i1[some]
        # a sentinel after the last knot, so a run that ends there has a valid end index
        lo[some] = np.minimum(lo[some], np.minimum.reduceat(np.append(ys, np.inf), idx)[0::2])
        hi[some] = np.maximum(hi[some], np.maximum.reduceat(np.append(ys, -np.inf), idx)[0::2])
    return lo.reshape(shape), hi.reshape(shape)


@node
class OneCycle(_Leaf):
    """One-cycle policy: ``low`` up to ``peak``, then (``phases=3``, Smith 2018) back to ``low`` and down to
    ``final`` in a tail, or (``phases=2``) straight down to ``final``."""

    kind: ClassVar[str] = "one_cycle"
    peak: float = _rate("highest rate, reached at the middle of the cycle", positive=True)
    steps: int = param(kind="ticks", lo=3, soft=TICK_SOFT, doc="whole budget in ticks")
    low: float = _rate("rate at the start and the end of the cycle")
    final: float = _rate("rate at the last tick, after the annihilation tail")
    tail: float = param(0.1, kind="ratio", lo=0.0, lo_open=True, hi=1.0, hi_open=True, soft=(0.01, 0.5),
                        doc="fraction of the budget after the cycle, spent going from low to final (phases=3)")
    curve: str = param("linear", kind="choice", choices=("linear", "cosine"), doc="shape of each phase")
    phases: int = param(3, kind="count", lo=2, hi=3,
                        doc="3: rise, fall back to low, tail to final (Smith 2018); 2: rise, then one fall to final")
    rise: float | None = param(None, kind="ratio", lo=0.0, lo_open=True, hi=1.0, hi_open=True, soft=(0.05, 0.5),
                               optional=True,
                               doc="share of the budget spent rising to the peak with phases=2; None with phases=3 "
                                   "(its rise is (1 - tail) / 2)")
    ends: str = param("after", kind="choice", choices=("after", "on"),
                      doc="with phases=2, where each phase's end value lands: 'after' the phase, at the next tick "
                          "(the peak at rise * steps, final at tick steps, the continuous clock of every shape), or "
                          "'on' its own last tick (the peak on tick rise * steps - 1, final on the last tick "
                          "steps - 1)")

    def __post_init__(self) -> None:
        self._validate()
        if self.low > self.peak:
            raise complain("one_cycle", "low", self.low, f"<= peak = {self.peak!r}")
        if self.phases == 2:
            self._check_two()
            return
        if self.ends != "after":
            raise complain("one_cycle", "ends", self.ends, "'after' with phases=3",
                           "the three-phase cycle ends its phases on the continuous clock")
        if self.rise is not None:
            raise complain("one_cycle", "rise", self.rise, "None with phases=3",
                           "the three-phase cycle rises for (1 - tail) / 2 of the budget; for another share use "
                           "phases=2")
        if self.final > self.low:
            raise complain("one_cycle", "final", self.final, f"<= low = {self.low!r}",
                           "the tail anneals below the cycle's low rate")
        if not 2.0 * ((1.0 - self.tail) * self.steps / 2.0) < self.steps:
            raise complain("one_cycle", "tail", self.tail, f"at least {1.0 / self.steps:.3g} (one tick of {self.steps})",
                           "the annihilation tail needs at least part of a tick after the cycle")
        if (1.0 - self.tail) * self.steps / 2.0 < 1.0:
            raise complain("one_cycle", "steps", self.steps, f"at least {math.ceil(2 / (1 - self.tail))} with tail={self.tail!r}",
                           "each half of the cycle needs at least one tick")

    def _check_two(self) -> None:
        if self.rise is None:
            raise complain("one_cycle", "rise", None, "a share in (0, 1) with phases=2",
                           "the share of the budget spent rising to the peak, e.g. 0.3")
        if self.final > self.peak:
            raise complain("one_cycle", "final", self.final, f"<= peak = {self.peak!r}",
                           "the second phase anneals down from the peak")
        xs = self._knots()[0]
        if not (xs[1] - xs[0] >= 1.0 and xs[2] - xs[1] >= 1.0):
            extra = 1 if self.ends == "on" else 0
            raise complain("one_cycle", "rise", self.rise,
                           f"a share that leaves at least one tick to each phase of {self.steps} "
                           f"(between {(1 + extra) / self.steps:.3g} and {1.0 - 1.0 / self.steps:.3g}"
                           + (" with ends='on')" if extra else ")"),
                           "each phase needs at least one tick")

    def __repr__(self) -> str:
        text = Schedule.__repr__(self)  # the new parameters at their defaults are left out: older reprs read the same
        if self.ends == "after":
            text = text.replace(", ends='after')", ")")
        return text.replace(", phases=3, rise=None)", ")") if self.phases == 3 and self.rise is None else text

    def _knots(self) -> tuple[np.ndarray, np.ndarray]:
        if self.phases == 2:  # the peak at rise * steps, final reached at tick steps (the continuous clock)
            top, end = float(self.rise * self.steps), float(self.steps)
            if self.ends == "on":  # each phase's end value on its own last tick
                top, end = top - 1.0, end - 1.0
            return np.array([0.0, top, end]), np.array([self.low, self.peak, self.final])
        r = (1.0 - self.tail) * self.steps / 2.0
        return (np.array([0.0, r, 2.0 * r, float(self.steps)]),
                np.array([self.low, self.peak, self.low, self.final]))

    def _source(self, w, u, bound, ind, sink):
        xs, ys = (a.tolist() for a in self._knots())
        if xs[-1] < self.steps and (bound is None or bound > xs[-1]):  # ends='on': held from the last tick on
            v = w.fresh("u")
            w.put(ind, f"{v} = {u} if {u} < {num(xs[-1])} else {num(xs[-1])}")
            u = v
        w.pieces(xs, ys, u, ind, sink, self.curve, ys[-1])

    def _at(self, u):
        xs, ys = self._knots()
        if xs[-1] < self.steps:  # ends='on': the final rate from the last tick on (a half cosine would run on)
            u = np.minimum(u, xs[-1])
        return _piecewise(xs, ys, u, self.curve)

    def _range(self, a, b):
        xs, ys = self._knots()
        return _piecewise_range(self._at, xs, ys, a, b)


@node
class Knots(_Leaf):
    """Through ``(tick, rate)`` pairs; linear, log-linear or held between them."""

    kind: ClassVar[str] = "knots"
    points: tuple[tuple[int, float], ...] = param(kind="points", doc="(tick, rate) pairs; the first at tick 0")
    interp: str = param("linear", kind="choice", choices=("linear", "log", "hold"),
                        doc="between knots: straight line, straight line in log(rate), or hold the left value")
    steps: int | None = param(None, kind="ticks", lo=1, soft=TICK_SOFT, optional=True,
                              doc="length in ticks, >= the last knot's tick (the last rate is held up to it); "
                                  "None: the last knot's tick")
    _table: tuple | None = field(default=None, init=False, repr=False, compare=False)  # (xs, ys), derived once

    def __post_init__(self) -> None:
        object.__setattr__(self, "points", _check_points(self.points))
        self._validate()
        last = self.points[-1][0]
        if self.steps is not None and self.steps < last:
            raise complain("knots", "steps", self.steps, f"a whole number >= {last} (the last knot's tick) or None",
                           "the design cannot end before its last knot")
        if self.interp == "log":
            for i, (_, y) in enumerate(self.points):
                if y <= 0:
                    raise complain("knots", f"points[{i}] rate", y, "a rate > 0 with interp='log'",
                                   "log interpolation cannot pass through a zero rate; use interp='linear'")

    @property
    def length(self) -> int:
        return self.points[-1][0] if self.steps is None else self.steps

    def _ends_at_last_entry(self) -> bool:
        return self.steps is None

    def _top(self) -> float:
        return max(y for _, y in self.points)

    def __repr__(self) -> str:
        text = Schedule.__repr__(self)  # steps=None (the default) is left out, so older reprs read the same
        return text.replace(", steps=None)", ")") if self.steps is None else text

    def _xy(self) -> tuple[np.ndarray, np.ndarray]:
        # built once per value (read on every evaluation and bound; 100,000 pairs cost ~30 ms to convert)
        if self._table is None:
            pts = np.asarray(self.points, dtype=float)
            xs, ys = np.ascontiguousarray(pts[:, 0]), np.ascontiguousarray(pts[:, 1])
            xs.setflags(write=False)
            ys.setflags(write=False)
            object.__setattr__(self, "_table", (xs, ys))
        return self._table

    def _source(self, w, u, bound, ind, sink):
        xs, ys = (a.tolist() for a in self._xy())
        end = float(self._at(np.array([xs[-1]]))[0])
        if self.interp == "log":
            ys = np.log(np.asarray(ys)).tolist()
        w.pieces(xs, ys, u, ind, sink, self.interp, end)

    def _at(self, u):
        xs, ys = self._xy()
        if self.interp == "hold":
            return ys[np.searchsorted(xs, u, side="right") - 1]
        return _piecewise(xs, ys, u, self.interp)

    def _edges(self, hi):
        if self.interp != "hold":
            return np.empty(0)
        xs, _ = self._xy()
        return xs[1:][xs[1:] <= hi][:EDGE_CAP]

    def _range(self, a, b):
        xs, ys = self._xy()
        return _piecewise_range(self._at, xs, ys, a, b)


def _real(y) -> float:
    """``y`` as a float, inf when it is an integer too large for one (instead of OverflowError)."""
    try:
        return float(y)
    except OverflowError:
        return math.inf


def _check_points(points) -> tuple[tuple[int, float], ...]:
    allowed = "a sequence of (tick, rate) pairs"
    try:
        items = iter(points) if not isinstance(points, (str, bytes)) else None
    except TypeError:  # not iterable, or a 0-d array
        items = None
    if items is None:
        raise complain("knots", "points", points, allowed)
    out: list[tuple[int, float]] = []
    for i, pair in enumerate(items):
        try:
            t, y = pair
        except (TypeError, ValueError):
            raise complain("knots", f"points[{i}]", pair, "a (tick, rate) pair") from None
        tick = as_whole(t)
        if tick is None or tick < 0 or tick > MAX_TICKS:
            raise complain("knots", f"points[{i}] tick", t, "a whole number >= 0 and <= 2**53")
        if isinstance(y, bool) or not isinstance(y, (int, float, np.floating, np.integer)) \
                or not math.isfinite(_real(y)) or y < 0:
            raise complain("knots", f"points[{i}] rate", y, "a finite rate >= 0")
        check_top("knots", f"points[{i}] rate", y, float(y), "a rate")
        if i == 0 and tick != 0:
            raise complain("knots", "points[0] tick", t, "0", "the first knot gives the rate at t = 0")
        if out and tick <= out[-1][0]:
            raise complain("knots", f"points[{i}] tick", t, f"a tick > {out[-1][0]} (the previous knot)",
                           "knot ticks must increase strictly: sort them and remove duplicates")
        out.append((tick, float(y)))
    if len(out) < 2:
        raise complain("knots", "points", points, "at least two (tick, rate) pairs",
                       "one knot has no length; use flat()")
    return tuple(out)


# ---------------------------------------------------------------------- factories


def triangle(low: float, high: float, half_period: int, shrink: float = 1.0,
             steps: int | None = None, fall: int | None = None) -> Schedule:
    """Triangular cyclical rates (Smith 2017): ``low`` at t = 0, ``high`` at ``half_period``.

    Each cycle rises for ``half_period`` ticks and falls back to ``low`` in ``fall`` ticks (None: the same
    ``half_period``, the symmetric cycle), so the rise takes ``half_period / (half_period + fall)`` of a cycle.

    >>> s = triangle(0.0, 1.0, half_period=2, shrink=0.5)
    >>> s(2), s(6)
    (1.0, 0.5)
    >>> u = triangle(0.0, 1.0, half_period=1, fall=3)
    >>> u(1), u(2), u(4)
    (1.0, 0.6666666666666666, 0.0)
    """
    return Triangle(low=low, high=high, half_period=half_period, shrink=shrink, steps=steps, fall=fall)


def one_cycle(peak: float, steps: int, low: float | None = None, final: float | None = None,
              tail: float = 0.1, curve: str = "linear", phases: int = 3, rise: float | None = None,
              ends: str = "after") -> Schedule:
    """The one-cycle policy: a rise to ``peak``, then back down.

    ``phases=3`` (Smith 2018): a rise and an equal fall over ``(1 - tail) * steps`` ticks, peaking at its
    middle, then an annihilation tail from ``low`` to ``final``.  ``phases=2``: a rise over ``rise * steps``
    ticks, then one fall from ``peak`` to ``final`` over the rest; with ``curve="cosine"`` both are half cosines,
    the form most training code uses today (``rise`` defaults to 0.3: common practice, no source).  ``final``
    is reached at tick ``steps``, as every shape here reaches its end; with two phases ``ends="on"`` puts each
    phase's end value on its own last tick instead (the peak on tick ``rise * steps - 1``, ``final`` on the
    last tick ``steps - 1``), the ticks torch's one-cycle scheduler uses.  ``low`` defaults to ``peak / 10`` and
    ``final`` to ``low / 100`` (from memory of Smith 2018's advice: a cycle range of about one decade and a
    tail that goes "several orders of magnitude" lower).

    >>> s = one_cycle(1.0, steps=100, tail=0.2)
    >>> s(0), s(40), s(80), s(100)
    (0.1, 1.0, 0.1, 0.001)
    >>> c = one_cycle(1.0, steps=100, phases=2, rise=0.25, curve="cosine")
    >>> c(0), c(25), round(c(100), 12)
    (0.1, 1.0, 0.001)
    """
    lo = peak / 10.0 if low is None else low
    fin = lo / 100.0 if final is None else final
    share = 0.3 if rise is None and phases == 2 else rise
    return OneCycle(peak=peak, steps=steps, low=lo, final=fin, tail=tail, curve=curve, phases=phases, rise=share,
                    ends=ends)


def knots(points: Sequence[tuple[int, float]], interp: str = "linear", steps: int | None = None) -> Schedule:
    """Through ``(tick, rate)`` pairs; the length is ``steps``, or the last knot's tick when None.

    After the last knot its rate is held.  A logged trace of n rates, one per tick,
    is the design ``knots(list(enumerate(rates)), interp="hold", steps=n)``: its
    length is the trace's length, and tick n - 1 has the last logged rate.

    >>> knots([(0, 1.0), (10, 0.0)])(5)
    0.5
    >>> trace = [0.1, 0.1, 0.05]
    >>> s = knots(list(enumerate(trace)), interp="hold", steps=len(trace))
    >>> s.length, s(2)
    (3, 0.05)
    """
    return Knots(points=points, interp=interp, steps=steps)  # type: ignore[arg-type]
