"""``make_scheduler``: the checked way from a design to a torch ``LambdaLR`` of ``RateFactor`` objects.

It checks every param group's starting lr against ``base_lr`` and its multiplier before it builds
the scheduler, and when it resumes from a saved ``scheduler.state_dict()``, the checkpoint's design
against the new one (``resume_with`` says which to continue on).  torch is never imported here: the
optimizer it is given leads to it (``sys.modules``).
"""

from __future__ import annotations

import math
import sys
from numbers import Real
from typing import Any, Sequence

from .factor import (RESUME_CHOICES, RateFactor, _brief, _multipliers, _positive, _schedule, _Shown, _two,
                     _valid_state)
from .schedule import Schedule, ScheduleError, complain

__all__ = ["make_scheduler"]


def _lambda_lr(optimizer: Any) -> Any:
    """torch's LambdaLR class, for an optimizer that is a torch optimizer.

    The core never imports torch: training code that only designs schedules
    must not need it, and ``import schedwidget`` stays light.  An optimizer
    passed in means torch is loaded already, so its module is read from
    ``sys.modules``, which imports nothing.
    """
    optim = getattr(sys.modules.get("torch"), "optim", None)
    if optim is None or not isinstance(optimizer, optim.Optimizer):
        raise complain("make_scheduler", "optimizer", _Shown(f"a {type(optimizer).__name__}"),
                       "a torch optimizer (torch.optim.SGD(...), torch.optim.AdamW(...), ...)")
    return optim.lr_scheduler.LambdaLR


def _start_lrs(optimizer: Any, resuming: bool) -> list[float]:
    """Each param group's starting lr: its "initial_lr" (set by a scheduler, kept by a checkpoint), else its lr."""
    out = []
    for i, group in enumerate(optimizer.param_groups):
        if resuming and "initial_lr" not in group:
            raise complain("make_scheduler", f"param_groups[{i}]", _Shown("a group without 'initial_lr'"),
                           "the optimizer's state from the checkpoint (it carries each group's starting lr)",
                           "call optimizer.load_state_dict(...) before make_scheduler(..., state=...)")
        lr = group.get("initial_lr", group.get("lr"))
        try:
            v = float(lr)  # a float, or a one-element tensor
        except (TypeError, ValueError, OverflowError):
            v = math.nan
        if not (math.isfinite(v) and v >= 0):
            raise complain("make_scheduler", f"param_groups[{i}]['lr']", _brief(lr), "a finite number >= 0")
        out.append(v)
    return out


def _base(base_lr: Any, starts: list[float]) -> float:
    """base_lr as given (a group must start there), or the common starting lr of every group."""
    if base_lr is None:
        if len(set(starts)) > 1:
            shown = ", ".join(f"{v!r}" for v in starts[:6]) + (", ..." if len(starts) > 6 else "")
            raise complain("make_scheduler", "base_lr", None,
                           f"given when the param groups start at different lrs (found {shown})",
                           f"pass the lr the design's rates are meant for, e.g. base_lr={starts[0]!r}; a group "
                           "starting at 10x base_lr then runs at 10x the design")
        return _positive("make_scheduler", "base_lr (every param group's lr)", starts[0])
    base = _positive("make_scheduler", "base_lr", base_lr)
    if base not in starts:
        shown = ", ".join(f"{v!r}" for v in sorted(set(starts))[:6])
        raise complain("make_scheduler", "base_lr", base_lr, f"the starting lr of a param group (found {shown})",
                       f"build the optimizer with lr=base_lr, or pass base_lr={starts[0]!r}; otherwise every rate "
                       f"would be {starts[0] / base:g}x the design")
    return base


def _shares(owner: str, starts: list[float], bases: Sequence[float], mults: Sequence[float], given: bool) -> None:
    """A group's share of the design comes from its multiplier or from its starting lr, never from both."""
    for i, (lr, base, m) in enumerate(zip(starts, bases, mults)):
        if lr != base and m != 1.0:
            ratio = lr / base
            fixed = "[" + ", ".join("1" if j == i else f"{x:g}" for j, x in enumerate(mults)) + "]"
            source = f"groups[{i}]={m:g}" if given else f"the checkpoint's multiplier {m:g}"
            raise complain(owner, f"param_groups[{i}]['lr']", lr,
                           f"base_lr={base!r} when {source} sets its share (it starts at {ratio:g}x base_lr, "
                           f"and the multiplier would apply on top: a {ratio * m:g}x rate)",
                           f"set that group's lr to base_lr, or pass groups={fixed} to keep the {ratio:g}x "
                           "its lr already gives")


