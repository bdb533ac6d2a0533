"""Readouts: the numbers a teammate asks for, one plain sentence, and cautions.

``facts(s)`` reads a schedule over its budget: peak and where, final, minimum,
mean, area (sum of rates), jumps, stage joins with the rate on both sides
(the boundary table), the half-life of an exponential stretch, where the rate
first falls under 10 % and 1 % of its peak, and cautions for risky settings.
Up to ``EXACT_LIMIT`` ticks every tick is evaluated (in chunks); above it the
readout is computed from an even grid plus every jump and says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .combine import Restarts, Stretch
from .sample import breaks, budget_of
from .schedule import Schedule, ScheduleError
from .shapes import ExpDecay

__all__ = ["Facts", "facts", "EXACT_LIMIT", "LARGE_BATCH"]

EXACT_LIMIT = 2 ** 21
CHUNK = 2 ** 18
#: Batch size from which a run without warmup gets a caution (common practice, no source).
LARGE_BATCH = 1024
#: A peak this many times the linear scaling rule's rate gets a caution (common practice, no source).
SCALING_MARGIN = 2.0


@dataclass(frozen=True)
class Facts:
    """What ``facts`` found.  Ticks are in the design's unit; rates are absolute."""

    unit: str
    steps: int
    steps_per_epoch: int | None
    exact: bool
    first: float
    peak: float
    peak_at: int
    minimum: float
    minimum_at: int
    final: float
    after: float
    mean: float
    area: float
    breaks: tuple[int, ...]
    joins: tuple[int, ...]
    boundary: tuple[tuple[str, int, float], ...]
    half_life: float | None
    under_10: int | None
    under_1: int | None
    cautions: tuple[str, ...]
    sentence: str

    def table(self) -> str:
        """The boundary table as aligned text."""
        rows = [("where", self.unit, "epoch" if self.steps_per_epoch else "", "rate")]
        for label, t, r in self.boundary:
            ep = f"{t / self.steps_per_epoch:.3f}" if self.steps_per_epoch else ""
            rows.append((label, f"{t:,}", ep, f"{r:.6g}"))
        w = [max(len(r[i]) for r in rows) for i in range(4)]
        return "\n".join("  ".join(c.ljust(w[i]) if i == 0 else c.rjust(w[i]) for i, c in enumerate(r)).rstrip()
                         for r in rows)


def _sorted_unique(x: np.ndarray) -> np.ndarray:
    x = np.sort(x)
    return x[np.concatenate([[True], x[1:] != x[:-1]])] if x.size else x


