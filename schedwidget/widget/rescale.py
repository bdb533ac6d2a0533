"""The rescale panel: the same design at a new batch size or process count, old and new overlaid, then apply.

Rates follow a scaling rule (linear, or square root); with ``keep="samples"``
a design in steps gets a rescaled clock so that its warmup and joins stay at
the same number of samples seen (``schedwidget.budget.scale_for_batch``).
When steps per epoch are known and the budget is a whole number of epochs, the
new budget is a whole number of epochs too: ``Budget(samples, new batch,
epochs, processes, drop_last=True).steps`` with samples per epoch = old steps
per epoch x old batch (the incomplete last global batch of an epoch is dropped).  A
design in epochs already counts samples, so only its rates change.  Nothing
raises into the notebook: problems go to the message line.
"""

from __future__ import annotations

import html
import warnings
from typing import TYPE_CHECKING, Callable

import ipywidgets as W
import numpy as np

with warnings.catch_warnings():
    # bqplot 0.13 declares traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Figure, LinearScale, Lines

from ..budget import Rescaled  # the arithmetic is the core's (budget arithmetic lives in schedwidget.budget)
from ..budget import rescale_for_batch as rescale
from ..sample import trace
from ..svg import nice_ticks
from ..schedule import complain
from .guard import Panel, quietly
from .theme import (AMBER, CURVE, ERROR_RED, RESCALE_FIGURE, TOGGLE, figure_layout, legend_html, lines, nice_ceiling,
                    rate_html, tidy_html)
from .theme import METRIC as OLD  # muted grey: the design as it is

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["RescalePanel", "Rescaled", "rescale"]



