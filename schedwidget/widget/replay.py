"""The replay panel: what a reduce-on-plateau rule would have done on a logged metric history.

Load a history (a shipped demo, an uploaded CSV or a path), set the rule, and
read the rate per epoch over the metric (own axis), the drops (markers and a
table) and a "what if" strip with the drop epochs for patience 1..8.  The
figure and its marks are built once; every change assigns new arrays.
Nothing raises into the notebook: problems go to the message line.

A replay is counterfactual: the logged metrics were produced by the rates the
run really used.  The first drop is faithful only if the logged run used the
same rate up to it; every later drop reads metrics that the replayed rates
never produced, so it is indicative only (the note under the figure and the
drops table say so).
"""

from __future__ import annotations

import html
import warnings
from typing import TYPE_CHECKING, Any, Callable

import ipywidgets as W
import numpy as np

with warnings.catch_warnings():
    # bqplot 0.13 declares traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Figure, LinearScale, Lines, Scatter

from ..metrics import DEMO_NAMES, demo_path, read_metric
from ..plateau import PlateauReplay, PlateauRule, lead_in, replay_plateau
from ..schedule import Schedule, ScheduleError
from .guard import Panel, quietly
from .theme import (AMBER, CURVE, ERROR_RED, METRIC, REPLAY_FIGURE, TOGGLE, RateAxes, figure_layout, lines, rate,
                    rate_html, tidy_html)
from .controls import ParamControl
from .replay_lines import epoch_base, nice_ticks, step_line

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ReplayPanel", "epoch_base", "step_line", "WHAT_IF_PATIENCE"]

WHAT_IF_PATIENCE = tuple(range(1, 9))
RULE_DEFAULTS = {name: getattr(PlateauRule(), name) for name in PlateauRule.params()}
#: What each number does, in words (not a framework's argument names).
LABELS = {"goal": "better is", "relative": "margin is a share of the best", "factor": "multiply rate by",
          "patience": "evaluations to wait", "tolerance": "better by at least", "wait_after_drop": "pause after a drop",
          "floor": "lowest rate"}
GOAL_WORDS = {"max": "higher (accuracy)", "min": "lower (loss)"}
#: The lowest rate the panel opens with, as a share of the start rate: at most three drops by 10x
#: (common practice, no source); the rule's own default, 0, let the demo fall through 11 drops to 1e-12.
OPENING_FLOOR = 1e-3
TINY = 1e-6  # a replayed rate below this times the start rate gets an amber caution
COUNTERFACTUAL = ("A replay is counterfactual. The first drop is faithful only if the logged run used the same "
                  "rate up to it; later drops read metrics that the replayed rates never produced: indicative only.")
LABEL = {"description_width": "5em"}  # the history rows' labels
NUM = 'style="text-align:right;padding:1px 10px"'
TXT = 'style="text-align:left;padding:1px 10px"'