def _ticks(n: int, limit: int) -> tuple[np.ndarray, bool]:
    if n <= limit:
        return np.arange(n, dtype=np.int64), True
    return _sorted_unique(np.linspace(0, n - 1, max(limit // 2, 2)).astype(np.int64)), False


def _scan(s: Schedule, ticks: np.ndarray, extra: np.ndarray):
    """Peak/min/area over ``ticks`` (chunked), with the jump ticks and their neighbours added."""
    grid = _sorted_unique(np.concatenate([ticks, extra]))
    peak, peak_at, low, low_at, total = -math.inf, 0, math.inf, 0, 0.0
    for i in range(0, grid.size, CHUNK):
        t = grid[i:i + CHUNK]
        y = s(t)
        j, k = int(np.argmax(y)), int(np.argmin(y))
        if y[j] > peak:
            peak, peak_at = float(y[j]), int(t[j])
        if y[k] < low:
            low, low_at = float(y[k]), int(t[k])
        total += float(np.sum(y))
    return grid, peak, peak_at, low, low_at, total


def _refine_peak(s: Schedule, grid: np.ndarray, peak: float, peak_at: int, tries: int = 4) -> tuple[float, int]:
    """On a grid, look inside the earliest gaps whose bounds reach the peak for a higher or earlier one."""
    a, b = grid[:-1], grid[1:]
    _, hi = s._span(a.astype(float), b.astype(float))
    for i in np.flatnonzero((hi >= peak) & (b - a > 1))[:tries]:
        if a[i] >= peak_at:
            break
        t = np.arange(a[i], b[i] + 1)
        y = s(t)
        j = int(np.argmax(y))
        if y[j] > peak or (y[j] == peak and t[j] < peak_at):
            peak, peak_at = float(y[j]), int(t[j])
    return peak, peak_at


def _first_under(s: Schedule, grid: np.ndarray, start: int, level: float) -> int | None:
    for i in range(int(np.searchsorted(grid, start)), grid.size, CHUNK):
        t = grid[i:i + CHUNK]
        hit = np.flatnonzero(s(t) < level)
        if hit.size:
            return int(t[hit[0]])
    return None


def _half_life(s: Schedule) -> tuple[float, ExpDecay] | None:
    """Half-life in ticks of the first exponential decay in the design (stretches applied)."""
    def walk(node: Schedule, scale: float):
        if isinstance(node, ExpDecay) and node.factor < 1.0:
            return node.half_life() * scale, node
        if isinstance(node, Restarts):
            return None
        if isinstance(node, Stretch):
            scale *= node.steps / node.target.length
        for c in node.children():
            got = walk(c, scale)
            if got:
                return got
        return None
    return walk(s, 1.0)


def _g(x: float) -> str:
    return f"{x:.3g}"


def _when(t: float, unit: str, spe: int | None) -> str:
    words = f"{unit} {t:,.0f}" if float(t).is_integer() else f"{t:,.1f} {unit}s"
    if spe and unit == "step":
        words += f" (epoch {t / spe:.1f})"
    return words


def _cautions(s: Schedule, f0: float, peak: float, n: int, batch: int | None, unit: str) -> list[str]:
    out: list[str] = []
    if peak > 1.0:
        out.append(f"peak {_g(peak)} is above 1.0: far above what common optimisers train stably with "
                   "(common practice, no source); check that it is a rate, not a percentage")
    if batch is not None:
        ref = 0.1 * batch / 256
        if peak > SCALING_MARGIN * ref:
            out.append(f"peak {_g(peak)} is {peak / ref:.2f}x the linear scaling rule's {_g(ref)} "
                       f"(0.1 x {batch}/256 for SGD, Goyal et al. 2017; caution above {SCALING_MARGIN:g}x): "
                       "risky unless tuned for this optimiser")
        if batch >= LARGE_BATCH and peak > 0 and f0 >= 0.5 * peak:
            out.append(f"no warmup at batch {batch:,}: the run starts at {f0 / peak:.0%} of its peak; "
                       "Goyal et al. 2017 needed a gradual warmup at large batch (try warmup(..., steps=5 epochs))")
    L = s.length
    if L is not None and L != n:
        if n < L:
            out.append(f"the design is {L:,} {unit}s long but the budget is {n:,}: its last {L - n:,} {unit}s never run")
        else:
            out.append(f"the design is {L:,} {unit}s long but the budget is {n:,}: the rate is held "
                       f"at {_g(s(L))} for the last {n - L:,} {unit}s")
    return out


def facts(s: Schedule, steps: int | None = None, steps_per_epoch: int | None = None,
          unit: str = "step", batch: int | None = None, exact_up_to: int = EXACT_LIMIT) -> Facts:
    """Read ``s`` over ``steps`` ticks (default: its length).

    Parameters
    ----------
    s : the schedule.
    steps : budget in ticks of ``unit``; required for an open-ended schedule.
    steps_per_epoch : adds epochs beside steps in the readout (unit "step").
    unit : "step" or "epoch", the unit of the clock; stated in every line.
    batch : batch size per update, used only for cautions.
    exact_up_to : budgets up to this many ticks are read tick by tick; longer ones from an
        even grid of half as many ticks plus every jump (``Facts.exact`` says which).

    Examples
    --------
    >>> from schedwidget import exp_decay
    >>> print(facts(exp_decay(0.1, 0.95), steps=200, unit="epoch").sentence)
    x0.95 per epoch: half-life 13.5 epochs; after 200 epochs the rate is 3.51e-05 of the peak (3.51e-06).
    """
    if unit not in ("step", "epoch"):
        raise ScheduleError(f"facts: unit must be one of 'step', 'epoch', got {unit!r}")
    if steps_per_epoch is not None and (not isinstance(steps_per_epoch, (int, np.integer)) or steps_per_epoch < 1):
        raise ScheduleError(f"facts: steps_per_epoch must be a whole number >= 1 or None, got {steps_per_epoch!r}")
    if batch is not None and (not isinstance(batch, (int, np.integer)) or batch < 1):
        raise ScheduleError(f"facts: batch must be a whole number >= 1 or None, got {batch!r}")
    n = budget_of(s, steps, "facts")
    ticks, exact = _ticks(n, exact_up_to)
    brk = breaks(s, n)
    joins = np.ceil(s._joins())
    joins = joins[(joins >= 1) & (joins <= n - 1)].astype(np.int64)
    extra = np.concatenate([brk, brk - 1, joins, joins - 1, [n - 1]]).astype(np.int64)
    grid, peak, peak_at, low, low_at, total = _scan(s, ticks, extra)
    if not exact:
        peak, peak_at = _refine_peak(s, grid, peak, peak_at)
    area = total if exact else total * n / grid.size
    first, final, after = s(0), s(n - 1), s(n)
    joins = tuple(int(j) for j in joins)
    rows: list[tuple[str, int, float]] = [("first tick", 0, first)]
    for i, j in enumerate(joins, start=1):
        # numbered by join, not by stage: the designer numbers its stages its own way (warmup apart, from 0)
        rows.append((f"join {i}: last tick before", j - 1, s(j - 1)))
        rows.append((f"join {i}: first tick after", j, s(j)))
    rows.append(("last tick", n - 1, final))
    rows.append(("held after the budget", n, after))
    under_10 = _first_under(s, grid, peak_at, 0.1 * peak) if peak > 0 else None
    under_1 = _first_under(s, grid, peak_at, 0.01 * peak) if peak > 0 else None
    hl = _half_life(s)
    sentence = _sentence(s, n, unit, steps_per_epoch, first, peak, peak_at, final, after,
                         hl, under_10, len(brk), exact)
    return Facts(unit, n, steps_per_epoch, exact, first, peak, peak_at, low, low_at, final, after,
                 total / grid.size, area, tuple(int(b) for b in brk), joins, tuple(rows),
                 hl[0] if hl else None, under_10, under_1,
                 tuple(_cautions(s, first, peak, n, batch, unit)), sentence)


def _sentence(s, n, unit, spe, first, peak, peak_at, final, after, hl, under_10, nbreaks, exact) -> str:
    approx = "" if exact else " (read from a grid of ticks; the budget is too long to read every one)"
    if hl is not None and peak > 0:
        life, node = hl
        per = unit if node.every == 1 else f"{node.every} {unit}s"
        return (f"x{node.factor:g} per {per}: half-life {life:.3g} {unit}s; after {n:,} {unit}s "
                f"the rate is {after / peak:.3g} of the peak ({after:.3g}){approx}.")
    parts = [f"Starts at {_g(first)}"]
    if peak_at > 0:
        parts.append(f"peaks at {_g(peak)} at {_when(peak_at, unit, spe)}")
    else:
        parts[0] = f"Starts at its peak {_g(peak)}"
    parts.append(f"ends at {_g(final)} at {_when(n - 1, unit, spe)}")
    text = ", ".join(parts)
    if under_10 is not None:
        text += f"; under 10% of the peak from {_when(under_10, unit, spe)}"
    if nbreaks:
        text += f"; {nbreaks} jump{'s' if nbreaks != 1 else ''}"
    return text + approx + "."
