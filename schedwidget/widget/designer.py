"""``ScheduleDesigner``: shape a schedule with sliders and watch the exact curve redraw live.

The designer holds the design and what is derived from it as traits: ``schedule``
(the last valid design), its clock and budget (``unit``, ``steps_per_epoch``,
``steps``, and ``batch`` for cautions), the ``facts`` of the design (computed once
per change, shared by every panel) and the ``pinned`` designs.  It only assembles
the panels: each observes ``revision`` (bumped once per accepted change) and
redraws what changed for it (``guard.Panel``).  Controls only propose a new value;
an invalid proposal never replaces the design: its message goes to ``error``.
"""

from __future__ import annotations

import html
import os
from contextlib import contextmanager
from numbers import Integral
from time import perf_counter
from typing import Any, Callable, Iterator

import ipywidgets as W
from traitlets import Instance, Int, Tuple, Unicode, observe, validate

from .. import spec as specs
from ..combine import warmup
from ..facts import Facts, facts
from ..schedule import Schedule, complain
from ..shapes import cosine
from ..svg import render_svg
from .canvas import Clock, CurvePanel
from .codeview import ExportPanel
from .compare import ComparePanel, Pin
from .controls import ParamControl
from .form import rescale
from .guard import explain, quietly
from .readout import ReadoutPanel
from .replay import ReplayPanel
from .rescale import RescalePanel
from .stages import StagesPanel
from .theme import ERROR_RED, Tabs

__all__ = ["ScheduleDesigner", "demo_design", "READOUT_EXACT"]

READOUT_EXACT = 2 ** 17  # every tick read up to this budget (the demo's 103,500 too); beyond it,
READOUT_GRID = 2 ** 14   # a grid of about this many ticks plus every jump (bounded work per change)
DEMO_STEPS_PER_EPOCH, DEMO_EPOCHS, DEMO_BATCH = 1150, 90, 128
KEPT = "the last valid design is kept"


def demo_design() -> Schedule:
    """The demo scenario's starting point: 5 epochs of linear warmup to 0.1, then cosine to 0 (90 x 1,150 steps).

    >>> demo_design().length
    103500
    """
    spe = DEMO_STEPS_PER_EPOCH
    return warmup(cosine(0.1, 0.0, steps=(DEMO_EPOCHS - 5) * spe), steps=5 * spe)


def _whole(owner: str, name: str, value: Any, optional: bool) -> int | None:
    if value is None and optional:
        return None
    if isinstance(value, bool) or not isinstance(value, Integral) or value < 1:
        raise complain(owner, name, value, "a whole number >= 1" + (" or None" if optional else ""))
    return int(value)


