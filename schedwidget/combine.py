"""Combinators: stages, warmup, restarts, product, sum, scale, clip, stretch.

Each combinator is a frozen value holding its parts.  Clocks: a stage's own
clock restarts at 0 where it begins; ``stretch`` and ``restarts`` rescale the
real-valued clock, so joins and drops move in proportion and take effect on the
first integer tick at or after their scaled position.
"""

from __future__ import annotations

import math
from dataclasses import field
from typing import ClassVar

import numpy as np

from .codegen import num
from .leaf import node
from .restarts import MIN_GROWTH_STEP, Restarts  # noqa: F401 - public here as before
from .schedule import Schedule, check_top, complain, literal, param, window
from .stages import Stages, Warmup, _cap, _merged_length, _schedule

__all__ = ["stages", "warmup", "restarts"]


class _Pair(Schedule):
    """What a product and a sum share: two schedules read on one clock.

    The length is the longest finite length of the two (None only when both are
    open-ended); past it, like every schedule, it holds its value, so an
    open-ended operand stops changing there too.  A subclass declares ``left``,
    ``right`` and ``_ceil`` fields and its own ``_joint``, ``_at``, ``_range``.
    """

    __slots__ = ()
    _word: ClassVar[str]
    _symbol: ClassVar[str]

    def __post_init__(self) -> None:
        _schedule(self.kind, "left", self.left)
        _schedule(self.kind, "right", self.right)
        top = self._joint(self.left._top(), self.right._top())
        check_top(self.kind, "right", self.right, top,
                  f"a schedule whose rates, {self._word} left's (up to {self.left._top():.3g}), stay")
        object.__setattr__(self, "_ceil", top)

    @staticmethod
    def _joint(a: float, b: float) -> float:
        raise NotImplementedError

    def _top(self) -> float:
        return self._ceil

    @property
    def length(self) -> int | None:
        return _merged_length(self.left, self.right)

    def children(self):
        return (self.left, self.right)

    def _source(self, w, u, bound, ind, sink):
        parts = []
        for child in (self.left, self.right):
            v, pb = w.held(child, u, bound, ind)
            parts.append(w.value(child, v, pb, ind))
        w.put(ind, sink(f"{parts[0]} {self._symbol} {parts[1]}"))

    def _edges(self, hi):
        return _cap(np.concatenate([self.left._edges(hi), self.right._edges(hi)]))

    def _joins(self):
        return np.unique(np.concatenate([self.left._joins(), self.right._joins()]))

    def _window(self) -> int:  # both sides are open-ended here: the wider window
        return max(window(self.left), window(self.right))

    def __repr__(self) -> str:
        return f"({self.left!r} {self._symbol} {self.right!r})"


@node
class Product(_Pair):
    """Tick-by-tick product of two schedules."""

    kind: ClassVar[str] = "product"
    left: Schedule = param(kind="schedule", doc="first factor")
    right: Schedule = param(kind="schedule", doc="second factor")
    _ceil: float = field(init=False, repr=False, compare=False)
    _word: ClassVar[str] = "times"
    _symbol: ClassVar[str] = "*"

    @staticmethod
    def _joint(a: float, b: float) -> float:
        return a * b

    def _at(self, u):
        return self.left._held(u) * self.right._held(u)

    def _range(self, a, b):
        la, ha = self.left._span(a, b)
        lb, hb = self.right._span(a, b)
        return la * lb, ha * hb


@node
class Sum(_Pair):
    """Tick-by-tick sum of two schedules."""

    kind: ClassVar[str] = "sum"
    left: Schedule = param(kind="schedule", doc="first term")
    right: Schedule = param(kind="schedule", doc="second term")
    _ceil: float = field(init=False, repr=False, compare=False)
    _word: ClassVar[str] = "added to"
    _symbol: ClassVar[str] = "+"

    @staticmethod
    def _joint(a: float, b: float) -> float:
        return a + b

    def _at(self, u):
        return self.left._held(u) + self.right._held(u)

    def _range(self, a, b):
        la, ha = self.left._span(a, b)
        lb, hb = self.right._span(a, b)
        return la + lb, ha + hb


