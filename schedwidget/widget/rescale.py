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
from typing import TYPE_CHECKING, Any, Callable

import ipywidgets as W
import numpy as np

with warnings.catch_warnings():
    # bqplot 0.13 declares traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, Figure, LinearScale, Lines

from ..sample import trace
from ..svg import nice_ticks
from ..schedule import Schedule, complain
from .guard import Panel, quietly
from .theme import AMBER, CURVE, ERROR_RED, RESCALE_FIGURE, figure_layout
from .theme import METRIC as OLD  # muted grey: the design as it is

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["RescalePanel", "Rescaled", "rescale"]



class Rescaled:
    """One rescaling: the new design, its budget and clock, and how each design's ticks map to samples/steps."""

    def __init__(self, old: Schedule, new: Schedule, old_steps: int, new_steps: int, unit: str,
                 old_batch: int, new_batch: int, old_spe: int | None, new_spe: int | None,
                 budget: Any = None) -> None:
        self.old, self.new = old, new
        self.budget = budget  # the new Budget when the clock was rescaled in whole epochs, else None
        self.old_steps, self.new_steps = old_steps, new_steps
        self.unit, self.old_batch, self.new_batch = unit, old_batch, new_batch
        self.old_spe, self.new_spe = old_spe, new_spe

    def x_factor(self, which: str, axis: str) -> float | None:
        """x = tick * factor for the old or new design on a "samples" or "steps" axis (None: not known)."""
        batch, spe = (self.old_batch, self.old_spe) if which == "old" else (self.new_batch, self.new_spe)
        if self.unit == "step":
            return float(batch) if axis == "samples" else 1.0
        if not self.old_spe:
            return None
        if axis == "samples":
            return float(self.old_spe * self.old_batch)  # an epoch is the same data at either batch size
        return float(spe)


