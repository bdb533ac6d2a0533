"""Exports that cannot drift: standalone Python source and a ready torch snippet.

``to_python`` / ``to_torch`` write source that needs only the standard library
(and torch for the snippet): paste it into training code that must not depend
on schedwidget.  The other route, ``make_scheduler`` with ``RateFactor``
objects (schedwidget needed at training time), lives in ``schedwidget.factor``
and is importable from here too.  torch is never imported: the snippet is only text.
"""

from __future__ import annotations

from typing import Any, Sequence

from .budget import check_length
from .codegen import TAKEN, UNITS, check_name, function_source
# the factor route lives in factor.py; its names stay importable from here (checkpoints pickled a RateFactor
# as schedwidget.export.RateFactor, and tests reach its caches through this module)
from .factor import (  # noqa: F401
    _BUILT, _CHECKED, _COMPILED, COMPILED_MAX, FIELDS, MAX_GROUPS, RESUME_CHOICES, RateFactor, _brief, _design_text,
    _multipliers, _positive, _schedule, _Shown, torch_factor)
from .scheduler import make_scheduler  # noqa: F401


def __getattr__(name: str) -> Any:
    if name == "to_torch_tracks":  # the snippet for tracks lives in track_export.py (it imports this module)
        from .track_export import to_torch_tracks

        return to_torch_tracks
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
from .schedule import MAX_TICKS, Schedule, complain

__all__ = ["to_python", "make_scheduler", "torch_factor", "to_torch", "RateFactor", "to_torch_tracks",
           "track_function_names"]

#: Names the torch snippet defines itself besides the function.
SNIPPET_NAMES = frozenset({"torch", "BASE_LR", "GROUP_MULTIPLIERS", "ExportedFactor", "make_scheduler"})
#: Names the snippet's factor reads inside ``__call__(self, t)``, where a function of that name would be shadowed.
SNIPPET_LOCALS = frozenset({"self", "t"})


def _unit(owner: str, unit: Any) -> str:
    if not isinstance(unit, str) or unit not in UNITS:  # a numpy array compares element by element
        raise complain(owner, "unit", _brief(unit), "one of 'step', 'epoch'")
    return unit


def _spe(owner: str, spe: Any) -> int | None:
    # the same bounds as codegen's own check, so to_python and to_torch refuse a huge value in their own name
    if spe is not None and (isinstance(spe, bool) or not isinstance(spe, int) or not 1 <= spe <= MAX_TICKS):
        raise complain(owner, "steps_per_epoch", spe, "a whole number >= 1 and <= 2**53 or None")
    return spe


def to_python(s: Schedule, name: str = "lr_at", unit: str = "step", steps_per_epoch: int | None = None,
              array: bool = False) -> str:
    """Source of one function ``name(t)`` equal to ``s(t)``, needing only the standard library.

    The text starts with its imports (``math``, and ``bisect`` when a long
    table is looked up), then one ``def`` whose docstring states the unit, the
    budget, the peak and what happens past the end.  A negative or non-integer
    ``t`` raises ValueError.

    Parameters
    ----------
    s : the schedule.
    name : the function's name: a plain ASCII identifier, not a keyword, dunder or builtin.
    unit : "step" or "epoch", the unit of the clock (stated in the docstring).
    steps_per_epoch : adds the budget in epochs to the docstring (unit "step").
    array : True for numpy source instead: ``name(t)`` takes an int or an integer array of ticks and is
        branch-free (every piece computed, ``np.where`` picks), equal to ``s(t)`` bit for bit (one schedule
        only, not tracks).

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> namespace = {}
    >>> exec(to_python(warmup(cosine(0.1, steps=97_750), steps=5_750)), namespace)
    >>> namespace["lr_at"](5_750)
    0.1
    """
    if not isinstance(array, bool):
        raise complain("to_python", "array", _brief(array), "True or False")
    if array:
        if _tracked(s):
            raise complain("to_python", "array", True, "False for tracks or per-group designs",
                           "the array form writes one schedule: export each track's design on its own")
        _schedule("to_python", s)
        from .export_array import array_source

        return array_source(s, name, _unit("to_python", unit), _spe("to_python", steps_per_epoch))
    if _tracked(s):
        return _track_functions("to_python", s, name, _unit("to_python", unit),
                                _spe("to_python", steps_per_epoch))[0]
    _schedule("to_python", s)
    check_name("to_python", name)
    body, modules = function_source(s, name, _unit("to_python", unit), _spe("to_python", steps_per_epoch))
    return "".join(f"import {m}\n" for m in sorted(modules)) + "\n\n" + body


