"""Stages: one schedule after another, each on its own clock; warmup is a ramp stage before a target.

Also the helpers every combinator shares (``_schedule`` checks an argument is a Schedule, ``_cap`` keeps
at most EDGE_CAP positions).
"""

from __future__ import annotations

import math
from dataclasses import field
from typing import Any, ClassVar

import numpy as np

from .codegen import num
from .leaf import node
from .schedule import EDGE_CAP, MAX_TICKS, Schedule, complain, literal, param, window
from .shapes import Ramp

__all__ = ["Stages", "Warmup", "PLACES"]

#: Where a warmup goes: in front of its target (its own clock starts after the warmup) or over its first ticks.
PLACES = ("before", "over")


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

    def _source(self, w, u, bound, ind, sink):
        starts = self.starts().tolist()
        last = len(self.parts) - 1

        def branch(i, j):
            part = self.parts[i]
            if i == last:
                v = u if starts[i] == 0.0 else w.clock(f"{u} - {num(starts[i])}", j)
                pb = None if bound is None else bound - starts[i]
            else:  # u < starts[i + 1], so this stage's clock cannot pass its length
                v = u if i == 0 else w.clock(f"{u} - {num(starts[i])}", j)
                pb = float(part.length)
            v, pb = w.held(part, v, pb, j)
            w.emit(part, v, pb, j, sink)
        w.chain(u, ind, starts[1:], branch)

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
    """A ramp from ``start`` into a target over ``steps`` ticks, placed before the target or over its first ticks.

    ``place="before"``: the ramp ends at the target's first rate, then the target runs on its own clock
    (length ``steps + target.length``; the peak lands at tick ``steps``).  ``place="over"``: the ramp is laid
    over the first ``steps`` ticks of the target on the run's clock: it rises from ``start`` to
    ``target(steps)`` on ``[0, steps)`` and the rate is ``target(t)`` from ``t = steps`` on (length
    ``target.length``; the target's drops and restarts keep their run positions, Goyal et al. 2017 as written).
    """

    kind: ClassVar[str] = "warmup"
    target: Schedule = param(kind="schedule", doc="the schedule the warmup leads into")
    steps: int = param(kind="ticks", lo=1, soft=(1, 20_000), doc="warmup length; the ramp hands over at this tick")
    start: float = param(0.0, kind="rate", lo=0.0, soft=(0.0, 1.0), doc="rate at tick 0")
    curve: str = param("linear", kind="choice", choices=("linear", "geometric", "cosine"),
                       doc="shape of the warmup ramp")
    place: str = param("before", kind="choice", choices=PLACES,
                       doc="'before': the warmup comes first, then the target on its own clock; "
                           "'over': laid over the target's first ticks on the run's clock",
                       hint="'before' adds the warmup to the length; 'over' keeps the target's ticks where they are")
    _stages: Stages | None = field(init=False, repr=False, compare=False)  # derived once (place="before")
    _ramp: Schedule = field(init=False, repr=False, compare=False)  # the warmup ramp itself, derived once
    _ceil: float = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        _schedule("warmup", "target", self.target)
        self._validate()
        n = self.target.length
        if n is not None and self.steps > n:
            if self.place == "over":
                raise complain("warmup", "steps", self.steps, f"<= {n} (the length of the schedule it is laid over)",
                               "with place='over' the warmup covers the target's first ticks, so it cannot be "
                               "longer than the target; place='before' puts it in front instead")
            raise complain("warmup", "steps", self.steps, f"<= {n} (the length of the schedule it leads into)",
                           "a warmup longer than the run it warms up is usually a steps/epochs mix-up")
        if self.curve == "geometric" and self.start <= 0:
            raise complain("warmup", "start", self.start, "a rate > 0 with curve='geometric'",
                           "a geometric warmup multiplies by a constant ratio from start; pass start=peak/100, say")
        # the rate the ramp reaches: the target's first rate (before), or the target's own rate at tick
        # ``steps`` on the run's clock (over), read from the target itself so the handover is exact
        end = self.target(0) if self.place == "before" else self.target(int(self.steps))
        if self.curve == "geometric" and end <= 0:
            where = "first rate" if self.place == "before" else f"rate at tick {self.steps}"
            raise complain("warmup", "target", self.target, f"a schedule whose {where} is > 0 with curve='geometric'",
                           "a geometric warmup cannot end at 0; use curve='linear'")
        ramp = Ramp(start=self.start, end=end, steps=self.steps, curve=self.curve)
        object.__setattr__(self, "_ramp", ramp)
        object.__setattr__(self, "_stages", Stages(parts=(ramp, self.target)) if self.place == "before" else None)
        object.__setattr__(self, "_ceil", max(ramp._top(), self.target._top()))

    def _top(self) -> float:
        return self._ceil

    def ramp(self) -> Schedule:
        """The warmup ramp itself (on ``[0, steps)`` of the run's clock, whichever the place)."""
        return self._ramp

    def as_stages(self) -> Stages:
        """The same design as two plain stages: the ramp, then the target (``place="before"`` only)."""
        if self._stages is None:
            raise complain("warmup", "place", self.place, "'before' for as_stages()",
                           "a warmup laid over its target's first ticks is not two stages one after the other")
        return self._stages

    @property
    def length(self) -> int | None:
        n = self.target.length
        if self.place == "over":
            return n
        return None if n is None else n + self.steps

    def children(self):
        return (self.target,)

    def _window(self) -> int:
        if self.place == "over":  # the target's own window, and at least the handover plus a quarter
            return max(window(self.target), self.steps + max(1, math.ceil(self.steps / 4)))
        return self.steps + window(self.target)

    def _lead_in(self) -> int:
        return int(self.steps)

    def _rise(self) -> int:  # as a design's first stage, a rising warmup is its lead-in (either place)
        return int(self.steps) if self._ramp._rise() else 0

    def _warmed(self) -> Schedule:
        return self.target

    def __repr__(self) -> str:
        # place="before" is the default and written only when it is not: reprs of earlier designs stay the same
        names = [n for n in self.params() if n != "place" or self.place != "before"]
        return "warmup(" + ", ".join(f"{n}={literal(getattr(self, n))}" for n in names) + ")"

    # ------------------------------------------------------------ evaluation: two places
    def _source(self, w, u, bound, ind, sink):
        if self._stages is not None:
            w.emit(self._stages, u, bound, ind, sink)
            return
        ramp, target, cut = self._ramp, self.target, float(self.steps)

        def branch(i, j):
            if i == 0:  # u < steps: the ramp on the run's clock, which cannot pass its length
                w.emit(ramp, u, cut, j, sink)
            else:  # the target on the run's own clock (as _at: read held)
                v, pb = w.held(target, u, bound, j)
                w.emit(target, v, pb, j, sink)
        w.chain(u, ind, [cut], branch)

    def _at(self, u):
        if self._stages is not None:
            return self._stages._at(u)
        u = np.asarray(u, dtype=float)
        cut = float(self.steps)
        out = np.empty(np.shape(u))
        flat_u, flat_out = u.reshape(-1), out.reshape(-1)
        early = flat_u < cut
        if early.all():
            flat_out[:] = self._ramp._at(flat_u)
        elif not early.any():
            flat_out[:] = self.target._held(flat_u)
        else:
            flat_out[early] = self._ramp._at(flat_u[early])
            flat_out[~early] = self.target._held(flat_u[~early])
        return out

    def _edges(self, hi):
        if self._stages is not None:
            return self._stages._edges(hi)
        cut = float(self.steps)
        if hi < cut:
            return np.empty(0)
        # the handover (a possible jump, as a stage join is) and the target's own jumps after it; a jump of the
        # target inside [0, steps) is covered by the ramp and never happens
        inner = self.target._edges(hi)
        return _cap(np.concatenate([[cut], inner[inner > cut]]))

    def _joins(self):
        if self._stages is not None:
            return self._stages._joins()
        cut = float(self.steps)
        inner = self.target._joins()
        return np.unique(np.concatenate([[cut], inner[inner > cut]]))

    def _range(self, a, b):
        if self._stages is not None:
            return self._stages._range(a, b)
        cut = float(self.steps)
        shape = np.shape(a)
        a, b = np.asarray(a, float).reshape(-1), np.asarray(b, float).reshape(-1)
        lo, hi = np.full(a.size, np.inf), np.full(a.size, -np.inf)
        early = a < cut  # meets the ramp: [a, min(b, steps)] (the ramp reaches target(steps) at steps exactly)
        if early.any():
            rlo, rhi = self._ramp._span(a[early], np.minimum(b[early], cut))
            lo[early], hi[early] = rlo, rhi
        late = b >= cut  # meets the target: [max(a, steps), b]
        if late.any():
            tlo, thi = self.target._span(np.maximum(a[late], cut), b[late])
            lo[late], hi[late] = np.minimum(lo[late], tlo), np.maximum(hi[late], thi)
        return lo.reshape(shape), hi.reshape(shape)
