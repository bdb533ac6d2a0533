"""The logs panel: read what a run logged back into the designer.

Two sources, each picked from the variables the panel was given or uploaded as a file:

* a **rate trace** (what the run's rate really was): checked against the design (``check_run``; the
  verdict sentence and its fault code, the departure marked on the figure) and turned into a compact
  design (``recover``), which "use the recovered design" adopts;
* a **range test** log (loss while the rate grows): read two ways (``read_range_test``), with a starting
  design around the suggested peak, which "use the suggested peak" adopts.

Adopting sets the ``adopted`` trait (a Schedule) and calls ``on_adopt``; the designer observes it.  The
figures are built once and get new arrays on every change; the trace is drawn from a bounded number of
points (a min/max envelope) whatever its length.  No callback raises into the notebook: problems go to the
section's message line and to ``error``.
"""

from __future__ import annotations

import html
import importlib.util
import os
import tempfile
import warnings
from typing import Any, Callable, Mapping

import ipywidgets as W
import numpy as np
from traitlets import Instance, Int, Unicode, observe

with warnings.catch_warnings():
    # bqplot 0.13 declares traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Figure, LinearScale, Lines, LogScale, Scatter

from ..run_check import Verdict, check_run
from ..metrics import MAX_METRIC_BYTES
from ..range_test import RangeReading, read_range_test
from ..recovery import Recovery, node_count, recover as recover_design
from ..sample import trace as curve_points
from ..schedule import Schedule, complain
from ..svg import nice_ticks  # one tick rule for the live and static curves
from ..trace import Trace, read_trace
from .guard import Panel, quietly
from .theme import (AMBER, CURVE, CURVE_FIGURE, ERROR_RED, JOIN, METRIC, TOGGLE, RateAxes, figure_layout, lines,
                    tidy_html)

__all__ = ["LogsPanel", "DesignerLogs", "envelope", "close_all", "MAX_DRAWN"]

#: A trace longer than this is drawn as a min/max envelope of about this many points.
MAX_DRAWN = 3000
#: The recovered design's repr is shown up to this many characters.
MAX_REPR = 600
#: What the two shape choices of "use the suggested peak" build (RangeReading.design's ``shape``).
SHAPES = {"one cycle": "one_cycle", "warmup + cosine": "cosine"}
READINGS = {"published": "published", "common practice": "common"}
NONE = "none"
LABEL = {"description_width": "6em"}
HEAD = '<div style="font-size:13px;color:#374151;margin:6px 0 2px 0"><b>{}</b></div>'


