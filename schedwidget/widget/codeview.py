"""The export panel: the design as Python or torch code, and spec files saved and loaded.

The code comes from ``schedwidget.export`` and is regenerated only while the panel
is on screen (its tab selected), since writing it reads the whole design; a hidden
panel marks itself stale and catches up when shown.  The text area takes no edits
(any typing is put back) but selects and copies normally.  Saving goes only
through the atomic ``schedwidget.spec.save``.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import ipywidgets as W

from .. import export
from .. import spec as specs
from ..budget import parse_rate
from ..schedule import complain
from .controls import Entry
from .guard import Panel
from .theme import AMBER, BORDER, ERROR_RED, OK, TOGGLE, lines, tidy_html

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ExportPanel", "FileMethods", "code_for"]


def code_for(designer: ScheduleDesigner, language: str, base: float | None = None,
             groups: tuple[float, ...] | None = None) -> str:
    """The generated source for the designer's current design ("Python" or "torch").

    torch code is for the optimizer's ``lr`` ``base`` (default: the design's peak) and one multiplier per
    param group (``groups``; None: the same rate in every group).
    """
    s = designer.schedule
    if language == "torch":
        if base is None:
            peak = designer.facts.peak if designer.facts is not None else 0.0
            base = peak if peak > 0 else 1.0
        return export.to_torch(s, base_lr=base, unit=designer.unit, groups=list(groups) if groups else None,
                               steps_per_epoch=designer.steps_per_epoch)
    return export.to_python(s, name="lr_at", unit=designer.unit, steps_per_epoch=designer.steps_per_epoch)


def highlighted(code: str) -> str:
    """``code`` as HTML coloured by pygments (inline styles, a light theme), in a scrolling block."""
    from pygments import highlight
    from pygments.formatters import HtmlFormatter
    from pygments.lexers import PythonLexer

    body = highlight(code, PythonLexer(), HtmlFormatter(noclasses=True, style="friendly", nobackground=True))
    return (f'<div style="max-height:420px;overflow:auto;border:1px solid {BORDER};padding:4px 8px;'
            f'font-size:12px;background:#fafafa">{body}</div>')


def parse_groups(text: str) -> tuple[float, ...] | None:
    """``"1, 0.1"`` -> ``(1.0, 0.1)``; blank -> None (one rate for every group).

    >>> parse_groups("1, 0.1"), parse_groups("  ")
    ((1.0, 0.1), None)
    """
    parts = [p.strip() for p in str(text).split(",") if p.strip()]
    if not parts:
        return None
    out = []
    for i, part in enumerate(parts):
        try:
            v = float(part)
        except ValueError:
            v = math.nan
        if not (math.isfinite(v) and v > 0):
            raise complain("export", f"param group multipliers[{i}]", part, "a number > 0",
                           "one multiplier of the base rate per param group, separated by commas: 1, 0.1")
        out.append(v)
    return tuple(out)


class ExportPanel(Panel, W.VBox):
    """Language toggle, base rate and group multipliers (torch), the highlighted code (``view``), the plain code
    (``code``, class ``sw-export-code``, for copying), a code file path with a Write button, and spec files."""

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        g = designer.guarded
        self.language = W.ToggleButtons(options=[("Python function", "Python"), ("PyTorch scheduler", "torch")],
                                        value="Python", description="code",
                                        tooltip="a standalone Python function of the step, or a ready torch snippet",
                                        style={"button_width": "12em", "description_width": "3em"},
                                        layout=dict(TOGGLE))
        self.base = Entry(description="base rate", placeholder="the peak", continuous_update=False,
                          tooltip="the optimizer's lr (blank: the design's peak); the schedule multiplies it",
                          style={"description_width": "5em"}, layout={"width": "14em"})
        self.base.add_class("sw-base-rate")
        self.groups = W.Text(description="param groups", placeholder="same rate for all", continuous_update=False,
                             tooltip="one multiplier of the base rate per param group, e.g. 1, 0.1",
                             style={"description_width": "7.5em"}, layout={"width": "21em"})
        self.groups.add_class("sw-groups")
        self.view = W.HTML("")
        self.view.add_class("sw-export-view")
        self.code = W.Textarea(rows=8, layout=W.Layout(width="100%", display="none"),
                               tooltip="the same code as plain text: select all and copy")
        self.code.add_class("sw-export-code")
        # the code is shown once, coloured; the plain text (for select all and copy) only when asked for
        self.plain = W.Checkbox(value=False, description="as plain text, to select all and copy", indent=False,
                                layout={"width": "auto"})
        self.plain.add_class("sw-export-plain")
        self.plain.observe(lambda ch: self._plain(ch["new"]), names="value")
        self.code_path = W.Text(value="lr_schedule.py", description="code file", style={"description_width": "5em"},
                                tooltip="where Write puts the code above", layout={"width": "28em"})
        self.code_path.add_class("sw-code-path")
        self.write_button = W.Button(description="Write code file", icon="file-code-o",
                                     tooltip="write the code above to this file (a complete file or none)")
        self.write_button.add_class("sw-write-code")
        self.path = W.Text(value="design.json", description="spec file", style={"description_width": "5em"},
                           tooltip="path of a spec JSON file", layout={"width": "28em"})
        self.path.add_class("sw-spec-path")
        self.save_button = W.Button(description="Save spec", icon="save",
                                    tooltip="write the design to this file (atomically: a complete file or none)")
        self.load_button = W.Button(description="Load spec", icon="folder-open",
                                    tooltip="read a design from this file")
        self.message = W.HTML("")
        self.message.add_class("sw-file-message")
        self.caution = W.HTML("", style={"text_color": AMBER})
        self.caution.add_class("sw-export-caution")
        self._generated = ""
        self.language.observe(g(lambda _c: self.heard()), names="value")
        self.base.observe(g(lambda _c: self.heard()), names="value")
        self.groups.observe(g(lambda _c: self.heard()), names="value")
        self.code.observe(g(self._typed), names="value")
        self.write_button.on_click(g(lambda _b: self._file(self.write_code)))
        self.save_button.on_click(g(lambda _b: self._file(self.d.save)))
        self.load_button.on_click(g(lambda _b: self._file(self.d.load)))
        wrap = {"flex_flow": "row wrap", "align_items": "center"}
        self.torch_row = W.HBox([self.base, self.groups], layout=wrap)
        super().__init__([self.language, self.torch_row, self.caution, self.view,
                          W.HBox([self.code_path, self.write_button, self.plain], layout=wrap), self.code,
                          W.HBox([self.path, self.save_button, self.load_button], layout=wrap), self.message])
        self.listen(designer, tab)

    def settings(self) -> tuple[float | None, tuple[float, ...] | None]:
        """The base rate and group multipliers typed (None: not given)."""
        text = str(self.base.value).strip()
        peak = self.d.facts.peak if self.d.facts is not None else None
        base = parse_rate(text, peak, "export", "base rate") if text else None
        return base, parse_groups(self.groups.value)

    def shows(self) -> tuple:
        d = self.d
        peak = d.facts.peak if d.facts is not None and self.language.value == "torch" else None
        return (d.schedule, d.unit, d.steps_per_epoch, d.steps, self.language.value, peak, self.base.value,
                self.groups.value)

    def paint(self) -> None:
        """Regenerate the code for the current design."""
        d = self.d
        torch = self.language.value == "torch"
        self.torch_row.layout.display = None if torch else "none"
        base, groups = self.settings() if torch else (None, None)
        self._generated = code_for(d, self.language.value, base, groups)
        if self.code.value != self._generated:
            self.code.value = self._generated
        view = highlighted(self._generated)
        if self.view.value != view:
            self.view.value = view
        L = d.schedule.length
        words = ""
        if L is not None and L != d.steps:
            gap = L - d.steps
            words = (f"&#9888; the design is {L:,} {d.unit}s long, {abs(gap):,} {'more' if gap > 0 else 'fewer'} "
                     f"than the run of {d.steps:,}: training for the run would "
                     + ("never reach its end" if gap > 0 else "hold its last rate at the end"))
        words = lines(words)
        if self.caution.value != words:
            self.caution.value = words

    def _plain(self, on: bool) -> None:
        """Show the plain text in place of the coloured view (or back)."""
        self.code.layout.display = None if on else "none"
        self.view.layout.display = "none" if on else None

    def write_code(self, path: str | os.PathLike) -> str:
        """Write the code shown to ``path`` atomically (the core's ``spec.write_atomic``)."""
        target = Path(os.fspath(self.code_path.value if path is None else path)).expanduser()
        specs.write_atomic(target, self._generated, owner="export", name="code file")
        return os.fspath(target)

    def _typed(self, change: dict) -> None:
        # read-only in effect: put the generated text back after any edit
        if change["new"] != self._generated:
            self.code.value = self._generated

    def _file(self, action) -> None:
        path = (self.code_path if action == self.write_code else self.path).value.strip()
        try:
            done = action(path)
        except Exception as exc:  # shown here, next to the buttons, as well as in the error area
            self._say(str(exc), ERROR_RED)
            raise
        verb = {self.write_code: "code written to", self.d.save: "saved to"}.get(action, "loaded from")
        self._say(f"{verb} {done}", OK)

    def _say(self, text: str, colour: str) -> None:
        self.message.value = lines(f'<span style="color:{colour}">{tidy_html(text)}</span>')


class FileMethods:
    """The designer's spec-file methods (the export panel's buttons call them; ``autosave`` after each change)."""

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

    def _autosave(self) -> None:
        if self.autosave is not None and self.to_spec() != self._saved:
            self.save(self.autosave)
            self._saved = self.to_spec()