class ScheduleDesigner(W.VBox):
    """An ipywidgets box to shape a learning-rate schedule and read it exactly.

    Parameters: ``schedule`` (None: the demo scenario, :func:`demo_design`, 1,150 steps per
    epoch, batch 128), ``steps`` (the budget; default the design's length), ``steps_per_epoch``,
    ``unit`` (``"step"`` or ``"epoch"``), ``batch`` (for cautions), ``autosave`` (a spec file
    written atomically after every valid change).  ``set_total`` and ``set_unit`` convert the
    design in proportion; assigning ``steps`` or ``unit`` only changes what is read.  Panels:
    ``stages``, ``canvas``, ``readout``, ``compare``, ``export`` and ``tabs``.

    >>> from schedwidget import ScheduleDesigner, cosine
    >>> d = ScheduleDesigner(cosine(0.1, steps=1000))
    >>> d.control(0, "peak").text.value = 0.2
    >>> d.schedule
    cosine(peak=0.2, floor=0.0, steps=1000)
    """

    schedule = Instance(Schedule, help="the current design (always the last valid one)")
    error = Unicode("", help="the last problem in words; empty when the last change was valid")
    unit = Unicode("step", help="the unit of the design's clock: 'step' or 'epoch'")
    steps = Int(1, help="the budget in ticks of the clock")
    steps_per_epoch = Int(None, allow_none=True, help="optimizer steps per epoch, or None")
    batch = Int(None, allow_none=True, help="batch size per update, or None (for cautions only)")
    facts = Instance(Facts, allow_none=True, help="the facts of the design over its budget (once per change)")
    pinned = Tuple(help="the pinned designs (Pin values), oldest first")
    revision = Int(0, help="bumped once per accepted change, when every trait above holds its new value")

    def __init__(self, schedule: Schedule | None = None, steps: int | None = None,
                 steps_per_epoch: int | None = None, unit: str = "step", batch: int | None = None,
                 autosave: str | os.PathLike | None = None, **kwargs: Any) -> None:
        self._hold, self._dirty, self._good, self._saved, self._read = 1, False, None, None, None
        self.redraws, self.timing = 0, {}
        super().__init__(**kwargs)
        if schedule is None:
            schedule = demo_design()
            steps_per_epoch = DEMO_STEPS_PER_EPOCH if steps_per_epoch is None else steps_per_epoch
            batch = DEMO_BATCH if batch is None else batch
        if not isinstance(schedule, Schedule):
            raise complain("ScheduleDesigner", "schedule", schedule, "a Schedule (cosine(...), stages(...), ...)")
        if steps is None and schedule.length is None:
            raise complain("ScheduleDesigner", "steps", None, "a whole number >= 1 for an open-ended design",
                           "pass steps=the number of ticks to draw and read")
        self.autosave = None if autosave is None else os.fspath(autosave)
        self.unit, self.steps_per_epoch, self.batch = unit, steps_per_epoch, batch
        self.steps = schedule.length if steps is None else steps
        self.schedule = schedule
        self.tabs = Tabs(("Compare", "Export", "Replay", "Rescale"))
        self.canvas = CurvePanel(self, "epochs" if unit == "epoch" else "steps")  # observes first: marks first
        self.observe(self._derive, names="revision")  # then the facts every other panel reads
        self.readout, self.stages = ReadoutPanel(self), StagesPanel(self)
        self.compare, self.export = ComparePanel(self, tab=0), ExportPanel(self, tab=1)
        self.error_line = W.HTML("", style={"text_color": ERROR_RED})
        self.error_line.add_class("sw-error")
        self.stages.list.layout = W.Layout(max_height="560px", overflow="auto")
        left = W.VBox([W.HTML("<b>Stages</b>"), self.stages, self.error_line],
                      layout={"width": "430px", "flex": "0 0 auto", "padding": "0 8px 0 0"})
        right = W.VBox([self.canvas, self.compare.pin_row, self.readout],
                       layout={"flex": "1 1 auto", "min_width": "0", "width": "auto"})
        self.tabs.fill(0, self.compare)
        self.tabs.fill(1, self.export)
        self.later: dict[int, type] = {2: ReplayPanel, 3: RescalePanel}  # started when first shown
        self.tabs.observe(self.guarded(self._tab_changed), names="selected_index")
        self.children = [W.HBox([left, right]), self.tabs.bar, self.tabs]
        self.add_class("sw-designer")
        self._hold = 0
        self._refresh()

    # ------------------------------------------------------------ validation
    @validate("unit")
    def _check_unit(self, proposal: dict) -> str:
        if proposal["value"] not in specs.UNITS:
            raise complain("ScheduleDesigner", "unit", proposal["value"], "one of 'step', 'epoch'")
        return proposal["value"]

    @validate("steps", "steps_per_epoch", "batch")
    def _check_whole(self, proposal: dict) -> int | None:
        name = proposal["trait"].name
        return _whole("ScheduleDesigner", name, proposal["value"], name != "steps")

    # ------------------------------------------------------------ one change, one redraw
    @observe("schedule", "steps", "steps_per_epoch", "unit", "batch", "pinned")
    def _changed(self, change: dict) -> None:
        with self._one_redraw():
            self._dirty = True
            old, new = change["old"], change["new"]
            if change["name"] == "schedule" and isinstance(old, Schedule) and old.length == self.steps \
                    and new.length is not None:
                self.steps = new.length  # the budget follows a design it was following

    @contextmanager
    def _one_redraw(self) -> Iterator[None]:
        """Changes made inside cause one redraw at the end, and only if something changed."""
        self._hold += 1
        try:
            yield
        finally:
            self._hold -= 1
        if self._hold == 0 and self._dirty:
            self._dirty = False
            self._refresh()

    def _state(self) -> tuple:
        return self.schedule, self.steps, self.unit, self.steps_per_epoch, self.batch

    def _derive(self, _change: dict) -> None:
        """The facts of the design, once per change of what they read (the curve is drawn by now)."""
        self.timing["marks_at"] = t0 = perf_counter()
        if self._read != self._state():
            s, n, unit, spe, batch = self._state()
            self.facts = facts(s, n, spe if unit == "step" else None, unit, batch,
                               exact_up_to=READOUT_EXACT if n <= READOUT_EXACT else READOUT_GRID)
            self._read = self._state()
        self.timing["readout"] = perf_counter() - t0

    def _refresh(self) -> None:
        """Bump ``revision``: every panel redraws what changed for it; revert if one of them fails."""
        t0 = perf_counter()
        try:
            self.revision += 1
            self._autosave()
        except Exception as exc:
            self._revert(exc)
            return
        self.timing.update(marks=self.timing["marks_at"] - t0, total=perf_counter() - t0)
        self._good, self.redraws = self._state() + (self.pinned,), self.redraws + 1
        if self.error:
            self.error = ""

    def _revert(self, exc: BaseException) -> None:
        good, self._read = self._good, None
        if good is not None and good != self._state() + (self.pinned,):
            self._good = None
            with self._one_redraw():
                self.schedule, self.steps, self.unit, self.steps_per_epoch, self.batch, self.pinned = good
        self.error = explain(exc, KEPT)

    def _autosave(self) -> None:
        if self.autosave is not None and self.to_spec() != self._saved:
            self.save(self.autosave)
            self._saved = self.to_spec()

    # ------------------------------------------------------------ proposals
    def guarded(self, fn: Callable) -> Callable:
        """``fn`` wrapped so that no exception leaves it: the message goes to ``error``."""
        return quietly(fn, self._refuse, KEPT)

    def _refuse(self, words: str) -> None:
        if self.error == words:
            self.error = ""  # the same refusal again is heard again (the controls go back again)
        self.error = words

    def propose(self, s: Schedule) -> None:
        """Make ``s`` the design (controls call this with the value they built)."""
        if self.error:
            self.error = ""
        self.schedule = s

    def set_total(self, total: int) -> None:
        """A new budget; the design's ticks are scaled in proportion (stage by stage, or ``stretch``)."""
        total = _whole("designer", "total", total, False)
        if total != self.steps:
            new = rescale(self.schedule, self.steps, total)
            with self._one_redraw():
                self.steps = total
                self.propose(new)

    def set_unit(self, unit: str) -> None:
        """Change the clock; with steps per epoch known the design is converted, otherwise relabelled."""
        self._check_unit({"value": unit})
        if unit == self.unit or not self.steps_per_epoch:
            self.unit = unit
            return
        spe = self.steps_per_epoch
        steps = self.steps * spe if unit == "step" else max(1, round(self.steps / spe))
        new = rescale(self.schedule, self.steps, steps)
        with self._one_redraw():
            self.unit, self.steps = unit, steps
            self.propose(new)
            self.canvas.x_choice.value = "epochs" if unit == "epoch" else "steps"

    def restore(self, s: Schedule, steps: int, unit: str, steps_per_epoch: int | None) -> None:
        """Put a design back with its budget and clock (one redraw)."""
        with self._one_redraw():
            self.unit, self.steps_per_epoch, self.steps = unit, steps_per_epoch, steps
            self.propose(s)

    def control(self, stage: int | str, name: str) -> ParamControl:
        """The control of parameter ``name`` of stage ``stage`` (0 = first stage; "warmup" = the warmup)."""
        return self.stages.control(stage, name)

    @property
    def clock(self) -> Clock:
        """How the design's ticks map onto the x axis right now."""
        return self.clock_for(self.unit, self.steps_per_epoch)

    def clock_for(self, unit: str, steps_per_epoch: int | None) -> Clock:
        """The x-axis mapping for a design on another clock (used for pins)."""
        return Clock(unit, steps_per_epoch, self.canvas.x_choice.value)

    # ------------------------------------------------------------ pins, files
    @property
    def pins(self) -> list[Pin]:
        """The pinned designs, oldest first."""
        return list(self.pinned)

    def pin(self, name: str | None = None) -> Pin:
        """Pin the current design under ``name`` (drawn as a grey ghost; up to five)."""
        return self.compare.pin(name)

    def to_spec(self) -> dict:
        """The current design as a spec dict, with its unit and steps per epoch."""
        return specs.to_spec(self.schedule, self.unit, self.steps_per_epoch)

    def save(self, path: str | os.PathLike) -> os.PathLike:
        """Write the current design to ``path`` atomically (``schedwidget.spec.save``)."""
        return specs.save(self.schedule, path, unit=self.unit, steps_per_epoch=self.steps_per_epoch)

    def load(self, path: str | os.PathLike) -> str:
        """Read a spec file into the editor (validated; loading never runs code)."""
        d = specs.load_design(path)
        with self._one_redraw():
            self.unit = d.unit
            if d.steps_per_epoch is not None:
                self.steps_per_epoch = d.steps_per_epoch
            if d.schedule.length is not None:
                self.steps = d.schedule.length
            self.propose(d.schedule)
        return os.fspath(path)

    @classmethod
    def from_file(cls, path: str | os.PathLike, **kwargs: Any) -> ScheduleDesigner:
        """A designer opened on the spec file at ``path`` (e.g. an autosave file)."""
        d = specs.load_design(path)
        kwargs.setdefault("unit", d.unit)
        kwargs.setdefault("steps_per_epoch", d.steps_per_epoch)
        return cls(d.schedule, **kwargs)

    # ------------------------------------------------------------ tabs, display
    def _tab_changed(self, change: dict) -> None:
        if change["new"] in self.later:
            self.tabs.fill(change["new"], self.later.pop(change["new"])(self, tab=change["new"]))

    @observe("error")
    def _show_error(self, change: dict) -> None:
        if hasattr(self, "error_line"):
            self.error_line.value = html.escape(change["new"])

    def summary(self) -> str:
        """One line: the budget and the readout's sentence."""
        words = f"{self.steps:,} {self.unit}s"
        if self.steps_per_epoch and self.unit == "step":
            words += f" ({self.steps / self.steps_per_epoch:,.4g} epochs)"
        f = self.facts
        return f"ScheduleDesigner · {words} · {f.sentence if f is not None else repr(self.schedule)}"

    def _repr_mimebundle_(self, **kwargs: Any) -> dict:
        data = super()._repr_mimebundle_(**kwargs) or {}
        data["text/plain"] = self.summary()
        try:
            data["image/svg+xml"] = render_svg(
                self.schedule, steps=self.steps, log=self.canvas.rate_axis.value == "log", unit=self.unit,
                steps_per_epoch=self.steps_per_epoch, ghosts=[(p.name, p.schedule) for p in self.pinned])
        except Exception:  # the widget still shows; only the static picture is missing
            pass
        return data
