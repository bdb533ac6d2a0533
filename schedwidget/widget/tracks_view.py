"""Companion tracks under the rate curve: momentum, the second Adam beta and weight decay on the rate's clock.

Small multiples: one short figure per companion track the design holds, stacked under the curve panel.  Every
figure uses the curve panel's own x scale (the same object, so the same clock and the same range, also when
the x axis switches between steps and epochs), and a y axis of its own.  Points come from
``schedwidget.sample.trace`` like the rate's.  The track the stages panel edits (``designer.track``: the rate, or a
companion chosen in its 'edit track' menu) is the main curve; every other track is drawn here.

``with_rate`` is the pure part: the designer's tracks with the rate (of one group) replaced, the companions
stretched in proportion when the rate's length changes (they run on the rate's clock).
"""

from __future__ import annotations

import html
import warnings
from dataclasses import replace
from typing import TYPE_CHECKING, Any

import ipywidgets as W
import numpy as np

with warnings.catch_warnings():
    # bqplot 0.13 / bqscales declare traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Figure, LinearScale, Lines

from ..sample import trace
from ..svg import nice_ticks  # one tick rule for the live and static pictures
from ..schedule import Schedule, complain
from ..tracks import TRACK_NAMES, GroupDesigns, Tracks, per_group
from .guard import Panel
from .theme import CURVE, figure_layout, nice_ceiling, rate

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["TracksPanel", "TRACK_COLOURS", "TRACK_WORDS", "with_rate", "with_track", "group_tracks", "TRACK_FIGURE", "as_held",
           "check_group"]

#: A companion's figure: short, the curve figure's side margins (so the x axes line up).
TRACK_FIGURE = (130, {"top": 8, "bottom": 34, "left": 64, "right": 24})
#: Each companion in words (title, y axis) and its colour (muted, so the rate stays the main curve).
TRACK_WORDS = {"rate": ("learning rate", "rate"), "momentum": ("momentum (SGD momentum or the first Adam beta)", "momentum"),
               "beta2": ("second Adam beta", "beta2"), "weight_decay": ("weight decay", "weight decay")}
TRACK_COLOURS = {"rate": CURVE, "momentum": "#7c3aed", "beta2": "#2563eb", "weight_decay": "#9a3412"}
COMPANIONS = TRACK_NAMES[1:]


def group_tracks(held: Tracks | GroupDesigns, group: int) -> Tracks:
    """The tracks of group ``group`` (``held`` itself when it is one set of tracks)."""
    return held if isinstance(held, Tracks) else held.groups[group]


def with_rate(held: Tracks | GroupDesigns, group: int, s: Schedule) -> Tracks | GroupDesigns:
    """``held`` with the rate of group ``group`` replaced by ``s``; companions with a length follow the rate's new
    length in proportion (``stretch``).  Raises ScheduleError when they cannot (an open-ended rate).

    >>> from schedwidget import cosine, flat, ramp, tracks
    >>> t = tracks(cosine(0.1, steps=100), momentum=ramp(0.85, 0.95, steps=100), weight_decay=flat(5e-4))
    >>> w = with_rate(t, 0, cosine(0.1, steps=200))
    >>> w.momentum.length, w.weight_decay.length
    (200, None)
    """
    old = group_tracks(held, group)
    n = s.length
    changes: dict[str, Any] = {"rate": s}
    for name in COMPANIONS:
        c = getattr(old, name)
        if c is None or c.length is None or c.length == n:
            continue
        if n is None:
            raise complain("designer", f"{name} track", c.length, "an open-ended track under an open-ended rate",
                           "the companion tracks run on the rate's clock; give the rate a length first")
        changes[name] = c.stretch(n)
    new = Tracks(**{name: changes.get(name, getattr(old, name)) for name in TRACK_NAMES})
    if isinstance(held, Tracks):
        return new
    groups = list(held.groups)
    groups[group] = new
    return GroupDesigns(tuple(groups), held.names)


def with_track(held: Tracks | GroupDesigns, group: int, name: str, s: Schedule) -> Tracks | GroupDesigns:
    """``held`` with track ``name`` of group ``group`` replaced by ``s`` (the rate: ``with_rate``); a companion
    is checked for its own range and the rate's length (ScheduleError naming the track otherwise).

    >>> from schedwidget import cosine, flat, tracks
    >>> with_track(tracks(cosine(0.1, steps=10), momentum=flat(0.9)), 0, "momentum", flat(0.95)).momentum
    flat(lr=0.95, steps=None)
    """
    if name == "rate":
        return with_rate(held, group, s)
    new = replace(group_tracks(held, group), **{name: s})
    if isinstance(held, Tracks):
        return new
    groups = list(held.groups)
    groups[group] = new
    return GroupDesigns(tuple(groups), held.names)


def as_held(value: Any) -> Tracks | GroupDesigns:
    """A value the designer can hold as tracks: tracks(...), per_group(...), or a list/mapping per_group takes."""
    if isinstance(value, (Tracks, GroupDesigns)):
        return value
    if isinstance(value, (list, tuple, dict)):
        return per_group(value)
    raise complain("ScheduleDesigner", "tracks", value, "tracks(...), per_group(...) or None")


