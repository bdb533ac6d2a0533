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
from time import perf_counter
from typing import Any, Callable, Iterator

import ipywidgets as W
from traitlets import Any as AnyTrait
from traitlets import Instance, Int, Tuple, Unicode, observe, validate

from .. import spec as specs
from ..facts import Facts, facts
from ..schedule import Schedule, ScheduleError, complain
from ..tracks import GroupDesigns, Tracks
from .canvas import Clock, CurvePanel
from .codeview import ExportPanel, FileMethods
from .compare import ComparePanel, PinMethods
from .form import DEMO_BATCH, DEMO_STEPS_PER_EPOCH, demo_design, whole
from .guard import explain, quietly
from .readout import DisplayMethods, ReadoutPanel
from .replay import ReplayPanel
from .rescale import RescalePanel
from .stages import BudgetMethods, StagesPanel
from .theme import ERROR_RED, Tabs, lines, tidy_html
from .tracks_view import TRACK_WORDS, TracksPanel, as_held, check_group, group_tracks, with_track

__all__ = ["ScheduleDesigner", "demo_design", "READOUT_EXACT"]

READOUT_EXACT = 2 ** 17  # every tick read up to this budget (the demo's 103,500 too); beyond it,
READOUT_GRID = 2 ** 14   # a grid of about this many ticks plus every jump (bounded work per change)
KEPT = "the last valid design is kept"


