"""The reduce-on-plateau rule, described once: its parameters, its two tests, and its standalone twin.

``replay_plateau`` (plateau.py) runs the rule over a logged history; ``plateau_source`` writes the same
rule as a class for training code.  Both read the tests below (``IMPROVES``, ``APPLIES``), so the replay
and the generated class apply one rule.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass, fields
from typing import Any, ClassVar

import numpy as np

from .codegen import check_name
from .schedule import Param, Schedule, ScheduleError, complain, param

__all__ = ["PlateauRule", "plateau_source", "TORCH_MIN_DROP", "IMPROVES", "APPLIES"]

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

#: The rule's two tests, written once: the replay compiles them (``_IMPROVES_FN``, ``_APPLIES_FN``) and the
#: generated class writes them with ``self.`` (``_in_class``), so the replay and its twin cannot drift apart.
#: Improvement, by (goal, relative): ``a`` is the evaluation, ``best`` the best so far (DESIGN.md 2b).
IMPROVES = {("max", True): "a > best * (tolerance + 1.0)",
            ("max", False): "a > best + tolerance",
            ("min", True): "a < best * (1.0 - tolerance)",
            ("min", False): "a < best - tolerance"}
#: Whether a drop from ``level`` to ``new`` is applied, by ``min_drop > 0``: torch's condition with its eps,
#: or (off) any drop that lowers a rate not already at the floor.
APPLIES = {True: "level - new > min_drop",
           False: f"new < level and level > floor * (1.0 + {NEGLIGIBLE!r})"}
_RULE_NAMES = re.compile(r"\b(best|tolerance|level|floor|min_drop)\b")


def _rule_fn(args: str, test: str):
    # our own constant tests above, compiled once with no builtins; never text from a user or a file
    return eval(compile(f"lambda {args}: {test}", "<plateau rule>", "eval"), {"__builtins__": {}})


def _in_class(test: str) -> str:
    """A test as the generated class writes it (its settings and state are attributes)."""
    return _RULE_NAMES.sub(r"self.\1", test)


_IMPROVES_FN = {key: _rule_fn("a, best, tolerance", test) for key, test in IMPROVES.items()}
_APPLIES_FN = {key: _rule_fn("level, new, floor, min_drop", test) for key, test in APPLIES.items()}


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
        return _IMPROVES_FN[self.goal, self.relative](a, best, self.tolerance)

    def settings(self) -> dict[str, Any]:
        """The parameters as a plain dict (what the generated class keeps in its state)."""
        return asdict(self)


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


def _applies(rate: float, new: float, floor: float, min_drop: float) -> bool:
    """Whether a drop from ``rate`` to ``new`` is applied (the generated class writes the same test)."""
    return _APPLIES_FN[min_drop > 0.0](rate, new, floor, min_drop)


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
    hold = int(base._lead_in()) if isinstance(base, Schedule) else 0  # plateau.lead_in: the base's own lead-in
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
    improve = _in_class(IMPROVES[rule.goal, rule.relative])
    settings = {"start_lr": start, "lead_in": hold, **rule.settings()}
    if skip > 0.0:  # only when on: states saved by a class written without it still load
        settings["min_drop"] = skip
        applies = _in_class(APPLIES[True]) + ":  # else: a change too small to apply"
        skip_words = f"\n    A drop that lowers the rate by {skip!r} or less is skipped."
    else:
        applies = _in_class(APPLIES[False]) + ":  # else: at the floor"
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
