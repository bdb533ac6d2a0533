"""Combinators: stages, warmup, restarts, product, sum, scale, clip, stretch.

Each combinator is a frozen value holding its parts.  Clocks: a stage's own
clock restarts at 0 where it begins; ``stretch`` and ``restarts`` rescale the
real-valued clock, so joins and drops move in proportion and take effect on the
first integer tick at or after their scaled position.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np

from .schedule import EDGE_CAP, MAX_TICKS, Schedule, check_top, complain, literal, param, window

#: growth must be 1 or at least this far from 1 (else a cycle table grows without bound).
MIN_GROWTH_STEP = 0.01
from .shapes import Ramp, node

__all__ = ["stages", "warmup", "restarts"]


def _cap(x: np.ndarray) -> np.ndarray:
    return np.unique(x)[:EDGE_CAP]


def _schedule(owner: str, name: str, value: Any) -> Schedule:
    if not isinstance(value, Schedule):
        raise complain(owner, name, value, "a Schedule (built with cosine(), ramp(), stages(), ...)")
    return value


def _sparse(values: np.ndarray, op) -> list[np.ndarray]:
    """Sparse table: level k holds ``op`` over every run of ``2**k`` consecutive values."""
    levels = [values]
    while 2 ** len(levels) <= len(values):
        step = 2 ** (len(levels) - 1)
        prev = levels[-1]
        levels.append(op(prev[:-step], prev[step:]))
    return levels


def _table_reduce(levels: list[np.ndarray], lo: np.ndarray, hi: np.ndarray, op) -> np.ndarray:
    """``op`` over ``values[lo..hi]`` (inclusive) for every pair, from a sparse table: two reads each."""
    k = np.floor(np.log2((hi - lo + 1).astype(float))).astype(int)
    out = np.empty(lo.size)
    for level in np.unique(k):
        m = k == level
        row = levels[level]
        out[m] = op(row[lo[m]], row[hi[m] - 2 ** level + 1])
    return out


def _merged_length(*parts: Schedule) -> int | None:
    lengths = [p.length for p in parts if p.length is not None]
    return max(lengths) if lengths else None


@node
class Stages(Schedule):
    """One stage after another; each stage's clock restarts at 0 where it begins."""

    kind: ClassVar[str] = "stages"
    parts: tuple[Schedule, ...] = param(kind="schedules", doc="the stages, in order")
    # derived once, like Warmup's stages and Restarts' length: read on every evaluation and clamp
    _length: int | None = field(init=False, repr=False, compare=False)
    _starts: np.ndarray = field(init=False, repr=False, compare=False)
    _ceil: float = field(init=False, repr=False, compare=False)
    _full: Any = field(init=False, repr=False, compare=False)  # stages' full ranges, on first use

    def __post_init__(self) -> None:
        object.__setattr__(self, "_full", None)
        parts = tuple(self.parts) if isinstance(self.parts, (list, tuple)) else self.parts
        if not isinstance(parts, tuple) or not parts:
            raise complain("stages", "parts", self.parts, "a non-empty sequence of schedules")
        for i, p in enumerate(parts):
            _schedule("stages", f"parts[{i}]", p)
            if p.length is None and i < len(parts) - 1:
                raise complain("stages", f"parts[{i}]", p, "a stage with a length (steps=...)",
                               "only the last stage may be open-ended; an open-ended stage never hands over")
        if len(parts) < 2:
            raise complain("stages", "parts", parts, "two or more schedules", "a single stage is just that schedule")
        total = sum(p.length for p in parts if p.length is not None)
        if total > MAX_TICKS:
            raise complain("stages", "parts", f"{len(parts)} stages of {total:.3g} ticks", "a total length <= 2**53")
        object.__setattr__(self, "parts", parts)
        object.__setattr__(self, "_length", None if parts[-1].length is None else total)
        lengths = [p.length for p in parts[:-1]]
        starts = np.concatenate([[0.0], np.cumsum(np.asarray(lengths, dtype=float))])
        starts.setflags(write=False)  # shared by every call: read-only
        object.__setattr__(self, "_starts", starts)
        object.__setattr__(self, "_ceil", max(p._top() for p in parts))

    def _top(self) -> float:
        return self._ceil

    def _work(self, below: list[int]) -> int:
        return 1 + max(below)  # each tick visits one stage

    def _window(self) -> int:  # the fixed stages, then a window for the open last one
        return int(self._starts[-1]) + window(self.parts[-1])

    def _lead_in(self) -> int:  # a first stage that rises (a ramp up) is a warmup
        return self.parts[0]._rise()

    def _stage_parts(self) -> tuple[Schedule, ...]:
        return self.parts

    @property
    def length(self) -> int | None:
        return self._length

    def starts(self) -> np.ndarray:
        """The tick where each stage begins (the first is 0)."""
        return self._starts

    def children(self):
        return self.parts

    def _at(self, u):
        starts = self.starts()
        if len(self.parts) == 1:
            return self.parts[0]._held(u)
        out = np.empty(np.shape(u))
        flat_u, flat_out = u.reshape(-1), out.reshape(-1)
        if flat_u.size < 2 or bool(np.all(flat_u[1:] >= flat_u[:-1])):
            # sorted clock (the usual np.arange): each stage is one slice, no masks
            cut = np.concatenate([np.searchsorted(flat_u, starts, side="left"), [flat_u.size]])
            for i, part in enumerate(self.parts):
                if cut[i + 1] > cut[i]:
                    flat_out[cut[i]:cut[i + 1]] = part._held(flat_u[cut[i]:cut[i + 1]] - starts[i])
            return out
        idx = np.searchsorted(starts, flat_u, side="right") - 1
        if len(self.parts) <= 24:  # a few stages: one mask each is cheaper than a sort (they cross near 30)
            for i, part in enumerate(self.parts):
                mask = idx == i
                if mask.any():
                    flat_out[mask] = part._held(flat_u[mask] - starts[i])
            return out
        # many stages: group the ticks by stage once (a sort, not one mask per stage), then one call per stage
        order = np.argsort(idx, kind="stable")
        cut = np.searchsorted(idx[order], np.arange(len(self.parts) + 1), side="left")
        for i in np.flatnonzero(cut[1:] > cut[:-1]):
            pick = order[cut[i]:cut[i + 1]]
            flat_out[pick] = self.parts[i]._held(flat_u[pick] - starts[i])
        return out

    def _edges(self, hi):
        starts = self.starts()
        found = [starts[1:][starts[1:] <= hi]]
        for i, part in enumerate(self.parts):
            if starts[i] > hi:
                break
            end = hi - starts[i] if part.length is None else min(hi - starts[i], part.length)
            found.append(part._edges(end) + starts[i])
        return _cap(np.concatenate(found))

    def _joins(self):
        starts = self.starts()
        inner = [p._joins() + s0 for p, s0 in zip(self.parts, starts)]
        return np.unique(np.concatenate([starts[1:], *inner]))

    def _range(self, a, b):
        # Each interval meets a first stage (from a), a last stage (to b) and whole stages between.  The partial
        # pieces are grouped by stage (one call per stage met), the whole stages come from a table of each stage's
        # full range: the cost is linear in the stages and the intervals, not their product.
        starts = self.starts()
        shape = np.shape(a)
        a, b = np.asarray(a, float).reshape(-1), np.asarray(b, float).reshape(-1)
        n, count = a.size, len(self.parts)
        ends = np.append(starts[1:], math.inf)
        ia = np.searchsorted(starts, a, side="right") - 1
        ib = np.maximum(np.searchsorted(starts, b, side="right") - 1, ia)
        two = ib > ia
        part = np.concatenate([ia, ib[two]])
        pa = np.concatenate([a - starts[ia], np.zeros(int(np.count_nonzero(two)))])
        pb = np.concatenate([np.minimum(b, ends[ia]) - starts[ia], b[two] - starts[ib[two]]])
        elo, ehi = np.empty(part.size), np.empty(part.size)
        order = np.argsort(part, kind="stable")
        cut = np.searchsorted(part[order], np.arange(count + 1), side="left")
        for i in np.flatnonzero(cut[1:] > cut[:-1]):
            pick = order[cut[i]:cut[i + 1]]
            elo[pick], ehi[pick] = self.parts[i]._span(pa[pick], pb[pick])
        lo, hi = elo[:n].copy(), ehi[:n].copy()
        lo[two] = np.minimum(lo[two], elo[n:])
        hi[two] = np.maximum(hi[two], ehi[n:])
        inner = ib - ia >= 2
        if inner.any():
            flo, fhi = self._full_ranges()
            lo[inner] = np.minimum(lo[inner], _table_reduce(flo, ia[inner] + 1, ib[inner] - 1, np.minimum))
            hi[inner] = np.maximum(hi[inner], _table_reduce(fhi, ia[inner] + 1, ib[inner] - 1, np.maximum))
        return lo.reshape(shape), hi.reshape(shape)

    def _full_ranges(self) -> tuple[list[np.ndarray], list[np.ndarray]]:
        """Sparse tables of every stage's full range but the last (computed on first use, then kept)."""
        if self._full is None:
            lengths = np.diff(self.starts())
            lo, hi = np.empty(lengths.size), np.empty(lengths.size)
            for i, (part, n) in enumerate(zip(self.parts[:-1], lengths)):
                plo, phi = part._span(np.zeros(1), np.full(1, n))
                lo[i], hi[i] = plo[0], phi[0]
            object.__setattr__(self, "_full", (_sparse(lo, np.minimum), _sparse(hi, np.maximum)))
        return self._full

    def __repr__(self) -> str:
        return "stages(" + ", ".join(repr(p) for p in self.parts) + ")"


