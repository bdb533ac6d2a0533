"""The curve panel: one bqplot figure, built once, whose marks get new arrays on every change.

Points come only from ``schedwidget.sample.trace`` (a bounded number whatever
the budget; jumps as vertical edges at their exact tick; cycles shorter than a
pixel as their min/max band), so drawing cost does not grow with the budget.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
import warnings
from typing import TYPE_CHECKING, Any, Sequence

import ipywidgets as W
import numpy as np

with warnings.catch_warnings():
    # bqplot 0.13 / bqscales declare traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Bars, Figure, LinearScale, Lines, OrdinalScale

from ..sample import Trace, trace
from ..schedule import Schedule
from ..svg import nice_ticks  # one tick rule for the live and static curves
from .guard import Panel
from .theme import (CURVE, CURVE_FIGURE, GHOSTS, HOVER, JOIN, TOGGLE, RateAxes, epochs, figure_layout, legend_html,
                    rate)

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["CurvePanel", "CURVE", "JOIN", "GHOSTS", "MAX_JOIN_LINES", "LOG_FLOOR"]

MAX_JOIN_LINES = 200                                        # more joins than this are not drawn one by one
LOG_FLOOR = 1e-5                                            # on the log axis nothing is drawn below peak * this
HOVER_BANDS = 400                                           # hover reads the x axis in this many bands


@dataclass(frozen=True)
class Clock:
    """How ticks of the design's clock map to the x axis."""

    unit: str                     # "step" or "epoch": the design's clock
    steps_per_epoch: int | None
    axis: str                     # "steps" or "epochs": what the x axis shows

    @property
    def factor(self) -> float:
        """x = tick * factor."""
        if self.axis == "epochs" and self.unit == "step" and self.steps_per_epoch:
            return 1.0 / self.steps_per_epoch
        if self.axis == "steps" and self.unit == "epoch" and self.steps_per_epoch:
            return float(self.steps_per_epoch)
        return 1.0

    @property
    def label(self) -> str:
        if self.factor == 1.0:
            return "epoch" if self.unit == "epoch" else "step"
        return "epoch" if self.axis == "epochs" else "step"


