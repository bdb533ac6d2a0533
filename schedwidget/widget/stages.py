"""The stages panel: the budget row, then the design as an ordered list of stages with generated controls.

Every edit builds a new design value from the editable form (``form.py``) and
hands it to the designer (``designer.propose``); the panel never keeps a copy
of the design of its own: it observes the designer and re-reads ``schedule`` and
the budget when they change, and after a refused edit (``error``) it puts the
controls back.  Controls it replaces (a stage added, removed, moved or changed
in kind) are closed, with everything inside them.
"""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

import ipywidgets as W

from ..lengths import ROUNDING
from ..schedule import complain
from ..tracks import GroupDesigns
from .controls import LABEL, Entry, ParamControl, number_text, put
from .form import LEAVES, SHAPE_WORDS, Form, Warm, filler, leaf_of, read_form, stage_span
from .budget_row import BudgetMethods, BudgetRow
from .stage_edits import StageEdits
from .guard import Panel, close_tree
from .theme import BORDER, tidy_html
from .tracks_view import TRACK_WORDS, group_tracks

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["StagesPanel", "BudgetMethods"]

BUTTON = {"width": "2.7em", "min_width": "2.7em", "flex": "0 0 auto", "padding": "0"}
BOX = {"width": "14em", "flex": "0 0 auto"}
NOT_EDITABLE = ("This design is not a warmup plus a list of stages, so it cannot be edited here; "
                "it is drawn and read out, and can be edited in code (designer.schedule = ...).")