# ------------------------------------------------------------------ tracks and per-group designs
#: Each track's function name (the rate's is the ``name`` argument); per group, the group's name or
#: ``group<i>`` goes first: ``head_momentum_at``, ``group0_lr_at``.
TRACK_FUNCTIONS = {"momentum": "momentum_at", "beta2": "beta2_at", "weight_decay": "weight_decay_at"}


def _tracked(s: Any) -> bool:
    from collections.abc import Mapping

    from .tracks import GroupDesigns, Tracks

    return isinstance(s, (Tracks, GroupDesigns, Mapping, list, tuple))


def track_function_names(design: Any, name: str = "lr_at") -> list[dict[str, str]]:
    """The generated function's name for every track of every group: ``[{"rate": "lr_at", ...}, ...]``."""
    from .tracks import as_groups

    g = as_groups("to_python", design)
    assert g is not None
    out = []
    for i, t in enumerate(g.groups):
        prefix = "" if len(g) == 1 and g.names is None else f"{g.names[i] if g.names else f'group{i}'}_"
        out.append({track: prefix + (name if track == "rate" else TRACK_FUNCTIONS[track]) for track, _ in t.items()})
    return out


def _track_functions(owner: str, design: Any, name: str, unit: str, spe: int | None,
                     taken: frozenset[str] = TAKEN) -> tuple[str, list[dict[str, str]], set[str]]:
    """Source of one function per track and group (imports first), their names, and the modules imported."""
    from .tracks import as_groups

    check_name(owner, name, taken)
    g = as_groups(owner, design)
    assert g is not None
    names = track_function_names(g, name)
    bodies, modules, seen = [], set(), set()
    for t, fns in zip(g.groups, names):
        for track, s in t.items():
            fn = check_name(owner, fns[track], taken)
            if fn in seen:
                raise complain(owner, "name", name, f"a name that no track's function repeats ({fn!r} twice)")
            seen.add(fn)
            body, mods = function_source(s, fn, unit, spe, what=track)  # the docstring names the track
            bodies.append(body)
            modules |= mods
    text = "".join(f"import {m}\n" for m in sorted(modules)) + "\n\n" + "\n\n".join(bodies)
    return text, names, modules


def _tracks_torch(s: Any, unit: str, groups: Any, steps: Any, name: str, spe: Any) -> str:
    from .track_export import to_torch_tracks
    from .tracks import as_groups

    return to_torch_tracks(as_groups("to_torch", s, groups), unit, steps, name, spe)


# ------------------------------------------------------------------ factor objects
#: The keys of a factor's state, as LambdaLR.state_dict() saves it (the instance __dict__).


# ------------------------------------------------------------------ torch snippet
_HEAD = """\
# Learning-rate schedule exported by schedwidget: export it again rather than editing it.
# Unit: $unit. Budget: $budget. Each param group's rate is $name(t) * its multiplier.
# Needs only torch and the standard library at training time (not schedwidget).
#
# Use:
#     optimizer = torch.optim.SGD(param_groups, lr=BASE_LR, momentum=0.9)  # every group at BASE_LR
#     scheduler = make_scheduler(optimizer)
#     for epoch in range(epochs):
#         for inputs, targets in loader:
#             loss = loss_fn(model(inputs), targets)
#             loss.backward()
#             optimizer.step()
#             optimizer.zero_grad()
$loop#
# The clock t counts $counts.
$clock#
# Resume (both ways continue with exactly the rates of an uninterrupted run):
# * State dicts: save model.state_dict(), optimizer.state_dict() and scheduler.state_dict().
#   To resume, build model and optimizer as before, call scheduler = make_scheduler(optimizer)
#   BEFORE optimizer.load_state_dict(...) (building a scheduler resets every group's lr), then
#   scheduler.load_state_dict(...).
# * By tick alone: scheduler = make_scheduler(optimizer, start_tick=k), k = $done.
#   torch's LambdaLR(..., last_epoch=k - 1) needs "initial_lr" in every param group;
#   make_scheduler sets it to BASE_LR where it is missing.
$imports
import torch

BASE_LR = $base  # every param group's lr when the optimizer is built
GROUP_MULTIPLIERS = $mults  # $groups_doc


"""

