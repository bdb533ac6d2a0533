"""The Schedule base class: the evaluation protocol, the node protocol with its defaults, and the registry of kinds.

A schedule maps an integer clock ``t = 0, 1, 2, ...`` to a learning rate ``>= 0``.
Internally every node is a formula of a *real-valued* clock (``_at``); integer
ticks are where it is sampled.  Past its ``length`` a schedule holds the value
its formula reaches at ``t = length``.
"""

from __future__ import annotations

from dataclasses import fields
from numbers import Real
from typing import Any, Iterator

import numpy as np

# parameter declarations and the message helper live in params.py; importable from here as before
from .params import (  # noqa: F401
    MAX_TICKS, PARAM_KINDS, Param, ParamKind, ScheduleError, _num, _shown, as_whole, check_ticklist, complain, param)

__all__ = ["Schedule", "ScheduleError", "Param", "param", "KINDS", "window"]

#: How many possible discontinuities a node reports before it counts as dense.
EDGE_CAP = 4096
#: An open-ended schedule with nothing to measure its structure by is drawn over this many ticks.
OPEN_WINDOW = 1000
#: Highest rate a design may reach anywhere (checked at construction on a bound of every node): far above any
#: learning rate, and low enough that no formula, sum, product or area over 2**53 ticks can overflow a float.
MAX_RATE = 1e100


def literal(v: Any) -> str:
    """Python source for a parameter value (floats by ``repr`` so they round-trip bit-exactly)."""
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, tuple):
        inner = ", ".join(literal(x) for x in v)
        return f"({inner},)" if len(v) == 1 else f"({inner})"
    return repr(v)


def fmt(x: float) -> str:
    """A float written so that ``eval`` gives the same float back (used by repr)."""
    return repr(float(x))


#: The one registry of kinds: spec "kind" -> class.  Every class that sets its own ``kind`` joins it on definition.
KINDS: dict[str, type[Schedule]] = {}


def window(s: Schedule) -> int:
    """The ticks a picture of ``s`` spans: its length, or for an open-ended design a window showing its structure."""
    return int(s.length) if s.length is not None else int(s._window())


