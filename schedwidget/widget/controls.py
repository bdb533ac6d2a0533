"""One control per declared parameter, generated from its ``Param`` declaration.

kind "rate" -> a log slider over a range around the current value plus a text box
for the exact value (a number, or a share of the stage's peak: ``1 %``); "ticks" ->
a length box that takes ticks, epochs or a share of the run (``3 ep``, ``6 %``,
read by the core's ``budget.parse_length``) with the length in the other units
beside it; "count" -> an integer slider plus an integer box (and an "open-ended"
box when None is allowed); "ratio" -> a slider (log when declared so) plus a text box; "choice" ->
a dropdown; "flag" -> a checkbox; "ticklist" / "points" -> a text box.

Sliders span the declared soft bounds (tick sliders: up to the budget) and
clamp what they show; the text box takes any value, and the core's hard
bounds decide whether it is valid.  Writing a value into a control from code
never reports it back as an edit.

A slider's grid may not hold the exact value (0.05 on a log slider, any value
typed in the box); the browser then snaps the slider to the nearest grid point
and sends that back.  Such an echo (a value *from the browser* less than half a
slider step away from the value the kernel last showed) is ignored: the exact
text box stays authoritative.  A value set from code is never an echo, however
small the change: it always becomes the design, so the box, the slider and the
design agree after any sequence of changes.  Linear
sliders use round steps (1, 2 or 5 times a power of ten) so common values lie
on the grid.  No slider shows a readout of its own: the exact box is beside every
slider (a second number beside it only repeated the box, rounded differently, and a
value of 0 read as a log slider's lowest end).
"""

from __future__ import annotations

import math
from typing import Any, Callable

import ipywidgets as W

from .entries import (CHOICE_WORDS, WORDS, Entry, format_points, from_browser, html_words, number_text, parse_points,
                      parse_ticklist, put, round_step)
from .guard import close_tree
from .positions import POSITION_FORMS, parse_positions, positions_text, positions_words
from ..budget import length_words, parse_length, parse_rate
from ..lengths import ROUNDING
from ..schedule import Param, complain

__all__ = ["ParamControl", "parse_ticklist", "parse_points", "format_points", "Entry", "number_text", "put",
           "WORDS", "LABEL"]

LABEL = {"description_width": "6.5em"}
SLIDER_LAYOUT = {"width": "21em", "flex": "0 0 auto"}
BOX_LAYOUT = {"width": "7em", "flex": "0 0 auto"}
RATE_FLOOR = 1e-8  # where a log slider stops when the declared soft range starts at 0
RATE_SPAN = 1.5    # a rate slider spans this many decades either side of the value it was centred on
#: Words beside a box: on the box's line when 14em are left there, else on a line of their own under it
#: (squeezed beside it they wrapped into a narrow column that ran into the next rows).
WORDS_LAYOUT = {"flex": "1 1 14em", "margin": "0 0 0 6px"}


def _log_range(p: Param) -> tuple[float, float]:
    lo, hi = p.soft if p.soft else (1e-6, 1.0)
    lo = lo if lo > 0 else RATE_FLOOR
    return math.log10(lo), math.log10(hi)


