"""Positions typed on the run's clock: "drop at epoch 30 of the run", whatever stages come before.

A drops stage keeps its drops on its own clock (DESIGN.md section 2: a stage's ticks
count from its start).  People think of them on the run's clock, so the designer's
"drops at" box reads and shows positions *of the run*: ``30 ep`` is epoch 30 counted
from the start of the run; the box beside it says where that is in the stage
(``= 25 ep into this stage`` after a 5-epoch warmup).  A ``+`` in front counts from
the stage's own start instead (``+25 ep``).  The conversion uses the stage's start on
the run's clock; a position at or before the stage's start, or at or after its end,
is refused with a message that names the box and the forms it takes.  Pure: no widgets.
"""

from __future__ import annotations

import re

from ..budget import parse_length
from ..schedule import ScheduleError, complain
from .theme import epochs

__all__ = ["POSITION_FORMS", "parse_positions", "positions_text", "positions_words", "split_items"]

BOX = "drops at"
POSITION_FORMS = ("a position of the run: 34500, '30 ep' (epoch 30 of the run), '33 %' of the run, or '+25 ep' "
                  "from this stage's start; commas or semicolons between positions")
#: A comma followed by exactly three digits is a thousands separator (34,500), any other comma separates items.
_SEPARATOR = re.compile(r";|,(?!\d{3}(?!\d))")


def split_items(text: str) -> list[str]:
    """The items of a typed list: ``"30 ep, 60 ep"``, ``"34,500; 69,000"``, ``"30,60,80"``.

    >>> split_items("34,500; 69,000"), split_items("30,60, 80"), split_items("30 ep, +5 ep")
    (['34,500', '69,000'], ['30', '60', '80'], ['30 ep', '+5 ep'])
    """
    return [p.strip() for p in _SEPARATOR.split(str(text)) if p.strip()]


def _where(tick: int, unit: str, spe: int | None) -> str:
    """A run position in words: ``step 3,450 (epoch 3)`` or ``epoch 30``."""
    words = f"{unit} {tick:,}"
    if unit == "step" and spe:
        words += f" (epoch {epochs(tick / spe)})"
    return words


def parse_positions(text: str, unit: str, spe: int | None, total: int | None, start: int, length: int | None,
                    owner: str = "drops", box: str = BOX, cycle: bool = False) -> tuple[int, ...]:
    """Typed positions on the run's clock, as ticks on the stage's own clock (what the core's ``at`` holds).

    ``start`` is the stage's first tick on the run's clock and ``length`` its length (None: open-ended).
    Every position must lie inside the stage, after its first tick and before its end.  ``cycle``: the stage
    repeats, ``length`` is its first cycle's, and the positions are read in that first cycle.

    >>> parse_positions("30 ep, 60 ep", "step", 1150, 103_500, 5750, 97_750)
    (28750, 63250)
    >>> parse_positions("+25 ep", "step", 1150, 103_500, 5750, 97_750)
    (28750,)
    """
    items = split_items(text)
    if not items:
        raise complain(owner, box, text, "at least one position, " + POSITION_FORMS, "with no drops use a constant")
    end = None if length is None else start + length
    out: list[int] = []
    for i, item in enumerate(items):
        into = item.startswith("+")
        body = item[1:].strip() if into else item
        try:
            tick = parse_length(body, unit, spe, total, owner, box)
        except ScheduleError:
            raise complain(owner, f"{box} item {i + 1}", item, POSITION_FORMS) from None
        run = start + tick if into else tick
        if run <= start or (end is not None and run >= end):
            span = f"after {_where(start, unit, spe)}" + ("" if end is None else f" and before {_where(end, unit, spe)}")
            side = "at or before the stage's start" if run <= start else "at or after the stage's end"
            where = "the first cycle of this stage" if cycle else "this stage"
            raise complain(owner, f"{box} item {i + 1}", item, f"inside {where}, {span} of the run, written as "
                           + POSITION_FORMS, f"it is {_where(run, unit, spe)} of the run, {side}")
        if out and run - start <= out[-1]:
            raise complain(owner, f"{box} item {i + 1}", item,
                           f"a position after item {i} ({_where(start + out[-1], unit, spe)} of the run)",
                           "ticks must increase strictly: sort them and remove duplicates")
        out.append(run - start)
    return tuple(out)


def _as_epochs(ticks: list[int], unit: str, spe: int | None) -> list[str] | None:
    """``['30 ep', '60 ep']`` when every tick is a whole epoch of a step clock, else None."""
    if unit != "step" or not spe or any(t % spe for t in ticks):
        return None
    return [f"{t // spe:,} ep" for t in ticks]


def positions_text(at: tuple[int, ...], start: int, unit: str, spe: int | None) -> str:
    """What the box shows: the positions on the run's clock (whole epochs as ``30 ep``), separated by ``; ``.

    >>> positions_text((28750, 63250), 5750, "step", 1150), positions_text((28740,), 5750, "step", 1150)
    ('30 ep; 60 ep', '34,490')
    """
    run = [start + t for t in at]
    return "; ".join(_as_epochs(run, unit, spe) or [f"{t:,}" for t in run])


def positions_words(at: tuple[int, ...], start: int, unit: str, spe: int | None, cycle: bool = False) -> str:
    """Beside the box, in plain words: positions count from the start of the run, and where they are in the stage.

    >>> positions_words((28750,), 5750, "step", 1150)
    'counted from the start of the run = 25 ep into this stage'
    >>> positions_words((30,), 0, "epoch", None)
    'counted from the start of the run (where this stage starts)'
    """
    if start == 0:
        if cycle:
            return "counted from the start of the run, in the first cycle (every cycle repeats them)"
        return "counted from the start of the run (where this stage starts)"
    ticks = list(at)
    shown = _as_epochs(ticks, unit, spe) or [f"{t:,}" for t in ticks]
    tail = "" if _as_epochs(ticks, unit, spe) else f" {unit}s"
    where = "into each cycle of this stage" if cycle else "into this stage"
    return f"counted from the start of the run = {'; '.join(shown)}{tail} {where}"