class Schedule:
    """A learning-rate schedule: an immutable value mapping integer ticks to rates.

    Call it with an int for a float, or with an integer array for a float64 array
    of the same shape.  Every subclass is a frozen dataclass, so ``==`` and hashing
    compare designs by value.

    Examples
    --------
    >>> from schedwidget import cosine
    >>> s = cosine(0.1, steps=100)
    >>> s(0), s(100), s(10**6)
    (0.1, 0.0, 0.0)
    """

    #: ``_whole``: this node's bounds over its whole length, computed on first use (see ``_span``); not a field,
    #: so equality, hashing, repr and pickling never see it (a copy computes it again).
    __slots__ = ("_whole",)
    kind: str = "schedule"  # overridden by every concrete class (a plain class attribute)

    def __init_subclass__(cls, **kwargs: Any) -> None:
        """A class that sets its own ``kind`` registers itself (``KINDS``): the spec, schema and fuzz suite see it."""
        super().__init_subclass__(**kwargs)
        kind = cls.__dict__.get("kind")
        if not isinstance(kind, str):
            return  # an abstract helper class (a leaf or pair base): no kind of its own
        known = KINDS.get(kind)
        # a dataclass with slots is built twice (the class, then its slotted copy, which loses a local class's
        # qualified name): the copy replaces the class, as does a class of the same name defined again in the
        # same module (a notebook cell run twice)
        if known is not None and (known.__module__, known.__name__) != (cls.__module__, cls.__name__):
            raise TypeError(f"kind {kind!r} is already registered by {known.__module__}.{known.__qualname__}")
        KINDS[kind] = cls

    # ----------------------------------------------------------------- protocol
    @property
    def length(self) -> int | None:
        """The planned budget in ticks, or None when open-ended."""
        raise NotImplementedError

    def _at(self, u: np.ndarray) -> np.ndarray:
        """The formula on the real clock ``u`` (float64 array, ``0 <= u <= length``)."""
        raise NotImplementedError

    def _edges(self, hi: float) -> np.ndarray:
        """Sorted real positions in ``(0, hi]`` where the formula may jump (at most EDGE_CAP)."""
        return np.empty(0)

    def _joins(self) -> np.ndarray:
        """Real positions of stage joins (where one stage hands over to the next)."""
        return np.empty(0)

    def _range(self, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper bounds of the formula over each closed interval ``[a, b]``."""
        raise NotImplementedError

    def children(self) -> tuple[Schedule, ...]:
        """The schedules this node is built from (empty for leaf shapes)."""
        return ()

    def _top(self) -> float:
        """An upper bound of every rate this node gives (from its parameters and its children's bounds)."""
        raise NotImplementedError

    def _work(self, below: list[int]) -> int:
        """Node visits one tick costs, given each child's (``children()`` order): this node and every child."""
        return 1 + sum(below)

    # ------------------------------------------------- readouts a kind may own (defaults for most kinds)
    def _window(self) -> int:
        """Ticks a picture of this open-ended node shows (called only when ``length`` is None)."""
        return OPEN_WINDOW

    def _decay(self) -> tuple[float, float, int] | None:
        """(half-life in ticks, factor, ticks per factor) when this node is an exponential decay, else None."""
        return None

    def _readout_children(self) -> tuple[tuple[Schedule, float], ...]:
        """The children whose own readouts (a half-life) carry over to this node, each with its clock's scale."""
        return tuple((c, 1.0) for c in self.children())

    def _lead_in(self) -> int:
        """Ticks at the start during which a plateau rule decides no drop: a warmup's length (0 by default)."""
        return 0

    def _rise(self) -> int:
        """Ticks this node rises for when it is a design's first stage (a rising ramp: its length)."""
        return 0

    def _stage_parts(self) -> tuple[Schedule, ...]:
        """This node as a list of stages (``stages`` flattens nested stages with it)."""
        return (self,)

    def _unstretched(self) -> Schedule:
        """The shape this node stretches (itself unless it is a stretch)."""
        return self

    def _repeated(self) -> Schedule | None:
        """The one cycle this node repeats when it is a repeat (restarts), else None."""
        return None

    def _warmed(self) -> Schedule | None:
        """The schedule this node leads into when it is a warmup (its ``steps``, ``start`` and ``curve`` are the
        warmup's own), else None."""
        return None

    def _pointwise_target(self) -> Schedule | None:
        """The schedule this node maps tick by tick on the same clock (a scale, a clip), else None."""
        return None

    def _constant_open(self) -> bool:
        """Whether this node is open-ended and the same rate at every tick (rescaling moves nothing on its clock)."""
        return False

    def _ends_at_last_entry(self) -> bool:
        """Whether this node is a table of rates whose length is its last entry's tick (knots without steps)."""
        return False

    # --------------------------------------------------------------- evaluation
    def __call__(self, t: Any) -> Any:
        """The rate at integer tick(s) ``t``: a float for a scalar, a float64 array for an array."""
        if isinstance(t, int) and not isinstance(t, bool) and t > MAX_TICKS:
            raise complain(self.kind, "t", t, "a tick <= 2**53", "above that, ticks are not exact on a float64 clock")
        if isinstance(t, np.ma.MaskedArray) and np.ma.is_masked(t):  # a masked tick has no rate: never read its fill
            raise complain(self.kind, "t", t, "ticks with no masked entries")
        try:
            arr = np.asarray(t)
        except (ValueError, TypeError, OverflowError, MemoryError):  # ragged lists, objects numpy cannot hold
            raise complain(self.kind, "t", t, "a whole number of ticks (int or integer array)",
                           "a list of ticks must be flat or rectangular") from None
        if arr.dtype.kind in "iu":
            u = arr.astype(np.float64)
        elif arr.dtype.kind == "f":
            u = arr.astype(np.float64, copy=False)
            if not np.all(np.isfinite(u)) or not np.array_equal(u, np.floor(u)):
                raise complain(self.kind, "t", t, "a whole number of ticks (int or integer array)")
        else:
            raise complain(self.kind, "t", t, "a whole number of ticks (int or integer array)")
        top = float(u.max()) if u.size else 0.0  # read once: the range checks and the clamp share it
        if top > MAX_TICKS:
            raise complain(self.kind, "t", t if arr.ndim == 0 else "an array with ticks above 2**53", "a tick <= 2**53",
                           "above that, ticks are not exact on a float64 clock")
        if u.size and u.min() < 0:
            raise complain(self.kind, "t", t if arr.ndim == 0 else "an array with negative ticks",
                           "a tick >= 0", "t = 0 is the rate of the very first update")
        n = self.length
        out = self._at(u if n is None or top <= n else np.minimum(u, float(n)))
        if arr.ndim == 0:
            return float(out)
        return np.asarray(out, dtype=np.float64).reshape(arr.shape)

    def _clamp(self, u: np.ndarray) -> np.ndarray:
        n = self.length
        if n is None or (np.size(u) and np.max(u) <= n):  # a max is cheaper than a copy
            return u
        return np.minimum(u, float(n))

    def _held(self, u: np.ndarray) -> np.ndarray:
        """``_at`` with the hold-past-the-end rule applied (for use by combinators)."""
        return self._at(self._clamp(u))

    def _span(self, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``_range`` with both interval ends clamped to the length; whole-length intervals read once per node.

        A combinator splits an interval into pieces on its children's clocks, and most of them cover a
        child whole (every cycle between two restarts, every stage between two joins).  Answering those
        from the node's own bounds over ``[0, length]`` (computed by ``_range`` once, then kept) keeps the
        number of intervals passed down at most twice the number asked, whatever the nesting depth;
        before, nested restarts multiplied them at every level.  The values are those ``_range`` gives
        for the same interval.
        """
        a, b = self._clamp(np.asarray(a, float)), self._clamp(np.asarray(b, float))
        n = self.length
        if n is None or not a.size:
            return self._range(a, b)
        whole = (a <= 0.0) & (b >= n)
        if not whole.any():
            return self._range(a, b)
        rest = ~whole
        ra, rb = a[rest], b[rest]
        try:
            w_lo, w_hi = self._whole
        except AttributeError:  # first use: the whole interval rides along with the rest (one call to _range)
            rlo, rhi = self._range(np.append(ra, 0.0), np.append(rb, float(n)))
            w_lo, w_hi = float(rlo[-1]), float(rhi[-1])
            object.__setattr__(self, "_whole", (w_lo, w_hi))
            lo, hi = np.full(np.shape(a), w_lo), np.full(np.shape(a), w_hi)
            lo[rest], hi[rest] = rlo[:-1], rhi[:-1]
            return lo, hi
        lo, hi = np.full(np.shape(a), w_lo), np.full(np.shape(a), w_hi)
        if ra.size:
            lo[rest], hi[rest] = self._range(ra, rb)
        return lo, hi

    def __repr__(self) -> str:
        args = ", ".join(f"{n}={literal(getattr(self, n))}" for n in self.params())
        return f"{self.kind}({args})"

    # ---------------------------------------------------------------- operators
    def then(self, *others: Schedule) -> Schedule:
        """``a.then(b)`` is ``stages(a, b)``: ``b`` starts, on its own clock, where ``a`` ends."""
        from .combine import stages

        return stages(self, *others)

    def __rshift__(self, other: Any) -> Any:
        if not isinstance(other, Schedule):
            return NotImplemented
        return self.then(other)

    def __mul__(self, other: Any) -> Any:
        from .combine import Product, Scaled

        if isinstance(other, Schedule):
            return Product(left=self, right=other)
        if isinstance(other, Real) and not isinstance(other, bool):
            return Scaled(target=self, factor=other)
        return NotImplemented

    def __rmul__(self, other: Any) -> Any:
        if isinstance(other, Schedule):
            return NotImplemented
        return self.__mul__(other)

    def __add__(self, other: Any) -> Any:
        from .combine import Sum

        if not isinstance(other, Schedule):
            return NotImplemented
        return Sum(left=self, right=other)

    def clip(self, low: float | None = None, high: float | None = None) -> Schedule:
        """The same schedule held inside ``[low, high]`` (either side may be None)."""
        from .combine import Clip

        return Clip(target=self, low=low, high=high)

    def stretch(self, steps: int) -> Schedule:
        """The same shape over a new budget of ``steps`` ticks: joins and drops move in proportion."""
        from .combine import Stretch

        inner = self._unstretched()
        if isinstance(steps, int) and steps == inner.length:
            return inner
        return Stretch(target=inner, steps=steps)

    # ------------------------------------------------------------------- data
    def to_spec(self) -> dict:
        """Plain-JSON description of this design, with format version (see ``schedwidget.spec``)."""
        from .spec import to_spec

        return to_spec(self)

    def _repr_svg_(self) -> str:
        from .svg import render_svg

        return render_svg(self)

    def walk(self) -> Iterator[Schedule]:
        """This node and every node below it, depth first."""
        yield self
        for c in self.children():
            yield from c.walk()

    @classmethod
    def params(cls) -> dict[str, Param]:
        """The declared parameters of this kind, in order."""
        return {f.name: f.metadata["param"] for f in fields(cls) if "param" in f.metadata}  # type: ignore[arg-type]

    def _validate(self) -> None:
        """Check and normalise every declared parameter (called from ``__post_init__``)."""
        for name, p in self.params().items():
            value = getattr(self, name)
            object.__setattr__(self, name, p.check(self.kind, name, value))


def check_top(owner: str, name: str, value: Any, top: float, what: str) -> float:
    """``top`` (an upper bound of a node's rates) if it is at most MAX_RATE, else a ScheduleError naming ``name``."""
    if not top <= MAX_RATE:  # also catches nan
        raise complain(owner, name, value, f"{what} <= 1e100 (the highest rate a design may reach)",
                       f"this design could reach {top:.3g}; no learning rate comes near 1e100, and above it "
                       "sums, products and areas over a run overflow a float")
    return top


def monotone_range(f, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Bounds of a monotone formula ``f`` over ``[a, b]``: its values at the two ends."""
    fa, fb = f(a), f(b)
    return np.minimum(fa, fb), np.maximum(fa, fb)