class RescalePanel(Panel, W.VBox):
    """Batch inputs, rule and keep toggles, old/new curves overlaid, a summary, an apply button.

    DOM hooks: ``sw-rescale`` (the panel), ``sw-rescale-apply``, ``sw-rescale-error``, ``sw-rescale-summary``.
    """

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        self.d = designer
        self.result: Rescaled | None = None
        self._batch_seen = designer.batch
        g = self._guard
        now = designer.batch or 0  # unknown: the person types it (no batch is assumed)
        label = {"description_width": "7em"}
        self.from_batch = W.IntText(value=now, description="batch now", style=label, layout={"width": "14em"},
                                    tooltip="the global batch the design was made for (the designer's batch)")
        self.batch = W.IntText(value=now * 8 if now else 1024, description="new batch", style=label,
                               layout={"width": "14em"},
                               tooltip="samples per batch on each process")
        self.processes = W.IntText(value=1, description="processes", style=label, layout={"width": "14em"},
                                   tooltip="data-parallel processes: the global batch is batch x processes")
        self.rule = W.ToggleButtons(options=[("linear", "linear"), ("square root", "sqrt")], value="linear",
                                    description="rate rule",
                                    tooltips=["rates x new/old batch (Goyal et al. 2017)",
                                              "rates x sqrt(new/old batch) (Krizhevsky 2014; from memory)"],
                                    style={"button_width": "8.5em", "description_width": "5em"}, layout=dict(TOGGLE))
        self.keep = W.ToggleButtons(options=["samples", "steps"], value="samples", description="keep",
                                    tooltips=["the warmup and stage changes stay at the same number of samples seen",
                                              "the warmup and stage changes stay at the same optimizer step"],
                                    style={"button_width": "8.5em", "description_width": "5em"}, layout=dict(TOGGLE))
        self.x_axis = W.ToggleButtons(options=["samples", "steps"], value="samples", description="x axis",
                                      tooltips=["x axis: samples seen", "x axis: optimizer steps"],
                                      style={"button_width": "8.5em", "description_width": "5em"}, layout=dict(TOGGLE))
        self.apply_button = W.Button(description="Apply", icon="check",
                                     tooltip="make the rescaled design the designer's design (and its batch)")
        self.apply_button.add_class("sw-rescale-apply")
        self.summary = W.HTML("")
        self.summary.add_class("sw-rescale-summary")
        self.message = W.HTML("", style={"text_color": ERROR_RED})
        self.message.add_class("sw-rescale-error")
        self.xs = LinearScale(min=0.0, allow_padding=False)
        self.ys = LinearScale(min=0.0, allow_padding=False)
        self.old_line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.ys}, colors=[OLD],
                              stroke_width=1.5, labels=["now"], display_legend=False)
        self.new_line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.ys}, colors=[CURVE],
                              stroke_width=2, labels=["rescaled"], display_legend=False)
        self.x_label = Axis(scale=self.xs, label="samples seen", tick_format=".3~s", num_ticks=6)
        self.figure = Figure(marks=[self.old_line, self.new_line],
                             axes=[self.x_label, Axis(scale=self.ys, side="left", label="", tick_format=".2~g")],
                             animation_duration=0, padding_y=0.05,
                             fig_margin=RESCALE_FIGURE[1], layout=W.Layout(**figure_layout(RESCALE_FIGURE)))
        self.figure.add_class("sw-rescale-figure")
        # the lines' names in the same compact legend above the plot as the designer's
        self.legend = W.HTML("", layout={"margin": "0 0 4px 0"})
        self.legend.add_class("sw-legend")
        self.figure_box = W.Box([self.figure], layout={"min_height": "280px", "width": "100%"})
        self.y_title = W.HTML('<span style="font-size:12px;color:#374151">learning rate</span>')
        for w in (self.from_batch, self.batch, self.processes, self.rule, self.keep, self.x_axis):
            w.observe(g(lambda c: self.refresh()), names="value")
        self.apply_button.on_click(g(lambda b: self.apply()))
        inputs = W.Box([W.VBox([self.from_batch, self.batch, self.processes], layout={"margin": "0 16px 0 0"}),
                        W.VBox([self.rule, self.keep, self.x_axis])], layout={"flex_flow": "row wrap"})
        super().__init__([inputs,
                          self.legend, self.y_title, self.figure_box, self.summary, W.HBox([self.apply_button]), self.message])
        self.add_class("sw-rescale")
        self.listen(designer, tab, now=True)

    # ------------------------------------------------------------ plumbing
    def _guard(self, fn: Callable) -> Callable:
        """``fn`` with every exception turned into the message line."""
        return quietly(fn, self._say, "the design is unchanged")

    def _say(self, text: str, colour: str = ERROR_RED) -> None:
        if self.message.style.text_color != colour:
            self.message.style.text_color = colour
        value = lines(tidy_html(text))
        if self.message.value != value:
            self.message.value = value

    def shows(self) -> tuple:
        d = self.d
        return d.schedule, d.steps, d.unit, d.steps_per_epoch, d.batch

    def paint(self) -> None:
        """Follow the designer: a new designer batch becomes 'batch now' (its observer refreshes)."""
        batch = self.d.batch
        changed, self._batch_seen = batch != self._batch_seen, batch
        if changed and batch and self.from_batch.value != batch:
            self.from_batch.value = batch
            return
        self._guard(self.refresh)()

    # ---------------------------------------------------------------- work
    def refresh(self) -> None:
        """Rescale the designer's design with the current inputs and redraw both curves."""
        d = self.d
        if not self.from_batch.value:
            raise complain("rescale", "current batch", self.from_batch.value, "a whole number >= 1",
                           "the designer does not know the batch the design was made for: type it in 'batch now'")
        r = rescale(d.schedule, d.steps, d.unit, d.steps_per_epoch, self.from_batch.value, self.batch.value,
                    self.processes.value, self.rule.value, self.keep.value)
        self.result = r
        axis = self.x_axis.value
        fo, fn = r.x_factor("old", axis), r.x_factor("new", axis)
        note = ""
        if fo is None:  # an epoch design without steps per epoch: draw in epochs
            fo = fn = 1.0
            note = "x axis in epochs: the designer has no steps per epoch"
        label = {"samples": "samples seen", "steps": "optimizer step"}[axis] if not note else "epoch"
        if self.x_axis.disabled != bool(note):
            self.x_axis.disabled = bool(note)  # drawn in epochs: the samples/steps toggle does not apply
        to, tn = trace(r.old, r.old_steps), trace(r.new, r.new_steps)
        with self.old_line.hold_sync():
            self.old_line.x, self.old_line.y = to.x * fo, to.y
        with self.new_line.hold_sync():
            self.new_line.x, self.new_line.y = tn.x * fn, tn.y
        if self.x_label.label != label:
            self.x_label.label = label
        high = float(max(np.max(to.y, initial=0.0), np.max(tn.y, initial=0.0)))
        ceiling = nice_ceiling(high * 1.02)  # a round top with a label, the curve clear of the frame
        if (self.ys.min, self.ys.max) != (0.0, ceiling):
            with self.ys.hold_sync():
                self.ys.min, self.ys.max = 0.0, ceiling
        top = float(max(to.x[-1] * fo, tn.x[-1] * fn)) if to.x.size and tn.x.size else 1.0
        ticks = nice_ticks(0.0, top, 5)  # round values (the front end's own were 2.65M, 5.3M, ...)
        ticks = ticks[(ticks >= 0.0) & (ticks <= top)]
        if self.x_label.tick_values is None or not np.array_equal(self.x_label.tick_values, ticks):
            self.x_label.tick_values = ticks
        legend = legend_html([(OLD, "now", float(to.y[-1]) if to.y.size else 0.0),
                              (CURVE, "rescaled", float(tn.y[-1]) if tn.y.size else 0.0)])
        if self.legend.value != legend:
            self.legend.value = legend
        text = self._summary(r, to, tn)
        if self.summary.value != text:
            self.summary.value = text
        if r.unit == "epoch":
            note = (note + "; " if note else "") + "an epoch clock already counts samples: epochs stay, rates scale"
        elif r.budget is None and self.keep.value == "samples":
            note = ("the budget is not a whole number of epochs (or steps per epoch are unknown): "
                    "new steps = round(steps x old batch / new batch)")
        self._say(note, AMBER)

    def _summary(self, r: Rescaled, to, tn) -> str:
        peak_old, peak_new = float(np.max(to.y)), float(np.max(tn.y))
        unit = r.unit
        rows = [("global batch", f"{r.old_batch:,}", f"{r.new_batch:,}"),
                ("peak rate", rate_html(peak_old), rate_html(peak_new)),
                (f"run length ({unit}s)", f"{r.old_steps:,}", f"{r.new_steps:,}")]
        if r.old_spe:
            rows.append(("steps per epoch", f"{r.old_spe:,}", f"{r.new_spe:,}" if r.new_spe else "?"))
        if to.joins.size and unit == "step":
            j_old, j_new = float(to.joins[0]), float(tn.joins[0]) if tn.joins.size else float("nan")
            rows.append(("first stage change, samples", f"{j_old * r.old_batch:,.0f}", f"{j_new * r.new_batch:,.0f}"))
        num = 'style="text-align:right;padding:1px 10px"'
        body = "".join(f"<tr><td>{html.escape(a)}</td><td {num}>{b}</td><td {num}>{c}</td></tr>" for a, b, c in rows)
        table = f"<table><tr><th></th><th {num}>now</th><th {num}>rescaled</th></tr>{body}</table>"
        return table + self._budget_words(r)

    @staticmethod
    def _budget_words(r: Rescaled) -> str:
        """The new budget in words, with the rounding rule."""
        b = r.budget
        if b is None:
            return ""
        lines = [f"{b.epochs:,} epochs x {b.steps_per_epoch:,} steps per epoch = {b.steps:,} steps",
                 f"steps per epoch = floor({b.samples:,} samples / global batch {b.global_batch:,}) = "
                 f"{b.steps_per_epoch:,}: the incomplete last batch of each epoch is skipped"]
        return "".join(f"<p>{html.escape(x)}</p>" for x in lines)

    def apply(self) -> None:
        """Make the rescaled design the designer's design, with its batch, budget and steps per epoch."""
        r = self.result
        if r is None:
            raise complain("rescale", "design", None, "a rescaled design to apply", "fix the message above first")
        d = self.d
        with d.hold_trait_notifications():
            if getattr(d, "error", ""):
                d.error = ""
            d.batch = r.new_batch
            if r.unit == "step" and r.new_spe:
                d.steps_per_epoch = r.new_spe
            d.steps = r.new_steps
            d.schedule = r.new
        self._say(f"applied: global batch {r.new_batch:,}, {r.new_steps:,} {r.unit}s", CURVE)
