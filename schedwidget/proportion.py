"""A design's ticks multiplied in proportion, as the designer's budget edits do (a new run length, steps to
epochs): every tick-valued parameter of a node and of the nodes inside it, each kind of parameter scaling
its own ticks (``ParamKind.scaled``), and the stage that takes the rounding difference.  Part of the budget
arithmetic (``budget``); the designer's form calls it.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any, Sequence

from .schedule import complain

__all__ = ["scale_node", "has_own_length", "absorb_rounding"]


def scale_node(node: Any, r: float, owner: str = "designer") -> Any:
    """``node`` (a schedule, or any frozen dataclass with ``params()``) with every tick-valued parameter, nested
    schedules included, multiplied by ``r`` and rounded half up to whole ticks.

    Rates, factors and counts are kept; raises ScheduleError if ``r`` is not a finite number > 0 or if rounding
    breaks the design (for example two drops landing on the same tick).

    >>> from schedwidget import cosine, drops
    >>> scale_node(drops(0.1, at=(30, 60), factor=0.1, steps=90), 1 / 3)
    drops(peak=0.1, at=(10, 20), factor=0.1, steps=30)
    """
    if isinstance(r, bool) or not (isinstance(r, (int, float)) and r > 0 and math.isfinite(r)):
        raise complain(owner, "scale", r, "a finite number > 0")
    return _scaled(node, float(r))


def _scaled(node: Any, r: float) -> Any:
    changes: dict[str, Any] = {}
    for name, p in type(node).params().items():
        v = getattr(node, name)
        if v is None:
            continue
        new = p.kind_of.scaled(p, v, r, lambda c: _scaled(c, r))
        if new is not v:
            changes[name] = new
    return dataclasses.replace(node, **changes) if changes else node


def has_own_length(node: Any) -> bool:
    """Whether ``node`` is a leaf whose length is its own ``steps`` parameter (so it can take a difference)."""
    return not node.children() and "steps" in type(node).params() and node.steps is not None


def absorb_rounding(nodes: Sequence[Any], difference: int) -> tuple[Any, ...] | None:
    """``nodes`` with the last one that has its own length lengthened by ``difference`` ticks (what rounding
    the others in proportion left over), or None when none has a length of its own.

    >>> from schedwidget import cosine, flat
    >>> absorb_rounding((flat(0.1, steps=3), cosine(0.1, steps=7), flat(0.0)), 2)[1]
    cosine(peak=0.1, floor=0.0, steps=9)
    """
    for i in range(len(nodes) - 1, -1, -1):
        if has_own_length(nodes[i]):
            out = list(nodes)
            out[i] = dataclasses.replace(nodes[i], steps=nodes[i].steps + difference)
            return tuple(out)
    return None
