"""Leaf shapes: each a frozen value with its parameters declared once.

Every formula below is written for a real-valued clock ``u`` on ``[0, steps]``;
integer ticks are where it is sampled.  The public names are the lowercase
factories at the bottom of this file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar, Sequence

import numpy as np

from .codegen import CHAIN_MAX, num, plus
from .formula import clock, const, cos, exp, floor, sqrt
from .leaf import RATE_SOFT, TICK_SOFT, ClosedForm, _Leaf, _floor_not_above_peak, _rate, _steps, node  # noqa: F401
from .schedule import EDGE_CAP, Schedule, complain, monotone_range, param

__all__ = ["flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle", "one_cycle", "knots"]


@node
class Flat(ClosedForm):
    """A constant rate."""

    kind: ClassVar[str] = "flat"
    lr: float = _rate("the constant rate")
    steps: int | None = _steps(optional=True)

    def __post_init__(self) -> None:
        self._validate()

    def _formula(self):
        return const(self.lr)

    def _constant_open(self):
        return self.steps is None


@node
class Ramp(ClosedForm):
    """From ``start`` to ``end`` over ``steps`` ticks; ``end`` is reached at tick ``steps``."""

    kind: ClassVar[str] = "ramp"
    start: float = _rate("rate at tick 0")
    end: float = _rate("rate reached at tick steps (the next stage's first tick)")
    steps: int = _steps()
    curve: str = param("linear", kind="choice", choices=("linear", "geometric", "cosine", "sqrt"),
                       doc="linear, geometric (constant ratio per tick), a half cosine, or sqrt: "
                           "end + (start - end) * (1 - sqrt(t / steps)), the closing 1-sqrt decay")

    def __post_init__(self) -> None:
        self._validate()
        if self.curve == "geometric":
            for name in ("start", "end"):
                if getattr(self, name) <= 0:
                    raise complain("ramp", name, getattr(self, name), "a rate > 0 with curve='geometric'",
                                   "a geometric ramp multiplies by a constant ratio, which cannot start or end at 0")

    def _formula(self):
        x = clock() / self.steps
        if self.curve == "linear":
            return self.start + (self.end - self.start) * x
        if self.curve == "geometric":
            return exp(math.log(self.start) + (math.log(self.end) - math.log(self.start)) * x)
        if self.curve == "sqrt":  # Hägele et al. 2024's closing (1-sqrt) decay; end = 0 leaves start * (1 - sqrt(x))
            return self.end + (self.start - self.end) * (1.0 - sqrt(x))
        return self.end + (self.start - self.end) * (1.0 + cos(math.pi * x)) / 2.0

    def _rise(self) -> int:
        return int(self.steps) if self.end > self.start else 0


@node
class Cosine(ClosedForm):
    """Cosine annealing from ``peak`` to ``floor`` over ``steps`` ticks (Loshchilov & Hutter 2017, eq. 5)."""

    kind: ClassVar[str] = "cosine"
    peak: float = _rate("rate at tick 0")
    floor: float = _rate("rate reached at tick steps", 0.0)
    steps: int = _steps()

    def __post_init__(self) -> None:
        self._validate()
        _floor_not_above_peak(self)

    def _formula(self):  # floor + (peak - floor) / 2 * (1 + cos(u * pi / L))
        return self.floor + (self.peak - self.floor) / 2.0 * (1.0 + cos(clock() * (math.pi / self.steps)))


@node
class ExpDecay(ClosedForm):
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

    def _formula(self):
        k = clock() / self.every
        return self.peak * self.factor ** (floor(k) if self.staircase else k)

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
    _levels: np.ndarray = field(init=False, repr=False, compare=False)  # the rate after k drops, derived once

    def __post_init__(self) -> None:
        self._validate()
        if not self.at:
            raise complain("drops", "at", self.at, "at least one tick", "with no drops use flat()")
        if self.steps is not None and self.at[-1] >= self.steps:
            raise complain("drops", "at", self.at, f"ticks < steps = {self.steps}",
                           "a drop at or after the end never runs")
        # The rate after 0, 1, ... drops, peak * factor ** k by the C library's pow, read by index: numpy's power
        # answered a 0-d tick and an array of ticks one ulp apart (0.0010000000000000002 against 0.001 after two
        # x0.1 drops from 0.1), so a scalar call and an array call disagreed.
        levels = [self.peak * self.factor ** k for k in range(len(self.at) + 1)]
        object.__setattr__(self, "_levels", np.array(levels, dtype=np.float64))

    def _source(self, w, u, bound, ind, sink):
        at = [float(a) for a in self.at]
        levels = self._levels.tolist()   # the core's own level after each drop
        if len(at) <= CHAIN_MAX:
            w.chain(u, ind, at, lambda i, j: w.put(j, sink(num(levels[i]))))
            return
        w.modules.add("bisect")
        ticks, rates = w.table(ind, "at", at), w.table(ind, "level", levels)
        w.put(ind, sink(f"{rates}[bisect.bisect_right({ticks}, {u})]"))

    def _at(self, u):
        n = np.searchsorted(np.asarray(self.at, dtype=float), u, side="right")
        return self._levels[n]

    def _edges(self, hi):
        at = np.asarray(self.at, dtype=float)
        return at[at <= hi][:EDGE_CAP]

    def _window(self) -> int:  # the last drop plus a quarter
        return self.at[-1] + max(1, math.ceil(self.at[-1] / 4))


@node
class Poly(ClosedForm):
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

    def _formula(self):
        return self.floor + (self.peak - self.floor) * (1.0 - clock() / self.steps) ** self.power


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

    def _source(self, w, u, bound, ind, sink):
        c = num(self.warmup)  # min(u / c, sqrt(c / u)) picks u / c exactly when u < c (both are 1.0 at u = c)
        w.put(ind, sink(f"{num(self.peak)} * ({u} / {c} if {u} < {c} else math.sqrt({c} / {u}))"))

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


def flat(lr: float, steps: int | None = None) -> Schedule:
    """A constant rate ``lr``; open-ended unless ``steps`` is given.

    >>> flat(0.01, steps=10)(9)
    0.01
    """
    return Flat(lr=lr, steps=steps)


def ramp(start: float, end: float, steps: int, curve: str = "linear") -> Schedule:
    """From ``start`` at tick 0 to ``end`` at tick ``steps`` (the next stage's first tick).

    ``curve="sqrt"`` is the closing (1-sqrt) decay of warmup-stable-decay runs (Hägele et al. 2024):
    ``end + (start - end) * (1 - sqrt(t / steps))``, which for ``end = 0`` is ``start * (1 - sqrt(t / steps))``;
    ``end > 0`` is a floor the decay ends on.

    >>> ramp(0.0, 1.0, 4)(2)
    0.5
    >>> ramp(1.0, 0.0, 4, curve="sqrt")(1)
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


# Piecewise and cyclic shapes live in their own module; importing them here (after the kinds above, so the
# registry keeps this order) keeps ``schedwidget.shapes`` the one place that names every leaf.
from .pieces import (  # noqa: E402
    Knots, OneCycle, Triangle, knots, one_cycle, triangle)
