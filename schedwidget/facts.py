"""Readouts: the numbers a teammate asks for, one plain sentence, and cautions.

``facts(s)`` reads a schedule over its budget: peak and where, final, minimum,
mean, area (sum of rates), jumps, stage joins with the rate on both sides
(the boundary table), the half-life of an exponential stretch, where the rate
first falls under 10 % and 1 % of its peak, and cautions for risky settings.
Up to ``EXACT_LIMIT`` ticks every tick is evaluated (in chunks); above it the
readout is computed from an even grid plus every jump and says so.

Work is bounded whatever the design: memory by ``CHUNK`` ticks at a time (and
``MAX_EXACT`` for an exact reading), the number of evaluations by the grid and
a fixed refinement budget, and every per-join value is read in one vectorised
call (a design with thousands of stages costs time linear in its stages).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .sample import at_ticks, breaks, budget_of
from .scan import (  # noqa: F401 - the reading's limits stay importable from here
    CHUNK, GRID_WORK, LEVEL_TOLERANCE, MIN_GRID, _first_under, _grid, _refine_peak, _scan, work)
from .schedule import Schedule, as_whole, complain

__all__ = ["Facts", "facts", "EXACT_LIMIT", "LARGE_BATCH", "LEVEL_TOLERANCE"]

EXACT_LIMIT = 2 ** 21
#: Largest ``exact_up_to`` accepted: an exact reading evaluates every tick, so its time grows with it.
MAX_EXACT = 2 ** 26
#: Batch size from which a run without warmup gets a caution (common practice, no source).
LARGE_BATCH = 1024
#: A peak this many times the linear scaling rule's rate gets a caution (common practice, no source).
SCALING_MARGIN = 2.0


@dataclass(frozen=True, kw_only=True)
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
    #: the half-life in epochs when steps per epoch are known (unit "step") or the clock counts epochs, else None
    half_life_epochs: float | None = None
    #: where the design's warmup goes ("before" its schedule or "over" its first ticks), None without a warmup
    warmup_place: str | None = None
    #: first tick at or after the peak where the rate is down to 10 % (1 %) of the peak or below,
    #: within ``LEVEL_TOLERANCE`` relative (so an exact x0.1 drop counts at its own tick); None if never.
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


def _half_life(s: Schedule) -> tuple[float, float, int] | None:
    """(half-life in ticks, factor, ticks per factor) of the first exponential decay in the design.

    Each node says whether it is a decay (``_decay``) and which children's readouts carry over with
    what clock scale (``_readout_children``: a stretch scales, restarts carry none).  Depth first with
    an explicit stack, so a deeply nested design cannot exhaust Python's recursion limit.
    """
    stack: list[tuple[Schedule, float]] = [(s, 1.0)]
    while stack:
        node, scale = stack.pop()
        decay = node._decay()
        if decay is not None:
            return decay[0] * scale, decay[1], decay[2]
        stack.extend((c, scale * k) for c, k in reversed(node._readout_children()))
    return None


#: A rate this far under the peak (relative) reads "~0" in the sentence, with its exact value beside it: a
#: cosine to 0 is 2.58e-11 one tick before its end over 100,000 ticks, which reads as 0 to anyone.
NEAR_ZERO = 1e-9


def _g(x: float, peak: float | None = None) -> str:
    """A rate to 3 significant digits; a positive rate under ``NEAR_ZERO`` of ``peak`` as ``~0 (2.58e-11)``."""
    if peak is not None and x != 0 and abs(x) < NEAR_ZERO * peak:
        return f"~0 ({x:.3g})"
    return f"{x:.3g}"


def _amount(x: float) -> str:
    """A count of ticks or epochs: 3 significant digits, whole with thousands separators from 1,000 on."""
    return f"{x:,.0f}" if abs(x) >= 1000 else f"{x:.3g}"


def _when(t: float, unit: str, spe: int | None) -> str:
    words = f"{unit} {t:,.0f}" if float(t).is_integer() else f"{t:,.1f} {unit}s"
    if spe and unit == "step":
        words += f" (epoch {t / spe:.1f})"
    return words


def _span_words(t: float, unit: str, spe: int | None) -> str:
    """A length: ``5 epochs`` or ``5,750 steps (5 epochs)``."""
    words = f"{t:,.0f} {unit}{'' if t == 1 else 's'}"
    if spe and unit == "step":
        words += f" ({t / spe:,.3g} epochs)"
    return words


def _jumps(s: Schedule, brk: np.ndarray, joins: np.ndarray) -> list[tuple[int, str, float, float]]:
    """Each jump that is not a stage join, as (tick, word, rate before, rate after).

    A fall is a "drop"; a rise is a "restart" when the design repeats a cycle (a node's ``_repeated``), else a
    "rise".  The words come from the rates and the protocol, never from asking which class a node is.
    """
    ticks = np.setdiff1d(brk.astype(np.int64), joins.astype(np.int64))
    if not ticks.size:
        return []
    y = at_ticks(s, np.concatenate([ticks - 1, ticks]))
    before, after = y[:ticks.size], y[ticks.size:]
    up = "restart" if _repeats(s) else "rise"
    return [(int(t), "drop" if a < b else up, float(b), float(a))
            for t, b, a in zip(ticks.tolist(), before.tolist(), after.tolist())]


def _repeats(s: Schedule) -> bool:
    """Whether any node of ``s`` repeats a cycle (restarts), without recursion."""
    stack = [s]
    while stack:
        node = stack.pop()
        if node._repeated() is not None:
            return True
        stack.extend(node.children())
    return False


def warmup_of(s: Schedule) -> tuple[str, int] | None:
    """(place, length in ticks) of the design's own warmup: ``s`` or what it scales, clips or stretches; else None.

    Through a stretch the length moves in proportion to the first whole tick at or after it (as the plateau
    lead-in does).  A warmup inside restarts or a later stage is part of that cycle or stage, not the design's.
    """
    num, den = 1, 1  # the clock scale of the stretches passed, as an exact fraction
    while True:
        if s._warmed() is not None:
            return str(s.place), -(-int(s.steps) * num // den)
        inner = s._pointwise_target()
        if inner is None and s._unstretched() is not s:
            inner = s._unstretched()
            num, den = num * int(s.length), den * int(inner.length)
        if inner is None:
            return None
        s = inner


#: The code the caution on a warmup placed before its schedule's jumps suggests: a caution that ends with it is
#: about positions of the run (the designer, which shows positions on the run's clock, leaves it out).
OVER_HINT = "warmup(..., place='over')"


def _shifted(s: Schedule, brk: np.ndarray, unit: str) -> list[str]:
    """A caution when a warmup placed before its schedule moves the schedule's jumps later on the run's clock.

    Writing ``warmup(drops(..., at=(30, 60, 80)), 5)`` puts the drops at 35, 65 and 85 of the run: right when
    the schedule's ticks were meant after the warmup, silently wrong when they were meant on the run's clock
    (Goyal et al. 2017 counts its epochs 30, 60 and 80 from the start of the run).  Only for a warmup that is the
    design itself or what it scales or clips (through a stretch the schedule's own ticks are not whole).
    """
    node = s
    while node._warmed() is None and node._pointwise_target() is not None:
        node = node._pointwise_target()
    if node._warmed() is None or node.place != "before":
        return []
    w = int(node.steps)
    later = brk[brk > w]
    if not later.size:
        return []
    shown = later[:3].tolist()
    more = ", ..." if later.size > 3 else ""
    own = ", ".join(f"{t - w:,}" for t in shown) + more
    run = ", ".join(f"{t:,}" for t in shown) + more
    return [f"the warmup of {w:,} {unit}s comes before the schedule, so the schedule's jumps at its own {unit}s "
            f"{own} happen at {unit}s {run} of the run; if they are meant on the run's clock, lay the warmup over "
            f"them with {OVER_HINT}"]


def _cautions(s: Schedule, f0: float, peak: float, n: int, batch: int | None, unit: str) -> list[str]:
    out: list[str] = []
    scaled = batch is not None and peak <= 0.1 * batch / 256 * (1 + 1e-12)  # the linear scaling rule's own rate
    if peak > 1.0 and not scaled:  # a large batch explains a large peak (Goyal et al. 2017: 3.2 at batch 8,192)
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
        even grid of half as many ticks plus every jump (``Facts.exact`` says which); at most 2**26.

    "Under 10 % (1 %) of the peak" (``under_10``, ``under_1``, the sentence) is the first tick from
    the peak where ``rate <= share * peak * (1 + 1e-12)``: a rate equal to the share, or above it only
    by float rounding (``LEVEL_TOLERANCE``, 1e-12 relative), counts, so drops of exactly x0.1 at
    epochs 30 and 60 read 10 % from epoch 30 and 1 % from epoch 60.

    Examples
    --------
    >>> from schedwidget import drops, exp_decay
    >>> f = facts(drops(0.05, at=(30, 60), factor=0.1, steps=90), unit="epoch")
    >>> f.under_10, f.under_1
    (30, 60)
    >>> print(facts(exp_decay(0.1, 0.95), steps=200, unit="epoch").sentence)
    x0.95 per epoch: half-life 13.5 epochs; after 200 epochs the rate is 3.51e-05 of the peak (3.51e-06).
    """
    owner = "facts"
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule (e.g. cosine(0.1, steps=1000))",
                       "a bare rate is flat(rate, steps=...)" if isinstance(s, (int, float, np.number)) else None)
    if not isinstance(unit, str) or unit not in ("step", "epoch"):
        raise complain(owner, "unit", unit, "one of 'step', 'epoch'")
    if steps_per_epoch is not None:
        steps_per_epoch = _whole_or_none(owner, "steps_per_epoch", steps_per_epoch)
    if batch is not None:
        batch = _whole_or_none(owner, "batch", batch)
    limit = as_whole(exact_up_to)
    if limit is None or not 2 <= limit <= MAX_EXACT:
        raise complain(owner, "exact_up_to", exact_up_to, f"a whole number >= 2 and <= 2**{MAX_EXACT.bit_length() - 1}",
                       "longer budgets are read from a grid")
    n = budget_of(s, steps, owner)
    brk = breaks(s, n)
    joins = np.ceil(s._joins())
    joins = joins[(joins >= 1) & (joins <= n - 1)].astype(np.int64)
    extra = np.concatenate([brk, brk - 1, joins, joins - 1, [n - 1]]).astype(np.int64)
    grid, exact = _grid(n, limit, extra, work(s))
    peak, peak_at, low, low_at, total = _scan(s, grid, n)
    if not exact:
        peak, peak_at = _refine_peak(s, grid, peak, peak_at)
    size = n if grid is None else grid.size
    area = total if exact else total * n / size
    # every value the table and the sentence need, in one call: a scalar call per join costs a pass over the design
    ends = at_ticks(s, np.concatenate([[0, n - 1, n], joins - 1, joins]).astype(np.int64))
    first, final, after = float(ends[0]), float(ends[1]), float(ends[2])
    before_join, after_join = ends[3:3 + joins.size], ends[3 + joins.size:]
    rows: list[tuple[str, int, float]] = [("first tick", 0, first)]
    events = [(j, "join", float(before_join[i]), float(after_join[i])) for i, j in enumerate(joins.tolist())]
    events += _jumps(s, brk, joins)
    events.sort(key=lambda e: e[0])  # by tick; a jump at a join is the join's own row
    counts: dict[str, int] = {}
    for j, word, before, after_ in events:
        # numbered by kind, not by stage: the designer numbers its stages its own way (warmup apart, from 0)
        counts[word] = k = counts.get(word, 0) + 1
        rows.append((f"{word} {k}: last tick before", j - 1, before))
        rows.append((f"{word} {k}: first tick after", j, after_))
    rows.append(("last tick", n - 1, final))
    rows.append(("after the run (held)", n, after))
    under_10, under_1 = _first_under(s, grid, n, peak_at, (0.1 * peak, 0.01 * peak)) if peak > 0 else (None, None)
    hl = _half_life(s)
    hl_epochs = None if hl is None else (hl[0] if unit == "epoch" else
                                         hl[0] / steps_per_epoch if steps_per_epoch else None)
    warm = warmup_of(s)
    sentence = _sentence(s, n, unit, steps_per_epoch, first, peak, peak_at, final, after,
                         hl, under_10, len(brk), exact, warm)
    return Facts(unit=unit, steps=n, steps_per_epoch=steps_per_epoch, exact=exact, first=first, peak=peak,
                 peak_at=peak_at, minimum=low, minimum_at=low_at, final=final, after=after, mean=total / size,
                 area=area, breaks=tuple(brk.tolist()), joins=tuple(joins.tolist()), boundary=tuple(rows),
                 half_life=hl[0] if hl else None, half_life_epochs=hl_epochs,
                 warmup_place=None if warm is None else warm[0], under_10=under_10, under_1=under_1,
                 cautions=tuple(_cautions(s, first, peak, n, batch, unit) + _shifted(s, brk, unit)),
                 sentence=sentence)


def _whole_or_none(owner: str, name: str, value) -> int:
    n = as_whole(value)
    if n is None or n < 1 or n > 2 ** 53:
        raise complain(owner, name, value, "a whole number >= 1 or None")
    return n


def _sentence(s, n, unit, spe, first, peak, peak_at, final, after, hl, under_10, nbreaks, exact, warm=None) -> str:
    approx = "" if exact else " (read from a grid of ticks; the budget is too long to read every one)"
    if hl is not None and peak > 0:
        life, factor, every = hl
        per = unit if every == 1 else f"{every:,} {unit}s"
        life_words = f"{_amount(life)} {unit}s" + (f" ({_amount(life / spe)} epochs)" if spe and unit == "step" else "")
        return (f"x{factor:g} per {per}: half-life {life_words}; after {n:,} {unit}s "
                f"the rate is {after / peak:.3g} of the peak ({_g(after, peak)}){_warm_words(warm, unit, spe)}"
                f"{approx}.")
    parts = [f"Starts at {_g(first, peak)}"]
    if peak_at > 0:
        parts.append(f"peaks at {_g(peak)} at {_when(peak_at, unit, spe)}")
    else:
        parts[0] = f"Starts at its peak {_g(peak)}"
    parts.append(f"ends at {_g(final, peak)} at {_when(n - 1, unit, spe)}")
    text = ", ".join(parts)
    if under_10 is not None:
        text += f"; under 10 % of the peak from {_when(under_10, unit, spe)}"
    if nbreaks:
        text += f"; {nbreaks} jump{'s' if nbreaks != 1 else ''}"
    return text + _warm_words(warm, unit, spe) + approx + "."


def _warm_words(warm: tuple[str, float] | None, unit: str, spe: int | None) -> str:
    """Which warmup the design has: before its schedule (whose ticks then start later) or over its first ticks."""
    if warm is None:
        return ""
    place, steps = warm
    length = _span_words(steps, unit, spe)
    if place == "over":
        return f"; warmup laid over the schedule's first {length}"
    return f"; warmup of {length} before the schedule"