class ScheduleDesigner(BudgetMethods, FileMethods, PinMethods, DisplayMethods, W.VBox):
    """An ipywidgets box to shape a learning-rate schedule and read it exactly.

    Parameters: ``schedule`` (None: the demo scenario, :func:`demo_design`, 1,150 steps per
    epoch, batch 128; ``tracks(...)`` or ``per_group(...)``: the stages edit the rate of ``group``, the
    companion tracks are drawn under the curve), ``steps`` (the budget; default the design's length),
    ``steps_per_epoch``, ``unit`` (``"step"`` or ``"epoch"``), ``batch`` (for cautions), ``autosave`` (a
    spec file written atomically after every valid change), ``traces`` and ``range_logs`` (what the Logs
    tab offers to pick).  ``set_total`` and ``set_unit`` convert the design in proportion; assigning
    ``steps`` or ``unit`` only changes what is read.  Panels: ``stages``, ``canvas``, ``readout``,
    ``compare``, ``export``, ``tracks_panel`` (with tracks), ``logs`` (once its tab is shown) and ``tabs``.

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
    tracks = AnyTrait(None, allow_none=True, help="tracks(...) or per_group(...) whose rate (of ``group``) is "
                      "``schedule``; None when the designer holds a rate only")
    group = Int(0, help="the param group whose rate the stages edit (0 unless ``tracks`` is per_group(...))")
    track = Unicode("rate", help="the track the stages edit: 'rate', or a companion the tracks hold ('momentum', "
                    "'beta2', 'weight_decay')")
    tracks_problem = Unicode("", help="why the companion tracks could not follow the last change of the rate")
    revision = Int(0, help="bumped once per accepted change, when every trait above holds its new value")

    def __init__(self, schedule: Schedule | None = None, steps: int | None = None,
                 steps_per_epoch: int | None = None, unit: str = "step", batch: int | None = None,
                 autosave: str | os.PathLike | None = None, traces: Any = None, range_logs: Any = None,
                 **kwargs: Any) -> None:
        self._hold, self._dirty, self._good, self._saved, self._read = 1, False, None, None, None
        self.redraws, self.timing = 0, {}
        self._traces, self._range_logs = traces, range_logs  # for the Logs tab (LogsPanel's own arguments)
        super().__init__(**kwargs)
        if schedule is None:
            schedule = demo_design()
            steps_per_epoch = DEMO_STEPS_PER_EPOCH if steps_per_epoch is None else steps_per_epoch
            batch = DEMO_BATCH if batch is None else batch
        held = None
        if isinstance(schedule, (Tracks, GroupDesigns)):  # a rate with companion tracks, or a design per group
            held, schedule = schedule, group_tracks(schedule, 0).rate
        if not isinstance(schedule, Schedule):
            raise complain("ScheduleDesigner", "schedule", schedule, "a Schedule (cosine(...), stages(...), ...), "
                           "tracks(...) or per_group(...)")
        if steps is None and schedule.length is None:
            raise complain("ScheduleDesigner", "steps", None, "a whole number >= 1 for an open-ended design",
                           "pass steps=the number of ticks to draw and read")
        self.autosave = None if autosave is None else os.fspath(autosave)
        self.unit, self.steps_per_epoch, self.batch = unit, steps_per_epoch, batch
        self.steps = schedule.length if steps is None else steps
        self.schedule = schedule
        self.tracks = held
        self.tabs = Tabs(("Compare", "Export", "Replay", "Rescale", "Numbers", "Logs"))
        self.canvas = CurvePanel(self, "epochs" if unit == "epoch" else "steps")  # observes first: marks first
        self.observe(self._derive, names="revision")  # then the facts every other panel reads
        self.readout, self.stages = ReadoutPanel(self), StagesPanel(self)
        self.compare, self.export = ComparePanel(self, tab=0), ExportPanel(self, tab=1)
        self.error_line = W.HTML("", style={"text_color": ERROR_RED})
        self.error_line.add_class("sw-error")
        self.stages.list.layout = W.Layout(max_height="380px", overflow="auto")
        left = W.VBox([self.stages, self.error_line],
                      layout={"width": "390px", "flex": "0 0 390px", "padding": "0 8px 0 0"})
        self.companions = W.VBox([])  # the tracks panel, started when the designer first holds tracks
        self.tracks_panel: TracksPanel | None = None
        self._start_tracks()
        right = W.VBox([self.canvas, self.companions, self.readout, self.compare.pin_row],
                       layout={"flex": "1 1 470px", "min_width": "0", "width": "auto"})
        left.add_class("sw-left")
        right.add_class("sw-right")
        self.tabs.fill(0, self.compare)
        self.tabs.fill(1, self.export)
        self.tabs.fill(4, self.readout.text)
        self.logs: Any = None  # the logs panel (LogsPanel), started when its tab is first shown
        self.later: dict[int, Callable] = {2: ReplayPanel, 3: RescalePanel, 5: self._logs_panel}  # when first shown
        self.tabs.observe(self.guarded(self._tab_changed), names="selected_index")
        # side by side when there is room (390 + 470 px), one above the other below that
        self.children = [W.Box([left, right], layout={"flex_flow": "row wrap", "width": "100%"}), self.tabs.bar,
                         self.tabs]
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
        return whole("ScheduleDesigner", name, proposal["value"], name != "steps")

    # ------------------------------------------------------------ one change, one redraw
    @validate("tracks")
    def _check_tracks(self, proposal: dict) -> Tracks | GroupDesigns | None:
        value = proposal["value"]
        return None if value is None else as_held(value)

    @validate("group")
    def _check_group(self, proposal: dict) -> int:
        return check_group(self.tracks, proposal["value"])

    @validate("track")
    def _check_track(self, proposal: dict) -> str:
        name, held = proposal["value"], self.tracks
        named = () if held is None else group_tracks(held, self.group).names()
        if name != "rate" and name not in named:
            raise complain("ScheduleDesigner", "track", name, "'rate' or a track the design holds: "
                           + (", ".join(repr(n) for n in named) or "'rate' only (no tracks)"))
        return name

    @validate("schedule")
    def _check_schedule(self, proposal: dict) -> Schedule:
        """A companion track's design must stay in its range and on the rate's clock (the core's check)."""
        s = proposal["value"]
        if getattr(self, "tracks", None) is not None and self.track != "rate" and isinstance(s, Schedule):
            with_track(self.tracks, self.group, self.track, s)  # raises ScheduleError naming the track
        return s

    @observe("schedule", "steps", "steps_per_epoch", "unit", "batch", "pinned", "tracks", "group", "track")
    def _changed(self, change: dict) -> None:
        with self._one_redraw():
            if change["name"] == "schedule":
                self._rate_to_tracks()
            elif change["name"] in ("tracks", "group", "track"):
                self._tracks_to_rate(change)
            self._dirty = True  # the run's length (steps) never follows the design: a mismatch is a caution

    # ------------------------------------------------------------ tracks: the rate is one of them
    def _rate_to_tracks(self) -> None:
        """The held tracks follow an accepted rate (companions stretched to its length); why not, when not."""
        held = self.tracks
        if held is None or getattr(group_tracks(held, self.group), self.track) == self.schedule:
            if self.tracks_problem:
                self.tracks_problem = ""  # the rate is back to one the tracks hold
            return
        try:
            self.tracks = with_track(held, self.group, self.track, self.schedule)
            self.tracks_problem = ""
        except ScheduleError as exc:
            self.tracks_problem = f"the companion tracks keep their last shape: {exc}"

    def _tracks_to_rate(self, change: dict) -> None:
        """New tracks or another group: the stages edit that group's rate."""
        held = self.tracks
        if held is None:
            if self.track != "rate":
                self.track = "rate"
            if self.group != 0:
                self.group = 0
            self._say_track()
            return
        if change["name"] == "tracks" and not (isinstance(held, GroupDesigns) and self.group < len(held)):
            if self.group != 0:
                self.group = 0  # runs this again for the group
                return
        if getattr(group_tracks(held, self.group), self.track) is None:
            self.track = "rate"  # runs this again for the rate
            return
        self._start_tracks()
        self.tracks_problem = ""
        self.schedule = getattr(group_tracks(held, self.group), self.track)
        self._say_track()

    def _say_track(self) -> None:
        """The curve's axis title names the track the stages edit."""
        canvas = getattr(self, "canvas", None)
        if canvas is not None:
            words = html.escape(TRACK_WORDS[self.track][0])
            said = f"<span style=\"font-size:12px;color:#374151\">{words}</span>"
            if canvas.y_title.value != said:
                canvas.y_title.value = said

    def _start_tracks(self) -> None:
        if self.tracks is not None and getattr(self, "companions", None) is not None and self.tracks_panel is None:
            self.tracks_panel = TracksPanel(self)
            self.companions.children = (self.tracks_panel,)

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
            self.facts = self.facts_for(s, n, unit, spe)
            self._read = self._state()
        self.timing["readout"] = perf_counter() - t0

    def facts_for(self, s: Schedule, n: int, unit: str, spe: int | None) -> Facts:
        """The readout's facts of ``s`` over ``n`` ticks (Compare reads pins with this too: same numbers)."""
        return facts(s, n, spe if unit == "step" else None, unit, self.batch,
                     exact_up_to=READOUT_EXACT if n <= READOUT_EXACT else READOUT_GRID)

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
        self._refuse(explain(exc, KEPT))

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

    @property
    def clock(self) -> Clock:
        """How the design's ticks map onto the x axis right now."""
        return self.clock_for(self.unit, self.steps_per_epoch)

    def clock_for(self, unit: str, steps_per_epoch: int | None) -> Clock:
        """The x-axis mapping for a design on another clock (used for pins)."""
        return Clock(unit, steps_per_epoch, self.canvas.x_choice.value)

    # ------------------------------------------------------------ the logs tab
    def _logs_panel(self, _designer: ScheduleDesigner, tab: int) -> W.Widget:
        """The logs panel in tab ``tab``: it checks logged traces against the design, and a design it adopts (a
        recovered one, or one around a range test's peak) becomes the designer's."""
        from .logs import LogsPanel  # loaded on first use: it reads traces, recovers designs, reads range tests

        spe = self.steps_per_epoch if self.unit == "step" else None
        self.logs = LogsPanel(self.schedule, self._traces, self._range_logs, steps_per_epoch=spe, steps=self.steps)
        self.logs.observe(self.guarded(self._adopted), names="adopted")
        self.observe(self.guarded(self._logs_follow), names="schedule")
        return self.logs

    def _adopted(self, change: dict) -> None:
        if change["new"] is not None and change["new"] != self.schedule:
            self.propose(change["new"])

    def _logs_follow(self, change: dict) -> None:
        if self.logs is not None and self.logs.design != change["new"]:
            self.logs.design = change["new"]  # the run is checked against the design as it is now

    # ------------------------------------------------------------ tabs, display
    def _tab_changed(self, change: dict) -> None:
        if change["new"] in self.later:
            self.tabs.fill(change["new"], self.later.pop(change["new"])(self, tab=change["new"]))

    @observe("error")
    def _show_error(self, change: dict) -> None:
        if hasattr(self, "error_line"):
            self.error_line.value = lines(tidy_html(change["new"]))  # in the widget's one number format