class ParamControl:
    """The control row of one parameter; ``box`` is the widget to lay out.

    ``on_commit(name, value)`` is called when the person changes the value;
    ``show(value, budget)`` writes a value from the design without calling it;
    ``guard`` wraps the change handler (the designer passes one that turns any
    exception into its error message); ``label`` is the words shown (default:
    the parameter's name) in a column ``label_width`` wide.

    Examples
    --------
    >>> from schedwidget.shapes import Cosine
    >>> c = ParamControl("cosine", "peak", Cosine.params()["peak"], 0.1, 1000, print)
    >>> c.text.value
    '0.1'
    """

    def __init__(self, owner: str, name: str, p: Param, value: Any, budget: int,
                 on_commit: Callable[[str, Any], None],
                 guard: Callable[[Callable], Callable] = lambda fn: fn, label: str | None = None,
                 label_width: str | None = None, context: Callable[[], tuple] | None = None,
                 span: Callable[[], tuple[int, int | None]] | None = None) -> None:
        self.owner, self.name, self.p, self.on_commit = owner, name, p, on_commit
        # context() -> (unit, steps per epoch, run total, peak to take shares of); lengths and rates read it
        self.context = context or (lambda: ("step", None, budget, None))
        # span() -> (the stage's first tick on the run's clock, its length[, whether it repeats]): tick lists are
        # positions of the run (of its first cycle when the stage repeats)
        self.span = span or (lambda: (0, None))
        self.value = value
        self.words: W.HTML | None = None
        words = label or WORDS.get(name, name)
        style = {"description_width": label_width} if label_width else LABEL
        self._quiet = 0
        self._shown: float | None = None  # the value the kernel last put into the slider
        self.slider: W.Widget | None = None
        self.text: W.Widget | None = None
        self.none: W.Checkbox | None = None
        tip = p.doc
        # the declaration says which control (p.control) and what a typed share is of (rates: the peak)
        k = self.control = p.control
        self.of_peak = p.kind_of.share_of == "peak"
        self._rate_args = {"description": words, "tooltip": tip, "style": style}
        self._on_value: Callable | None = None  # the slider's observer, kept so a replacement slider gets it
        if k == "log_slider" and self.of_peak:
            self.slider = self._rate_slider(*self._rate_range(value), value)
            self.text = Entry(tooltip=tip + "; a number, or a share of the peak such as 1\u2009%",
                              continuous_update=False, layout=BOX_LAYOUT)
        elif k == "log_slider":
            lo, hi = _log_range(p)
            self.slider = W.FloatLogSlider(min=lo, max=hi, base=10, step=0.01, description=words, tooltip=tip,
                                           readout=False, style=style, layout=SLIDER_LAYOUT)
            self.text = W.FloatText(tooltip=tip, layout=BOX_LAYOUT)
        elif k == "length":
            self.text = Entry(description=words, tooltip=tip + "; steps, epochs ('3 ep') or a share of the run "
                              "('6\u2009%'); " + ROUNDING, continuous_update=False,
                              style=style, layout={"width": "13em", "flex": "0 0 auto"})
            self.text.add_class("sw-length")
            self.words = W.HTML("", layout=WORDS_LAYOUT)
            self.words.add_class("sw-length-words")
            if p.optional:  # a stage's own length: None is open-ended; any other length: None means "not set"
                unset = "open-ended" if name == "steps" else "not set"
                self.none = W.Checkbox(description=unset, indent=False, tooltip="None: " + tip,
                                       layout={"width": "8.5em", "min_width": "8.5em", "flex": "0 0 auto"})
        elif k == "slider":
            lo, hi = p.soft if p.soft else (p.lo or 0.0, p.hi or 1.0)
            self.slider = W.FloatSlider(min=lo, max=hi, step=round_step(lo, hi), description=words, tooltip=tip,
                                        readout=False, style=style, layout=SLIDER_LAYOUT)
            self.text = W.FloatText(tooltip=tip, layout=BOX_LAYOUT)
            if p.optional:  # None is allowed: a box to leave the value unset (the shape then works it out)
                self.none = W.Checkbox(description="not set", indent=False, tooltip="None: " + tip,
                                       layout={"width": "6em", "min_width": "6em", "flex": "0 0 auto"})
                self.slider.layout.width = "14em"
        elif k == "int_slider":
            self.slider = W.IntSlider(min=self._int_lo(), max=self._int_hi(budget, value), description=words,
                                      tooltip=tip, readout=False, style=style, layout=SLIDER_LAYOUT)
            self.text = W.IntText(tooltip=tip, layout=BOX_LAYOUT)
            if p.optional:
                self.none = W.Checkbox(description="open-ended", indent=False, tooltip="None: " + tip,
                                       layout={"width": "8.5em", "min_width": "8.5em", "flex": "0 0 auto"})
                self.slider.layout.width = "14.5em"
        elif k == "dropdown":
            said = CHOICE_WORDS.get(name, {})
            self.text = W.Dropdown(options=[(said.get(c, str(c)), c) for c in p.choices], description=words,
                                   tooltip=tip, style=style)
        elif k == "checkbox":
            self.text = W.Checkbox(description=words, tooltip=tip, indent=False)
        elif k == "ticklist":
            self.text = W.Text(description=words, tooltip="positions on the run's clock, counted from the start of "
                               "the run: " + POSITION_FORMS, continuous_update=False, style=style,
                               layout={"width": "22em", "flex": "0 0 auto"})  # '30 ep; 60 ep; 80 ep' whole
            self.text.add_class("sw-positions")
            self.words = W.HTML("", layout=WORDS_LAYOUT)
            self.words.add_class("sw-positions-words")
        elif k == "points":
            self.text = W.Text(description=words, tooltip=tip, continuous_update=False, style=style,
                               layout={"width": "23em"})
        else:
            raise complain("designer", f"{owner}.{name}", k, "a control the designer shows for a value "
                           "(log_slider, slider, int_slider, length, dropdown, checkbox, ticklist, points)")
        if self.text is not None and k not in ("dropdown", "checkbox"):
            self.text.add_class("sw-value")
        self.show(value, budget)
        parts = [w for w in (self.slider, self.text, self.none) if w is not None]
        self._on_value = guard(self._edited)
        for w in parts:
            w.observe(self._on_value, names="value")
        self.box = W.HBox(parts + ([self.words] if self.words is not None else []),
                          layout={"align_items": "center", "flex_flow": "row wrap"})

    # ---------------------------------------------------------------- ranges
    def _rate_slider(self, lo: float, hi: float, value: Any = None) -> W.FloatLogSlider:
        kw = {} if not isinstance(value, (int, float)) or not lo <= math.log10(max(value, 1e-300)) <= hi \
            else {"value": value}
        slider = W.FloatLogSlider(min=lo, max=hi, base=10, step=0.01, readout=False, layout=SLIDER_LAYOUT,
                                  **self._rate_args, **kw)
        slider.add_class("sw-rate")
        return slider

    def _recentre(self, value: float) -> None:
        """Put a rate slider around ``value`` by replacing it with a new slider built there (the old one closed).

        Moving a shown slider's range cannot be made safe: a browser applies a message's keys in an order of its
        own and re-snaps its value to the new grid when the range moves, sends that back, and then drops the
        kernel's value while its own is unanswered (3e-4 typed became 0.0095 or 0.00316). A new slider arrives
        with its range and value as one consistent first state.
        """
        old, new = self.slider, self._rate_slider(*self._rate_range(value), value)
        new.layout.width = old.layout.width  # a panel may have widened its sliders
        if self._on_value is not None:
            new.observe(self._on_value, names="value")
        self.slider, self._shown = new, value
        box = getattr(self, "box", None)
        if box is not None:
            box.children = tuple(new if w is old else w for w in box.children)
        close_tree(old)

    def _int_lo(self) -> int:
        return int(self.p.soft[0]) if self.p.soft else int(self.p.lo or 0)

    def _int_hi(self, budget: int, value: Any) -> int:
        # an int slider is a count (cycles, patience): its usual range; lengths are text boxes (control "length")
        return int(self.p.soft[1]) if self.p.soft else 100

    def _rate_range(self, value: Any) -> tuple[float, float]:
        """Exponents of a rate slider: RATE_SPAN decades either side of ``value`` (of the soft range when 0)."""
        if isinstance(value, (int, float)) and value > 0 and math.isfinite(value):
            c = math.log10(value)  # not rounded: the value sits exactly on the slider's grid, so nothing snaps
            return c - RATE_SPAN, c + RATE_SPAN
        return _log_range(self.p)

    def _slider_bounds(self) -> tuple[float, float]:
        s = self.slider
        if isinstance(s, W.FloatLogSlider):
            return s.base ** s.min, s.base ** s.max
        return s.min, s.max

    # ------------------------------------------------------------------ sync
    def show(self, value: Any, budget: int | None = None) -> None:
        """Write ``value`` (from the design) into the widgets; compares before writing, reports nothing."""
        self._quiet += 1
        try:
            k = self.control
            if isinstance(self.slider, W.IntSlider) and budget is not None:
                hi = self._int_hi(budget, value)
                if self.slider.max != hi:
                    self.slider.max = hi
            if self.none is not None:
                put(self.none, value is None)
                for w in (self.slider, self.text):
                    if w is not None:
                        put(w, value is None, "disabled")
                if value is None and self.slider is None:
                    self.value = value
                    put(self.text, "")
                    put(self.words, "")
                    return
                if value is None:  # park the slider where unticking "open-ended" should start from
                    put(self.slider, min(self.slider.min + 1, self.slider.max))
                    return
            self.value = value
            if k == "length":
                put(self.text, number_text(value))
                unit, spe, total, _peak = self.context()
                put(self.words, html_words(length_words(value, unit, spe, total)))
                return
            if k == "log_slider" and self.of_peak and isinstance(value, (int, float)):
                lo, hi = self.slider.min, self.slider.max
                v = math.log10(value) if value > 0 else None
                if v is not None and not (lo + 0.2 <= v <= hi - 0.2):  # near an end: centre on the value
                    self._recentre(value)
            if k == "ticklist":
                unit, spe, _total, _peak = self.context()
                start, _length, *repeats = self.span()
                put(self.text, positions_text(tuple(value), start, unit, spe))
                put(self.words, html_words(positions_words(tuple(value), start, unit, spe, bool(repeats and repeats[0]))))
            elif k == "points":
                put(self.text, format_points(value))
            else:
                put(self.text, value)
            if self.slider is not None:
                lo, hi = self._slider_bounds()
                shown = min(max(value, lo), hi)
                put(self.slider, shown)
                self._shown = shown
        finally:
            self._quiet -= 1

    def is_echo(self, value: Any) -> bool:
        """Whether a slider value is the browser snapping the shown value to its grid (under half a step away).

        Only a value that came from the browser can be an echo; one set from code is always an edit.
        """
        s, ref = self.slider, self._shown
        if ref is None or not isinstance(s, (W.FloatSlider, W.FloatLogSlider)) or not from_browser(s, "value"):
            return False
        if isinstance(s, W.FloatLogSlider):
            if not (value > 0 and ref > 0):
                return False
            gap = abs(math.log(value, s.base) - math.log(ref, s.base))
        else:
            gap = abs(value - ref)
        # the browser snaps to the nearest grid point, so an echo is at most half a step away; a drag or a
        # key press from the slider's position moves a whole step, so it lands at least half a step away
        return gap < 0.5 * s.step * (1 - 1e-9)

    def _slider_value(self, value: float) -> float:
        """A moved slider's value, rounded to what its grid can mean (no 0.10000000000000002)."""
        s = self.slider
        if isinstance(s, W.FloatLogSlider):
            return float(f"{value:.3g}")
        if isinstance(s, W.FloatSlider):
            digits = max(0, -math.floor(math.log10(s.step))) + 1
            return round(value, digits)
        return value

    def _edited(self, change: dict) -> None:
        if self._quiet:
            return
        w = change["owner"]
        if w is self.slider and self.is_echo(change["new"]):
            self._shown = change["new"]  # later moves are whole steps from here
            return
        if w is self.none:
            if self.slider is None:  # a length: back to the whole run when open-ended is unticked
                value = None if change["new"] else max(1, int(self.context()[2] or 1))
            else:
                value = None if change["new"] else self.slider.value
        elif self.control == "ticklist":
            unit, spe, total, _peak = self.context()
            start, length, *repeats = self.span()
            value = parse_positions(change["new"], unit, spe, total, start, length, self.owner,
                                    WORDS.get(self.name, self.name), bool(repeats and repeats[0]))
        elif self.control == "points":
            value = parse_points(self.owner, self.name, change["new"])
        elif self.control == "length" and w is self.text:
            unit, spe, total, _peak = self.context()
            value = parse_length(change["new"], unit, spe, total, self.owner, self.name, int(self.p.lo or 0))
        elif self.of_peak and w is self.text:
            value = parse_rate(change["new"], self.context()[3], self.owner, self.name)
        elif w is self.slider:
            value = self._slider_value(change["new"])
        else:
            value = change["new"]
        self.on_commit(self.name, value)
        if w is self.slider and self.text is not None and self.none is None:
            # a moved slider shows what the design now holds, also when its value rounded to the design's
            # own (no redraw then, so nothing else would put it back)
            self.show(self.value)
        elif w is self.text and (self.control in ("length", "ticklist") or self.of_peak):
            self.show(self.value)  # "3 ep" or "1 %" is shown as the value it became

    def widgets(self) -> list[W.Widget]:
        """Every widget of this row."""
        return [w for w in (self.slider, self.text, self.none) if w is not None]