class CurvePanel(Panel, W.VBox):
    """The figure, its two toggles (rate axis, x axis) and the hover readout.

    It shows the designer's design over its budget and its pins: the curve is drawn again when
    the design, the budget, the clock or an axis changes; a pin's ghost is traced once when it is
    pinned and drawn again only when the axes change (``ghost_traces`` counts the traces).
    ``draw(s, steps, clock)`` puts a design on the figure; ``ghost(i, pin)`` draws pin ``i``.
    Marks: ``curve`` (teal), ``ghosts`` (five greys), ``joins`` (dotted slate, on a 0..1 scale
    so they always span the plot).
    """

    def __init__(self, designer: ScheduleDesigner, axis: str = "steps") -> None:
        self.xs = LinearScale(min=0.0, max=1.0, allow_padding=False)
        self.rates = RateAxes()
        self.ys_linear, self.ys_log = self.rates.linear_scale, self.rates.log_scale
        self.unit_scale = LinearScale(min=0.0, max=1.0)
        # unused ghosts sit on a scale of their own, so their placeholder data never reaches the rate axis
        self.parking = LinearScale(min=0.0, max=1.0)
        ys = {"x": self.xs, "y": self.ys_linear}
        self.curve = Lines(x=np.zeros(1), y=np.zeros(1), scales=dict(ys), colors=[CURVE], stroke_width=2,
                           labels=["current"], display_legend=False)
        self.ghosts = [Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.parking}, colors=[g],
                             stroke_width=1.5,
                             labels=[""], visible=False, display_legend=False, opacities=[0.9])
                       for g in GHOSTS]
        self.joins = Lines(x=np.zeros((1, 2)), y=np.array([[0.0, 1.0]]),
                           scales={"x": self.xs, "y": self.unit_scale}, colors=[JOIN], line_style="dotted",
                           stroke_width=1, visible=False, labels=["stage joins"])
        # hover: transparent full-height bands over the plot; entering one reads its x (no click needed)
        self.band_scale = OrdinalScale()
        self.bands = Bars(x=np.arange(HOVER_BANDS), y=np.ones(HOVER_BANDS), scales={"x": self.band_scale,
                          "y": self.unit_scale}, padding=0.0, colors=["#ffffff"], opacities=[0.0], stroke=None,
                          interactions={"hover": "tooltip"}, tooltip=None, base=-1.0, apply_clip=True)
        self.hover_line = Lines(x=np.zeros((1, 2)), y=np.array([[0.0, 1.0]]), scales={"x": self.xs,
                                "y": self.unit_scale}, colors=[HOVER], stroke_width=1, visible=False)
        self.x_axis = Axis(scale=self.xs, label="step", tick_format="~s", num_ticks=6, label_offset="32px")
        self.figure = Figure(marks=[self.joins, *self.ghosts, self.curve, self.hover_line, self.bands],
                             axes=[self.x_axis, *self.rates.axes],
                             animation_duration=0, padding_y=0.05,
                             fig_margin=CURVE_FIGURE[1], layout=W.Layout(**figure_layout(CURVE_FIGURE)))
        self.figure.add_class("sw-curve")
        # the column's width exactly (width 100% plus the figure's own margin ran 2 px past the designer)
        self.figure.layout.width = "auto"
        self.bands.on_hover(designer.guarded(self._band_hovered))
        # the rate axis's title sits above the axis (a title beside it would cross long tick labels)
        self.y_title = W.HTML("<span style=\"font-size:12px;color:#374151\">learning rate</span>",
                              layout={"margin": "0 0 -14px 8px"})
        self.y_title.add_class("sw-y-title")
        # names of the lines: a compact legend in a row above the plot, never on the curves or outside the figure
        self.legend = W.HTML("", layout={"margin": "0 0 4px 8px"})
        self.legend.add_class("sw-legend")
        self.rate_axis = W.ToggleButtons(options=["linear", "log"], value="linear", description="rate axis",
                                         tooltip="linear or logarithmic rate axis",
                                         style={"button_width": "5em", "description_width": "5em"},
                                         layout=TOGGLE)
        self.x_choice = W.ToggleButtons(options=["steps", "epochs"], value=axis, description="x axis",
                                        tooltip="ticks of the x axis: optimizer steps or epochs",
                                        style={"button_width": "6em", "description_width": "4em"},
                                        layout={**TOGGLE, "margin": "2px 0 2px 16px"})
        self.hover_label = W.Label("point at the curve to read the step, epoch and rate there",
                                   layout={"min_height": "1.6em"})
        self.hover_label.add_class("sw-hover")
        self.current: Trace | None = None
        self._tops: dict[object, float] = {}  # right end of each drawn curve, in x-axis units
        self.clock = Clock("step", None, "steps")
        self.peak = 1.0
        self.log_bottom = 1e-6
        self._ghosts: dict[int, tuple] = {}         # slot -> (pin, its trace): traced once per pin
        self._ghost_keys: dict[int, tuple] = {}     # slot -> what its mark shows now
        self.ghost_traces = 0
        self._hover_x: float | None = None          # where the pointer was last (x-axis units)
        self._ends: dict[object, tuple] = {}        # "current" or slot -> (last x, last y, lowest y, highest y, name)
        super().__init__([self.legend, self.y_title, self.figure, W.HBox([self.rate_axis, self.x_choice],
                                                     layout={"flex_flow": "row wrap"}), self.hover_label])
        g = designer.guarded
        self.rate_axis.observe(g(self._axes_changed), names="value")
        self.x_choice.observe(g(lambda _c: self.redraw()), names="value")
        self.add_class("sw-canvas")
        self.listen(designer)

    # ----------------------------------------------------------------- panel
    def shows(self) -> tuple:
        d = self.d
        return d.schedule, d.steps, d.clock, self.rate_axis.value, d.pinned

    def paint(self) -> None:
        d = self.d
        for i in range(len(self.ghosts)):
            self.ghost(i, d.pinned[i] if i < len(d.pinned) else None)
        self.draw(d.schedule, d.steps, d.clock)
        if self._hover_x is not None:
            self.hover_at(min(self._hover_x, float(self.xs.max)))  # the hover line reads the new design

    def _axes_changed(self, change: dict) -> None:
        self.use_log(change["new"] == "log")
        self.redraw()

    def _band_hovered(self, _mark: Any, event: dict) -> None:
        data = event.get("data") or {}
        i = data.get("index", data.get("x"))
        if i is None:
            return
        self.hover_at((float(i) + 0.5) / HOVER_BANDS * float(self.xs.max or 1.0))

    def hover_at(self, x: float | None) -> None:
        """Read the design at the x-axis position ``x`` (what pointing at the plot does) and mark it."""
        self._hover_x = x
        words = self.read(self.d.schedule, None if x is None else [x])
        if words and self.hover_label.value != words:
            self.hover_label.value = words
            t = self.tick_at(x)
            exact = float(self.d.schedule(t)) if t is not None else None
            tip = f"rate exactly {exact!r}" if exact is not None and rate(exact) == "~0" else ""
            if self.hover_label.tooltip != tip:
                self.hover_label.tooltip = tip  # a tiny rate reads ~0; its exact value on hover
        if x is not None:
            with self.hover_line.hold_sync():
                self.hover_line.x = np.array([[x, x]])
                self.hover_line.visible = True

    # ----------------------------------------------------------------- marks
    def _y(self, y: np.ndarray) -> np.ndarray:
        """Rates as drawn: unchanged on the linear axis; on the log axis a rate of 0 sits a decade
        below the current curve's smallest positive rate (and nothing goes below peak * LOG_FLOOR)."""
        if self.rate_axis.value == "log":
            return np.maximum(np.where(y > 0, y, self.log_bottom), self.peak * LOG_FLOOR)
        return y

    def _set_log_bottom(self, y: np.ndarray) -> None:
        positive = y[y > 0]
        low = float(positive.min()) / 10.0 if positive.size else 1e-6
        self.log_bottom = max(low, self.peak * LOG_FLOOR if self.peak > 0 else 0.0)

    def _log_ticks(self) -> None:
        """Powers of ten on the log axis (the axis picks its own ticks on the linear one)."""
        if self.rate_axis.value != "log":
            return
        lo, hi = self._span()
        self.rates.fit_log(lo, hi)

    def draw(self, s: Schedule, steps: int, clock: Clock) -> Trace:
        """Trace ``s`` over ``steps`` ticks and give the curve and join marks their new arrays."""
        tr = trace(s, steps)
        self.current, self.clock = tr, clock
        self.peak = float(np.max(tr.y)) if tr.y.size else 1.0
        self._set_log_bottom(tr.y)
        f = clock.factor
        with self.curve.hold_sync():
            self.curve.x = tr.x * f
            self.curve.y = y = self._y(tr.y)
        self._ends["current"] = self._end_of(self.curve.x, y, "current")
        self._tops["current"] = max(tr.steps - 1, 1) * f
        self._fit_x()
        self._fit_y()
        self._log_ticks()
        joins = tr.joins[:MAX_JOIN_LINES] * f
        with self.joins.hold_sync():
            if joins.size:
                self.joins.x = np.stack([joins, joins], axis=1)
                self.joins.y = np.tile([0.0, 1.0], (joins.size, 1))
                if len(self.joins.colors) != joins.size:
                    self.joins.colors = [JOIN] * int(joins.size)
            self.joins.visible = bool(joins.size)
        if self.x_axis.label != clock.label:
            self.x_axis.label = clock.label
        fmt = ",.4~g" if clock.label == "epoch" else "~s"  # no SI prefixes on an epoch axis
        if self.x_axis.tick_format != fmt:
            self.x_axis.tick_format = fmt
        self._legend()
        return tr

    def ghost(self, i: int, pin: Any | None) -> None:
        """Draw pin ``i`` (None hides it): traced once per pin, its ticks mapped with its own clock."""
        m = self.ghosts[i]
        if pin is None:
            self._ends.pop(i, None)
            self._ghosts.pop(i, None)
            self._ghost_keys.pop(i, None)
            self._tops.pop(i, None)
            if m.visible:
                with m.hold_sync():
                    m.visible = m.display_legend = False
                    m.scales = {"x": self.xs, "y": self.parking}
            return
        clock = self.d.clock_for(pin.unit, pin.steps_per_epoch)
        key = (pin, clock, self.rate_axis.value)
        if self._ghost_keys.get(i) == key:
            return
        if i not in self._ghosts or self._ghosts[i][0] != pin:
            self._ghosts[i] = (pin, trace(pin.schedule, pin.steps))
            self.ghost_traces += 1
        tr = self._ghosts[i][1]
        f = clock.factor
        with m.hold_sync():
            m.x = x = tr.x * f
            m.y = y = self._own_y(tr.y)
            m.labels = [pin.name]
            m.visible = True
            if m.scales.get("y") is not self.rate_scale:
                m.scales = {"x": self.xs, "y": self.rate_scale}
        self._ends[i] = self._end_of(x, y, pin.name)
        self._ghost_keys[i] = key
        self._tops[i] = max(tr.steps - 1, 1) * f

    def _own_y(self, y: np.ndarray) -> np.ndarray:
        """A ghost's rates as drawn: on the log axis its zeros sit a decade below its own smallest positive rate
        (so a ghost does not move when the current design changes)."""
        if self.rate_axis.value != "log":
            return y
        positive = y[y > 0]
        peak = float(np.max(y)) if y.size else 1.0
        bottom = max(float(positive.min()) / 10.0 if positive.size else 1e-6, peak * LOG_FLOOR if peak > 0 else 0.0)
        return np.maximum(np.where(y > 0, y, bottom), peak * LOG_FLOOR)

    @staticmethod
    def _end_of(x: np.ndarray, y: np.ndarray, name: str) -> tuple:
        """What the legend and the log axis need of a drawn line, computed once when it is drawn."""
        if not y.size:
            return (0.0, 0.0, math.inf, -math.inf, name)
        return (float(x[-1]), float(y[-1]), float(np.min(y)), float(np.max(y)), name)

    def _span_as(self, log: bool) -> tuple[float, float]:
        """The lowest and highest rate the curve and the visible ghosts will have on the log axis."""
        lows, highs = [], []
        if self.current is not None and self.current.y.size:
            y = self.current.y
            lows.append(float(np.min(np.maximum(np.where(y > 0, y, self.log_bottom), self.peak * LOG_FLOOR))))
            highs.append(float(np.max(y)))
        for i, (_pin, tr) in self._ghosts.items():
            if self.ghosts[i].visible and tr.y.size:
                y = self._own_y(tr.y) if log else tr.y
                lows.append(float(np.min(y)))
                highs.append(float(np.max(y)))
        return (min(lows) if lows else 1e-6), (max(highs) if highs else 1.0)

    def _span(self) -> tuple[float, float]:
        """The lowest and highest rate drawn (current curve and visible ghosts)."""
        ends = self._ends.values()
        return min(e[2] for e in ends), max(e[3] for e in ends)

    def _legend(self) -> None:
        """Name each line in the legend above the plot (only when there are pins): swatch, name, last rate."""
        keys = ["current", *range(len(self.ghosts))]
        if len(self._ends) <= 1:
            html = ""
        else:
            rows = [((CURVE, *GHOSTS)[i], self._ends[k][4], self._ends[k][1]) for i, k in enumerate(keys)
                    if k in self._ends]
            html = legend_html(rows)
        if self.legend.value != html:
            self.legend.value = html

    def _fit_y(self) -> None:
        """The linear rate axis spans 0 to a round number above the highest rate drawn; it moves only when the
        curve leaves the upper two thirds of it, so a dragged rate visibly moves the curve."""
        _lo, hi = self._span()
        self.rates.fit_linear(hi)

    def _fit_x(self) -> None:
        """The x axis spans tick 0 to the last tick of the longest curve shown (no padding, no negative ticks)."""
        top = float(max(self._tops.values(), default=1.0))
        if self.xs.max != top or self.xs.min != 0.0:
            with self.xs.hold_sync():
                self.xs.min, self.xs.max = 0.0, top
        # round tick values (the front end's own choice for a domain like 0..113,849 was 22.7698k, 45.5396k, ...)
        ticks = nice_ticks(0.0, top, 5)
        ticks = ticks[(ticks >= 0.0) & (ticks <= top)]
        if self.x_axis.tick_values is None or not np.array_equal(self.x_axis.tick_values, ticks):
            self.x_axis.tick_values = ticks

    @property
    def rate_scale(self):
        """The rate scale in use (linear or log)."""
        return self.ys_log if self.rate_axis.value == "log" else self.ys_linear

    @property
    def y_axis(self) -> Axis:
        """The rate axis shown now (a linear and a log axis are both in the figure; one is visible)."""
        return self.rates.shown

    def use_log(self, log: bool) -> None:
        """Put every rate mark on the log or the linear scale and show that scale's axis (the figure stays).

        Each scale keeps an axis of its own: giving one axis another scale left the front end's ticks at the
        old scale's positions (every log label at one spot, log-spaced ticks on the linear axis)."""
        scale = self.ys_log if log else self.ys_linear
        if log:  # the scales first: a log scale must never read the linear axis's zeros (NaN paths)
            self._set_log_bottom(self.current.y if self.current is not None else np.ones(1))
            self.rates.fit_log(*self._span_as(log=True))
        # each mark gets its new rates and its new scale in one message, so no frame draws zeros on a log scale
        lines = [(self.curve, self.current.y if self.current is not None else None, self._y)]
        lines += [(self.ghosts[i], tr.y, self._own_y) for i, (_pin, tr) in self._ghosts.items() if self.ghosts[i].visible]
        for m, y, drawn in lines:
            if m.scales.get("y") is not scale:
                with m.hold_sync():
                    if y is not None:
                        m.y = drawn(y)
                    m.scales = {"x": self.xs, "y": scale}
        self.rates.show(log)

    # ----------------------------------------------------------------- hover
    def tick_at(self, x: float) -> int | None:
        """The tick under the x-axis position ``x`` (None outside the budget)."""
        if self.current is None or not math.isfinite(x):
            return None
        t = int(math.floor(x / self.clock.factor + 0.5))
        return min(max(t, 0), self.current.steps - 1)

    def read(self, s: Schedule, x: Sequence[float] | None) -> str:
        """The hover line for the x position ``x``: step, epoch and the exact rate there."""
        if x is None or len(x) == 0:
            return ""
        t = self.tick_at(float(x[0]))
        if t is None:
            return ""
        c = self.clock
        words = [f"{c.unit} {t:,}"]
        if c.steps_per_epoch and c.unit == "step":
            words.append(f"epoch {epochs(t / c.steps_per_epoch)}")
        elif c.steps_per_epoch:
            words.append(f"step {t * c.steps_per_epoch:,}")
        words.append(f"rate {rate(float(s(t)))}")
        return " · ".join(words)


def bounded_state_bytes(marks: Sequence[Any]) -> int:
    """Bytes of array data the marks would send (x and y buffers), for the size check."""
    total = 0
    for m in marks:
        for name in ("x", "y"):
            v = getattr(m, name)
            total += int(np.asarray(v).nbytes)
    return total
