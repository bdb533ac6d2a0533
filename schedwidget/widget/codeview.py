"""The export panel: the design as Python or torch code, and spec files saved and loaded.

The code comes from ``schedwidget.export`` and is regenerated only while the panel
is on screen (its tab selected), since writing it reads the whole design; a hidden
panel marks itself stale and catches up when shown.  The text area takes no edits
(any typing is put back) but selects and copies normally.  Saving goes only
through the atomic ``schedwidget.spec.save``.
"""

from __future__ import annotations

import html
import os
from typing import TYPE_CHECKING, Any

import ipywidgets as W

from .. import export
from .. import spec as specs
from .guard import Panel
from .theme import ERROR_RED, OK

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ExportPanel", "FileMethods", "code_for"]


def code_for(designer: ScheduleDesigner, language: str) -> str:
    """The generated source for the designer's current design ("Python" or "torch")."""
    s = designer.schedule
    if language == "torch":
        base = designer.facts.peak if designer.facts is not None else 0.0
        return export.to_torch(s, base_lr=base if base > 0 else 1.0, unit=designer.unit)
    return export.to_python(s, name="lr_at", unit=designer.unit, steps_per_epoch=designer.steps_per_epoch)


class ExportPanel(Panel, W.VBox):
    """Language toggle, the code (Textarea ``sw-export-code``), a path box and save/load buttons."""

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        g = designer.guarded
        self.language = W.ToggleButtons(options=["Python", "torch"], value="Python", description="code",
                                        tooltip="a standalone Python function, or a ready torch snippet "
                                                "(torch.optim.lr_scheduler)",
                                        style={"button_width": "6em", "description_width": "3em"})
        self.code = W.Textarea(rows=18, layout=W.Layout(width="100%"),
                               tooltip="generated code: select all and copy")
        self.code.add_class("sw-export-code")
        self.path = W.Text(value="design.json", description="spec file", style={"description_width": "5em"},
                           tooltip="path of a spec JSON file", layout={"width": "28em"})
        self.path.add_class("sw-spec-path")
        self.save_button = W.Button(description="Save spec", icon="save",
                                    tooltip="write the design to this file (atomically: a complete file or none)")
        self.load_button = W.Button(description="Load spec", icon="folder-open",
                                    tooltip="read a design from this file")
        self.message = W.HTML("")
        self.message.add_class("sw-file-message")
        self._generated = ""
        self.language.observe(g(lambda _c: self.heard()), names="value")
        self.code.observe(g(self._typed), names="value")
        self.save_button.on_click(g(lambda _b: self._file(self.d.save)))
        self.load_button.on_click(g(lambda _b: self._file(self.d.load)))
        super().__init__([self.language, self.code, W.HBox([self.path, self.save_button, self.load_button]),
                          self.message])
        self.listen(designer, tab)

    def shows(self) -> tuple:
        d = self.d
        peak = d.facts.peak if d.facts is not None and self.language.value == "torch" else None
        return d.schedule, d.unit, d.steps_per_epoch, self.language.value, peak

    def paint(self) -> None:
        """Regenerate the code for the current design."""
        self._generated = code_for(self.d, self.language.value)
        if self.code.value != self._generated:
            self.code.value = self._generated

    def _typed(self, change: dict) -> None:
        # read-only in effect: put the generated text back after any edit
        if change["new"] != self._generated:
            self.code.value = self._generated

    def _file(self, action) -> None:
        path = self.path.value.strip()
        try:
            done = action(path)
        except Exception as exc:  # shown here, next to the buttons, as well as in the error area
            self._say(str(exc), ERROR_RED)
            raise
        verb = "saved to" if action == self.d.save else "loaded from"
        self._say(f"{verb} {done}", OK)

    def _say(self, text: str, colour: str) -> None:
        self.message.value = f'<span style="color:{colour}">{html.escape(text)}</span>'


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
