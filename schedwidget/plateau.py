"""Replay of a reduce-on-plateau rule on a metric history, and the same rule as standalone source.

The rule (DESIGN.md section 2b) reacts to a validation metric, so it cannot be
drawn from a formula; given a logged history it can be replayed exactly.  This
is the one sequential loop in the core: it runs over evaluations, not ticks.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields
from typing import Any, ClassVar

import numpy as np

from .codegen import check_name
from .metrics import values_of
from .schedule import Param, Schedule, ScheduleError, complain, param

__all__ = ["replay_plateau", "plateau_source", "PlateauReplay", "PlateauRule", "Drop", "lead_in", "TORCH_MIN_DROP"]

#: A rate within this fraction above the floor counts as at the floor, and a drop leaves it unchanged
#: (0.1 * 0.1**4 is 1.0000000000000004e-05, a hair above a floor of 1e-05). Every other drop is applied.
NEGLIGIBLE = 1e-9
#: ``min_drop`` that reproduces torch's ReduceLROnPlateau with its default ``eps=1e-8`` (torch applies a new
#: rate only when ``old_lr - new_lr > eps``; torch/optim/lr_scheduler.py, ReduceLROnPlateau._reduce_lr).
TORCH_MIN_DROP = 1e-8
#: Attributes and methods of the generated class: a class of the same name would read confusingly.
MEMBERS = frozenset({"SETTINGS", "rate", "update", "state", "load_state", "epoch", "level", "best", "best_at",
                     "count", "wait", "start_lr", "lead_in", "goal", "factor", "patience", "tolerance", "relative",
                     "wait_after_drop", "floor", "min_drop"})


@dataclass(frozen=True, slots=True, kw_only=True)
class PlateauRule:
    """The rule's parameters, declared once (validation, the replay panel's controls and docs read them)."""

    owner: ClassVar[str] = "replay_plateau"
    goal: str = param("max", kind="choice", choices=("max", "min"),
                      doc="'max' when higher is better (accuracy), 'min' when lower is better (loss)",
                      hint="'max' for an accuracy, 'min' for a loss")
    factor: float = param(0.1, kind="ratio", lo=0.0, hi=1.0, lo_open=True, hi_open=True, soft=(0.05, 0.9),
                          doc="each drop multiplies the rate by this",
                          hint="0.1 divides the rate by ten at each drop")
    patience: int = param(3, kind="count", lo=0, soft=(0, 20),
                          doc="evaluations without improvement tolerated; one more triggers a drop",
                          hint="0 drops at the first evaluation that does not improve")
    tolerance: float = param(1e-4, kind="ratio", lo=0.0, soft=(0.0, 0.05),
                             doc="how much better than the best an evaluation must be to count as an improvement",
                             hint="0 counts any strict improvement")
    relative: bool = param(True, kind="flag", doc="tolerance is a fraction of the best (True) or an amount (False)")
    wait_after_drop: int = param(0, kind="count", lo=0, soft=(0, 10),
                                 doc="evaluations after a drop during which the count stays at 0",
                                 hint="0 lets the count start again right after a drop")
    floor: float = param(0.0, kind="rate", lo=0.0, soft=(0.0, 1e-3),
                         doc="a drop never takes the rate below this", hint="0 for no floor")

    def __post_init__(self) -> None:
        for name, p in self.params().items():
            object.__setattr__(self, name, p.check(self.owner, name, getattr(self, name)))
        if self.relative and self.tolerance >= 1.0:
            raise complain(self.owner, "tolerance", self.tolerance, "< 1 when relative=True",
                           "a relative tolerance is a fraction of the best; 1 or more would make "
                           "every 'min' evaluation fail to improve")

    @classmethod
    def params(cls) -> dict[str, Param]:
        """The declared parameters, in order."""
        return {f.name: f.metadata["param"] for f in fields(cls)}

    def improves(self, a: float, best: float) -> bool:
        """Whether evaluation ``a`` improves on ``best`` (``best`` starts at -inf for 'max', +inf for 'min')."""
        if self.goal == "max":
            return a > best * (self.tolerance + 1.0) if self.relative else a > best + self.tolerance
        return a < best * (1.0 - self.tolerance) if self.relative else a < best - self.tolerance

    def settings(self) -> dict[str, Any]:
        """The parameters as a plain dict (what the generated class keeps in its state)."""
        return asdict(self)


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

    A ``warmup(...)`` node gives its ``steps``; ``stages(ramp(...), ...)`` whose
    first stage rises gives that ramp's length; ``s.stretch(n)`` gives its
    target's lead-in moved in proportion (the first whole epoch at or after it);
    anything else gives 0.

    >>> from schedwidget import cosine, flat, warmup
    >>> lead_in(warmup(flat(0.1), 5)), lead_in(flat(0.1)), lead_in(None)
    (5, 0, 0)
    >>> lead_in(warmup(cosine(0.1, steps=850), 50).stretch(90))  # a design in steps read once per epoch
    5
    """
    if base is not None and not isinstance(base, Schedule):
        raise complain("lead_in", "base", base, "None or a Schedule on the epoch clock (e.g. warmup(flat(0.1), 5))")
    return 0 if base is None else int(base._lead_in())  # each kind knows its own lead-in


