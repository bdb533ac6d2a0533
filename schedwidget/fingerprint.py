"""A short fingerprint of a design: the first 12 hex digits of the SHA-256 of its canonical spec.

The design report prints it and the exported code carries it in its docstring, so a reviewer can tell
that the code in a pull request is the design that was reported.  The canonical spec is ``to_spec``'s
JSON with the unit of the clock always written (``"step"`` when none is given) and without
``steps_per_epoch`` (it only labels epochs beside steps; the rate at every tick does not depend on it),
dumped with sorted keys and no whitespace::

    json.dumps(spec, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)

Every parameter of every node is in that text, so changing any one changes the fingerprint.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any

from .schedule import complain

__all__ = ["fingerprint", "canonical", "docstring_lines", "DIGITS"]

#: Hex digits kept: 48 bits, enough to tell designs apart by eye in a review.
DIGITS = 12


def _parts(design: Any, unit: str | None) -> tuple[Any, str | None]:
    from .spec import Design

    if isinstance(design, Design):
        if unit is not None and unit != design.unit:
            raise complain("fingerprint", "unit", unit, f"None or the design's own unit {design.unit!r}")
        return (design.tracks if design.tracks is not None else design.schedule), design.unit
    return design, unit


def canonical(design: Any, unit: str | None = None) -> str:
    """The canonical spec text the fingerprint hashes (see the module's docstring).

    ``design`` is a Schedule, ``tracks(...)``, ``per_group(...)`` or a ``Design`` (whose unit is used);
    ``unit`` is ``"step"`` or ``"epoch"`` (default ``"step"``).
    """
    from .spec import to_spec

    value, unit = _parts(design, unit)
    spec = to_spec(value, "step" if unit is None else unit)  # checks the value and the unit
    return json.dumps(spec, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def fingerprint(design: Any, unit: str | None = None) -> str:
    """The first ``DIGITS`` hex digits of the SHA-256 of ``canonical(design, unit)``.

    >>> from schedwidget import cosine
    >>> len(fingerprint(cosine(0.1, steps=100)))
    12
    >>> fingerprint(cosine(0.1, steps=100)) == fingerprint(cosine(0.1, steps=100), unit="step")
    True
    >>> fingerprint(cosine(0.1, steps=100)) == fingerprint(cosine(0.1, steps=101))
    False
    """
    return hashlib.sha256(canonical(design, unit).encode("ascii")).hexdigest()[:DIGITS]


def docstring_lines(design: Any, unit: str | None = None) -> list[str]:
    """The lines an exported function's docstring ends with: a blank line and the fingerprint, or none.

    A design no spec file can hold (deeper than ``spec.MAX_DEPTH``, more than ``spec.MAX_NODES`` schedules)
    has no canonical spec and so no fingerprint: its export is written without the line, never refused.

    >>> from schedwidget import cosine
    >>> docstring_lines(cosine(0.1, steps=100))[1].startswith("Fingerprint: ")
    True
    """
    from .schedule import ScheduleError

    try:
        mark = fingerprint(design, unit)
    except ScheduleError:
        return []
    return ["", f"Fingerprint: {mark} (SHA-256 of the design's canonical spec, as its design report shows it)."]
