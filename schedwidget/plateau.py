"""Replay of a reduce-on-plateau rule on a metric history (the rule and its source twin: plateau_rule.py).

The rule (DESIGN.md section 2b) reacts to a validation metric, so it cannot be
drawn from a formula; given a logged history it can be replayed exactly.  This
is the one sequential loop in the core: it runs over evaluations, not ticks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .metrics import values_of
from .plateau_rule import (  # noqa: F401 - the rule's public names stay importable from here
    APPLIES, IMPROVES, MEMBERS, NEGLIGIBLE, TORCH_MIN_DROP, PlateauRule, _applies, _check_min_drop, _check_start,
    plateau_source)
from .schedule import Schedule, complain

__all__ = ["replay_plateau", "plateau_source", "PlateauReplay", "PlateauRule", "Drop", "lead_in", "TORCH_MIN_DROP"]


@dataclass(frozen=True, slots=True)
class Drop:
    """One drop: ``epoch`` is the first epoch trained at ``rate_after`` (decided at evaluation ``epoch - 1``).

    ``best`` and ``best_at`` are the best evaluation so far and its index; ``stale``
    is the number of evaluations without improvement that triggered it.  Rates
    are the plateau rule's own rates (before any ``base`` shape multiplies them).
    """

    epoch: int
    rate_before: float
    rate_after: float
    best: float
    best_at: int
    stale: int


@dataclass(frozen=True, eq=False)
class PlateauReplay:
    """What the rule would have done: ``rates[i]`` is the rate used while training epoch ``i``.

    ``next_rate`` is the rate after the last evaluation (for the epoch that would
    come next); ``best`` / ``best_at`` the best evaluation and its index;
    ``lead_in`` the number of leading epochs that follow ``base`` undisturbed.
    """

    rates: np.ndarray
    drops: tuple[Drop, ...]
    best: float
    best_at: int
    next_rate: float
    lead_in: int = 0

    @property
    def drop_epochs(self) -> tuple[int, ...]:
        """The first epoch at each new rate."""
        return tuple(d.epoch for d in self.drops)


def lead_in(base: Schedule | None) -> int:
    """Epochs at the start of ``base`` during which no drop can be decided: its warmup.

    A ``warmup(...)`` node gives its ``steps`` (placed before its schedule or laid over its first epochs
    alike); ``stages(ramp(...), ...)`` whose
    first stage rises gives that ramp's length; ``s.stretch(n)`` gives its
    target's lead-in moved in proportion (the first whole epoch at or after it);
    anything else gives 0.

    >>> from schedwidget import cosine, flat, warmup
    >>> lead_in(warmup(flat(0.1), 5)), lead_in(warmup(flat(0.1), 5, place="over")), lead_in(None)
    (5, 5, 0)
    >>> lead_in(warmup(cosine(0.1, steps=850), 50).stretch(90))  # a design in steps read once per epoch
    5
    """
    if base is not None and not isinstance(base, Schedule):
        raise complain("lead_in", "base", base, "None or a Schedule on the epoch clock (e.g. warmup(flat(0.1), 5))")
    return 0 if base is None else int(base._lead_in())  # each kind knows its own lead-in


def replay_plateau(metric: Any, start_lr: float | None, goal: str = "max", factor: float = 0.1,
                   patience: int = 3, tolerance: float = 1e-4, relative: bool = True,
                   wait_after_drop: int = 0, floor: float = 0.0, base: Schedule | None = None,
                   min_drop: float = 0.0) -> PlateauReplay:
    """Replay a reduce-on-plateau rule over a metric history (one value per evaluation, usually per epoch).

    The rule, evaluation by evaluation (``a`` is the metric, ``best`` the best so
    far, starting at -inf for ``goal="max"`` and +inf for ``"min"``):

    * **Improvement.** For "max": ``a > best * (1 + tolerance)`` when ``relative``,
      ``a > best + tolerance`` otherwise; for "min": ``a < best * (1 - tolerance)``
      or ``a < best - tolerance``.  Equality never improves; the first evaluation
      always does.  On improvement ``best = a`` and the count of evaluations
      without improvement resets to 0, otherwise the count grows by 1.
    * **Wait.** For ``wait_after_drop`` evaluations after a drop the best still
      updates but the count is held at 0.
    * **Drop.** When the count exceeds ``patience`` the rate becomes
      ``max(rate * factor, floor)``, the count resets and the wait starts.  A drop
      decided at evaluation ``i`` applies from epoch ``i + 1``.  A drop that cannot
      lower the rate by more than one part in 10**9 (the rate is at ``floor``, up to
      rounding) leaves it unchanged and is not listed in ``drops``, but still
      resets the count and starts the wait.
    * **Smallest drop (``min_drop``, off by default).** With ``min_drop > 0`` a drop
      is applied only when ``rate - max(rate * factor, floor) > min_drop`` and is
      otherwise skipped (not listed, but the count resets and the wait starts);
      this condition replaces the floor rule above.  ``min_drop=TORCH_MIN_DROP``
      (1e-8) is torch's own rule with its default ``eps``.
    * **Base.** With ``base`` (a schedule on the epoch clock, e.g.
      ``warmup(flat(0.1), 5)``) the rule multiplies the design:
      ``rates[i] = r[i] * (base(i) / start_lr)``, where ``r`` is the rule's own rate
      above (``base(i)`` itself while ``r[i] == start_lr``, so exactly the design
      until the first drop).  The first ``W = lead_in(base)`` evaluations (the warmup's epochs)
      update the best but hold the count at 0, like a wait, so no drop is decided
      during the warmup: ``rates[i] == base(i)`` for ``i < W`` and, when ``base``
      is flat after its warmup and ``start_lr`` is that flat rate (the default
      ``start_lr=None`` takes ``base(W)``), ``rates[i] == r[i]`` from ``W`` on.
      The floor bounds ``r``.

    Without ``base`` and with ``min_drop=1e-8`` this is torch's ReduceLROnPlateau
    (default ``eps=1e-8``) bit for bit, at every rate.  With the default
    ``min_drop=0`` the two give the same rates exactly as long as every drop this
    rule applies lowers the rate by more than 1e-8 (with no floor in reach: while
    the rate before each drop is above ``1e-8 / (1 - factor)``, 1.11e-8 for factor
    0.1) and the floor is at most 10; from the first drop of 1e-8 or less torch
    leaves the rate where this rule still lowers it.  torch has no base schedule.

    Parameters
    ----------
    metric
        The history: a list, tuple, 1-D array or pandas Series of finite numbers
        (see ``schedwidget.metrics.read_metric`` for CSV files).
    start_lr
        The rule's starting rate (> 0).
    min_drop
        Skip a drop that lowers the rate by ``min_drop`` or less (absolute); 0 (the
        default) applies every drop that lowers it.  1e-8 matches torch's default.

    Returns
    -------
    PlateauReplay
        ``rates`` (float64, one per evaluation), ``drops``, ``best``, ``best_at``, ``next_rate``.

    Examples
    --------
    >>> r = replay_plateau([0.5, 0.6, 0.6, 0.6, 0.6, 0.7], 0.1, patience=2)
    >>> r.rates.tolist(), r.drop_epochs, r.next_rate
    ([0.1, 0.1, 0.1, 0.1, 0.1, 0.010000000000000002], (5,), 0.010000000000000002)

    torch's skip rule, below 1e-8 (a drop from 1e-8 to 1e-9 is 9e-9, not more than 1e-8):

    >>> replay_plateau([0.5] * 4, 1e-7, patience=0).rates.tolist()
    [1e-07, 1e-07, 1e-08, 1e-09]
    >>> replay_plateau([0.5] * 4, 1e-7, patience=0, min_drop=1e-8).rates.tolist()
    [1e-07, 1e-07, 1e-08, 1e-08]
    """
    owner = "replay_plateau"
    rule = PlateauRule(goal=goal, factor=factor, patience=patience, tolerance=tolerance, relative=relative,
                       wait_after_drop=wait_after_drop, floor=floor)
    values = _finite_history(owner, metric)
    skip = _check_min_drop(owner, min_drop)
    hold = lead_in(base) if isinstance(base, Schedule) else 0
    start = _check_start(owner, start_lr, rule, base, hold)
    level, drops, best, best_at = _run(values, start, rule, hold, skip)
    rates = np.asarray(level, dtype=np.float64)
    if base is not None:
        b = base(np.arange(len(values) + 1))
        # before the first drop the design's own rates, to the last bit; after it the rule's rate times the shape
        rates = np.where(rates == start, b, rates * (b / start))
    rates.setflags(write=False)
    return PlateauReplay(rates=rates[:-1], drops=tuple(drops), best=best, best_at=best_at,
                         next_rate=float(rates[-1]), lead_in=hold)


def _finite_history(owner: str, metric: Any) -> list[float]:
    values = values_of(owner, "metric", metric)
    bad = ~np.isfinite(values)
    if bad.all():
        raise complain(owner, "metric", f"{values.size} values, all nan or infinite",
                       "a history with finite values", "check the column that was read")
    if bad.any():
        i = int(np.argmax(bad))
        more = int(bad.sum()) - 1
        hint = "drop or fill the evaluations that did not run" + (f"; {more} more after it" if more else "")
        raise complain(owner, f"metric[{i}]", float(values[i]), "a finite number", hint)
    return values.tolist()


def _run(values: list[float], start: float, rule: PlateauRule, hold: int, min_drop: float = 0.0):
    """The rule's own rate before each evaluation and after the last one (``len(values) + 1`` entries)."""
    rate = start
    best = -math.inf if rule.goal == "max" else math.inf
    best_at, count, wait = -1, 0, hold
    level: list[float] = []
    drops: list[Drop] = []
    for i, a in enumerate(values):
        level.append(rate)
        if rule.improves(a, best):
            best, best_at, count = a, i, 0
        else:
            count += 1
        if wait > 0:
            wait -= 1
            count = 0
        if count > rule.patience:
            new = max(rate * rule.factor, rule.floor)
            if _applies(rate, new, rule.floor, min_drop):
                drops.append(Drop(epoch=i + 1, rate_before=rate, rate_after=new, best=best,
                                  best_at=best_at, stale=count))
                rate = new
            count, wait = 0, rule.wait_after_drop
    level.append(rate)
    return level, drops, best, best_at