@node
class Warmup(Schedule):
    """A ramp from ``start`` to the target's first rate over ``steps`` ticks, then the target."""

    kind: ClassVar[str] = "warmup"
    target: Schedule = param(kind="schedule", doc="the schedule the warmup leads into")
    steps: int = param(kind="ticks", lo=1, soft=(1, 20_000), doc="warmup length; the peak lands at this tick")
    start: float = param(0.0, kind="rate", lo=0.0, soft=(0.0, 1.0), doc="rate at tick 0")
    curve: str = param("linear", kind="choice", choices=("linear", "geometric", "cosine"),
                       doc="shape of the warmup ramp")
    _stages: Stages = field(init=False, repr=False, compare=False)  # derived once, for evaluation

    def __post_init__(self) -> None:
        _schedule("warmup", "target", self.target)
        self._validate()
        n = self.target.length
        if n is not None and self.steps > n:
            raise complain("warmup", "steps", self.steps, f"<= {n} (the length of the schedule it leads into)",
                           "a warmup longer than the run it warms up is usually a steps/epochs mix-up")
        if self.curve == "geometric" and self.start <= 0:
            raise complain("warmup", "start", self.start, "a rate > 0 with curve='geometric'",
                           "a geometric warmup multiplies by a constant ratio from start; pass start=peak/100, say")
        # building the ramp validates start/curve against the target's first rate
        ramp = Ramp(start=self.start, end=self.target(0), steps=self.steps, curve=self.curve)
        object.__setattr__(self, "_stages", Stages(parts=(ramp, self.target)))

    def _top(self) -> float:
        return self._stages._top()

    def ramp(self) -> Schedule:
        """The warmup ramp itself."""
        return self._stages.parts[0]

    def as_stages(self) -> Stages:
        """The same design as two plain stages: the ramp, then the target."""
        return self._stages

    @property
    def length(self) -> int | None:
        n = self.target.length
        return None if n is None else n + self.steps

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        return self.steps + window(self.target)

    def _lead_in(self) -> int:
        return int(self.steps)

    def _at(self, u):
        return self.as_stages()._at(u)

    def _edges(self, hi):
        return self.as_stages()._edges(hi)

    def _joins(self):
        return self.as_stages()._joins()

    def _range(self, a, b):
        return self.as_stages()._range(a, b)