def envelope(x: np.ndarray, y: np.ndarray, most: int = MAX_DRAWN) -> tuple[np.ndarray, np.ndarray]:
    """At most about ``most`` points that draw ``(x, y)``: every point when there are few, else each bin's
    lowest and highest value in the order they come, so no jump or spike of the trace is lost.

    >>> envelope(np.arange(5.0), np.arange(5.0))[0].tolist()
    [0.0, 1.0, 2.0, 3.0, 4.0]
    >>> len(envelope(np.arange(10_000.0), np.sin(np.arange(10_000.0)), most=100)[0]) <= 100
    True
    """
    n = x.size
    if n <= most:
        return x.astype(float), y.astype(float)
    bins = max(most // 2, 1)
    edges = np.linspace(0, n, bins + 1).astype(np.int64)
    lo = np.minimum.reduceat(y, edges[:-1])
    hi = np.maximum.reduceat(y, edges[:-1])
    i_lo = np.array([a + int(np.argmin(y[a:b])) for a, b in zip(edges[:-1], edges[1:])])
    i_hi = np.array([a + int(np.argmax(y[a:b])) for a, b in zip(edges[:-1], edges[1:])])
    first = np.minimum(i_lo, i_hi)
    second = np.maximum(i_lo, i_hi)
    xs = np.stack([x[first], x[second]], axis=1).ravel().astype(float)
    ys = np.stack([np.where(i_lo <= i_hi, lo, hi), np.where(i_lo <= i_hi, hi, lo)], axis=1).ravel().astype(float)
    return xs, ys


def close_all(widget: Any) -> int:
    """Close ``widget`` and every widget it holds in its synced state (children, layouts, styles, a figure's
    marks, axes and scales); the number closed.  ``guard.close_tree`` does not reach into bqplot figures."""
    closed, todo, seen = 0, [widget], set()
    while todo:
        w = todo.pop()
        if not isinstance(w, W.Widget) or w.comm is None or id(w) in seen:
            continue
        seen.add(id(w))
        for key in w.keys:
            value = getattr(w, key, None)
            items = value.values() if isinstance(value, dict) else value if isinstance(value, (list, tuple)) else [value]
            todo.extend(v for v in items if isinstance(v, W.Widget))
        w.close()
        closed += 1
    return closed


def _tensorboard() -> bool:
    return importlib.util.find_spec("tensorboard") is not None


class LogsPanel(W.VBox):
    """Check a run, recover its design and choose a peak from a range test, from logs.

    Parameters
    ----------
    design : the design the run meant to follow (None: the trace is only recovered, not checked).
    traces : rate traces to pick from by name (``Trace``, arrays, lists, DataFrames, CSV paths), or one.
    range_logs : range-test logs to pick from by name (``(rates, losses)`` pairs, (n, 2) arrays, DataFrames,
        CSV paths), or one.
    steps_per_epoch : updates per epoch when known (``check_run`` finds it from the trace otherwise).
    steps : the length of the starting design proposed from a range test (default: the design's length).
    on_adopt : called with the adopted design (after the ``adopted`` trait is set).

    >>> from schedwidget import cosine                                      # doctest: +SKIP
    >>> p = LogsPanel(cosine(0.1, steps=100), traces={"run": [0.1] * 100})  # doctest: +SKIP
    >>> p.verdict.fault                                                     # doctest: +SKIP
    'other'
    """

    design = Instance(Schedule, allow_none=True, help="the design the run meant to follow")
    adopted = Instance(Schedule, allow_none=True, help="the last design adopted with one of the two buttons")
    verdict = Instance(Verdict, allow_none=True, help="check_run's verdict on the trace shown")
    recovery = Instance(Recovery, allow_none=True, help="recover's result on the trace shown")
    reading = Instance(RangeReading, allow_none=True, help="the range test read")
    steps = Int(1000, help="length in ticks of the design proposed from a range test")
    error = Unicode("", help="the last problem in words; empty after a change that worked")

    def __init__(self, design: Schedule | None = None, traces: Any = None, range_logs: Any = None, *,
                 steps_per_epoch: int | None = None, steps: int | None = None,
                 on_adopt: Callable[[Schedule], Any] | None = None, **kwargs: Any) -> None:
        if design is not None and not isinstance(design, Schedule):
            raise complain("LogsPanel", "design", design, "a Schedule or None")
        if on_adopt is not None and not callable(on_adopt):
            raise complain("LogsPanel", "on_adopt", on_adopt, "a function of the adopted design, or None")
        self.on_adopt, self.steps_per_epoch = on_adopt, steps_per_epoch
        self.trace: Trace | None = None
        self.trace_name, self.range_name = "", ""
        self.traces, self.range_logs = _named(traces, "run"), _named(range_logs, "range test")
        g = self.guard
        # ---------------------------------------------------------------- rate trace: source
        board = _tensorboard()
        self.pick = W.Dropdown(options=[NONE, *self.traces], value=NONE, description="rate trace", style=LABEL,
                               layout={"width": "22em"})
        self.upload = W.FileUpload(accept="" if board else ".csv,text/csv,text/plain", multiple=False,
                                   description="upload CSV or event file" if board else "upload CSV",
                                   tooltip="a CSV file of (tick, rate) rows or of rates"
                                           + (", or a TensorBoard event file" if board else ""),
                                   layout={"width": "auto"})
        self.column = W.Text(value="", placeholder="blank: the rate column", description="column",
                             continuous_update=False, style=LABEL, layout={"width": "18em"})
        self.trace_message = W.HTML("", style={"text_color": ERROR_RED})
        self.verdict_text = W.HTML("")
        self.recovery_text = W.HTML("")
        self.recover_button = W.Button(description="recover its design", disabled=True,
                                       tooltip="fit a compact design of our shapes to this trace",
                                       layout={"width": "auto"})
        self.use_recovered = W.Button(description="use the recovered design", disabled=True,
                                      tooltip="make the design recovered from this trace the designer's design",
                                      layout={"width": "auto"})
        # ---------------------------------------------------------------- rate trace: figure
        self.xs = LinearScale(min=0.0, max=1.0, allow_padding=False)
        self.rates = RateAxes()
        self.unit_scale = LinearScale(min=0.0, max=1.0)
        ys = {"x": self.xs, "y": self.rates.linear_scale}
        self.design_line = Lines(x=np.zeros(1), y=np.zeros(1), scales=dict(ys), colors=[CURVE], stroke_width=2,
                                 visible=False)
        self.logged_line = Lines(x=np.zeros(1), y=np.zeros(1), scales=dict(ys), colors=[METRIC], stroke_width=1.5,
                                 visible=False)
        self.departure_line = Lines(x=np.zeros((1, 2)), y=np.array([[0.0, 1.0]]),
                                    scales={"x": self.xs, "y": self.unit_scale}, colors=[AMBER],
                                    line_style="dashed", stroke_width=1, visible=False)
        self.departure = Scatter(x=np.zeros(1), y=np.zeros(1), scales=dict(ys), colors=[AMBER], default_size=48,
                                 visible=False)
        self.x_axis = Axis(scale=self.xs, label="step", tick_format="~s", num_ticks=6, label_offset="32px")
        self.figure = Figure(marks=[self.departure_line, self.design_line, self.logged_line, self.departure],
                             axes=[self.x_axis, *self.rates.axes], animation_duration=0, padding_y=0.05,
                             fig_margin=CURVE_FIGURE[1], layout=W.Layout(**figure_layout(CURVE_FIGURE)))
        self.legend = W.HTML("")
        self.rate_axis = W.ToggleButtons(options=["linear", "log"], value="linear", description="rate axis",
                                         style={"button_width": "5em", "description_width": "5em"}, layout=TOGGLE)
        # ---------------------------------------------------------------- range test
        self.range_pick = W.Dropdown(options=[NONE, *self.range_logs], value=NONE, description="range test",
                                     style=LABEL, layout={"width": "22em"})
        self.range_upload = W.FileUpload(accept=".csv,text/csv,text/plain", multiple=False,
                                         description="upload CSV", tooltip="a CSV file of (rate, loss) rows",
                                         layout={"width": "auto"})
        self.range_message = W.HTML("", style={"text_color": ERROR_RED})
        self.reading_text = W.HTML("")
        self.rx = LogScale(min=1e-6, max=1.0)
        self.ry = LinearScale()
        self.loss_raw = Lines(x=np.ones(1), y=np.zeros(1), scales={"x": self.rx, "y": self.ry}, colors=[METRIC],
                              stroke_width=1, visible=False)
        self.loss_smooth = Lines(x=np.ones(1), y=np.zeros(1), scales={"x": self.rx, "y": self.ry}, colors=[CURVE],
                                 stroke_width=2, visible=False)
        self.marks_at = Lines(x=np.ones((1, 2)), y=np.array([[0.0, 1.0]]), scales={"x": self.rx, "y": self.unit_scale},
                              colors=[CURVE], line_style="dashed", stroke_width=1, visible=False)
        self.rx_axis = Axis(scale=self.rx, label="learning rate (log)", tick_format=".0e")
        self.range_legend = W.HTML(_legend([(METRIC, "loss as logged"), (CURVE, "smoothed; dashed: published bounds"),
                                            (JOIN, "dashed: common-practice peak")]))
        self.range_figure = Figure(marks=[self.loss_raw, self.loss_smooth, self.marks_at],
                                   axes=[self.rx_axis,
                                         Axis(scale=self.ry, side="left", label="loss",
                                              tick_format=".3~g")],
                                   animation_duration=0, fig_margin=CURVE_FIGURE[1],
                                   layout=W.Layout(**figure_layout(CURVE_FIGURE)))
        self.reading_choice = W.ToggleButtons(options=list(READINGS), value="published", description="reading",
                                              style={"button_width": "11em", "description_width": "5em"},
                                              layout=TOGGLE)
        self.shape_choice = W.ToggleButtons(options=list(SHAPES), value="one cycle", description="shape",
                                            style={"button_width": "11em", "description_width": "5em"},
                                            layout=TOGGLE)
        self.steps_box = W.IntText(value=1000, description="over steps", style=LABEL, layout={"width": "14em"})
        self.proposal_text = W.HTML("")
        self.use_peak = W.Button(description="use the suggested peak", disabled=True, layout={"width": "auto"},
                                 tooltip="make the starting design around the suggested peak the designer's design")
        wrap = {"flex_flow": "row wrap", "align_items": "center"}
        super().__init__([
            W.HTML(HEAD.format("Check a run and recover its design")),
            W.HBox([self.pick, self.upload, self.column], layout=wrap), self.trace_message, self.verdict_text,
            self.legend, self.figure, self.rate_axis, self.recovery_text,
            W.HBox([self.recover_button, self.use_recovered], layout=wrap),
            W.HTML(HEAD.format("Choose a peak from a range test")),
            W.HBox([self.range_pick, self.range_upload], layout=wrap), self.range_message, self.reading_text,
            self.range_legend, self.range_figure, W.HBox([self.reading_choice, self.shape_choice, self.steps_box], layout=wrap),
            self.proposal_text, W.HBox([self.use_peak])], **kwargs)
        self.add_class("sw-logs")
        # traits first, then the observers (no callback runs on a half-built panel)
        self.design = design
        self.steps = steps if steps is not None else (design.length if design is not None and design.length else 1000)
        self.steps_box.value = self.steps
        self.pick.observe(g(lambda _c: self._pick_trace(), self._trace_say), names="value")
        self.upload.observe(g(lambda _c: self._upload_trace(), self._trace_say), names="value")
        self.column.observe(g(lambda _c: self._pick_trace(), self._trace_say), names="value")
        self.rate_axis.observe(g(lambda _c: self._draw_trace(), self._trace_say), names="value")
        self.recover_button.on_click(g(lambda _b: self.recover(), self._trace_say))
        self.use_recovered.on_click(g(lambda _b: self._adopt(self.recovery.design), self._trace_say))
        self.range_pick.observe(g(lambda _c: self._pick_range(), self._range_say), names="value")
        self.range_upload.observe(g(lambda _c: self._upload_range(), self._range_say), names="value")
        for w in (self.reading_choice, self.shape_choice, self.steps_box):
            w.observe(g(lambda _c: self._propose(), self._range_say), names="value")
        self.use_peak.on_click(g(lambda _b: self._adopt(self._proposal()), self._range_say))
        if self.traces:
            self.pick.value = next(iter(self.traces))
        if self.range_logs:
            self.range_pick.value = next(iter(self.range_logs))

    # ------------------------------------------------------------------ plumbing
    def guard(self, fn: Callable, say: Callable[[str], None] | None = None) -> Callable:
        """``fn`` with every exception turned into words on a message line (the trace's by default)."""
        return quietly(fn, say or self._trace_say, "the last reading is kept")

    def _put(self, line: W.HTML, text: str) -> None:
        value = lines(tidy_html(text))
        if line.value != value:
            line.value = value
        self.error = text

    def _trace_say(self, text: str) -> None:
        self._put(self.trace_message, text)

    def _range_say(self, text: str) -> None:
        self._put(self.range_message, text)

    def close(self) -> None:
        """Close the panel and every widget inside it (figures, marks, axes and scales too)."""
        if self.comm is None:
            return
        parts = [self.layout, *self.children]
        super().close()
        for w in parts:
            close_all(w)

    # ------------------------------------------------------------------ the trace
    def use_trace(self, source: Any, name: str = "trace") -> None:
        """Read ``source`` (anything ``read_trace`` reads) as the trace, check it and recover its design."""
        column = self.column.value.strip() or None
        tr = read_trace(source, column) if not isinstance(source, Trace) else source
        self.trace, self.trace_name, self.recovery = tr, name, None
        self.use_recovered.disabled = True
        self._set(self.recovery_text, lines(tidy_html(
            f"{name}: {len(tr):,} logged points. Recovering its design fits our shapes to it (a long trace logged "
            "every k ticks can take a while).")))
        self.recover_button.disabled = False
        self._check()

    def _pick_trace(self) -> None:
        if self.pick.value == NONE:
            return
        self.use_trace(self.traces[self.pick.value], self.pick.value)

    def _upload_trace(self) -> None:
        if not self.upload.value:
            return
        f = self.upload.value[0]
        name, content = str(f.get("name", "uploaded file")), bytes(f["content"])
        if len(content) > MAX_METRIC_BYTES:
            raise complain("LogsPanel", "upload", f"{len(content):,} bytes", f"at most {MAX_METRIC_BYTES:,} bytes")
        if "tfevents" in name:  # the tensorboard reader reads files: a private copy, removed after reading
            with tempfile.TemporaryDirectory() as folder:
                path = os.path.join(folder, os.path.basename(name))
                with open(path, "wb") as out:
                    out.write(content)
                self.use_trace(path, name)
        else:
            self.use_trace(content, name)

    @observe("design")
    def _design_changed(self, _change: dict) -> None:
        if self.trace is not None:
            self.guard(self._check)()

    def _check(self) -> None:
        tr = self.trace
        if tr is None:
            return
        verdict = check_run(self.design, tr, steps_per_epoch=self.steps_per_epoch) if self.design is not None else None
        self.verdict = verdict
        if verdict is None:
            words = "No design to check the trace against: recover its design, or give the panel one."
        else:
            code = "matches" if verdict.matches else verdict.fault
            words = f"<b>{html.escape(str(code))}</b>: " + tidy_html(str(verdict))
        self._set(self.verdict_text, lines(words))
        self._draw_trace()
        self._trace_say("")

    def recover(self) -> Recovery | None:
        """Recover the trace's design (what "recover its design" does); shown, drawn when there is no design,
        and ready for "use the recovered design"."""
        if self.trace is None:
            return None
        self.recovery = recover_design(self.trace)
        self._set(self.recovery_text, lines(_recovery_words(self.recovery, self.trace_name)))
        self.use_recovered.disabled = False
        self._draw_trace()
        self._trace_say("")
        return self.recovery

    def _draw_trace(self) -> None:
        tr = self.trace
        if tr is None:
            return
        log = self.rate_axis.value == "log"
        span = int(tr.ticks[-1]) + 1
        shown = self.design if self.design is not None else (self.recovery.design if self.recovery else None)
        dx, dy = (np.zeros(1), np.zeros(1))
        if shown is not None:
            pts = curve_points(shown, max(span, 2))
            dx, dy = pts.x, pts.y
        lx, ly = envelope(tr.ticks, tr.rates)
        every = np.concatenate([dy, ly])
        positive = every[every > 0]
        bottom = float(positive.min()) / 10 if positive.size else 1e-6
        top = float(every.max()) if every.size else 1.0
        drawn = (lambda y: np.where(y > 0, y, bottom)) if log else (lambda y: y)
        scale = self.rates.log_scale if log else self.rates.linear_scale
        if log:
            self.rates.fit_log(bottom, top)
        else:
            self.rates.fit_linear(top)
        v = self.verdict
        off = v is not None and not v.matches
        for mark, x, y, seen in ((self.design_line, dx, dy, shown is not None), (self.logged_line, lx, ly, True),
                                 (self.departure, np.array([float(v.first_tick if off else 0)]),
                                  np.array([float(v.logged if off else 0.0)]), off)):
            with mark.hold_sync():
                mark.x, mark.y = x.astype(float), drawn(y.astype(float))
                mark.scales = {"x": self.xs, "y": scale}
                mark.visible = bool(seen)
        with self.departure_line.hold_sync():
            self.departure_line.x = np.array([[float(v.first_tick), float(v.first_tick)]]) if off else np.zeros((1, 2))
            self.departure_line.visible = bool(off)
        top = float(max(span - 1, 1))
        with self.xs.hold_sync():
            self.xs.min, self.xs.max = 0.0, top
        ticks = nice_ticks(0.0, top, 5)  # round numbers, as the designer's curve
        self.x_axis.tick_values = ticks[(ticks >= 0.0) & (ticks <= top)]
        self.rates.show(log)
        who = "the design" if self.design is not None else "the recovered design"
        rows = [(CURVE, who)] if shown is not None else []
        rows.append((METRIC, f"logged: {self.trace_name}"))
        if off:
            rows.append((AMBER, f"departs at tick {v.first_tick:,}"))
        self._set(self.legend, _legend(rows))

    # ------------------------------------------------------------------ the range test
    def use_range_log(self, source: Any, name: str = "range test") -> None:
        """Read ``source`` as a range test's log (a ``(rates, losses)`` pair or anything ``read_range_test``
        reads alone) and propose a starting design around its suggested peak."""
        if isinstance(source, tuple) and len(source) == 2 and not np.isscalar(source[0]):
            reading = read_range_test(source[0], source[1])
        else:
            reading = read_range_test(source)
        self.reading, self.range_name = reading, name
        self._set(self.reading_text, lines("<br>".join(tidy_html(s) for s in str(reading).splitlines())))
        self._draw_range()
        self._propose()
        self._range_say("")

    def _pick_range(self) -> None:
        if self.range_pick.value == NONE:
            return
        self.use_range_log(self.range_logs[self.range_pick.value], self.range_pick.value)

    def _upload_range(self) -> None:
        if not self.range_upload.value:
            return
        f = self.range_upload.value[0]
        content = bytes(f["content"])
        if len(content) > MAX_METRIC_BYTES:
            raise complain("LogsPanel", "upload", f"{len(content):,} bytes", f"at most {MAX_METRIC_BYTES:,} bytes")
        self.use_range_log(content, str(f.get("name", "uploaded file")))

    def _draw_range(self) -> None:
        r = self.reading
        with self.rx.hold_sync():
            self.rx.min, self.rx.max = float(r.rates[0]), float(r.rates[-1])
        decades = np.arange(np.ceil(np.log10(r.rates[0]) - 1e-9), np.floor(np.log10(r.rates[-1]) + 1e-9) + 1)
        self.rx_axis.tick_values = 10.0 ** decades[:: max(1, int(np.ceil(decades.size / 8)))]
        for mark, y in ((self.loss_raw, r.losses), (self.loss_smooth, r.smoothed)):
            x, yy = envelope(r.rates, np.asarray(y, float))
            with mark.hold_sync():
                mark.x, mark.y, mark.visible = x, yy, True
        at = [(x, c) for x, c in ((r.low, CURVE), (r.peak, CURVE), (r.peak_common, JOIN)) if x is not None]
        with self.marks_at.hold_sync():
            if at:
                self.marks_at.x = np.array([[x, x] for x, _ in at])
                self.marks_at.y = np.tile([0.0, 1.0], (len(at), 1))
                self.marks_at.colors = [c for _, c in at]
            self.marks_at.visible = bool(at)

    def _proposal(self) -> Schedule:
        if self.reading is None:
            raise complain("LogsPanel", "range test", None, "a range test read first", "pick or upload one")
        return self.reading.design(self.steps_box.value, READINGS[self.reading_choice.value],
                                   SHAPES[self.shape_choice.value])

    def _propose(self) -> None:
        if self.reading is None:
            return
        self.steps = self.steps_box.value
        self.use_peak.disabled = True
        s = self._proposal()
        self._set(self.proposal_text, lines("Starting design: <code>" + html.escape(repr(s)) + "</code>"))
        self.use_peak.disabled = False
        self._range_say("")

    # ------------------------------------------------------------------ adopting
    def _adopt(self, s: Schedule) -> None:
        self.adopted = s
        if self.on_adopt is not None:
            self.on_adopt(s)

    @staticmethod
    def _set(w: W.HTML, value: str) -> None:
        if w.value != value:
            w.value = value


def _named(sources: Any, default: str) -> dict[str, Any]:
    """Sources by name: a mapping as given, one source as ``{default: source}``, None as nothing."""
    if sources is None:
        return {}
    if isinstance(sources, Mapping):
        out = {}
        for k, v in sources.items():
            if not isinstance(k, str) or not k.strip() or k == NONE:
                raise complain("LogsPanel", "names", k, f"a non-empty name other than {NONE!r}")
            out[k] = v
        return out
    return {default: sources}


def _recovery_words(rec: Recovery, name: str) -> str:
    """What the recovered design is, in a few lines of HTML: its size, how well it fits, its repr (cut when long)."""
    text = repr(rec.design)
    shown = text if len(text) <= MAX_REPR else text[:MAX_REPR] + f"\u2026 ({len(text):,} characters in all)"
    if rec.exact:
        fit = f"reproduces all {rec.points:,} logged rates to a relative tolerance of {rec.rtol:g}".replace("e-0", "e-")
    else:
        spans = ", ".join(f"{a:,}..{b:,}" for a, b in rec.fallback[:4]) + (" ..." if len(rec.fallback) > 4 else "")
        fit = (f"no shape fits ticks {spans}, kept as knots; without them the closest compact design is off by "
               f"{rec.residual:.3g} (relative) at worst")
    return (tidy_html(f"Recovered from {name}: a design of {node_count(rec.design)} node(s) that {fit}.")
            + f"<br><code>{html.escape(shown)}</code>")


def _legend(rows: list[tuple[str, str]]) -> str:
    items = "".join(f'<span style="display:inline-flex;align-items:center;gap:6px;margin-right:16px;font-size:12px">'
                    f'<span style="display:inline-block;width:18px;height:3px;background:{c}"></span>'
                    f'{html.escape(name)}</span>' for c, name in rows)
    return f'<div style="display:flex;flex-wrap:wrap">{items}</div>'


class DesignerLogs(Panel, LogsPanel):
    """The logs panel as one of the designer's tabs: checks against the designer's design, adopts into it.

    It follows the designer's panel rules (``guard.Panel``): it reads the design, the clock and the budget
    when they change and it is on screen (or when its tab is shown), and an adopted design is proposed to the
    designer (``designer.propose``), whose message line gets any refusal.  The designer starts it as it starts
    Replay and Rescale: ``later[i] = DesignerLogs`` (called with the designer and ``tab=i``).
    """

    def __init__(self, designer: Any, tab: int | None = None, **kwargs: Any) -> None:
        LogsPanel.__init__(self, designer.schedule, steps=designer.steps, on_adopt=designer.guarded(designer.propose),
                           steps_per_epoch=designer.steps_per_epoch if designer.unit == "step" else None, **kwargs)
        self.listen(designer, tab, now=True)

    def shows(self) -> tuple:
        d = self.d
        return d.schedule, d.unit, d.steps_per_epoch, d.steps

    def paint(self) -> None:
        d = self.d
        self.steps_per_epoch = d.steps_per_epoch if d.unit == "step" else None
        if self.steps_box.value != d.steps:
            self.steps_box.value = d.steps  # the proposed starting design fills the designer's budget
        self.design = d.schedule  # checks the trace again (observe("design")) when the design changed

    def heard(self, change: dict | None = None) -> None:
        if self.comm is not None:  # a closed panel no longer follows the designer
            Panel.heard(self, change)

    def close(self) -> None:
        """Stop following the designer, then close every widget of the panel."""
        if self.comm is not None:
            self.d.unobserve(self.heard, names="revision")
        LogsPanel.close(self)
