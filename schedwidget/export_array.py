"""Array source: a design as one numpy function of an integer array of ticks, branch-free.

``to_python(s, array=True)`` calls ``array_source``.  The body comes from the scalar body that every kind writes
(``lowering.lower``): stages and branches become ``np.where`` over the pieces, tables ``np.searchsorted`` and
``np.take``, so one call evaluates any number of ticks with no Python loop.  It applies the core's operations in
the core's order with numpy's own functions, so it equals ``s(t)`` bit for bit at every tick.
"""

from __future__ import annotations

from typing import Any

from .codegen import TAKEN, _describe, check_name
from .lowering import NUMPY, lower
from .schedule import MAX_TICKS, Schedule

__all__ = ["array_source", "ARRAY_TAKEN", "head_lines"]

#: Names the array source uses itself besides the scalar writer's.
ARRAY_TAKEN = TAKEN | {"np", "rate"}


def head_lines(s: Schedule, name: str, unit: str, spe: int | None, title: str, per: str, extra: list[str]) -> list[str]:
    """The function's docstring (indented once), from the scalar export's description."""
    text = _describe(s, unit, spe, per=per, title=title)
    text[1:1] = [""] + extra if extra else []
    return ['    """' + text[0]] + [("    " + x).rstrip() for x in text[1:]] + ['    """']


def checked_lowering(owner: str, s: Schedule, name: str, taken: frozenset[str], unit: str, steps_per_epoch: int | None,
                     target: Any) -> tuple[str, int | None, list[str], str]:
    """The checks every framework export makes (a schedule, a free name, the clock's unit, steps per epoch) and the
    branch-free lowering of ``s`` for ``target``: ``(unit, steps_per_epoch, lines, result)``."""
    from .export import _schedule, _spe, _unit

    _schedule(owner, s)
    check_name(owner, name, taken)
    unit, spe = _unit(owner, unit), _spe(owner, steps_per_epoch)
    lines, result = lower(s, target)
    return unit, spe, lines, result


def array_source(s: Schedule, name: str = "lr_at", unit: str = "step", steps_per_epoch: int | None = None) -> str:
    """Source of ``name(t)``: ``s(t)`` for an int or an integer array ``t`` (any shape), with numpy only.

    The function returns a float64 array of ``t``'s shape (a float for an int) and raises ValueError for
    negative, non-whole or (open-ended designs) ticks above 2**53, as the scalar function does.
    """
    check_name("to_python", name, ARRAY_TAKEN)
    n = s.length
    lines, result = lower(s, NUMPY)
    first = "the first update" if unit == "step" else "the first epoch"
    doc = head_lines(s, name, unit, steps_per_epoch,
                     f"Learning rate at tick(s) t (an int or integer array, >= 0; t = 0 is {first}).",
                     f"one tick is one {'optimizer update' if unit == 'step' else 'epoch'}",
                     ["Vectorised and branch-free: every piece is computed and np.where picks it, so one call",
                      "evaluates any number of ticks; equal to the design bit for bit."])
    out = ["import numpy as np", "", "", f"def {name}(t):", *doc,
           "    t = np.asarray(t)",
           "    if t.dtype.kind == 'f' and bool(np.all(np.isfinite(t))) and bool(np.all(t == np.floor(t))):",
           "        t = t.astype(np.int64)  # whole floats are read as ticks, as the scalar function does",
           "    if t.dtype.kind not in 'iu':",
           f"        raise ValueError(f'{name}: t must be whole numbers of {unit}s (ints >= 0), got {{t!r}}')",
           "    if t.size and t.min() < 0:",
           f"        raise ValueError(f'{name}: t must be >= 0 (t = 0 is {first})')"]
    if n is None:
        out += ["    if t.size and t.max() > 9007199254740992:",
                f"        raise ValueError(f'{name}: t must be <= 2**53 (above that, ticks are not exact on a float "
                "clock)')",
                "    u = t.astype(np.float64)"]
    else:
        out += [f"    u = np.minimum(t.astype(np.float64), {float(n)!r})  # past the end the rate holds"]
    out += ["    with np.errstate(all='ignore'):  # every piece is computed everywhere; np.where keeps its own ticks"]
    out += ["        " + x for x in lines]
    out += [f"    {result} = np.broadcast_to(np.asarray({result}, dtype=np.float64), u.shape)",
            f"    return float({result}) if {result}.ndim == 0 else {result}.copy()"]
    assert MAX_TICKS == 9007199254740992
    return "\n".join(out) + "\n"
