"""Warm restarts: a schedule repeated in cycles that may grow or shrink and decay (Loshchilov & Hutter 2017)."""

from __future__ import annotations

import math
from dataclasses import field
from typing import ClassVar

import numpy as np

from .codegen import num
from .leaf import node
from .schedule import EDGE_CAP, MAX_TICKS, Schedule, complain, param
from .stages import _cap, _schedule

__all__ = ["Restarts", "MIN_GROWTH_STEP"]

#: growth must be 1 or at least this far from 1 (else a cycle table grows without bound).
MIN_GROWTH_STEP = 0.01


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

    def _repeated(self) -> Schedule:
        return self.target

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

    def _source(self, w, u, bound, ind, sink):
        if self.cycles == 1:  # as the core: one cycle is the target itself, read held (no cycle clock to round)
            v, pb = w.held(self.target, u, bound, ind)
            w.emit(self.target, v, pb, ind, sink)
            return
        L = float(self.target.length)
        last = None if self.cycles is None else self.cycles - 1
        k, start, ln = w.fresh("k"), w.fresh("start"), w.fresh("span")
        if self.growth == 1.0:
            q = f"math.floor({u} / {num(L)})"
            w.put(ind, f"{k} = {q}  # cycle number, from 0" if last is None else f"{k} = min({q}, {last})")
            w.put(ind, f"{start}, {ln} = {k} * {num(L)}, {num(L)}")
        else:
            self._cycle_source(w, u, bound, ind, k, start, ln, last)
        # as the core: a stretched cycle is read on its inner clock in one step (one rounding, not two)
        inner = self.target._unstretched()
        Li = float(inner.length)
        if self._same_clock():  # as the core: equal cycles of an unstretched target run on the cycle clock itself
            local = w.clock(f"{u} - {start}", ind)
        else:
            local = w.clock(f"(({u} - {start}) * {num(Li)}) / {ln}", ind)
        # Held as in the core, unless it provably cannot pass Li: inside a cycle u - start <= span, and when
        # span * Li is exact (<= 2**53) rounding is monotone, so ((u - start) * Li) / span <= (span * Li) / span = Li.
        # Otherwise the two roundings can pass Li by an ulp (a poly there gives a complex number).
        within = self.cycles is None or (bound is not None and self.length is not None and bound <= self.length)
        widest = L if self.growth <= 1.0 else (math.inf if self.length is None else float(self.length))
        exact = widest * Li <= MAX_TICKS
        v, pb = w.held(inner, local, Li if within and exact else None, ind)
        e = w.value(inner, v, pb, ind)
        w.put(ind, sink(e if self.peak_decay == 1.0 else f"{e} * {num(self.peak_decay)} ** {k}"))

    def _cycle_source(self, w, u, bound, ind, k, start, ln, last):
        """Cycle number, start and length from a table of cycles (and a loop or closed form past it)."""
        L = float(self.target.length)
        total = math.inf if self.length is None else float(self.length)
        if self.growth > 1.0:
            starts, lens = self._table(min(bound if bound is not None else 64.0 * L, total))
            starts, lens = starts[:w.cycle_table_max], lens[:w.cycle_table_max]
        else:
            starts, lens = self._table(0.0)
        n, end = len(starts), float(starts[-1] + lens[-1])
        complete = self.cycles is not None and n >= self.cycles
        past = not complete and (bound is None or bound >= end)
        w.modules.add("bisect")
        ts, tl = w.table(ind, "starts", starts.tolist()), w.table(ind, "spans", lens.tolist())
        j = ind
        if past:
            w.put(ind, f"if {u} < {num(end)}:")
            j = ind + 1
        w.put(j, f"{k} = bisect.bisect_right({ts}, {u}) - 1")
        w.put(j, f"{start}, {ln} = {ts}[{k}], {tl}[{k}]")
        if not past:
            return
        w.put(ind, "else:")
        cap = "" if last is None else f" and {k} < {last}"
        if self.growth < 1.0:  # every cycle after the table is one tick long
            extra = f"math.floor({u} - {num(end)})"
            w.put(ind + 1, f"{k} = {n} + " + (extra if last is None else f"min({extra}, {last - n})"))
            w.put(ind + 1, f"{start}, {ln} = {num(end)} + ({k} - {n}), 1.0")
            return
        size = f"max(1.0, math.floor({num(L)} * {num(self.growth)} ** {k} + 0.5))"
        w.put(ind + 1, f"{k}, {start} = {n}, {num(end)}  # past the table: later cycles one by one")
        w.put(ind + 1, f"{ln} = {size}")
        w.put(ind + 1, f"while {u} >= {start} + {ln}{cap}:")
        w.put(ind + 2, f"{k}, {start} = {k} + 1, {start} + {ln}")
        w.put(ind + 2, f"{ln} = {size}")

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

    def _first_cycles(self, hi: float, per_cycle: int, table=None) -> tuple[np.ndarray, np.ndarray]:
        """The cycles whose inner positions can be among the first EDGE_CAP (cycles follow each other in time).

        Each cycle holds ``per_cycle`` distinct inner positions in ``(start, start + length]``; only its last can
        repeat the next cycle's start, so ``EDGE_CAP // (per_cycle - 1) + 3`` cycles hold the first EDGE_CAP of them.
        Taking every cycle cost (EDGE_CAP + 1) x per_cycle positions: 16 million, sorted, for a dense target.
        """
        starts, lens = self._starts(hi) if table is None else table
        if per_cycle > 1:
            keep = EDGE_CAP // (per_cycle - 1) + 3
            starts, lens = starts[:keep], lens[:keep]
        return starts, lens

    def _joins(self):
        """The target's joins in every cycle (the first EDGE_CAP positions), moved with each cycle's length."""
        inner = self.target._joins()
        if not inner.size:
            return inner
        L = float(self.target.length)
        starts, lens = self._first_cycles(float(MAX_TICKS if self.length is None else self.length), inner.size)
        return _cap((starts[:, None] + (inner[None, :] * lens[:, None]) / L).ravel())

    def _edges(self, hi):
        L = float(self.target.length)
        starts, lens = self._starts(hi)
        inner = self.target._edges(L)
        if inner.size:
            few, flens = self._first_cycles(hi, inner.size, (starts, lens))
            pos = (few[:, None] + (inner[None, :] * flens[:, None]) / L).ravel()
        else:
            pos = np.empty(0)
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