def _tick(start_tick: Any) -> int:
    if isinstance(start_tick, bool) or not isinstance(start_tick, int) or start_tick < 0:
        raise complain("make_scheduler", "start_tick", _brief(start_tick),
                       "a whole number >= 0 (the ticks already done; 0 for a fresh run)")
    return start_tick


def _is_tracks(design: Any) -> bool:
    """Whether ``design`` is tracks or per-group designs (a ``TrackClock`` runs them), not one Schedule."""
    from collections.abc import Mapping

    from .spec import Design
    from .tracks import GroupDesigns, Tracks

    if isinstance(design, Design):
        return design.tracks is not None
    return isinstance(design, (Tracks, GroupDesigns, Mapping, list, tuple))


def _track_clock(optimizer: Any, design: Any, base_lr: Any, groups: Any, start_tick: Any, state: Any,
                 resume_with: Any) -> Any:
    """make_scheduler's route for tracks and per-group designs: a ``TrackClock`` (absolute rates, no base lr)."""
    from .clock import TrackClock, saved_design
    from .tracks import Tracks

    owner = "make_scheduler"
    if base_lr is not None:
        raise complain(owner, "base_lr", _brief(base_lr), "None with tracks or per-group designs",
                       "their rates are absolute and set each group's lr directly; give a group its share "
                       "with groups=[1, 0.1, ...] or its own design")
    tick = _tick(start_tick)
    if resume_with is not None and resume_with not in RESUME_CHOICES:
        raise complain(owner, "resume_with", _brief(resume_with), "None, 'saved' or 'new'",
                       "'saved' continues on the checkpoint's design, 'new' on the new design from the saved tick")
    if state is None and resume_with is not None:
        raise complain(owner, "resume_with", resume_with, "None when no state is given",
                       "it chooses between a checkpoint's design and the new one: pass state=<the saved "
                       "scheduler.state_dict()> too")
    if state is not None and tick:
        raise complain(owner, "start_tick", tick, "0 when state is given (the state carries its tick)")
    value = design.tracks if hasattr(design, "tracks") and not isinstance(design, Tracks) else design
    plain = getattr(optimizer, "param_groups", None)
    plain = isinstance(plain, list) and all(isinstance(g, dict) for g in plain)  # else TrackClock says what it needs
    if isinstance(value, Tracks) and groups is None and plain:
        starts = _start_lrs(optimizer, resuming=False)
        if len(set(starts)) > 1:
            shown = ", ".join(f"{v!r}" for v in starts[:6]) + (", ..." if len(starts) > 6 else "")
            raise complain(owner, "groups", None, f"given when the param groups start at different lrs ({shown})",
                           "the tracks set every group's lr to the rate design; pass groups=[...] with each "
                           "group's multiplier, or one design per group")
    if state is not None and resume_with == "saved":
        clock = TrackClock(optimizer, saved_design(owner, state))
    else:
        clock = TrackClock(optimizer, value, start_tick=tick, multipliers=groups)
    if state is not None:
        if resume_with == "new":
            saved_design(owner, state)  # a valid checkpoint, even when its design is not kept
            clock.load_state_dict({**state, "design": clock.state_dict()["design"]})
        else:
            clock.load_state_dict(state)
    return clock


