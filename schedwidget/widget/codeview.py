"""The export panel: the design as Python or torch code, and spec files saved and loaded.

The code comes from ``schedwidget.export`` (imported when first needed) and is
regenerated only while the panel is on screen (its tab selected), since writing
it reads the whole design; the text area takes no edits (any typing is put
back) but selects and copies normally.  Saving goes only through the atomic ``schedwidget.spec.save``.
"""

from __future__ import annotations

import html
import json
from typing import TYPE_CHECKING

import ipywidgets as W

from ..spec import to_spec

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ExportPanel", "code_for"]

OK = "#0f766e"
BAD = "#b91c1c"


def code_for(designer: ScheduleDesigner, language: str) -> str:
    """The generated source for the designer's current design ("Python" or "torch")."""
    s = designer.schedule
    try:
        from .. import export
    except ImportError as exc:
        spec = json.dumps(to_spec(s, designer.unit, designer.steps_per_epoch), indent=2)
        return (f"# Code export is not available in this installation ({exc}).\n"
                f"# The design as a spec file (schedwidget.from_spec reads it):\n{spec}\n")
    if language == "torch":
        base = designer.readout.facts.peak if designer.readout.facts is not None else 0.0
        base = base if base > 0 else 1.0
        return export.to_torch(s, base_lr=base, unit=designer.unit)
    return export.to_python(s, name="lr_at", unit=designer.unit, steps_per_epoch=designer.steps_per_epoch)


class ExportPanel(W.VBox):
    """Language toggle, the code (Textarea ``sw-export-code``), a path box and save/load buttons."""

    def __init__(self, designer: ScheduleDesigner) -> None:
        self.d = designer
        g = designer.guarded
        self.language = W.ToggleButtons(options=["Python", "torch"], value="Python", description="code",
                                        tooltip="a standalone Python function, or a ready torch snippet (torch.optim.lr_scheduler)",
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
        self.stale = True
        self.visible = lambda: True  # the designer replaces this with "is my tab selected"
        self.language.observe(g(lambda _c: self.refresh(force=True)), names="value")
        self.code.observe(g(self._typed), names="value")
        self.save_button.on_click(g(lambda _b: self._file(self.d.save)))
        self.load_button.on_click(g(lambda _b: self._file(self.d.load)))
        super().__init__([self.language, self.code, W.HBox([self.path, self.save_button, self.load_button]),
                          self.message])

    def refresh(self, force: bool = False) -> None:
        """Regenerate the code for the current design now if the panel is on screen (or ``force``)."""
        self.stale = True
        if not (force or self.visible()):
            return
        self.stale = False
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
            self._say(str(exc), BAD)
            raise
        verb = "saved to" if action == self.d.save else "loaded from"
        self._say(f"{verb} {done}", OK)

    def _say(self, text: str, colour: str) -> None:
        self.message.value = f'<span style="color:{colour}">{html.escape(text)}</span>'