_TAIL = """

class ExportedFactor:
    \"\"\"LambdaLR factor for one param group: $name(t) * multiplier / BASE_LR.

    A small class rather than a lambda: scheduler.state_dict() saves its __dict__
    ({"multiplier": ...}), load_state_dict() restores it, and torch.save can pickle it.
    \"\"\"

    def __init__(self, multiplier):
        self.multiplier = float(multiplier)

    def __call__(self, t):
        return $name(t) * self.multiplier / BASE_LR


def make_scheduler(optimizer, start_tick=0):
    \"\"\"A LambdaLR running $name; start_tick = $done (0 for a fresh run).\"\"\"
    if type(start_tick) is not int or start_tick < 0:
        raise ValueError(f"start_tick must be a whole number >= 0, got {start_tick!r}")
    groups = optimizer.param_groups
    multipliers = GROUP_MULTIPLIERS or (1.0,) * len(groups)
    if len(groups) != len(multipliers):
        raise ValueError(
            f"this schedule was exported for {len(multipliers)} param group(s), the optimizer has "
            f"{len(groups)}: export it again with one multiplier per group (in param_groups order)")
    for i, group in enumerate(groups):
        lr = group.get("initial_lr", group["lr"])
        if lr != BASE_LR:
            raise ValueError(
                f"param_groups[{i}] starts at lr={lr!r}, not BASE_LR={BASE_LR!r}: build the optimizer "
                "with lr=BASE_LR for every group (GROUP_MULTIPLIERS sets each group's share)")
        if start_tick > 0:
            group.setdefault("initial_lr", BASE_LR)
    factors = [ExportedFactor(m) for m in multipliers]
    return torch.optim.lr_scheduler.LambdaLR(optimizer, lr_lambda=factors, last_epoch=start_tick - 1)
"""

_LOOP = {
    "step": "#             scheduler.step()  # once per optimizer update, right after optimizer.step()\n",
    "epoch": "#         scheduler.step()  # once per epoch, after the epoch's last optimizer.step()\n",
}
_CLOCK = {
    "step": """\
# * Gradient accumulation over A micro-batches: t counts optimizer updates, not micro-batches;
#   call scheduler.step() right after each optimizer.step(), once per update.
# * Several processes (DistributedDataParallel): every process builds its own scheduler and steps
#   it once per update, so all of them read the same t.
# * Mixed precision: when GradScaler skips an update (inf/NaN gradients), scaler.step(optimizer)
#   does not run optimizer.step(), but scheduler.step() still advances t. Keep calling it: t then
#   counts attempted updates and the schedule ends with the loop (skips are rare and come early,
#   while the scale settles; torch may warn once that scheduler.step() ran before optimizer.step()).
#   To count only applied updates, read scaler.get_scale() before and after scaler.update() and
#   call scheduler.step() only when it did not drop.
""",
    "epoch": """\
# * Gradient accumulation, several processes (DistributedDataParallel) or updates that GradScaler
#   skips change nothing: t counts epochs, so every process calls scheduler.step() once after
#   each epoch, never inside the batch loop.
""",
}


def _snippet_name(name: Any) -> str:
    """A function name the snippet can call from its factor class: not shadowed there, not private or mangled."""
    check_name("to_torch", name, TAKEN | SNIPPET_NAMES | SNIPPET_LOCALS)
    if name.startswith("_"):
        raise complain("to_torch", "name", name, "a public identifier, not starting with _",
                       "the snippet calls it from a class, where Python renames __x to _ExportedFactor__x; "
                       "try 'lr_at'")
    return name


