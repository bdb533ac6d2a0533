"""The text boxes' side of the controls: a box that takes numbers from code, the text shown for a value, the
readers of typed tick lists and knots, and the small helpers that write into widgets without echoes.

``controls.py`` builds the rows from these; the names stay importable from there.
"""

from __future__ import annotations

import math
from typing import Any

import ipywidgets as W
from traitlets import Any as AnyTrait
from traitlets import validate

from ..schedule import as_whole, complain
from .theme import pct

__all__ = ["Entry", "number_text", "WORDS", "CHOICE_WORDS", "parse_ticklist", "parse_points", "format_points", "round_step",
           "html_words", "from_browser", "put"]


class Entry(W.Text):
    """A text box that also takes a number assigned from code (shown as its text)."""

    value = AnyTrait("", help="the text (a number assigned from code becomes its text)").tag(sync=True)

    @validate("value")
    def _as_text(self, proposal: dict) -> str:
        v = proposal["value"]
        return v if isinstance(v, str) else number_text(v)


def number_text(v) -> str:
    """The text a box shows for a value: whole numbers with thousands separators, rates exactly.

    >>> number_text(3450), number_text(0.1003), number_text(3e-06), number_text(0.0)
    ('3,450', '0.1003', '3e-06', '0')
    """
    if isinstance(v, bool) or v is None:
        return str(v)
    if isinstance(v, int):
        return f"{v:,}"
    return "0" if v == 0 else repr(float(v))


#: Words shown for parameter names (the name itself when absent).
WORDS = {"steps": "length", "peak": "peak rate", "floor": "end rate", "start": "start rate", "end": "end rate",
         "lr": "rate", "every": "every", "at": "drops at", "factor": "multiply by", "power": "power",
         "warmup": "rise over", "low": "low rate", "high": "high rate", "final": "final rate",
         "half_period": "half period", "curve": "curve", "cycles": "cycles", "growth": "growth",
         "peak_decay": "peak decay", "points": "points", "up": "rising share", "rise": "rising share",
         "tail": "tail share", "phases": "phases", "ends": "phase ends", "fall": "fall over", "shrink": "shrink by",
         "interp": "between points", "place": "goes"}

#: Choices in words, by parameter name: (words, value) pairs for the menu (a choice not listed shows as itself).
CHOICE_WORDS = {"place": {"before": "before the decay", "over": "laid over the decay's first ticks"}}


def parse_ticklist(owner: str, name: str, text: str) -> tuple[int, ...]:
    """``"30, 60, 80"`` -> ``(30, 60, 80)``; the core then checks the order and bounds.

    >>> parse_ticklist("drops", "at", "30, 60,80")
    (30, 60, 80)
    """
    out = []
    for i, part in enumerate(p.strip() for p in text.replace(";", ",").split(",")):
        if not part:
            continue
        try:
            v = float(part.replace("_", ""))
        except ValueError:
            raise complain(owner, f"{name}[{i}]", part, "a whole number of ticks",
                           "write the ticks separated by commas, e.g. 30, 60, 80") from None
        w = as_whole(v)
        if w is None:
            raise complain(owner, f"{name}[{i}]", part, "a whole number of ticks")
        out.append(w)
    return tuple(out)


def parse_points(owner: str, name: str, text: str) -> tuple[tuple[int, float], ...]:
    """``"0: 0.1, 500: 0.01"`` -> ``((0, 0.1), (500, 0.01))``; the core checks the rest.

    >>> parse_points("knots", "points", "0: 0.1, 500: 0.01")
    ((0, 0.1), (500, 0.01))
    """
    out = []
    for i, part in enumerate(p.strip() for p in text.split(",")):
        if not part:
            continue
        tick, sep, rate = part.partition(":")
        try:
            t, y = float(tick.replace("_", "")), float(rate)
        except ValueError:
            t = y = math.nan
        if not sep or as_whole(t) is None or not math.isfinite(y):
            raise complain(owner, f"{name}[{i}]", part, "a pair tick: rate",
                           "write the knots as tick: rate, separated by commas, e.g. 0: 0.1, 500: 0.01")
        out.append((as_whole(t), y))
    return tuple(out)


def format_points(points) -> str:
    """The text a points box shows: ``"0: 0.1, 500: 0.01"``."""
    return ", ".join(f"{t}: {y!r}" for t, y in points)


def round_step(lo: float, hi: float, positions: int = 200) -> float:
    """A round slider step (1, 2 or 5 x 10^k) giving at least ``positions`` steps over ``lo..hi``.

    >>> round_step(0.05, 0.9), round_step(0.0, 0.05)
    (0.002, 0.0002)
    """
    raw = (hi - lo) / positions
    if not raw > 0:
        return 1.0
    k = math.floor(math.log10(raw))
    for m in (5, 2, 1):
        step = m * 10.0 ** k
        if step <= raw * (1 + 1e-9):
            return float(f"{step:.12g}")
    return float(f"{10.0 ** k:.12g}")  # pragma: no cover - m=1 always fits


def html_words(text: str) -> str:
    """Grey words beside a box (``%`` with a thin space, as everywhere in the widget)."""
    return f'<span style="color:#4b5563;font-size:12px">{pct(text)}</span>' if text else ""


def from_browser(widget: W.Widget, trait: str) -> bool:
    """Whether the change of ``trait`` being observed now came from the front end.

    ipywidgets applies a front-end update under a lock on the traits it sets and fires the observers
    before releasing it (``Widget.set_state``: "Properties must be locked when ... notifications are
    fired"); a value assigned from Python is never under that lock.
    """
    return trait in getattr(widget, "_property_lock", {})


def put(widget: W.Widget, value: Any, trait: str = "value") -> None:
    """Assign only when different (so no change event goes out for nothing)."""
    if getattr(widget, trait) != value:
        setattr(widget, trait, value)