def _check_min_drop(owner: str, min_drop: Any) -> float:
    try:
        ok = not isinstance(min_drop, bool) and isinstance(min_drop, (int, float, np.number)) \
            and math.isfinite(min_drop) and min_drop >= 0
    except OverflowError:  # an int too large for a float: math.isfinite(10**400) overflows
        ok = False
    if not ok:
        raise complain(owner, "min_drop", min_drop, "a finite rate >= 0",
                       f"0 applies every drop that lowers the rate; {TORCH_MIN_DROP!r} skips drops of "
                       "1e-8 or less, as torch's ReduceLROnPlateau does by default")
    return float(min_drop)


def _check_start(owner: str, start_lr: Any, rule: PlateauRule, base: Schedule | None, hold: int) -> float:
    if base is not None and not isinstance(base, Schedule):
        raise complain(owner, "base", base, "None or a Schedule on the epoch clock (e.g. warmup(flat(0.1), 5))")
    if start_lr is None and base is not None:
        start_lr = base(hold)
        if start_lr <= 0.0:
            raise complain(owner, "start_lr", None, "a rate > 0",
                           f"base is 0 at epoch {hold}, the end of its warmup; pass start_lr explicitly")
    try:
        finite = not isinstance(start_lr, bool) and isinstance(start_lr, (int, float, np.number)) \
            and math.isfinite(start_lr)
    except OverflowError:  # an int too large for a float: math.isfinite(10**400) overflows
        finite = False
    if not finite or start_lr <= 0:
        raise complain(owner, "start_lr", start_lr, "a finite rate > 0" + (" or None" if base is not None else ""),
                       "the rate the rule starts from" + (
                           "; None takes base's rate at the end of its warmup" if base is not None else ""))
    start = float(start_lr)
    if rule.floor > start:
        raise complain(owner, "floor", rule.floor, f"a rate <= start_lr = {start!r}",
                       "the floor is the lowest rate a drop can reach")
    return start


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


def _applies(rate: float, new: float, floor: float, min_drop: float) -> bool:
    """Whether a drop from ``rate`` to ``new`` is applied (the generated class writes the same test)."""
    if min_drop > 0.0:
        return rate - new > min_drop  # torch's condition, with its eps
    return new < rate and rate > floor * (1.0 + NEGLIGIBLE)


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


