"""Answers to inverse questions in the readout: "make this number X by moving that parameter".

One compact row under the readout's sentence: a menu of targets (the rate at a tick, the first tick under a
share of the peak, the sum of rates, the rate at the end), the boxes the target needs, a menu of the
parameters the core's ``solve.paths`` says can move (in plain words), and a button.  The core's ``solve``
does the work; on success the design is replaced and the row says what moved from what to what; a refusal
(the core's ``ScheduleError``) shows in the row's own message line, and the design stays.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import ipywidgets as W

from ..lengths import parse_length, parse_rate
from ..schedule import Schedule, ScheduleError, complain
from ..inverse import paths, solve
from .entries import WORDS, Entry, number_text, put
from .guard import Panel
from .theme import ERROR_RED, tidy_html

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["SolveRow", "TARGETS", "path_words"]

#: The targets in words (menu order) -> solve's keyword.
TARGETS = (("rate at", "rate"), ("first under a share of the peak at", "under"),
           ("sum of rates (area)", "area"), ("rate at the end", "final"))
#: What the value box holds for each target.
VALUE_WORDS = {"rate": "equal to", "under": "share", "area": "equal to", "final": "equal to"}
GREY = "#4b5563"


def path_words(design: Schedule, path: str) -> str:
    """A parameter path of ``solve`` in the designer's words: ``"target.parts[1].factor"`` -> ``stage 1 · multiply
    by``, ``"steps"`` of a warmup -> ``warmup · length``, a repeat's own parameter -> ``stage 0 · cycles``.

    >>> from schedwidget import drops, flat, warmup
    >>> d = warmup(flat(0.1, steps=5).then(drops(0.1, at=(3,), steps=9)), 2)
    >>> path_words(d, "target.parts[1].factor"), path_words(d, "steps"), path_words(d, "target.parts[0].lr")
    ('stage 1 · multiply by', 'warmup · length', 'stage 0 · rate')
    """
    node: Any = design
    where: list[str] = []
    segments = path.split(".")
    for k, seg in enumerate(segments):
        name, _, index = seg.partition("[")
        last = k == len(segments) - 1
        if last:
            if node.kind == "warmup" and not where:
                where.append("warmup")
            return " · ".join(where + [WORDS.get(name, name).replace("_", " ")])
        held = getattr(node, name)
        if index:
            i = int(index.rstrip("]"))
            if node.kind == "stages" and not any(w.startswith("stage") for w in where):
                where.append(f"stage {i}")
            else:
                where.append(f"{name.replace('_', ' ')} {i}")
            node = held[i]
        else:
            node = held
    return path  # pragma: no cover - the loop returns at the last segment


class SolveRow(Panel, W.VBox):
    """The row (class ``sw-solve``): ``target`` menu, ``at`` box, ``value`` box, ``parameter`` menu, ``button``
    (class ``sw-solve-button``) and the ``message`` line (class ``sw-solve-message``)."""

    def __init__(self, designer: ScheduleDesigner) -> None:
        g = designer.guarded
        small = {"flex": "0 0 auto"}
        self.target = W.Dropdown(options=TARGETS, value="final", description="make the",
                                 tooltip="the number to hit", style={"description_width": "5.5em"},
                                 layout={"width": "19em", **small})
        self.at = Entry(description="at", placeholder="tick", continuous_update=False,
                        tooltip="a tick of the design's clock: 200, '200 ep' or a share of the run '50 %'",
                        style={"description_width": "1.5em"}, layout={"width": "9em", **small})
        self.value = Entry(description="equal to", continuous_update=False,
                           tooltip="the number to hit: a rate (1e-3) or a share of the peak ('1 %')",
                           style={"description_width": "4.5em"}, layout={"width": "11em", **small})
        self.parameter = W.Dropdown(options=[], description="by moving", tooltip="the parameter solve moves "
                                    "(within its declared bounds)", style={"description_width": "5.5em"},
                                    layout={"width": "19em", **small})
        self.button = W.Button(description="Solve", tooltip="move the parameter so the number comes out as asked",
                               layout={"width": "6em", **small})
        self.button.add_class("sw-solve-button")
        self.message = W.HTML("")
        self.message.add_class("sw-solve-message")
        self._said: Schedule | None = None  # the design a message was written for
        self.target.observe(g(self._target_changed), names="value")
        self.button.on_click(g(self._solve))
        row = W.HBox([self.target, self.at, self.value, self.parameter, self.button],
                     layout={"flex_flow": "row wrap", "align_items": "center"})
        super().__init__([row, self.message])
        self.add_class("sw-solve")
        self._target_changed({"new": self.target.value})
        self.listen(designer)

    # ------------------------------------------------------------ showing
    def shows(self) -> Schedule:
        return self.d.schedule

    def paint(self) -> None:
        """Offer the parameters of the current design (keeping the chosen one when it is still there)."""
        s = self.d.schedule
        options = [(path_words(s, p), p) for p, _decl, _v in paths(s)]
        chosen = self.parameter.value
        if list(self.parameter.options) != options:
            self.parameter.options = options
            held = [p for _w, p in options]
            if held:  # the one chosen before when it is still there, else the first (never an empty menu)
                self.parameter.value = chosen if chosen in held else held[0]
        if self._said is not None and self._said != s:
            self._said = None
            put(self.message, "")

    def _target_changed(self, change: dict) -> None:
        what = change["new"]
        put(self.at, what not in ("rate", "under"), "disabled")
        self.value.description = VALUE_WORDS[what]

    # ------------------------------------------------------------ solving
    def ask(self) -> dict[str, Any]:
        """The target as ``solve``'s keyword argument, read from the boxes (ScheduleError when they do not read)."""
        d, what = self.d, self.target.value
        text = self.value.value
        if what in ("rate", "under"):
            tick = parse_length(self.at.value, d.unit, d.steps_per_epoch, d.steps, "solve", "at")
            if what == "rate":
                peak = d.facts.peak if d.facts is not None else None
                return {"rate": (tick, parse_rate(text, peak, "solve", "equal to"))}
            return {"under": (parse_rate(text, 1.0, "solve", "share"), tick)}
        if what == "area":
            try:
                return {"area": float(str(text).replace(",", ""))}
            except ValueError:
                raise complain("solve", "equal to", text, "a number: the sum of the rates over the run") from None
        peak = d.facts.peak if d.facts is not None else None
        return {"final": parse_rate(text, peak, "solve", "equal to")}

    def _solve(self, _button: Any = None) -> None:
        s, path = self.d.schedule, self.parameter.value
        if path is None:
            raise complain("solve", "parameter", None, "a parameter of the design", "this design has none to move")
        words = path_words(s, path)
        try:
            new = solve(s, path, **self.ask())
        except ScheduleError as exc:  # the core says why: shown in this row, the design stays
            self._say(str(exc), ERROR_RED)
            return
        before = {p: v for p, _d, v in paths(s)}[path]
        after = {p: v for p, _d, v in paths(new)}[path]
        self.d.propose(new)
        if self.d.schedule is new:
            self._said = new
            self._say(f"moved {words} from {number_text(before)} to {number_text(after)}", GREY)

    def _say(self, words: str, colour: str) -> None:
        put(self.message, f'<div style="color:{colour};line-height:1.4">{tidy_html(words)}</div>')
        if colour == ERROR_RED:
            self._said = self.d.schedule
