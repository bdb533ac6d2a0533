"""Leaf shapes: each a frozen value with its parameters declared once.

Every formula below is written for a real-valued clock ``u`` on ``[0, steps]``;
integer ticks are where it is sampled.  The public names are the lowercase
factories at the bottom of this file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar, Sequence

import numpy as np

from .schedule import EDGE_CAP, MAX_TICKS, Schedule, as_whole, check_top, complain, monotone_range, param

__all__ = ["flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle", "one_cycle", "knots"]

node = dataclass(frozen=True, slots=True, repr=False, kw_only=True)

RATE_SOFT = (1e-6, 1.0)
TICK_SOFT = (1, 100_000)


def _rate(doc: str, default=dataclass, positive: bool = False):
    return param(default, kind="rate", lo=0.0, lo_open=positive, soft=RATE_SOFT, log=True, doc=doc)


def _steps(doc: str = "length of the shape in ticks", optional: bool = False):
    if optional:
        return param(None, kind="ticks", lo=1, soft=TICK_SOFT, optional=True,
                     doc=doc + "; None for open-ended")
    return param(kind="ticks", lo=1, soft=TICK_SOFT, doc=doc,
                 hint="a shape needs at least one tick; use flat() for a constant rate")


class _Leaf(Schedule):
    __slots__ = ()

    @property
    def length(self) -> int | None:
        return self.steps  # type: ignore[attr-defined]

    def _range(self, a, b):
        return monotone_range(self._at, a, b)

    def _top(self) -> float:
        # every leaf formula stays within its rate parameters (a geometric ramp within an ulp)
        return max((v for n, p in self.params().items() if p.kind == "rate" and (v := getattr(self, n)) is not None),
                   default=0.0)

    def _validate(self) -> None:
        super()._validate()
        for n, p in self.params().items():
            if p.kind == "rate" and getattr(self, n) is not None:
                check_top(self.kind, n, getattr(self, n), getattr(self, n), "a rate")


def _floor_not_above_peak(s) -> None:
    if s.floor > s.peak:
        raise complain(s.kind, "floor", s.floor, f"<= peak = {s.peak!r}",
                       "a decay cannot end above its peak; for a rising curve use ramp(..., curve='cosine')")


@node
class Flat(_Leaf):
    """A constant rate."""

    kind: ClassVar[str] = "flat"
    lr: float = _rate("the constant rate")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()

    def _at(self, u):
        return np.full(np.shape(u), self.lr)


@node
class Ramp(_Leaf):
    """From ``start`` to ``end`` over ``steps`` ticks; ``end`` is reached at tick ``steps``."""

    kind: ClassVar[str] = "ramp"
    start: float = _rate("rate at tick 0")
    end: float = _rate("rate reached at tick steps (the next stage's first tick)")
    steps: int = _steps()
    curve: str = param("linear", kind="choice", choices=("linear", "geometric", "cosine"),
                       doc="linear, geometric (constant ratio per tick) or a half cosine")

    def __post_init__(self) -> None:
        self._validate()
        if self.curve == "geometric":
            for name in ("start", "end"):
                if getattr(self, name) <= 0:
                    raise complain("ramp", name, getattr(self, name), "a rate > 0 with curve='geometric'",
                                   "a geometric ramp multiplies by a constant ratio, which cannot start or end at 0")

    def _at(self, u):
        x = u / self.steps
        if self.curve == "linear":
            return self.start + (self.end - self.start) * x
        if self.curve == "geometric":
            return np.exp(math.log(self.start) + (math.log(self.end) - math.log(self.start)) * x)
        return self.end + (self.start - self.end) * (1.0 + np.cos(np.pi * x)) / 2.0

    def _rise(self) -> int:
        return int(self.steps) if self.end > self.start else 0


@node
class Cosine(_Leaf):
    """Cosine annealing from ``peak`` to ``floor`` over ``steps`` ticks (Loshchilov & Hutter 2017, eq. 5)."""

    kind: ClassVar[str] = "cosine"
    peak: float = _rate("rate at tick 0")
    floor: float = _rate("rate reached at tick steps", 0.0)
    steps: int = _steps()

    def __post_init__(self) -> None:
        self._validate()
        _floor_not_above_peak(self)

    def _at(self, u):
        y = np.multiply(u, np.pi / self.steps, out=np.empty(np.shape(u)))
        np.cos(y, out=y)
        y += 1.0
        y *= (self.peak - self.floor) / 2.0
        y += self.floor
        return y


@node
class ExpDecay(_Leaf):
    """``peak * factor ** k`` with ``k`` the number of whole ``every``-tick periods (or its real value)."""

    kind: ClassVar[str] = "exp_decay"
    peak: float = _rate("rate at tick 0")
    factor: float = param(kind="ratio", lo=0.0, lo_open=True, hi=1.0, soft=(0.5, 1.0),
                          doc="multiplier applied once every `every` ticks",
                          hint="a factor above 1 would grow the rate; 1 keeps it flat")
    every: int = param(1, kind="ticks", lo=1, soft=(1, 1000), doc="ticks between two multiplications")
    staircase: bool = param(True, kind="flag", doc="True: whole periods only (a staircase); False: smooth")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()

    def _at(self, u):
        k = u / self.every
        if self.staircase:
            k = np.floor(k)
        return self.peak * np.power(self.factor, k)

    def _edges(self, hi):
        if not self.staircase or self.factor == 1.0:
            return np.empty(0)
        n = min(int(hi // self.every), EDGE_CAP)
        return np.arange(1, n + 1, dtype=float) * self.every

    def half_life(self) -> float:
        """Ticks for the rate to halve (continuous reading of the decay)."""
        return math.inf if self.factor == 1.0 else self.every * math.log(0.5) / math.log(self.factor)

    def _decay(self):
        return (self.half_life(), self.factor, self.every) if self.factor < 1.0 else None

    def _window(self) -> int:  # until the rate is under 1 % of its peak
        if self.factor >= 1.0:
            return super()._window()
        periods = math.ceil(math.log(0.01) / math.log(self.factor))
        return max(2, min(self.every * periods, 10**9))


@node
class Drops(_Leaf):
    """``peak``, multiplied by ``factor`` from each listed tick on."""

    kind: ClassVar[str] = "drops"
    peak: float = _rate("rate before the first drop")
    at: tuple[int, ...] = param(kind="ticklist", lo=1, doc="ticks where the rate is multiplied by factor")
    factor: float = param(0.1, kind="ratio", lo=0.0, lo_open=True, hi=1.0, soft=(0.01, 1.0), log=True,
                          doc="multiplier applied at each listed tick",
                          hint="a drop multiplies by a factor in (0, 1]")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()
        if not self.at:
            raise complain("drops", "at", self.at, "at least one tick", "with no drops use flat()")
        if self.steps is not None and self.at[-1] >= self.steps:
            raise complain("drops", "at", self.at, f"ticks < steps = {self.steps}",
                           "a drop at or after the end never runs")

    def _at(self, u):
        n = np.searchsorted(np.asarray(self.at, dtype=float), u, side="right")
        return self.peak * np.power(self.factor, n)

    def _edges(self, hi):
        at = np.asarray(self.at, dtype=float)
        return at[at <= hi][:EDGE_CAP]

    def _window(self) -> int:  # the last drop plus a quarter
        return self.at[-1] + max(1, math.ceil(self.at[-1] / 4))


@node
class Poly(_Leaf):
    """Polynomial decay ``floor + (peak - floor) * (1 - u / steps) ** power``."""

    kind: ClassVar[str] = "poly"
    peak: float = _rate("rate at tick 0")
    floor: float = _rate("rate reached at tick steps", 0.0)
    steps: int = _steps()
    power: float = param(1.0, kind="ratio", lo=0.0, lo_open=True, hi=100.0, soft=(0.1, 5.0),
                         doc="exponent of the decay; 1 is linear")

    def __post_init__(self) -> None:
        self._validate()
        _floor_not_above_peak(self)

    def _at(self, u):
        return self.floor + (self.peak - self.floor) * np.power(1.0 - u / self.steps, self.power)


@node
class InvSqrt(_Leaf):
    """Linear warmup to ``peak`` at ``warmup``, then ``peak * sqrt(warmup / u)`` (Vaswani et al. 2017, eq. 3)."""

    kind: ClassVar[str] = "inv_sqrt"
    peak: float = _rate("rate at tick warmup (the highest)")
    warmup: int = param(kind="ticks", lo=1, soft=TICK_SOFT, doc="ticks of linear warmup")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()
        if self.steps is not None and self.warmup > self.steps:
            raise complain("inv_sqrt", "warmup", self.warmup, f"<= steps = {self.steps}",
                           "the warmup would never finish inside the budget")

    def _at(self, u):
        w = float(self.warmup)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = np.sqrt(np.divide(w, u, out=np.full(np.shape(u), np.inf), where=u > 0))
        return self.peak * np.minimum(u / w, tail)

    def _range(self, a, b):
        lo, hi = monotone_range(self._at, a, b)
        inside = (a <= self.warmup) & (self.warmup <= b)
        return lo, np.where(inside, self.peak, hi)

    def _window(self) -> int:  # ten warmups
        return 10 * self.warmup


@node
class Triangle(_Leaf):
    """Triangular cycles between ``low`` and ``high`` (Smith 2017); amplitude times ``shrink`` each cycle."""

    kind: ClassVar[str] = "triangle"
    low: float = _rate("rate at the start of every cycle")
    high: float = _rate("rate at the apex of the first cycle")
    half_period: int = param(kind="ticks", lo=1, soft=(1, 20_000), doc="ticks from low to apex")
    shrink: float = param(1.0, kind="ratio", lo=0.0, lo_open=True, hi=1.0, soft=(0.3, 1.0),
                          doc="amplitude multiplier per cycle; 0.5 halves it each cycle")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()
        if self.low > self.high:
            raise complain("triangle", "low", self.low, f"<= high = {self.high!r}")

    def _cycle(self, u):
        return np.floor(1.0 + u / (2.0 * self.half_period))

    def _at(self, u):
        h = float(self.half_period)
        c = self._cycle(u)
        x = np.abs(u / h - 2.0 * c + 1.0)
        return self.low + (self.high - self.low) * np.maximum(0.0, 1.0 - x) * np.power(self.shrink, c - 1.0)

    def _range(self, a, b):
        h = float(self.half_period)
        fa, fb = self._at(a), self._at(b)
        trough = np.ceil(a / (2 * h)) * 2 * h <= b
        lo = np.where(trough, self.low, np.minimum(fa, fb))
        c0 = np.ceil((a / h + 1.0) / 2.0)
        apex = (2.0 * c0 - 1.0) * h <= b
        top = self.low + (self.high - self.low) * np.power(self.shrink, c0 - 1.0)
        hi = np.maximum(np.maximum(fa, fb), np.where(apex, top, -np.inf))
        return lo, hi

    def _window(self) -> int:  # three cycles
        return 6 * self.half_period


def _piecewise(xs: np.ndarray, ys: np.ndarray, u: np.ndarray, curve: str) -> np.ndarray:
    if curve == "linear":
        return np.interp(u, xs, ys)
    i = np.clip(np.searchsorted(xs, u, side="right") - 1, 0, len(xs) - 2)
    frac = (u - xs[i]) / (xs[i + 1] - xs[i])
    if curve == "cosine":
        return ys[i] + (ys[i + 1] - ys[i]) * (1.0 - np.cos(np.pi * frac)) / 2.0
    return np.exp(np.interp(u, xs, np.log(ys)))


def _piecewise_range(f, xs: np.ndarray, ys: np.ndarray, a, b):
    """Bounds of a curve that is monotone between the knots ``xs``: ends plus knots inside."""
    lo, hi = monotone_range(f, a, b)
    for x, y in zip(xs, ys):
        inside = (a <= x) & (x <= b)
        lo = np.where(inside, np.minimum(lo, y), lo)
        hi = np.where(inside, np.maximum(hi, y), hi)
    return lo, hi


@node
class OneCycle(_Leaf):
    """One-cycle policy (Smith 2018): ``low`` up to ``peak``, back to ``low``, then down to ``final``."""

    kind: ClassVar[str] = "one_cycle"
    peak: float = _rate("highest rate, reached at the middle of the cycle", positive=True)
    steps: int = param(kind="ticks", lo=3, soft=TICK_SOFT, doc="whole budget in ticks")
    low: float = _rate("rate at the start and the end of the cycle")
    final: float = _rate("rate at the last tick, after the annihilation tail")
    tail: float = param(0.1, kind="ratio", lo=0.0, lo_open=True, hi=1.0, hi_open=True, soft=(0.01, 0.5),
                        doc="fraction of the budget after the cycle, spent going from low to final")
    curve: str = param("linear", kind="choice", choices=("linear", "cosine"), doc="shape of each phase")

    def __post_init__(self) -> None:
        self._validate()
        if self.low > self.peak:
            raise complain("one_cycle", "low", self.low, f"<= peak = {self.peak!r}")
        if self.final > self.low:
            raise complain("one_cycle", "final", self.final, f"<= low = {self.low!r}",
                           "the tail anneals below the cycle's low rate")
        if not 2.0 * ((1.0 - self.tail) * self.steps / 2.0) < self.steps:
            raise complain("one_cycle", "tail", self.tail, f"at least {1.0 / self.steps:.3g} (one tick of {self.steps})",
                           "the annihilation tail needs at least part of a tick after the cycle")
        if (1.0 - self.tail) * self.steps / 2.0 < 1.0:
            raise complain("one_cycle", "steps", self.steps, f"at least {math.ceil(2 / (1 - self.tail))} with tail={self.tail!r}",
                           "each half of the cycle needs at least one tick")

    def _knots(self) -> tuple[np.ndarray, np.ndarray]:
        r = (1.0 - self.tail) * self.steps / 2.0
        return (np.array([0.0, r, 2.0 * r, float(self.steps)]),
                np.array([self.low, self.peak, self.low, self.final]))

    def _at(self, u):
        xs, ys = self._knots()
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

    def _top(self) -> float:
        return max(y for _, y in self.points)

    def __repr__(self) -> str:
        text = Schedule.__repr__(self)  # steps=None (the default) is left out, so older reprs read the same
        return text.replace(", steps=None)", ")") if self.steps is None else text

    def _xy(self) -> tuple[np.ndarray, np.ndarray]:
        pts = np.asarray(self.points, dtype=float)
        return pts[:, 0], pts[:, 1]

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
def flat(lr: float, steps: int | None = None) -> Schedule:
    """A constant rate ``lr``; open-ended unless ``steps`` is given.

    >>> flat(0.01, steps=10)(9)
    0.01
    """
    return Flat(lr=lr, steps=steps)


def ramp(start: float, end: float, steps: int, curve: str = "linear") -> Schedule:
    """From ``start`` at tick 0 to ``end`` at tick ``steps`` (the next stage's first tick).

    >>> ramp(0.0, 1.0, 4)(2)
    0.5
    """
    return Ramp(start=start, end=end, steps=steps, curve=curve)


def cosine(peak: float, floor: float = 0.0, steps: int | None = None) -> Schedule:
    """Cosine annealing: ``floor + (peak - floor) * (1 + cos(pi * t / steps)) / 2``.

    Loshchilov & Hutter 2017 (SGDR), eq. 5 with T_cur = t and T_i = steps.

    >>> cosine(0.1, steps=100)(50)
    0.05
    """
    return Cosine(peak=peak, floor=floor, steps=steps)  # type: ignore[arg-type]


def exp_decay(peak: float, factor: float, every: int = 1, staircase: bool = True,
              steps: int | None = None) -> Schedule:
    """``peak`` times ``factor`` once every ``every`` ticks (closed form, no drift).

    >>> round(exp_decay(0.1, 0.95)(200), 10)
    3.5053e-06
    """
    return ExpDecay(peak=peak, factor=factor, every=every, staircase=staircase, steps=steps)


def drops(peak: float, at: Sequence[int] = (), factor: float = 0.1, steps: int | None = None) -> Schedule:
    """``peak``, times ``factor`` from each listed tick on: ``f(at[0]) = peak * factor``.

    >>> s = drops(0.1, at=(32_000, 48_000), steps=64_000)
    >>> s(31_999), s(32_000)
    (0.1, 0.010000000000000002)
    """
    return Drops(peak=peak, at=at, factor=factor, steps=steps)  # type: ignore[arg-type]


def poly(peak: float, floor: float = 0.0, steps: int | None = None, power: float = 1.0) -> Schedule:
    """Polynomial decay from ``peak`` to ``floor`` over ``steps`` ticks.

    >>> poly(1.0, steps=4, power=2.0)(2)
    0.25
    """
    return Poly(peak=peak, floor=floor, steps=steps, power=power)  # type: ignore[arg-type]


def inv_sqrt(peak: float, warmup: int, steps: int | None = None) -> Schedule:
    """``peak * min(t / warmup, sqrt(warmup / t))``: 0 at t = 0, ``peak`` at t = warmup.

    >>> inv_sqrt(1.0, warmup=4)(16)
    0.5
    """
    return InvSqrt(peak=peak, warmup=warmup, steps=steps)


def triangle(low: float, high: float, half_period: int, shrink: float = 1.0,
             steps: int | None = None) -> Schedule:
    """Triangular cyclical rates (Smith 2017): ``low`` at t = 0, ``high`` at ``half_period``.

    >>> s = triangle(0.0, 1.0, half_period=2, shrink=0.5)
    >>> s(2), s(6)
    (1.0, 0.5)
    """
    return Triangle(low=low, high=high, half_period=half_period, shrink=shrink, steps=steps)


def one_cycle(peak: float, steps: int, low: float | None = None, final: float | None = None,
              tail: float = 0.1, curve: str = "linear") -> Schedule:
    """The one-cycle policy (Smith 2018): a rise and an equal fall, then an annihilation tail.

    The cycle takes ``(1 - tail) * steps`` ticks, peaking at its middle; ``low``
    defaults to ``peak / 10`` and ``final`` to ``low / 100`` (from memory of the
    paper's advice: a cycle range of about one decade and a tail that goes
    "several orders of magnitude" lower).

    >>> s = one_cycle(1.0, steps=100, tail=0.2)
    >>> s(0), s(40), s(80), s(100)
    (0.1, 1.0, 0.1, 0.001)
    """
    lo = peak / 10.0 if low is None else low
    fin = lo / 100.0 if final is None else final
    return OneCycle(peak=peak, steps=steps, low=lo, final=fin, tail=tail, curve=curve)


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