# ----------------------------------------------------------- generated code
def plateau_source(start_lr: float | None, goal: str = "max", factor: float = 0.1, patience: int = 3,
                   tolerance: float = 1e-4, relative: bool = True, wait_after_drop: int = 0, floor: float = 0.0,
                   base: Schedule | None = None, name: str = "PlateauRate", min_drop: float = 0.0) -> str:
    """Source of a standalone class (standard library only) that runs the same rule during training.

    The class has ``rate`` (the rate for the epoch about to be trained),
    ``update(metric) -> rate`` (call once after each evaluation; returns the rate
    for the next epoch), and ``state() -> dict`` / ``load_state(d)`` with plain
    JSON-safe dicts for checkpoints.  The rule and the ``base`` semantics are
    those of ``replay_plateau`` (``min_drop`` too); the base is written by
    ``schedwidget.export.to_python``.  ``name`` is a plain identifier that does
    not start with ``_`` (a private name would be mangled inside the class), is
    not taken by the generated module (``math``, builtins) and is not one of the
    class's own members (``MEMBERS``).

    Examples
    --------
    >>> ns = {}
    >>> exec(plateau_source(0.1, patience=0), ns)
    >>> rule = ns["PlateauRate"]()
    >>> rule.rate, rule.update(0.5), rule.update(0.5)
    (0.1, 0.1, 0.010000000000000002)
    """
    owner = "plateau_source"
    check_name(owner, name)
    if name.startswith("_"):
        raise complain(owner, "name", name, "a name that does not start with '_'",
                       "a private name is mangled inside the generated class and the base function "
                       "cannot be found at run time; try 'PlateauRate'")
    if name in MEMBERS:
        raise complain(owner, "name", name, "a name the generated class does not use for its own members",
                       f"{', '.join(sorted(MEMBERS))} are taken; try 'PlateauRate'")
    skip = _check_min_drop(owner, min_drop)
    try:
        rule = PlateauRule(goal=goal, factor=factor, patience=patience, tolerance=tolerance, relative=relative,
                           wait_after_drop=wait_after_drop, floor=floor)
    except ScheduleError as exc:
        raise ScheduleError(str(exc).replace("replay_plateau:", owner + ":", 1)) from None
    hold = lead_in(base) if isinstance(base, Schedule) else 0
    start = _check_start(owner, start_lr, rule, base, hold)
    head = ['"""Reduce-on-plateau rule written by schedwidget (standard library only)."""', "",
            "# In a torch training loop (no scheduler object needed; the rule reacts to your metric):",
            f"#     rule = {name}()",
            "#     for epoch in range(epochs):",
            "#         for group in optimizer.param_groups:",
            "#             group[\"lr\"] = rule.rate  # times the group's own multiplier, if it has one",
            "#         train_one_epoch(model, optimizer)",
            "#         rule.update(evaluate(model))  # once per evaluation: the rate for the next epoch",
            f"#     checkpoint[\"plateau\"] = rule.state()  # resume: rule = {name}(); rule.load_state(...)",
            ""]
    if base is not None:
        from .export import to_python  # lazy: the exporter is its own module

        fn = f"_{name.lower()}_base"
        head += [to_python(base, name=fn, unit="epoch").strip(), "", ""]
        rate_at = (f"if self.level == self.start_lr:  # before the first drop: the design's own rate\n"
                   f"            return {fn}(epoch)\n"
                   f"        return self.level * ({fn}(epoch) / self.start_lr)")
    else:
        head += ["import math", "", ""]
        rate_at = "return self.level"
    improve = {("max", True): "a > self.best * (self.tolerance + 1.0)",
               ("max", False): "a > self.best + self.tolerance",
               ("min", True): "a < self.best * (1.0 - self.tolerance)",
               ("min", False): "a < self.best - self.tolerance"}[rule.goal, rule.relative]
    settings = {"start_lr": start, "lead_in": hold, **rule.settings()}
    if skip > 0.0:  # only when on: states saved by a class written without it still load
        settings["min_drop"] = skip
        applies = "self.level - new > self.min_drop:  # else: a change too small to apply"
        skip_words = f"\n    A drop that lowers the rate by {skip!r} or less is skipped."
    else:
        applies = f"new < self.level and self.level > self.floor * (1.0 + {NEGLIGIBLE!r}):  # else: at the floor"
        skip_words = ""
    body = f'''class {name}:
    """Call ``update(metric)`` once after each evaluation; train the next epoch at ``rate``.

    Rule: an evaluation improves when {improve.replace("self.", "")}; the count of
    evaluations without improvement resets on improvement; when it exceeds
    patience the rate becomes max(rate * factor, floor), the count resets and the
    next wait_after_drop evaluations (and the first lead_in, the warmup) hold it
    at 0.{skip_words}  ``state()`` / ``load_state(d)`` are plain dicts for checkpoints.
    """

    SETTINGS = {settings!r}

    def __init__(self):
        for key, value in self.SETTINGS.items():
            setattr(self, key, value)
        self.epoch = 0
        self.level = self.start_lr
        self.best = None
        self.best_at = -1
        self.count = 0
        self.wait = self.lead_in
        self.rate = self._rate_at(0)

    def _rate_at(self, epoch):
        {rate_at}

    def update(self, metric):
        """Record one evaluation of the epoch just trained; return the rate for the next epoch."""
        a = float(metric)
        if not math.isfinite(a):
            raise ValueError("{name}.update: metric must be a finite number, got %r" % (metric,))
        if self.best is None or {improve}:
            self.best, self.best_at, self.count = a, self.epoch, 0
        else:
            self.count += 1
        if self.wait > 0:
            self.wait -= 1
            self.count = 0
        if self.count > self.patience:
            new = max(self.level * self.factor, self.floor)
            if {applies}
                self.level = new
            self.count, self.wait = 0, self.wait_after_drop
        self.epoch += 1
        self.rate = self._rate_at(self.epoch)
        return self.rate

    def state(self):
        """The rule's state as a plain dict (JSON-safe)."""
        keys = ("epoch", "level", "best", "best_at", "count", "wait")
        return {{"settings": dict(self.SETTINGS), **{{k: getattr(self, k) for k in keys}}}}

    def load_state(self, d):
        """Continue from a dict written by ``state()`` of the same rule."""
        if dict(d.get("settings", {{}})) != self.SETTINGS:
            raise ValueError("{name}.load_state: the state was saved by a different rule: %r" % (d.get("settings"),))
        for k in ("epoch", "level", "best", "best_at", "count", "wait"):
            setattr(self, k, d[k])
        self.rate = self._rate_at(self.epoch)
'''
    return "\n".join(head) + body