class _Multiple:
    """One companion's figure: a title, a line on the shared x scale, a y axis of its own."""

    def __init__(self, name: str, xs: LinearScale) -> None:
        self.name = name
        self.ys = LinearScale(min=0.0, max=1.0)
        title, axis = TRACK_WORDS[name]
        self.line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": xs, "y": self.ys},
                          colors=[TRACK_COLOURS[name]], stroke_width=1.75)
        self.y_axis = Axis(scale=self.ys, side="left", tick_format=".3~g", label="")
        self.x_axis = Axis(scale=xs, label="", tick_format="~s", num_ticks=6)
        self.figure = Figure(marks=[self.line], axes=[self.x_axis, self.y_axis], animation_duration=0,
                             padding_y=0.05, fig_margin=TRACK_FIGURE[1], layout=W.Layout(**figure_layout(TRACK_FIGURE)))
        self.figure.layout.width = "auto"
        self.figure.add_class("sw-track-figure")
        self.title = W.HTML(f'<span style="font-size:12px;color:#374151">{html.escape(title)}</span>',
                            layout={"margin": "2px 0 -10px 8px"})
        self.box = W.VBox([self.title, self.figure], layout={"display": "none"})
        self.box.add_class(f"sw-track-{name.replace('_', '-')}")

    def draw(self, s: Schedule | None, steps: int, factor: float, tick_format: str, ticks: Any) -> None:
        if s is None:
            if self.box.layout.display != "none":
                self.box.layout.display = "none"
            return
        tr = trace(s, steps)
        y = tr.y
        lo, hi = float(np.min(y)), float(np.max(y))
        span = hi - lo
        if span <= max(abs(hi), 1e-12) * 1e-9:  # a constant: a little room around it
            pad = abs(hi) * 0.1 or 0.1
            bottom, top = max(0.0, lo - pad), hi + pad
        else:
            bottom, top = max(0.0, lo - span * 0.15), hi + span * 0.15
        if self.name == "weight_decay" and bottom < top * 0.25:
            bottom, top = 0.0, nice_ceiling(hi * 1.02) if hi > 0 else 1.0
        with self.ys.hold_sync():
            self.ys.min, self.ys.max = float(bottom), float(top)
        # round labels inside the range (bqplot's own labelled the range's ends: 0.974, 0.000557)
        levels = np.array([float(f"{t:.12g}") for t in nice_ticks(float(bottom), float(top), 3)])
        if self.y_axis.tick_values is None or not np.array_equal(self.y_axis.tick_values, levels):
            self.y_axis.tick_values = levels
        with self.line.hold_sync():
            self.line.x = tr.x * factor
            self.line.y = y
        if self.x_axis.tick_format != tick_format:
            self.x_axis.tick_format = tick_format
        if ticks is not None and (self.x_axis.tick_values is None or not np.array_equal(self.x_axis.tick_values,
                                                                                           ticks)):
            self.x_axis.tick_values = ticks  # the curve's own labels: the clocks read alike
        self.title.tooltip = f"from {rate(float(y[0]))} to {rate(float(y[-1]))}; lowest {rate(lo)}, highest {rate(hi)}"
        if self.box.layout.display != "flex":
            self.box.layout.display = "flex"


class TracksPanel(Panel, W.VBox):
    """The tracks of the designer's current group other than the one edited, under the curve (class
    ``sw-tracks``), each in its own short figure (``multiples[name].figure``) on the curve's x scale."""

    def __init__(self, designer: ScheduleDesigner) -> None:
        self.multiples = {name: _Multiple(name, designer.canvas.xs) for name in TRACK_NAMES}
        self.note = W.HTML('<div style="color:#4b5563;font-size:12px;line-height:1.35">The other tracks on the '
                           "same clock. Choose the track the stages edit with 'edit track'; companions follow the "
                           "rate's length in proportion.</div>")
        self.note.add_class("sw-tracks-note")
        self.problem = W.HTML("")
        self.problem.add_class("sw-tracks-problem")
        super().__init__([m.box for m in self.multiples.values()] + [self.note, self.problem])
        self.add_class("sw-tracks")
        # the x axis's unit switches on the curve panel only (no new revision): follow it too
        designer.canvas.x_choice.observe(designer.guarded(lambda _c: self.heard()), names="value")
        self.listen(designer)  # created inside a change: the revision that ends it draws the tracks

    def shows(self) -> tuple:
        d = self.d
        return d.tracks, d.group, d.track, d.steps, d.clock, d.tracks_problem

    def paint(self) -> None:
        d = self.d
        held = d.tracks
        t = group_tracks(held, d.group) if held is not None else None
        clock = d.clock
        fmt = ",.4~g" if clock.label == "epoch" else "~s"
        for name, m in self.multiples.items():
            shown = None if t is None or name == d.track else getattr(t, name)  # the edited one is the curve
            m.draw(shown, d.steps, clock.factor, fmt, d.canvas.x_axis.tick_values)
        said = d.tracks_problem
        self.problem.value = (f'<div style="color:#b45309;line-height:1.4">&#9888; {html.escape(said)}</div>'
                              if said else "")

    def shown(self) -> tuple[str, ...]:
        """The companions drawn now, in order."""
        return tuple(n for n, m in self.multiples.items() if m.box.layout.display != "none")


def check_group(held: Tracks | GroupDesigns | None, group: int) -> int:
    """``group`` if it is a group of ``held`` (0 for one set of tracks or none), else a ScheduleError."""
    count = len(held) if isinstance(held, GroupDesigns) else 1
    if isinstance(group, bool) or not isinstance(group, int) or not 0 <= group < count:
        raise complain("ScheduleDesigner", "group", group, f"a group index 0 .. {count - 1}")
    return group