class ReplayPanel(Panel, W.VBox):
    """History source, the rule's controls, the figure, the drops table, the what-if strip and a message line.

    DOM hooks: ``sw-replay`` (the panel), ``sw-replay-path`` (the path box),
    ``sw-replay-error`` (the message line), ``sw-replay-drops``, ``sw-replay-whatif``.

    Examples
    --------
    >>> from schedwidget import ScheduleDesigner, flat   # doctest: +SKIP
    >>> panel = ReplayPanel(ScheduleDesigner(flat(0.1), steps=90, unit="epoch"))  # doctest: +SKIP
    >>> panel.replay.drop_epochs  # doctest: +SKIP
    """

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        self.d = designer
        self.values: np.ndarray | None = None
        self.source_name = ""
        self.replay: PlateauReplay | None = None
        self.what_if: dict[int, PlateauReplay] = {}
        self.rule: dict[str, Any] = dict(RULE_DEFAULTS)
        self.rule["floor"] = float(f"{self._default_start() * OPENING_FLOOR:.3g}")
        self._active = "demo"
        g = self._guard
        # ---------------------------------------------------------- source
        # short menu entries; what a demo history shows is said in the status line under them
        demo_options = [("none", "")] + [(f"demo {k}", k) for k in DEMO_NAMES]
        self.demo = W.Dropdown(options=demo_options, value="a", description="history",
                               tooltip="invented demo histories of the plastic-flake classifier: "
                                       + "; ".join(f"{k}: {what}" for k, (_f, what) in DEMO_NAMES.items()),
                               style=LABEL, layout={"width": "19em", "flex": "0 0 auto"})
        self.upload = W.FileUpload(accept=".csv,text/csv,text/plain", multiple=False, description="upload CSV",
                                   tooltip="a CSV file with one row per evaluation")
        self.path = W.Text(placeholder="path/to/metrics.csv", description="or path", continuous_update=False,
                           style=LABEL, layout={"width": "30em", "max_width": "100%"})
        self.path.add_class("sw-replay-path")
        self.column = W.Text(value="", placeholder="blank: the only value column", description="column",
                             continuous_update=False, style=LABEL, layout={"width": "21em", "max_width": "100%"})
        self.demo.observe(g(lambda c: self._source("demo")), names="value")
        self.upload.observe(g(lambda c: self._source("upload")), names="value")
        self.path.observe(g(lambda c: self._source("path")), names="value")
        self.column.observe(g(lambda c: self._source(self._active)), names="value")
        # ------------------------------------------------------------ rule
        self.controls = {name: ParamControl("replay_plateau", name, p, self.rule[name], 100, self._set, guard=g,
                                            label=LABELS.get(name), label_width="11em")
                         for name, p in PlateauRule.params().items()}
        goal = self.controls["goal"].text
        goal.options = [(GOAL_WORDS.get(k, k), k) for k in self.controls["goal"].p.choices]
        # one grid: every label 11em, every slider track 12em, every exact box 7em beside it (no readouts)
        goal.layout.width = "26em"
        for c in self.controls.values():
            if c.slider is not None:
                c.slider.layout.width = "23em"
        self.controls["relative"].text.layout = W.Layout(width="auto", margin="0 0 0 11.5em")
        # the start rate's box sits in the column of the exact boxes, its label in the column of the labels
        self.start = W.FloatText(value=self._default_start(), tooltip="the rate the rule starts from",
                                 layout={"width": "7em", "flex": "0 0 auto"})
        start_label = W.HTML('<div style="text-align:right;padding-right:6px">start rate</div>',
                             layout={"width": "11em", "flex": "0 0 auto"})
        start_row = W.HBox([start_label, W.Box(layout={"width": "12em", "flex": "0 0 auto"}), self.start],
                           layout={"align_items": "center"})
        self.follow = W.Checkbox(value=False, indent=False, description="follow the design",
                                 tooltip="use the designer's schedule as the base: its warmup, then the rule "
                                         "multiplies it", layout={"width": "auto", "margin": "0 0 0 11.5em"})
        self.follow.observe(g(self._follow_changed), names="value")
        self.start.observe(g(lambda c: self.refresh()), names="value")
        # ---------------------------------------------------------- figure
        self.xs = LinearScale(min=0.0, max=1.0, allow_padding=False)
        self.rates = RateAxes(colour=CURVE)
        self.ys_linear, self.ys_log = self.rates.linear_scale, self.rates.log_scale
        self.rates.show(True)
        self.ys = self.ys_log
        self.ms = LinearScale()
        self.rate_axis = W.ToggleButtons(options=["linear", "log"], value="log", description="rate axis",
                                         tooltip="linear or logarithmic rate axis",
                                         style={"button_width": "5em", "description_width": "5em"},
                                         layout=dict(TOGGLE))
        self.rate_axis.observe(g(self._rate_axis_changed), names="value")
        self.rate_line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.ys}, colors=[CURVE],
                               stroke_width=2, labels=["rate"])
        self.metric_line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.ms},
                                 colors=[METRIC], stroke_width=1.2, marker="circle", marker_size=10,
                                 labels=["metric"])
        self.drop_marks = Scatter(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                  colors=[CURVE], marker="triangle-down", default_size=48, visible=False)
        self.x_axis = Axis(scale=self.xs, label="epoch (metric read at each epoch's end)", tick_format="d",
                           tick_values=np.array(nice_ticks(90)))
        axes = [self.x_axis, *self.rates.axes,
                Axis(scale=self.ms, side="right", label="metric", tick_format=".3~g", label_offset="4em",
                     color=METRIC, grid_lines="none")]
        self.figure = Figure(marks=[self.metric_line, self.rate_line, self.drop_marks], axes=axes,
                             animation_duration=0, padding_y=0.05,
                             fig_margin=REPLAY_FIGURE[1], layout=W.Layout(**figure_layout(REPLAY_FIGURE)))
        self.figure.add_class("sw-replay-figure")
        self.figure_box = W.Box([self.figure], layout={"min_height": "300px", "width": "100%"})
        self.y_title = W.HTML('<span style="font-size:12px;color:#0f766e">learning rate</span>')
        self.note = W.HTML(lines(f"<small><i>{html.escape(COUNTERFACTUAL)}</i></small>"))
        self.note.add_class("sw-replay-note")
        self.caution = W.HTML("", style={"text_color": AMBER})
        self.caution.add_class("sw-replay-caution")
        self.table = W.HTML("")
        self.table.add_class("sw-replay-drops")
        self.whatif = W.HTML("")
        self.whatif.add_class("sw-replay-whatif")
        self.message = W.HTML("", style={"text_color": ERROR_RED})
        self.message.add_class("sw-replay-error")
        self.status = W.HTML("")
        self.status.add_class("sw-replay-status")
        # two groups in the order a person reasons: when an evaluation counts as better, then what a drop does
        # (not one list in the order of any library's arguments)
        heading = '<div style="font-size:12px;color:#4b5563;margin:4px 0 0 0">{}</div>'
        rule_rows = [W.HTML(heading.format("when an evaluation counts as better")),
                     *(self.controls[n].box for n in ("goal", "tolerance", "relative", "patience")),
                     W.HTML(heading.format("what a drop does")),
                     *(self.controls[n].box for n in ("factor", "floor", "wait_after_drop")),
                     W.HTML(heading.format("the rate before any drop")), start_row, self.follow]
        wrap = {"flex_flow": "row wrap", "align_items": "center"}
        rules = W.VBox(rule_rows, layout={"flex": "0 0 31em", "width": "31em", "margin": "0 12px 0 0"})
        rules.add_class("sw-replay-rule")
        plot = W.VBox([self.y_title, self.figure_box, self.rate_axis, self.note, self.caution],
                      layout={"flex": "1 1 26em", "min_width": "22em"})
        # side by side when the pane is wide enough (31em of rule + 26em of plot), one above the other below that
        super().__init__([W.HBox([self.demo, self.upload], layout=wrap), W.HBox([self.path, self.column], layout=wrap),
                          self.message, self.status, W.Box([rules, plot], layout={"flex_flow": "row wrap"}),
                          self.table, self.whatif])
        self.add_class("sw-replay")
        g(self._source)("demo")
        self.listen(designer, tab, now=True)

    # ------------------------------------------------------------ plumbing
    def _guard(self, fn: Callable) -> Callable:
        """``fn`` with every exception turned into the message line."""
        return quietly(fn, self._say, "the last replay is kept")

    def _say(self, text: str, colour: str = ERROR_RED) -> None:
        value = lines(tidy_html(text))
        if self.message.style.text_color != colour:
            self.message.style.text_color = colour
        if self.message.value != value:
            self.message.value = value

    def _default_start(self) -> float:
        s = self.d.schedule
        try:
            rate = float(s(lead_in(s)))
        except ScheduleError:
            rate = 0.0
        return rate if rate > 0 else 0.1

    def _set(self, name: str, value: Any) -> None:
        self.rule[name] = value
        self.controls[name].show(value)  # the box and the slider agree, however the value was set
        self.refresh()

    def _rate_axis_changed(self, change: dict) -> None:
        log = change["new"] == "log"
        self.ys = self.ys_log if log else self.ys_linear
        for m in (self.rate_line, self.drop_marks):
            m.scales = {"x": self.xs, "y": self.ys}
        self.rates.show(log)
        if self.replay is not None:
            self._draw(self.replay)

    @property
    def y_axis(self) -> Axis:
        """The rate axis shown now (each scale has its own axis; see ``theme.RateAxes``)."""
        return self.rates.shown

    def _follow_changed(self, change: dict) -> None:
        self.start.disabled = bool(change["new"])
        self.refresh()

    def shows(self) -> tuple | None:
        d = self.d
        return (d.schedule, d.unit, d.steps_per_epoch) if self.follow.value else None

    def paint(self) -> None:
        self._guard(self.refresh)()

    # --------------------------------------------------------------- input
    def _source(self, kind: str) -> None:
        """Read the history from ``kind`` ("demo", "upload" or "path") and replay it."""
        column = self.column.value.strip() or None
        if kind == "demo":
            if not self.demo.value:
                return
            path = demo_path(self.demo.value)
            values, name = read_metric(path, column), f"demo {self.demo.value} ({path.name})"
        elif kind == "upload":
            if not self.upload.value:
                return
            f = self.upload.value[0]
            values, name = read_metric(bytes(f["content"]), column), str(f.get("name", "uploaded file"))
        else:
            text = self.path.value.strip()
            if not text:
                return
            values, name = read_metric(text, column), text
        self._active, self.values, self.source_name = kind, values, name
        self.refresh()

    def base(self) -> Schedule | None:
        """The base schedule on the epoch clock when following the design, else None."""
        if not self.follow.value:
            return None
        return epoch_base(self.d.schedule, self.d.unit, self.d.steps_per_epoch)

    # -------------------------------------------------------------- output
    def refresh(self) -> None:
        """Replay with the current history and rule; redraw marks, table and what-if strip."""
        if self.values is None:
            return
        base = self.base()
        start = None if base is not None else self.start.value
        r = replay_plateau(self.values, start, base=base, **self.rule)
        what_if = {p: replay_plateau(self.values, start, base=base, **{**self.rule, "patience": p})
                   for p in WHAT_IF_PATIENCE}
        self.replay, self.what_if = r, what_if
        self._draw(r)
        table, strip = self._drops_html(r), self._what_if_html(what_if)
        if self.table.value != table:
            self.table.value = table
        if self.whatif.value != strip:
            self.whatif.value = strip
        n = len(self.values)
        inside = sum(1 for d in r.drops if d.epoch < n)
        after = " (+1 after the run)" if inside < len(r.drops) else ""
        what = DEMO_NAMES[self.demo.value][1] if self._active == "demo" and self.demo.value in DEMO_NAMES else ""
        words = (html.escape(f"{self.source_name}{' (' + what + ')' if what else ''}: {n:,} evaluations, best "
                             f"{r.best:.6g} at epoch {r.best_at:,}, "
                             f"{inside:,} drops{after}, final rate ") + rate_html(r.next_rate))
        words = lines(words)
        if self.status.value != words:
            self.status.value = words
        caution = self._caution(r, start)
        caution = lines(caution)
        if self.caution.value != caution:
            self.caution.value = caution
        self._say("")

    def _caution(self, r: PlateauReplay, start: float | None) -> str:
        """Amber words when the replayed rate falls below TINY x the start rate (a floor of 0 lets it)."""
        ref = start if start is not None else float(np.max(r.rates, initial=0.0))
        low = float(np.min(np.append(r.rates, r.next_rate)))
        if not ref > 0 or low >= TINY * ref:
            return ""
        return tidy_html(f"Caution: the replayed rate falls to {rate(low)}, below a millionth of the start rate "
                         f"{rate(ref)} (lowest rate {rate(self.rule['floor'])}); such a rate no longer trains. "
                         "Set a lowest rate, or fewer drops.")

    def rate_of(self, r: PlateauReplay, epoch: int) -> float:
        """The combined rate used in ``epoch`` (``next_rate`` just past the history)."""
        return float(r.rates[epoch]) if epoch < len(r.rates) else r.next_rate

    def _drawn(self, y: np.ndarray) -> np.ndarray:
        """Rates as drawn: on the log axis a rate of 0 sits a decade below the smallest positive one."""
        if self.rate_axis.value != "log":
            return y
        positive = y[y > 0]
        bottom = float(positive.min()) / 10 if positive.size else 1e-8
        return np.where(y > 0, y, bottom)

    def _draw(self, r: PlateauReplay) -> None:
        x, y = step_line(r.rates, r.next_rate)
        n = len(r.rates)
        with self.rate_line.hold_sync():
            drawn = self._drawn(y)
            self.rate_line.x, self.rate_line.y = x, drawn
        if drawn.size:
            self.rates.fit_linear(float(np.max(drawn)))
            self.rates.fit_log(float(np.min(drawn[drawn > 0])) if np.any(drawn > 0) else 1e-8, float(np.max(drawn)))
        if self.xs.max != n:
            self.xs.max = float(n)
        ticks = np.array(nice_ticks(n))
        if not np.array_equal(self.x_axis.tick_values, ticks):
            self.x_axis.tick_values = ticks
        values = np.asarray(self.values, dtype=float)
        with self.metric_line.hold_sync():
            self.metric_line.x = np.arange(1, len(values) + 1, dtype=float)
            self.metric_line.y = values
        dx = np.array([d.epoch for d in r.drops], dtype=float)
        dy = self._drawn(np.array([self.rate_of(r, d.epoch) for d in r.drops], dtype=float))
        with self.drop_marks.hold_sync():
            self.drop_marks.x, self.drop_marks.y = dx, dy
            self.drop_marks.visible = bool(dx.size)

    def _drops_html(self, r: PlateauReplay) -> str:
        if not r.drops:
            return "<p><b>No drops</b>: the rule never ran out of patience on this history.</p>"
        n = len(r.rates)
        names = ("from epoch", "rate before", "rate after", "best so far", "best at epoch",
                 "evaluations without improvement")
        head = "<tr>" + "".join(f"<th {NUM}>{h}</th>" for h in names) + f"<th {TXT}>reading</th></tr>"
        rows = []
        for i, d in enumerate(r.drops):
            reading = ("faithful if the logged run used this rate up to here" if i == 0 else "indicative")
            if d.epoch >= n:
                reading += " (after the run)"
            cells = (f"{d.epoch:,}", rate_html(self.rate_of(r, d.epoch - 1)), rate_html(self.rate_of(r, d.epoch)),
                     f"{d.best:.6g}", f"{d.best_at:,}", f"{d.stale:,}")
            rows.append("<tr>" + "".join(f"<td {NUM}>{c}</td>" for c in cells) + f"<td {TXT}>{reading}</td></tr>")
        return f"<p><b>Drops</b></p><table>{head}{''.join(rows)}</table>"

    def _epochs_words(self, epochs: list[int], most: int = 12) -> tuple[str, int]:
        """The drop epochs as text (one from epoch >= the history's length marked "(after the run)") and
        how many apply inside the run."""
        n = len(self.values) if self.values is not None else 0
        inside = [e for e in epochs if e < n]
        words = [str(e) for e in inside[:most]]
        if len(inside) > most:
            words.append(f"... (+{len(inside) - most})")
        words += [f"{e} (after the run)" for e in epochs if e >= n]
        return ", ".join(words), len(inside)

    def what_if_title(self) -> str:
        """Which history and floor the what-if strip used."""
        return (f"history {self.source_name}, multiply rate by {self.rule['factor']:g}, lowest rate "
                f"{rate(self.rule['floor'])}, pause after a drop {self.rule['wait_after_drop']}")

    def _what_if_html(self, what_if: dict[int, PlateauReplay]) -> str:
        rows = []
        for p, r in what_if.items():
            shown, count = self._epochs_words(list(r.drop_epochs))
            bold = p == self.rule["patience"]  # the row of the current rule
            cells = [(p, NUM), (shown or "none", TXT), (count, NUM), (rate_html(r.next_rate), NUM)]
            rows.append("<tr>" + "".join(f"<td {a}><b>{c}</b></td>" if bold else f"<td {a}>{c}</td>"
                                         for c, a in cells) + "</tr>")
        head = (f"<tr><th {NUM}>evaluations to wait</th><th {TXT}>drop epochs</th><th {NUM}>drops in the run</th>"
                f"<th {NUM}>final rate</th></tr>")
        title = html.escape(self.what_if_title())
        return (f"<p><b>What if</b>: the same history and rule, waiting 1 to 8 evaluations ({title}; drops after "
                f"the first are indicative)</p><table>{head}{''.join(rows)}</table>")

    def what_if_text(self) -> str:
        """The what-if strip as plain lines: ``patience 3: 24, 42, 46``."""
        return "\n".join(f"patience {p}: " + (self._epochs_words(list(r.drop_epochs), 10 ** 6)[0] or "none")
                          for p, r in self.what_if.items())