@node
class Restarts(Schedule):
    """Warm restarts: cycle k is the target stretched to ``round(L * growth**k)`` ticks, times ``peak_decay**k``."""

    kind: ClassVar[str] = "restarts"
    target: Schedule = param(kind="schedule", doc="one cycle")
    cycles: int | None = param(None, kind="count", lo=1, soft=(1, 20), optional=True,
                               doc="number of cycles; None repeats forever")
    growth: float = param(1.0, kind="ratio", lo=0.5, hi=10.0, soft=(1.0, 3.0),
                          doc="each cycle is this many times longer than the one before (lengths round half up)")
    peak_decay: float = param(1.0, kind="ratio", lo=0.0, lo_open=True, hi=1.0, soft=(0.3, 1.0),
                              doc="each cycle is scaled by this factor relative to the one before")
    _length: int | None = field(init=False, repr=False, compare=False)  # derived once; read on every call

    def __post_init__(self) -> None:
        _schedule("restarts", "target", self.target)
        self._validate()
        if self.target.length is None:
            raise complain("restarts", "target", self.target, "a schedule with a length (steps=...)",
                           "an open-ended schedule never ends, so it cannot restart")
        if self.growth != 1.0 and abs(self.growth - 1.0) < MIN_GROWTH_STEP:
            raise complain("restarts", "growth", self.growth, f"1.0, or at least {MIN_GROWTH_STEP} away from 1",
                           "cycles that change length by less than 1 % would need thousands of cycles; use 1.0")
        total = None if self.cycles is None else self._total(self.cycles)
        if total is not None and total > MAX_TICKS:
            raise complain("restarts", "cycles", self.cycles, f"few enough that the length stays <= 2**53",
                           f"these cycles add up to at least {total:.3g} ticks")
        object.__setattr__(self, "_length", total)

    @property
    def length(self) -> int | None:
        return self._length

    def children(self):
        return (self.target,)

    def _top(self) -> float:
        return self.target._top()  # peak_decay <= 1: no cycle rises above the first

    def _total(self, n: int) -> int:
        """The length of the first ``n`` cycles, in time bounded whatever ``n`` (<= 2**53) is."""
        L, g = self.target.length, self.growth
        if g == 1.0:
            return n * L
        if g > 1.0:  # a single cycle passes 2**53 ticks after m cycles: more than m cannot fit, so stop there
            m = min(n, int(math.log(MAX_TICKS / L) / math.log(g)) + 2)
            return int(self._lengths(m).sum())
        # shrinking cycles round to one tick from cycle m on (L * g**m < 0.5): those add one tick each
        m = min(n, int(math.log(0.5 / L) / math.log(g)) + 2 if L > 1 else 1)
        return int(self._lengths(m).sum()) + (n - m)

    def _lengths(self, n: int) -> np.ndarray:
        # One Python pow per cycle (a loop over cycles, not ticks): numpy's vectorised power can differ from it by
        # an ulp, and the generated code computes cycle lengths this way, so both must round the same value.
        L, g = float(self.target.length), self.growth
        return np.array([max(1.0, math.floor(L * g ** k + 0.5)) for k in range(n)])

    def _table(self, umax: float) -> tuple[np.ndarray, np.ndarray]:
        """Starts and lengths of every cycle that begins at or before ``umax`` (growth != 1)."""
        L = self.target.length
        if self.growth > 1.0:
            n = int(math.log(umax / L * (self.growth - 1.0) + 1.0) / math.log(self.growth)) + 2 if umax > 0 else 1
        else:  # shrinking cycles reach one tick after a few dozen cycles; past that, closed form
            n = int(math.log(0.5 / L) / math.log(self.growth)) + 2 if L > 1 else 1
        n = max(n, 1) if self.cycles is None else min(max(n, 1), self.cycles)
        lengths = self._lengths(n)
        while self.growth > 1.0 and lengths.sum() <= umax and (self.cycles is None or n < self.cycles):
            n = 2 * n if self.cycles is None else min(2 * n, self.cycles)
            lengths = self._lengths(n)
        return np.concatenate([[0.0], np.cumsum(lengths)[:-1]]), lengths

    def _locate(self, u):
        """Cycle index, cycle start and cycle length for every real tick ``u``."""
        L = float(self.target.length)
        last = math.inf if self.cycles is None else self.cycles - 1
        if self.growth == 1.0:
            k = np.minimum(np.floor(u / L), last)
            return k, k * L, np.full(np.shape(u), L)
        umax = float(np.max(u)) if np.size(u) else 0.0
        starts, lengths = self._table(umax)
        k = np.searchsorted(starts, u, side="right") - 1
        start, ln = starts[k], lengths[k]
        if self.growth < 1.0 and (self.cycles is None or self.cycles > len(lengths)):
            end = starts[-1] + lengths[-1]  # every later cycle is one tick long
            past = u >= end
            extra = np.minimum(np.floor(u - end), last - len(lengths))
            k = np.where(past, len(lengths) + extra, k)
            start = np.where(past, end + extra, start)
            ln = np.where(past, 1.0, ln)
        return k, start, ln

    def _at(self, u):
        if self.cycles == 1:  # one cycle is the target itself: nested single restarts cost what the target costs
            return self.target._held(u)
        k, start, ln = self._locate(u)
        # A stretched cycle is read on its inner clock in one step, so the clock is rounded once, not twice:
        # a drop whose scaled position is a whole tick then lands exactly on it.
        inner = self.target._unstretched()
        local = u - start
        if not self._same_clock():  # cycles of another length than the target's: rescale the clock
            local *= float(inner.length)
            local /= ln
        out = inner._held(local)
        if self.peak_decay != 1.0:
            out *= np.power(self.peak_decay, k)
        return out

    def _same_clock(self) -> bool:
        """True when every cycle runs on the target's own clock (equal cycles of an unstretched target).

        Then the cycle clock is ``u - start``, not ``((u - start) * L) / L``: above 2**53 the product rounds,
        and 48 nested restarts read tick 30 as 29.999999999999996, a tick early (0.0 instead of 0.01).
        """
        return self.growth == 1.0 and self.target._unstretched() is self.target

    def _starts(self, hi: float) -> tuple[np.ndarray, np.ndarray]:
        """Start and length of every cycle that begins at or before ``hi`` (at most EDGE_CAP)."""
        L = float(self.target.length)
        last = EDGE_CAP if self.cycles is None else min(self.cycles - 1, EDGE_CAP)
        if self.growth == 1.0:
            n = int(min(hi // L, last))
            return np.arange(n + 1, dtype=float) * L, np.full(n + 1, L)
        starts, lengths = self._table(hi)
        if self.growth < 1.0 and (self.cycles is None or self.cycles > len(lengths)):
            end = starts[-1] + lengths[-1]
            n = int(min(max(hi - end + 1, 0), last + 1 - len(lengths)))
            starts = np.concatenate([starts, end + np.arange(n, dtype=float)])
            lengths = np.concatenate([lengths, np.ones(n)])
        keep = starts <= hi
        return starts[keep][: EDGE_CAP + 1], lengths[keep][: EDGE_CAP + 1]

    def _window(self) -> int:  # three cycles
        return int(self._lengths(3).sum())

    def _readout_children(self):
        return ()  # a decay that restarts has no half-life of the whole

    def _joins(self):
        """The target's joins in every cycle (the first EDGE_CAP positions), moved with each cycle's length."""
        inner = self.target._joins()
        if not inner.size:
            return inner
        L = float(self.target.length)
        starts, lens = self._starts(float(MAX_TICKS if self.length is None else self.length))
        return _cap((starts[:, None] + (inner[None, :] * lens[:, None]) / L).ravel())

    def _edges(self, hi):
        L = float(self.target.length)
        starts, lens = self._starts(hi)
        inner = self.target._edges(L)
        pos = (starts[:, None] + (inner[None, :] * lens[:, None]) / L).ravel() if inner.size else np.empty(0)
        found = np.concatenate([starts[1:], pos])
        return _cap(found[(found > 0) & (found <= hi)])

    def _range(self, a, b):
        if self.cycles == 1:
            return self.target._span(a, b)
        L = float(self.target.length)
        shape = np.shape(a)
        a, b = np.asarray(a, float).reshape(-1), np.asarray(b, float).reshape(-1)
        n = a.size
        k, s0, ln = self._locate(np.concatenate([a, b]))  # one table for both ends
        ka, sa, la, kb, sb, lb = k[:n], s0[:n], ln[:n], k[n:], s0[n:], ln[n:]
        da, db = np.power(self.peak_decay, ka), np.power(self.peak_decay, kb)
        same = ka == kb
        # one call to the target for three kinds of interval (so nesting costs one call per level, not three):
        # the first (possibly partial) cycle, from a to its end or to b within the same cycle; the last partial
        # cycle where it differs from the first; and one whole cycle
        if self.growth == 1.0:  # every cycle is L long: the cycle clock is exact, with no product to round
            def clock(x, x0, ln):
                return x - x0
        else:
            def clock(x, x0, ln):
                return ((x - x0) * L) / ln
        end_a = np.where(same, clock(b, sa, la), L)
        m = int(np.count_nonzero(~same))
        los, his = self.target._span(np.concatenate([clock(a, sa, la), np.zeros(m), [0.0]]),
                                     np.concatenate([end_a, clock(b[~same], sb[~same], lb[~same]), [L]]))
        lo, hi = los[:n] * da, his[:n] * da
        lo2, hi2 = np.empty(n), np.empty(n)
        lo2[~same], hi2[~same] = los[n:n + m], his[n:n + m]
        lo = np.where(same, lo, np.minimum(lo, lo2 * db))
        hi = np.where(same, hi, np.maximum(hi, hi2 * db))
        # whole cycles strictly between: their full range, largest at ka+1, smallest at kb-1
        full_lo, full_hi = los[-1:], his[-1:]
        between = kb - ka >= 2
        # kb - 1 >= 0 only where between: keep it >= 0 everywhere (peak_decay ** -1 overflows for a tiny decay)
        lo = np.where(between, np.minimum(lo, full_lo[0] * np.power(self.peak_decay, np.maximum(kb - 1, 0))), lo)
        hi = np.where(between, np.maximum(hi, full_hi[0] * np.power(self.peak_decay, ka + 1)), hi)
        return lo.reshape(shape), hi.reshape(shape)


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

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        return window(self.target)

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

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        return window(self.target)

    def _bound(self, x):
        return np.clip(x, self.low, self.high)

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


def warmup(target: Schedule, steps: int, start: float = 0.0, curve: str = "linear") -> Schedule:
    """A ramp from ``start`` up to ``target(0)`` over ``steps`` ticks, then ``target``.

    The peak lands at tick ``steps``.

    >>> from schedwidget import cosine
    >>> s = warmup(cosine(0.1, steps=100), steps=10)
    >>> s(0), s(5), s(10)
    (0.0, 0.05, 0.1)
    """
    return Warmup(target=target, steps=steps, start=start, curve=curve)


def restarts(target: Schedule, cycles: int | None = None, growth: float = 1.0,
             peak_decay: float = 1.0) -> Schedule:
    """Warm restarts (Loshchilov & Hutter 2017): repeat ``target``, cycle k lasting ``L * growth**k``.

    >>> from schedwidget import cosine
    >>> s = restarts(cosine(1.0, steps=10), cycles=3, growth=2.0)
    >>> s.length, s(10), s(30)
    (70, 1.0, 1.0)
    """
    return Restarts(target=target, cycles=cycles, growth=growth, peak_decay=peak_decay)