@node
class Scaled(Schedule):
    """A schedule multiplied by a constant ``factor >= 0``."""

    kind: ClassVar[str] = "scale"
    target: Schedule = param(kind="schedule", doc="the schedule to scale")
    factor: float = param(kind="ratio", lo=0.0, soft=(0.01, 10.0), log=True, doc="constant multiplier")
    _ceil: float = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        _schedule(self.kind, "target", self.target)
        self._validate()
        top = self.target._top() * self.factor
        check_top(self.kind, "factor", self.factor, top,
                  f"a number whose product with the target's highest rate ({self.target._top():.3g}) is")
        object.__setattr__(self, "_ceil", top)

    def _top(self) -> float:
        return self._ceil

    @property
    def length(self) -> int | None:
        return self.target.length

    def _pointwise_target(self):
        return self.target

    def _constant_open(self):
        return self.target._constant_open()

    def _ends_at_last_entry(self):
        return self.target._ends_at_last_entry()

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        return window(self.target)

    def _source(self, w, u, bound, ind, sink):
        w.put(ind, sink(f"{w.value(self.target, u, bound, ind)} * {num(self.factor)}"))

    def _at(self, u):
        return self.target._at(u) * self.factor

    def _edges(self, hi):
        return self.target._edges(hi)

    def _joins(self):
        return self.target._joins()

    def _range(self, a, b):
        lo, hi = self.target._range(a, b)
        return lo * self.factor, hi * self.factor

    def __repr__(self) -> str:
        return f"({self.target!r} * {literal(self.factor)})"


@node
class Clip(Schedule):
    """A schedule held inside ``[low, high]``."""

    kind: ClassVar[str] = "clip"
    target: Schedule = param(kind="schedule", doc="the schedule to clip")
    low: float | None = param(None, kind="rate", lo=0.0, optional=True, soft=(1e-6, 1.0), log=True,
                              doc="the rate never goes below this")
    high: float | None = param(None, kind="rate", lo=0.0, optional=True, soft=(1e-6, 1.0), log=True,
                               doc="the rate never goes above this")

    def __post_init__(self) -> None:
        _schedule(self.kind, "target", self.target)
        self._validate()
        if self.low is None and self.high is None:
            raise complain("clip", "low", None, "a rate when high is None", "clip needs low, high or both")
        if self.low is not None and self.high is not None and self.low > self.high:
            raise complain("clip", "low", self.low, f"<= high = {self.high!r}")
        for name in ("low", "high"):
            if getattr(self, name) is not None:
                check_top("clip", name, getattr(self, name), getattr(self, name), "a rate")

    def _top(self) -> float:
        if self.high is not None:
            return self.high
        return max(self.target._top(), self.low)

    @property
    def length(self) -> int | None:
        return self.target.length

    def _pointwise_target(self):
        return self.target

    def _constant_open(self):
        return self.target._constant_open()

    def _ends_at_last_entry(self):
        return self.target._ends_at_last_entry()

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        return window(self.target)

    def _bound(self, x):
        return np.clip(x, self.low, self.high)

    def _source(self, w, u, bound, ind, sink):
        e = w.value(self.target, u, bound, ind)
        # a conditional on a plain name costs a third of a max() call, and the factor runs once per training step
        if self.low is not None:
            e = f"{e} if {e} > {num(self.low)} else {num(self.low)}" if e.isidentifier() else f"max({e}, {num(self.low)})"
        if self.high is not None:
            e = f"min({e}, {num(self.high)})"
        w.put(ind, sink(e))

    def _at(self, u):
        out = np.asarray(self.target._at(u), dtype=float)  # a fresh array: bound it in place
        if self.low is not None:
            np.maximum(out, self.low, out=out)
        if self.high is not None:
            np.minimum(out, self.high, out=out)
        return out

    def _edges(self, hi):
        return self.target._edges(hi)

    def _joins(self):
        return self.target._joins()

    def _range(self, a, b):
        lo, hi = self.target._range(a, b)
        return self._bound(lo), self._bound(hi)

    def __repr__(self) -> str:
        return f"{self.target!r}.clip(low={literal(self.low)}, high={literal(self.high)})"