def to_torch(s: Any, base_lr: float | None = None, unit: str = "step", groups: Sequence[float] | None = None,
             steps: int | None = None, name: str = "lr_at", steps_per_epoch: int | None = None) -> str:
    """A ready torch snippet: the generated function, a picklable factor class and ``make_scheduler``.

    The snippet needs only torch and the standard library.  Its comments say
    where ``scheduler.step()`` goes for the unit, what the clock counts (with
    gradient accumulation, several processes or skipped mixed-precision
    updates) and how to resume, by state dicts or by tick alone.  With
    ``groups=[1.0, 0.1, ...]`` the group count is checked when the scheduler is
    built; every group must start at ``lr=base_lr``.

    For ``tracks(...)`` or per-group designs (a list or mapping, one per param group), the snippet is
    ``to_torch_tracks``'s: one function per track and group and a small clock class that sets each
    group's lr and tracked keys; ``base_lr`` must then be None.

    Parameters
    ----------
    s : the schedule (or tracks, or one design per param group).
    base_lr : the optimizer's lr for every param group (> 0); required for a single schedule.
    unit : "step" (scheduler.step() after every update) or "epoch" (after every epoch).
    groups : one rate multiplier per param group, or None for the same rate in every group.
    steps : the budget the snippet is for, in ticks of ``unit``, or a ``Budget``; a design of
        another length is a ScheduleError (budget mismatch).
    name : the function's name: a plain identifier that the snippet does not use itself (not ``self``,
        ``t``, ``torch``, ``BASE_LR``, ``make_scheduler``, ...) and not starting with ``_`` (the snippet's
        factor class calls it, and Python renames ``__x`` inside a class).
    steps_per_epoch : adds the budget in epochs to the comments (unit "step").

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> text = to_torch(warmup(cosine(0.1, steps=97_750), steps=5_750), base_lr=0.1, steps=103_500)
    >>> "LambdaLR(optimizer, lr_lambda=factors" in text
    True
    """
    from string import Template

    if _tracked(s):
        if base_lr is not None:
            raise complain("to_torch", "base_lr", _brief(base_lr), "None with tracks or per-group designs",
                           "their rates are absolute: the snippet sets each group's lr directly")
        return _tracks_torch(s, unit, groups, steps, name, steps_per_epoch)
    if base_lr is None:
        raise complain("to_torch", "base_lr", None, "a rate > 0 for a single design (the optimizer's lr)")
    _schedule("to_torch", s)
    _snippet_name(name)
    _unit("to_torch", unit)
    spe = _spe("to_torch", steps_per_epoch)
    base = _positive("to_torch", "base_lr", base_lr)
    mults = None if groups is None else _multipliers("to_torch", groups)
    if steps is not None:
        check_length(s, steps, unit, owner="to_torch")
    body, modules = function_source(s, name, unit, spe)
    n = s.length
    budget = "open-ended" if n is None else f"{n:,} {unit}s"
    if n is not None and spe and unit == "step":
        budget += f" ({n / spe:g} epochs of {spe:,} steps)"
    words = dict(
        unit=unit, budget=budget, name=name, loop=_LOOP[unit], clock=_CLOCK[unit],
        counts="optimizer updates: t = k is the (k+1)-th update" if unit == "step"
        else "finished epochs: every update in epoch e uses the rate for t = e",
        done="the optimizer updates already done" if unit == "step" else "the epochs already done",
        imports="".join(f"import {m}\n" for m in sorted(modules)), base=repr(base),
        mults="None" if mults is None else "(" + ", ".join(map(repr, mults)) + (",)" if len(mults) == 1 else ")"),
        groups_doc="the same rate for every param group" if mults is None
        else "one per param group, in optimizer.param_groups order",
    )
    return Template(_HEAD).substitute(words) + body + Template(_TAIL).substitute(words)
