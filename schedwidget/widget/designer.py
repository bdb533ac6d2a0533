"""``ScheduleDesigner``: shape a schedule with sliders and watch the exact curve redraw live.

The designer holds one value, ``schedule`` (the last valid design), with its
clock (``unit``, ``steps_per_epoch``), its budget (``steps``) and a batch size
(``batch``, for cautions).  Every control only proposes a new value; one
observer redraws the curve first, then the readout, compare table, controls and
code.  An invalid proposal never replaces the design: its message goes to
``error`` and to the error line under the controls.
"""

from __future__ import annotations

import functools
import html
import os
from contextlib import contextmanager
from numbers import Integral
from time import perf_counter
from typing import Any, Callable, Iterator

import ipywidgets as W
from traitlets import Instance, Int, Unicode, observe, validate

from .. import spec as specs
from ..combine import warmup
from ..facts import facts
from ..schedule import Schedule, complain
from ..shapes import cosine
from .canvas import Clock, CurvePanel
from .codeview import ExportPanel
from .compare import ComparePanel, Pin
from .controls import ParamControl, check_error
from .form import rescale
from .readout import ReadoutPanel
from .replay import ReplayPanel
from .rescale import RescalePanel
from .stages import StagesPanel

__all__ = ["ScheduleDesigner", "demo_design", "READOUT_EXACT"]

READOUT_EXACT = 2 ** 17  # every tick read up to this budget (the demo's 103,500 too); a grid beyond
ERROR_RED = "#b91c1c"
DEMO_STEPS_PER_EPOCH, DEMO_EPOCHS, DEMO_BATCH = 1150, 90, 128