@node
class Stretch(Schedule):
    """The same shape over a new budget: tick ``t`` reads the target at ``t * length / steps``."""

    kind: ClassVar[str] = "stretch"
    target: Schedule = param(kind="schedule", doc="the schedule to stretch")
    steps: int = param(kind="ticks", lo=1, soft=(1, 1_000_000), doc="the new budget in ticks")

    def __post_init__(self) -> None:
        _schedule(self.kind, "target", self.target)
        self._validate()
        if self.target.length is None:
            raise complain("stretch", "target", self.target, "a schedule with a length (steps=...)",
                           "an open-ended schedule has no budget to stretch")

    def _top(self) -> float:
        return self.target._top()

    @property
    def length(self) -> int:
        return self.steps

    def children(self):
        return (self.target,)

    def _unstretched(self) -> Schedule:
        return self.target

    def _readout_children(self):
        return ((self.target, self.steps / self.target.length),)

    def _lead_in(self) -> int:  # the target's lead-in moved in proportion: the first whole tick at or after it
        return math.ceil(self.target._lead_in() * self.steps / self.target.length)

    def _inner(self, u):
        return (u * float(self.target.length)) / float(self.steps)

    def _outer(self, v):
        return (v * float(self.steps)) / float(self.target.length)

    def _source(self, w, u, bound, ind, sink):
        a, b = float(self.target.length), float(self.steps)
        v = w.clock(f"({u} * {num(a)}) / {num(b)}", ind)
        # as the core: the target is read held, since (u * a) / b can pass its length by an ulp
        v, pb = w.held(self.target, v, None if bound is None else (bound * a) / b, ind)
        w.emit(self.target, v, pb, ind, sink)

    def _at(self, u):
        # (u * a) / b can land an ulp past the target's length at u = steps: read the target held, so a leaf
        # never sees a clock past its end (a poly would give NaN there, a ramp to 0 a tiny negative rate)
        return self.target._held(self._inner(u))

    def _edges(self, hi):
        return _cap(self._outer(self.target._edges(self._inner(hi))))

    def _joins(self):
        return self._outer(self.target._joins())

    def _range(self, a, b):
        return self.target._span(self._inner(a), self._inner(b))

    def __repr__(self) -> str:
        return f"{self.target!r}.stretch({self.steps})"


# ---------------------------------------------------------------------- factories
def stages(*parts: Schedule) -> Schedule:
    """One stage after another; nested stages flatten, so ``a >> b >> c`` is one node.

    >>> from schedwidget import flat
    >>> s = stages(flat(1.0, steps=2), flat(0.5))
    >>> s(1), s(2)
    (1.0, 0.5)
    """
    flatparts: list[Schedule] = []
    for i, p in enumerate(parts):
        _schedule("stages", f"parts[{i}]", p)
        flatparts.extend(p._stage_parts())
    if len(flatparts) == 1:
        return flatparts[0]
    return Stages(parts=tuple(flatparts))


def warmup(target: Schedule, steps: int, start: float = 0.0, curve: str = "linear",
           place: str = "before") -> Schedule:
    """A ramp from ``start`` over ``steps`` ticks into ``target``, placed before it or over its first ticks.

    ``place="before"`` (the default): the ramp rises to ``target(0)`` and ``target`` follows on its own
    clock, so the peak lands at tick ``steps`` and the length is ``steps + target.length``.

    ``place="over"``: the ramp is laid over the first ``steps`` ticks of ``target`` on the run's clock: it
    rises from ``start`` to ``target(steps)`` on ``[0, steps)``, and from ``t = steps`` on the rate is
    ``target(t)``; the length is ``target.length`` and the target's drops and restarts keep their run
    positions (Goyal et al. 2017, section 2.2: 5 epochs of gradual warmup in a run whose drops are
    counted from its start).  ``steps`` may not exceed the target's length.

    >>> from schedwidget import cosine, drops
    >>> s = warmup(cosine(0.1, steps=100), steps=10)
    >>> s(0), s(5), s(10)
    (0.0, 0.05, 0.1)
    >>> g = warmup(drops(3.2, at=(30, 60, 80), steps=90), 5, start=0.1, place="over")
    >>> g.length, g(0), g(5), g(29), round(g(30), 12)
    (90, 0.1, 3.2, 3.2, 0.32)
    """
    return Warmup(target=target, steps=steps, start=start, curve=curve, place=place)


def restarts(target: Schedule, cycles: int | None = None, growth: float = 1.0,
             peak_decay: float = 1.0) -> Schedule:
    """Warm restarts (Loshchilov & Hutter 2017): repeat ``target``, cycle k lasting ``L * growth**k``.

    >>> from schedwidget import cosine
    >>> s = restarts(cosine(1.0, steps=10), cycles=3, growth=2.0)
    >>> s.length, s(10), s(30)
    (70, 1.0, 1.0)
    """
    return Restarts(target=target, cycles=cycles, growth=growth, peak_decay=peak_decay)