def rescale(s: Schedule, steps: int, unit: str, steps_per_epoch: int | None, from_batch: int, batch: int,
            processes: int, rule: str, keep: str) -> Rescaled:
    """``s`` moved from global batch ``from_batch`` to ``batch * processes`` (see the module docstring).

    >>> from schedwidget import cosine, warmup
    >>> r = rescale(warmup(cosine(0.1, steps=97_750), 5_750), 103_500, "step", 1150, 128, 1024, 1, "linear", "samples")
    >>> r.new_steps, r.new_spe, round(r.new(715), 6)
    (12870, 143, 0.8)
    """
    from ..budget import Budget, scale_for_batch  # lazy: the budget arithmetic is its own module

    for name, v in (("current batch", from_batch), ("new batch", batch), ("processes", processes)):
        if isinstance(v, bool) or not isinstance(v, int) or v < 1:
            raise complain("rescale", name, v, "a whole number >= 1")
    to_batch = batch * processes
    if unit == "epoch":  # the epoch clock counts samples already: keep the ticks, scale the rates
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep="steps")
        new_spe = None
        if steps_per_epoch:
            new_spe = Budget(samples=steps_per_epoch * from_batch, batch=batch, processes=processes, epochs=1,
                             drop_last=True).steps_per_epoch
        return Rescaled(s, new, steps, steps, unit, from_batch, to_batch, steps_per_epoch, new_spe)
    if keep == "samples" and s.length is None:
        raise complain("rescale", "design length", None, "a length to rescale the clock in samples",
                       "an open-ended design keeps its ticks; choose keep 'steps'")
    if keep == "steps":
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep)
        return Rescaled(s, new, steps, steps, unit, from_batch, to_batch, steps_per_epoch, steps_per_epoch)
    budget = None
    if steps_per_epoch and steps % steps_per_epoch == 0:
        # whole epochs stay whole epochs: the incomplete last global batch of an epoch is dropped
        budget = Budget(samples=steps_per_epoch * from_batch, batch=batch, epochs=steps // steps_per_epoch,
                        processes=processes, drop_last=True)
        new_steps, new_spe = budget.steps, budget.steps_per_epoch
        n = new_steps if s.length == steps else max(1, round(s.length * new_steps / steps))
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep, steps=n)
    else:
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep)
        new_steps = new.length if s.length == steps else max(1, round(steps * from_batch / to_batch))
        new_spe = None
    return Rescaled(s, new, steps, new_steps, unit, from_batch, to_batch, steps_per_epoch, new_spe, budget)


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
        self.rule = W.ToggleButtons(options=["linear", "sqrt"], value="linear", description="rate rule",
                                    tooltips=["rates x new/old batch (Goyal et al. 2017)",
                                              "rates x sqrt(new/old batch) (Krizhevsky 2014; from memory)"],
                                    style={"button_width": "7em", "description_width": "5em"})
        self.keep = W.ToggleButtons(options=["samples", "steps"], value="samples", description="keep",
                                    tooltips=["warmup and joins stay at the same samples seen",
                                              "warmup and joins stay at the same optimizer step"],
                                    style={"button_width": "7em", "description_width": "5em"})
        self.x_axis = W.ToggleButtons(options=["samples", "steps"], value="samples", description="x axis",
                                      tooltips=["x axis: samples seen", "x axis: optimizer steps"],
                                      style={"button_width": "7em", "description_width": "5em"})
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
                              stroke_width=1.5, labels=["now"], display_legend=True)
        self.new_line = Lines(x=np.zeros(1), y=np.zeros(1), scales={"x": self.xs, "y": self.ys}, colors=[CURVE],
                              stroke_width=2, labels=["rescaled"], display_legend=True)
        self.x_label = Axis(scale=self.xs, label="samples seen", tick_format=".3~s", num_ticks=6)
        self.figure = Figure(marks=[self.old_line, self.new_line],
                             axes=[self.x_label, Axis(scale=self.ys, side="left", label="", tick_format=".2~g")],
                             animation_duration=0, padding_y=0.05, legend_location="top-right",
                             fig_margin=RESCALE_FIGURE[1], layout=W.Layout(**figure_layout(RESCALE_FIGURE)))
        self.figure.add_class("sw-rescale-figure")
        self.figure_box = W.Box([self.figure], layout={"min_height": "280px", "width": "100%"})
        self.y_title = W.HTML('<span style="font-size:12px;color:#374151">learning rate</span>')
        for w in (self.from_batch, self.batch, self.processes, self.rule, self.keep, self.x_axis):
            w.observe(g(lambda c: self.refresh()), names="value")
        self.apply_button.on_click(g(lambda b: self.apply()))
        super().__init__([W.HBox([W.VBox([self.from_batch, self.batch, self.processes]),
                                  W.VBox([self.rule, self.keep, self.x_axis])]),
                          self.y_title, self.figure_box, self.summary, W.HBox([self.apply_button]), self.message])
        self.add_class("sw-rescale")
        self.listen(designer, tab, now=True)

    # ------------------------------------------------------------ plumbing
    def _guard(self, fn: Callable) -> Callable:
        """``fn`` with every exception turned into the message line."""
        return quietly(fn, self._say, "the design is unchanged")

    def _say(self, text: str, colour: str = ERROR_RED) -> None:
        if self.message.style.text_color != colour:
            self.message.style.text_color = colour
        value = html.escape(text)
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
        top = float(max(to.x[-1] * fo, tn.x[-1] * fn)) if to.x.size and tn.x.size else 1.0
        ticks = nice_ticks(0.0, top, 5)  # round values (the front end's own were 2.65M, 5.3M, ...)
        ticks = ticks[(ticks >= 0.0) & (ticks <= top)]
        if self.x_label.tick_values is None or not np.array_equal(self.x_label.tick_values, ticks):
            self.x_label.tick_values = ticks
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
                ("peak rate", f"{peak_old:.4g}", f"{peak_new:.4g}"),
                (f"budget ({unit}s)", f"{r.old_steps:,}", f"{r.new_steps:,}")]
        if r.old_spe:
            rows.append(("steps per epoch", f"{r.old_spe:,}", f"{r.new_spe:,}" if r.new_spe else "?"))
        if to.joins.size and unit == "step":
            j_old, j_new = float(to.joins[0]), float(tn.joins[0]) if tn.joins.size else float("nan")
            rows.append(("first join, samples", f"{j_old * r.old_batch:,.0f}", f"{j_new * r.new_batch:,.0f}"))
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