def demo_design() -> Schedule:
    """The demo scenario's starting point: 5 epochs of linear warmup to 0.1, then cosine to 0 (90 x 1,150 steps).

    A place to start shaping from, not a recommendation.

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


class Tabs(W.VBox):
    """Panes under a tab bar (``bar``, toggle buttons, class ``sw-tabs``); ``children[i]`` is pane ``i``.

    A hidden pane is not taken out of the layout (``display: none``) as a tab widget's pane would be:
    it keeps its width, gets ``height: 0`` and ``visibility: hidden``.  A bqplot figure lays itself out
    from its element's size when it first renders, and in a ``display: none`` pane that size is 0, so
    the plot area came out negative (width 0 - 156 px of margins); the browser's bar has no hidden
    state of its own either, so a pane filled by the kernel after the person moved on is never 0-sized.
    """

    selected_index = Int(0, help="the pane shown")

    def __init__(self, panes: list[W.Widget | None], titles: tuple[str, ...]) -> None:
        self.titles = tuple(titles)
        self.bar = W.ToggleButtons(options=[(t, i) for i, t in enumerate(self.titles)], value=0,
                                   style={"button_width": "7em"})
        self.bar.add_class("sw-tabs")
        super().__init__([W.Box([] if p is None else [p]) for p in panes],
                         layout={"border_top": "1px solid #e5e7eb", "padding": "4px 0 0 0"})
        self.bar.observe(lambda ch: setattr(self, "selected_index", ch["new"]), names="value")
        self._show({"new": 0})

    @observe("selected_index")
    def _show(self, change: dict) -> None:
        i = change["new"]
        if self.bar.value != i:
            self.bar.value = i
        for j, pane in enumerate(self.children):
            shown = j == i
            with pane.layout.hold_sync():
                pane.layout.height = None if shown else "0px"
                pane.layout.overflow = None if shown else "hidden"
                pane.layout.visibility = None if shown else "hidden"


class ScheduleDesigner(W.VBox):
    """An ipywidgets box to shape a learning-rate schedule and read it exactly.

    Parameters
    ----------
    schedule : the design to start from; None starts from the demo scenario
        (:func:`demo_design`, with 1,150 steps per epoch and batch 128).
    steps : the budget in ticks of the clock; default the design's length.
    steps_per_epoch : optimizer steps per epoch (shows epochs beside steps).
    unit : the clock of the design, ``"step"`` or ``"epoch"``.
    batch : batch size per update, used only for cautions.
    autosave : a spec file path written (atomically) after every valid change.

    Notes
    -----
    Assigning ``steps`` or ``unit`` in code changes only the budget read or the
    clock's name; ``set_total`` and ``set_unit`` (the budget row) convert the
    design in proportion.  While the design's length equals the budget, the
    budget follows the design when a stage gets longer or shorter.  The panels
    are attributes: ``stages``, ``canvas`` (the bqplot figure and its marks),
    ``readout``, ``compare``, ``export`` and ``tabs``; ``control(stage, name)``
    finds one parameter's control.

    Examples
    --------
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

    def __init__(self, schedule: Schedule | None = None, steps: int | None = None,
                 steps_per_epoch: int | None = None, unit: str = "step", batch: int | None = None,
                 autosave: str | os.PathLike | None = None, **kwargs: Any) -> None:
        self._hold, self._dirty, self._good, self._saved = 1, False, None, None
        self.redraws = 0
        self.timing: dict[str, float] = {}
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
        self.unit = unit
        self.steps_per_epoch = steps_per_epoch
        self.batch = batch
        self.steps = schedule.length if steps is None else steps
        self.schedule = schedule
        self.canvas = CurvePanel()
        self.canvas.x_choice.value = "epochs" if unit == "epoch" else "steps"
        self.readout = ReadoutPanel()
        self.stages = StagesPanel(self)
        self.compare = ComparePanel(self)
        self.export = ExportPanel(self)
        self.error_line = W.HTML("", style={"text_color": ERROR_RED})
        self.error_line.add_class("sw-error")
        self.canvas.rate_axis.observe(self.guarded(self._axes_changed), names="value")
        self.canvas.x_choice.observe(self.guarded(self._axes_changed), names="value")
        self.canvas.hover.observe(self.guarded(self._hovered), names="selected")
        stage_list = self.stages.list
        stage_list.layout = W.Layout(max_height="560px", overflow="auto")
        left = W.VBox([W.HTML("<b>Stages</b>"), self.stages, self.error_line],
                      layout={"width": "430px", "flex": "0 0 auto", "padding": "0 8px 0 0"})
        right = W.VBox([self.canvas, self.compare.pin_row, self.readout],
                       layout={"flex": "1 1 auto", "min_width": "0", "width": "auto"})
        # Replay and Rescale start when their tab is first opened (keeps the designer quick to open)
        self.later: dict[int, type] = {2: ReplayPanel, 3: RescalePanel}
        self.tabs = Tabs([self.compare, self.export, None, None], ("Compare", "Export", "Replay", "Rescale"))
        self.export.visible = lambda: self.tabs.selected_index == 1
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

    @validate("steps")
    def _check_steps(self, proposal: dict) -> int:
        return _whole("ScheduleDesigner", "steps", proposal["value"], False)

    @validate("steps_per_epoch")
    def _check_spe(self, proposal: dict) -> int | None:
        return _whole("ScheduleDesigner", "steps_per_epoch", proposal["value"], True)

    @validate("batch")
    def _check_batch(self, proposal: dict) -> int | None:
        return _whole("ScheduleDesigner", "batch", proposal["value"], True)

    # ------------------------------------------------------------ the one redraw
    @observe("schedule", "steps", "steps_per_epoch", "unit", "batch")
    def _changed(self, change: dict) -> None:
        if self._hold:
            self._dirty = True
            return
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

    @property
    def clock(self) -> Clock:
        """How the design's ticks map onto the x axis right now."""
        return self.clock_for(self.unit, self.steps_per_epoch)

    def clock_for(self, unit: str, steps_per_epoch: int | None) -> Clock:
        """The x-axis mapping for a design on another clock (used for pins)."""
        return Clock(unit, steps_per_epoch, self.canvas.x_choice.value)

    def _refresh(self) -> None:
        """Curve first, then readout, compare table, controls, code, autosave; revert on failure."""
        t0 = perf_counter()
        s, n = self.schedule, self.steps
        try:
            self.canvas.draw(s, n, self.clock)
            t1 = perf_counter()
            spe = self.steps_per_epoch if self.unit == "step" else None
            self.readout.show(facts(s, n, spe, self.unit, self.batch, exact_up_to=READOUT_EXACT))
            t2 = perf_counter()
            self.compare.refresh(ghosts=self._good is None or self._good[1:4] != (n, self.unit,
                                                                                  self.steps_per_epoch))
            self.stages.sync()
            self.export.refresh()
            self._autosave()
        except Exception as exc:
            self._revert(exc)
            return
        self.timing = {"marks": t1 - t0, "readout": t2 - t1, "total": perf_counter() - t0, "marks_at": t1}
        self._good = (s, n, self.unit, self.steps_per_epoch, self.batch)
        self.redraws += 1
        if self.error:
            self.error = ""

    def _revert(self, exc: BaseException) -> None:
        good = self._good
        message = check_error(exc)
        if good is not None and good != (self.schedule, self.steps, self.unit, self.steps_per_epoch, self.batch):
            self._good = None
            with self._one_redraw():
                self.schedule, self.steps, self.unit, self.steps_per_epoch, self.batch = good
        self.error = message

    def _autosave(self) -> None:
        if self.autosave is None:
            return
        spec = self.to_spec()
        if spec != self._saved:
            self.save(self.autosave)
            self._saved = spec

    # ------------------------------------------------------------ proposals
    def guarded(self, fn: Callable) -> Callable:
        """``fn`` wrapped so that no exception leaves it: the message goes to ``error`` instead."""
        @functools.wraps(fn)
        def run(*args: Any, **kwargs: Any) -> Any:
            try:
                return fn(*args, **kwargs)
            except Exception as exc:
                self.error = check_error(exc)
                try:
                    self.stages.sync()  # put the controls back to the last valid design
                except Exception:  # pragma: no cover - the message above is what matters
                    pass
                return None
        return run

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

    # ------------------------------------------------------------ pins, files
    @property
    def pins(self) -> list[Pin]:
        """The pinned designs, oldest first."""
        return list(self.compare.pins)

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

    # ------------------------------------------------------------ figure events
    def _axes_changed(self, _change: dict) -> None:
        self.canvas.use_log(self.canvas.rate_axis.value == "log")
        self.canvas.draw(self.schedule, self.steps, self.clock)
        self.compare.refresh(ghosts=True)

    def _tab_changed(self, change: dict) -> None:
        i = change["new"]
        if i in self.later:
            self.tabs.children[i].children = (self.later.pop(i)(self),)
        if self.export.stale and self.export.visible():
            self.export.refresh()

    def _hovered(self, change: dict) -> None:
        words = self.canvas.read(self.schedule, change["new"])
        if words and self.canvas.hover_label.value != words:
            self.canvas.hover_label.value = words

    @observe("error")
    def _show_error(self, change: dict) -> None:
        if hasattr(self, "error_line"):
            self.error_line.value = html.escape(change["new"])

    # ------------------------------------------------------------ display
    def summary(self) -> str:
        """One line: the budget and the readout's sentence."""
        f = self.readout.facts
        words = f"{self.steps:,} {self.unit}s"
        if self.steps_per_epoch and self.unit == "step":
            words += f" ({self.steps / self.steps_per_epoch:,.4g} epochs)"
        return f"ScheduleDesigner · {words} · {f.sentence if f is not None else repr(self.schedule)}"

    def _repr_mimebundle_(self, **kwargs: Any) -> dict:
        data = super()._repr_mimebundle_(**kwargs) or {}
        data["text/plain"] = self.summary()
        try:
            from ..svg import render_svg
        except ImportError:
            return data
        try:
            data["image/svg+xml"] = render_svg(
                self.schedule, steps=self.steps, log=self.canvas.rate_axis.value == "log", unit=self.unit,
                steps_per_epoch=self.steps_per_epoch, ghosts=[(p.name, p.schedule) for p in self.compare.pins])
        except Exception:  # the widget still shows; only the static picture is missing
            pass
        return data