def make_scheduler(optimizer: Any, design: Any, base_lr: float | None = None,
                   groups: Sequence[float] | None = None, start_tick: int = 0, *,
                   state: dict[str, Any] | None = None, resume_with: str | None = None) -> Any:
    """A torch ``LambdaLR`` that runs ``design`` on ``optimizer``, after checking the optimizer's param groups.

    The documented way to use the factor (``RateFactor``): group ``i`` runs at
    ``design(t) * share_i``, where the share comes from ``groups[i]`` or from
    the group's own starting lr (``lr / base_lr``), never from both: a group
    built at 10x ``base_lr`` with ``groups[i] = 10`` would run at 100x and is
    refused.  Each group's starting lr is its ``"initial_lr"`` when a scheduler
    or checkpoint set one, else its ``lr``.  Call ``scheduler.step()`` once per
    tick of the design's clock (after ``optimizer.step()`` for a step clock,
    after each epoch for an epoch clock).

    Parameters
    ----------
    optimizer : a torch optimizer; torch is not imported here (it is already loaded).
    design : the schedule (or a ``Design`` from ``load_design``); its values are absolute rates.
    base_lr : the lr the design's rates are meant for.  None: every group's starting lr, which must be
        the same for all; given: at least one group must start there.
    groups : one multiplier per param group, in ``optimizer.param_groups`` order (None: 1 for each); the
        count must match the optimizer's.
    start_tick : resume by tick alone: the ticks already done (the next update uses ``design(start_tick)``).
        As in the ``to_torch`` snippet: ``LambdaLR(..., last_epoch=start_tick - 1)``, with "initial_lr" set to
        each group's starting lr where it is missing.
    state : resume from a saved ``scheduler.state_dict()``; load the optimizer's state first (it carries
        each group's starting lr), then call ``make_scheduler(optimizer, design, state=...)`` instead of
        ``scheduler.load_state_dict(...)``.  Every saved factor is checked field by field; the next update
        uses the rate of the saved tick.
    resume_with : needed (with ``state``) only when the checkpoint's design differs from ``design`` (another
        design, multiplier or base_lr): ``"saved"`` continues on the checkpoint's design, ``"new"`` continues
        on ``design`` from the saved tick.  Without it a difference is a ScheduleError naming both designs.
        A plain ``scheduler.load_state_dict(...)`` of another design is refused too, at the next step.

    Tracks and per-group designs: ``design`` may also be ``tracks(rate, momentum=..., beta2=...,
    weight_decay=...)`` (with ``groups`` multipliers of its rate, or None), or a list or mapping of designs
    (Schedules or tracks), one per param group in ``optimizer.param_groups`` order.  Then the result is a
    ``TrackClock`` (``schedwidget.clock``), which sets each group's ``lr`` and tracked keys (``momentum`` or
    ``betas[0]``, ``betas[1]``, ``weight_decay``) at every ``step()``, with ``state_dict()`` and
    ``load_state_dict()``; ``base_lr`` must be None (their rates are absolute), and ``state`` is a saved
    ``TrackClock.state_dict()``.

    Returns
    -------
    torch.optim.lr_scheduler.LambdaLR with one ``RateFactor`` per param group (a ``TrackClock`` for tracks or
    per-group designs).

    Raises
    ------
    ScheduleError
        A param group whose starting lr and multiplier would both scale it, a group count other than
        ``len(groups)``, an ambiguous or unmatched ``base_lr``, a bad ``start_tick``, a saved state that is
        not what ``LambdaLR.state_dict()`` saves (each factor field checked like a fresh one), or a
        checkpoint of another design without ``resume_with``.

    Notes
    -----
    Resuming from a checkpoint (model, optimizer and scheduler state dicts)::

        optimizer.load_state_dict(ckpt["optimizer"])           # first: it carries each group's starting lr
        scheduler = make_scheduler(optimizer, design, groups=[1, 10], state=ckpt["scheduler"])
        # the design changed since the checkpoint (a longer run): say which one to continue on
        scheduler = make_scheduler(optimizer, longer, groups=[1, 10], state=ckpt["scheduler"], resume_with="new")

    By tick alone: ``make_scheduler(optimizer, design, groups=[1, 10], start_tick=k)``, k the ticks done.

    Examples
    --------
    >>> import torch
    >>> from schedwidget import cosine, warmup
    >>> body, head = torch.nn.Linear(4, 4), torch.nn.Linear(4, 2)
    >>> optimizer = torch.optim.SGD([{"params": body.parameters()}, {"params": head.parameters()}], lr=3e-4)
    >>> scheduler = make_scheduler(optimizer, warmup(cosine(3e-4, steps=900), steps=100), groups=[1, 10])
    >>> [group["lr"] for group in optimizer.param_groups]     # the first update: t = 0
    [0.0, 0.0]
    >>> head_at_10x = torch.optim.SGD([{"params": body.parameters()},
    ...                                {"params": head.parameters(), "lr": 3e-3}], lr=3e-4)
    >>> make_scheduler(head_at_10x, warmup(cosine(3e-4, steps=900), steps=100), base_lr=3e-4, groups=[1, 10])
    Traceback (most recent call last):
    ...
    schedwidget.params.ScheduleError: make_scheduler: param_groups[1]['lr'] must be base_lr=0.0003 when groups[1]=10 sets its share (it starts at 10x base_lr, and the multiplier would apply on top: a 100x rate), got 0.003 (set that group's lr to base_lr, or pass groups=[1, 1] to keep the 10x its lr already gives)
    """
    if _is_tracks(design):
        return _track_clock(optimizer, design, base_lr, groups, start_tick, state, resume_with)
    lambda_lr = _lambda_lr(optimizer)
    from .spec import Design

    s = design.schedule if isinstance(design, Design) else design
    if not isinstance(s, Schedule):
        raise complain("make_scheduler", "design", _brief(design),
                       "a Schedule (built with cosine(), warmup(), ...) or a Design from load_design()")
    tick = _tick(start_tick)
    if resume_with is not None and resume_with not in RESUME_CHOICES:
        raise complain("make_scheduler", "resume_with", _brief(resume_with), "None, 'saved' or 'new'",
                       "'saved' continues on the checkpoint's design, 'new' on the new design from the saved tick")
    if state is None and resume_with is not None:
        raise complain("make_scheduler", "resume_with", resume_with, "None when no state is given",
                       "it chooses between a checkpoint's design and the new one: pass state=<the saved "
                       "scheduler.state_dict()> too")
    if state is not None and tick:
        raise complain("make_scheduler", "start_tick", tick, "0 when state is given (the state carries its tick)")
    starts = _start_lrs(optimizer, resuming=state is not None)
    n = len(starts)
    base = _base(base_lr, starts)
    mults = (1.0,) * n if groups is None else _multipliers("make_scheduler", groups)
    if len(mults) != n:
        raise complain("make_scheduler", "groups", _brief(list(groups or ())),
                       f"one multiplier per param group: the optimizer has {n}",
                       "list them in optimizer.param_groups order")
    _shares("make_scheduler", starts, [base] * n, mults, True)
    factors = [RateFactor(s, base, m) for m in mults]
    if state is None:
        if tick:  # LambdaLR(..., last_epoch >= 0) reads "initial_lr": the starting lr just checked
            for group, lr in zip(optimizer.param_groups, starts):
                group.setdefault("initial_lr", lr)
        return lambda_lr(optimizer, lr_lambda=factors, last_epoch=tick - 1)
    tick, chosen = _choose(factors, state, resume_with, starts)   # every check before anything is touched
    scheduler = lambda_lr(optimizer, lr_lambda=factors)
    scheduler.load_state_dict({**state, "lr_lambdas": chosen})
    for f in factors:  # what was loaded is now what each factor was built with
        f._built(_valid_state("make_scheduler", f.__dict__))
    # the rates of the saved tick, as an uninterrupted run's scheduler.step() set them
    for group, b, f in zip(optimizer.param_groups, scheduler.base_lrs, factors):
        rate = b * f(tick)
        if hasattr(group["lr"], "fill_"):  # a tensor lr keeps its identity, as torch's own step does
            group["lr"].fill_(rate)
        else:
            group["lr"] = rate
    scheduler._last_lr = [group["lr"] for group in optimizer.param_groups]
    return scheduler