class StagesPanel(StageEdits, BudgetRow, Panel, W.VBox):
    """Budget row, 'add stage' row, one box per stage (class ``sw-stage``), and a note for other designs."""

    def __init__(self, designer: ScheduleDesigner) -> None:
        d = self.d = designer
        g = d.guarded
        self.unit = W.Dropdown(options=[("steps", "step"), ("epochs", "epoch")], description="count in",
                               tooltip="what the design counts: optimizer steps or epochs; changing it "
                                       "converts the design with steps per epoch when known", style=LABEL,
                               layout=BOX)
        self.spe = W.Text(description="steps/epoch", placeholder="unknown", continuous_update=False,
                          tooltip="optimizer steps per epoch (blank: unknown)", style=LABEL, layout=BOX)
        self.total = Entry(description="run length", continuous_update=False, tooltip="the whole run, in the unit counted; it stays "
                               "as set while stages change (one stage fills the rest); changing it scales every "
                               "stage in proportion",
                               style=LABEL, layout=BOX)
        self.total.add_class("sw-total")
        self.batch = W.Text(description="batch", placeholder="unknown", continuous_update=False,
                            tooltip="batch size per update (blank: unknown); used for cautions and Rescale",
                            style=LABEL, layout=BOX)
        self.total_words = W.HTML("")
        self.total_words.add_class("sw-run-words")
        self.shape = W.Dropdown(options=[(SHAPE_WORDS[k], k) for k in LEAVES] + [("warmup", "warmup")],
                                value="cosine", description="new stage",
                                tooltip="the shape of the stage to add at the end, or after a stage with its + "
                                        "button ('warmup' goes first)", style=LABEL,
                                layout={"width": "17em", "flex": "0 0 auto"})
        self.shape.add_class("sw-add-shape")
        self.add = W.Button(description="Add stage", tooltip="add a stage of this shape", icon="plus")
        self.add.add_class("sw-add-stage")
        self.note = W.HTML("")
        self.group_menu = W.Dropdown(options=[("group 0", 0)], value=0, description="edit group",
                                     tooltip="the param group whose rate the stages below edit (each group has "
                                             "a design of its own)", style=LABEL,
                                     layout={"width": "22em", "flex": "0 0 auto", "display": "none"})
        self.group_menu.add_class("sw-group")
        self.track_menu = W.Dropdown(options=[("learning rate", "rate")], value="rate", description="edit track",
                                     tooltip="the track the stages below edit: the rate, or a companion (momentum, "
                                             "second beta, weight decay) on the same clock", style=LABEL,
                                     layout={"width": "22em", "flex": "0 0 auto", "display": "none"})
        self.track_menu.add_class("sw-track")
        self.rule = W.HTML('<div style="color:#4b5563;font-size:12px;line-height:1.35">Type lengths as 3,450, '
                           '3 ep or 6\u2009% of the run; rates as 3e-4 or 1\u2009% of the peak. Rounding: '
                           f'{tidy_html(ROUNDING)}.</div>')
        self.rule.add_class("sw-rule")
        self.fill: int | None = None  # the stage chosen to fill the rest of the run (None: the longest)
        self.list = W.VBox([])
        self.controls: list[list[ParamControl]] = []
        self.signature: tuple | None = None
        self._quiet = 0
        self.unit.observe(g(self._unit_edited), names="value")
        self.spe.observe(g(self._spe_edited), names="value")
        self.total.observe(g(self._total_edited), names="value")
        self.batch.observe(g(self._batch_edited), names="value")
        self.add.on_click(g(self._add))
        self.group_menu.observe(g(self._group_chosen), names="value")
        self.track_menu.observe(g(self._track_chosen), names="value")
        wrap = {"flex_flow": "row wrap"}
        super().__init__([W.HBox([self.total, self.unit], layout=wrap), W.HBox([self.spe, self.batch], layout=wrap),
                          self.total_words, self.rule, self.group_menu, self.track_menu, self.note, self.list,
                          W.HBox([self.shape, self.add], layout=wrap)])
        d.observe(self._refused, names="error")
        self.listen(d)

    def shows(self) -> tuple:
        d = self.d
        return d.schedule, d.steps, d.unit, d.steps_per_epoch, d.batch, d.tracks, d.group, d.track

    def _track_chosen(self, change: dict) -> None:
        if self._quiet or change["new"] is None:
            return
        self.d.track = change["new"]

    def _group_chosen(self, change: dict) -> None:
        if self._quiet or change["new"] is None:
            return
        self.d.group = change["new"]

    def _show_groups(self) -> None:
        """The group menu: shown when the designer holds a design per param group, on the group being edited."""
        held = self.d.tracks
        shown = "none" if held is None else "flex"
        if self.track_menu.layout.display != shown:
            self.track_menu.layout.display = shown
        if held is not None:
            names = group_tracks(held, self.d.group).names()
            options = [(TRACK_WORDS[n][0].split(" (")[0], n) for n in names]  # short: the menu is narrow
            if list(self.track_menu.options) != options:
                self.track_menu.options = options
            put(self.track_menu, self.d.track)
        groups = held if isinstance(held, GroupDesigns) else None
        display = "none" if groups is None else "flex"
        if self.group_menu.layout.display != display:
            self.group_menu.layout.display = display
        if groups is None:
            return
        options = [(f"group {i}" if groups.names is None else f"{groups.names[i]} (group {i})", i)
                   for i in range(len(groups))]
        if list(self.group_menu.options) != options:
            self.group_menu.options = options
        put(self.group_menu, self.d.group)

    def paint(self) -> None:
        self.sync()

    def _refused(self, change: dict) -> None:
        if change["new"]:
            self.redraw()  # put the controls back to the last valid design

    # ------------------------------------------------------------- reading
    @property
    def form(self) -> Form | None:
        """The editable form of the designer's current design (None if it does not fit)."""
        return read_form(self.d.schedule)

    def sync(self) -> None:
        """Make every control show the designer's current design; rebuild only when the structure changed."""
        self._quiet += 1
        try:
            d = self.d
            put(self.unit, d.unit)
            put(self.spe, f"{d.steps_per_epoch:,}" if d.steps_per_epoch else "")
            put(self.total, number_text(d.steps))
            put(self.batch, f"{d.batch:,}" if d.batch else "")
            words = f"the run: {d.steps:,} {d.unit}s"
            if d.steps_per_epoch and d.unit == "step":
                words += f" = {d.steps / d.steps_per_epoch:,.4g} epochs of {d.steps_per_epoch:,} steps"
            elif d.steps_per_epoch:
                words += f" = {d.steps * d.steps_per_epoch:,} steps"
            if d.schedule.length is None:
                words += " (the design has no end: this much is drawn and read)"
            elif d.schedule.length != d.steps:
                gap = d.schedule.length - d.steps
                words += (f' <span style="color:#b45309">&#9888; the design is {d.schedule.length:,} {d.unit}s, '
                          f'{abs(gap):,} {"more" if gap > 0 else "fewer"} than the run</span>')
            put(self.total_words, words)
            self._show_groups()
            form = self.form
            put(self.note, "" if form is not None else f"<i>{NOT_EDITABLE}</i>")
            put(self.add, form is None, "disabled")
            if form is None:
                old = self.list.children
                if old:
                    self.list.children = ()
                    for box in old:
                        close_tree(box)
                self.controls, self.signature = [], None
                return
            if form.signature() != self.signature:
                self._rebuild(form)
            else:
                self._show(form)
        finally:
            self._quiet -= 1

    def _items(self, form: Form) -> list[tuple[str, Any]]:
        """(where, object) for every box: 'warm', then 'i' for stage i."""
        out: list[tuple[str, Any]] = [("warm", form.warm)] if form.warm is not None else []
        return out + [(str(i), s) for i, s in enumerate(form.stages)]

    def _show(self, form: Form) -> None:
        budget = self.d.steps
        fill = filler(form, self.fill)
        for (where, obj), (box, rows) in zip(self._items(form), zip(self.list.children, self.controls)):
            header = box.children[0].children[0]
            put(header, html.escape(self._title(form, where)))
            if where != "warm":
                put(box.children[0].children[-1].children[0], int(where) == fill)
            for c in rows:
                c.show(getattr(_owner(obj, c), c.name), budget)

    # ------------------------------------------------------------ building
    def _title(self, form: Form, where: str) -> str:
        u = self.d.unit
        if where == "warm":
            w = form.warm.steps
            return f"warmup · {u}s 0–{w:,}"  # where it goes is its 'goes' menu
        i = int(where)
        s = form.stages[i]
        a = stage_span(form, i)[0]
        span = f"from {u} {a:,}" if s.length is None else f"{u}s {a:,}–{a + s.length:,}"
        return f"stage {i}{' (repeated)' if s._repeated() is not None else ''} · {span}"  # as designer.control(i, ...)

    def _rebuild(self, form: Form) -> None:
        boxes, self.controls = [], []
        items = self._items(form)
        first = 1 if form.warm is not None else 0
        for pos, (where, obj) in enumerate(items):
            rows: list[ParamControl] = []
            title = W.HTML(html.escape(self._title(form, where)), layout={"flex": "1 1 12em", "min_width": "10em"})
            remove = W.Button(description="✕", tooltip="remove this stage", layout=BUTTON)
            up = W.Button(description="↑", tooltip="move this stage up", layout=BUTTON,
                          disabled=where == "warm" or pos == first)
            down = W.Button(description="↓", tooltip="move this stage down", layout=BUTTON,
                            disabled=where == "warm" or pos == len(items) - 1)
            for b, name in ((remove, "sw-remove"), (up, "sw-up"), (down, "sw-down")):
                b.add_class(name)
            remove.on_click(self.d.guarded(lambda _b, w=where: self._remove(w)))
            up.on_click(self.d.guarded(lambda _b, w=where: self._move(w, -1)))
            down.on_click(self.d.guarded(lambda _b, w=where: self._move(w, +1)))
            head = [title, up, down, remove]
            if where != "warm":
                fills = W.Checkbox(value=int(where) == filler(form, self.fill), description="fills the rest",
                                   indent=False, tooltip="this stage grows or shrinks so the design keeps the run's "
                                   "length when other stages change", layout={"width": "9em", "flex": "0 0 auto"})
                fills.add_class("sw-fills")
                fills.observe(self.d.guarded(lambda ch, w=where: self._fills(w, ch["new"])), names="value")
                own = leaf_of(obj).kind  # a kind defined outside the package is offered under its own name
                shapes = [(SHAPE_WORDS[k], k) for k in LEAVES] + ([] if own in LEAVES else [(own, own)])
                kind = W.Dropdown(options=shapes, value=own,
                                  tooltip="change this stage's shape: same span, same starting rate",
                                  layout={"width": "10.5em", "flex": "0 0 auto"})
                kind.add_class("sw-stage-shape")
                kind.observe(self.d.guarded(lambda ch, w=where: self._reshape(w, ch["new"])), names="value")
                rep = W.Checkbox(value=obj._repeated() is not None, description="repeat", indent=False,
                                 tooltip="repeat this stage (warm restarts)",
                                 layout={"width": "5.5em", "min_width": "5.5em", "flex": "0 0 auto"})
                rep.observe(self.d.guarded(lambda ch, w=where: self._repeat(w, ch["new"])), names="value")
                insert = W.Button(description="+", tooltip="insert a stage of the 'new stage' shape after this one",
                                  layout=BUTTON)
                insert.add_class("sw-insert")
                insert.on_click(self.d.guarded(lambda _b, w=where: self._insert(int(w) + 1)))
                head = [title, up, down, insert, remove, W.Box([fills, kind, rep], layout={"width": "100%"})]
            parts = ["warm"] if where == "warm" else (["leaf", "repeat"] if obj._repeated() is not None else ["leaf"])
            try:
                for part in parts:
                    target = obj if part != "leaf" else leaf_of(obj)
                    params = Warm.params() if part == "warm" else type(target).params()
                    for name, p in params.items():
                        if p.control in ("schedule", "schedules"):
                            continue
                        rows.append(self._control(where, part, target, name, p))
            except Exception:  # nothing half-built stays behind in the widget registry
                for w in [*head, *(c.box for c in rows), *(b for b in boxes)]:
                    close_tree(w)
                raise
            head_row = W.HBox(head, layout={"flex_flow": "row wrap", "align_items": "center"})
            box = W.VBox([head_row] + [c.box for c in rows],
                         layout={"border": f"1px solid {BORDER}", "padding": "2px 4px", "margin": "2px 0",
                                 "flex": "0 0 auto"})  # never squeezed by the list's height: rows ran into each other
            box.add_class("sw-stage")
            boxes.append(box)
            self.controls.append(rows)
        old, self.list.children = self.list.children, boxes
        for box in old:
            close_tree(box)
        self.signature = form.signature()

    def _control(self, where: str, part: str, target: Any, name: str, p) -> ParamControl:
        owner = "warmup" if part == "warm" else target.kind
        d = self.d

        def context(w: str = where) -> tuple:
            form = self.form
            peak = None
            if form is not None and w != "warm" and int(w) < len(form.stages):
                peak = getattr(leaf_of(form.stages[int(w)]), "peak", None)
            if peak is None and d.facts is not None:
                peak = d.facts.peak
            return d.unit, d.steps_per_epoch, d.steps, peak

        def span(w: str = where) -> tuple[int, int | None, bool]:
            """The stage's first tick on the run's clock, its (first cycle's) length, whether it repeats."""
            form = self.form
            if form is None or w == "warm" or int(w) >= len(form.stages):
                return 0, None, False
            start, _length = stage_span(form, int(w))
            st = form.stages[int(w)]
            return start, leaf_of(st).length, st._repeated() is not None

        c = ParamControl(owner, name, p, getattr(target, name), self.d.steps,
                         lambda n, v, w=where, pt=part: self._edit(w, pt, n, v), guard=self.d.guarded,
                         context=context, span=span)
        c.part = part  # type: ignore[attr-defined]
        return c

    def control(self, stage: int | str, name: str) -> ParamControl:
        """The control of parameter ``name`` of stage ``stage`` (0 = first stage; "warmup" = the warmup).

        For a repeated stage the repeat's own parameters (cycles, growth, peak_decay) are found too.
        """
        form = self.form
        if form is None:
            raise complain("designer", "stage", stage, "a stage of an editable design",
                           "this design is edited in code")
        index = -1 if stage == "warmup" else int(stage)
        pos = 0 if stage == "warmup" else index + (form.warm is not None)
        if (stage == "warmup" and form.warm is None) or (stage != "warmup" and index < 0) \
                or not 0 <= pos < len(self.controls):
            raise complain("designer", "stage", stage, f"0 .. {len(form.stages) - 1} or 'warmup' if there is one")
        for c in self.controls[pos]:
            if c.name == name:
                return c
        names = ", ".join(c.name for c in self.controls[pos])
        raise complain("designer", "name", name, f"one of {names}")


def _owner(obj: Any, c: ParamControl) -> Any:
    """The object a control's parameter lives on: the stage, or the shape a repeated stage repeats."""
    return leaf_of(obj) if getattr(c, "part", "leaf") == "leaf" else obj