def _choose(factors: list[RateFactor], state: Any, resume_with: str | None,
            starts: list[float]) -> tuple[int, list[dict[str, Any]]]:
    """The saved tick and the factor states to load: each saved one checked, a different design only by choice."""
    owner, n = "make_scheduler", len(factors)
    if not isinstance(state, dict):
        raise complain(owner, "state", _brief(state), "a dict saved by scheduler.state_dict()")
    tick = state.get("last_epoch")
    if isinstance(tick, bool) or not isinstance(tick, int) or tick < 0:
        raise complain(owner, "state['last_epoch']", _brief(tick), "a whole number >= 0 (the ticks already done)")
    saved, bases = state.get("lr_lambdas"), state.get("base_lrs")
    if not isinstance(saved, list) or len(saved) != n:
        raise complain(owner, "state['lr_lambdas']", _brief(saved), f"a list with one entry per param group ({n})")
    if not isinstance(bases, list) or len(bases) != n or any(
            not isinstance(b, Real) or isinstance(b, bool) or b != lr for b, lr in zip(bases, starts)):
        raise complain(owner, "state['base_lrs']", _brief(bases),
                       f"each param group's starting lr in the loaded optimizer, {starts!r}",
                       "load the optimizer's state from the same checkpoint first")
    chosen, differ = [], []
    for i, (f, d) in enumerate(zip(factors, saved)):
        new = _valid_state(owner, f.__dict__)
        if d is None:  # the saved run used a plain function: torch kept nothing to compare with
            if resume_with != "new":
                raise complain(owner, f"state['lr_lambdas'][{i}]", None, "a saved RateFactor state",
                               "that run used a function torch does not save; pass resume_with='new' to "
                               f"continue on the new design from the saved tick {tick}")
            chosen.append(dict(f.__dict__))
            continue
        old = _valid_state(f"{owner}: state['lr_lambdas'][{i}]", d)
        if not old.same(new):
            differ.append((i, old, new))
        chosen.append(dict(f.__dict__) if resume_with == "new" else dict(d))
    if differ and resume_with is None:
        i, old, new = differ[0]
        a, b = _two(old.describe(), new.describe())
        raise complain(owner, f"state's design for param_groups[{i}]", _Shown(f"the checkpoint's {a}"),
                       f"the new design {b} unless resume_with says which to keep",
                       f"pass resume_with='saved' to continue on the checkpoint's design, or resume_with='new' "
                       f"to continue on the new design from the saved tick {tick}")
    if resume_with == "saved":
        kept = [_valid_state(owner, d) for d in chosen]
        _shares(owner, starts, [v.base_lr for v in kept], [v.multiplier for v in kept], False)
    return tick, chosen
