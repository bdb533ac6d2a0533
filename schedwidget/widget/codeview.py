"""The export panel: the design as code for a training loop, a design report, and spec files saved and loaded.

The code comes from ``schedwidget.export`` (one-tick Python, numpy arrays, the torch snippet),
``schedwidget.export_jax`` and ``schedwidget.export_keras``, as text (jax and keras are never imported),
and is regenerated only while the panel is on screen (its tab selected), since writing it reads the whole
design; a hidden panel marks itself stale and catches up when shown.  The text area takes no edits (any
typing is put back) but selects and copies normally.  Every file goes through the core's atomic writers
(``spec.write_atomic``, ``spec.save``, ``report.report``): a complete file or none.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import ipywidgets as W

from .. import export, export_jax, export_keras
from .. import spec as specs
from ..budget import parse_rate
from ..fingerprint import fingerprint
from ..report import FORMS, report
from ..schedule import Schedule, complain
from .controls import Entry
from .guard import Panel
from .theme import AMBER, BORDER, ERROR_RED, OK, TOGGLE, lines, tidy_html
from .tracks_view import group_tracks

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ExportPanel", "FileMethods", "code_for", "TARGETS", "REPORT_FILES", "report_label"]

#: The code targets, in the toggle's order: (words on the button, value, default file name, what it writes).
#: No default is a framework's own module name (a file called keras.py would shadow keras).
TARGETS = (
    ("Python (one step)", "Python", "lr_schedule.py",
     "a standalone function of one step: the standard library only"),
    ("numpy (arrays)", "numpy", "lr_schedule_numpy.py",
     "a numpy function of an int or an integer array of steps, branch-free: one call for any number of steps"),
    ("JAX", "jax", "lr_schedule_jax.py",
     "jax.numpy code that jax.jit traces: a step count in, a rate out (an optax schedule)"),
    ("Keras", "keras", "lr_schedule_keras.py",
     "a Keras 3 LearningRateSchedule class that saves and reloads with the model"),
    ("PyTorch scheduler", "torch", "lr_schedule.py",
     "a ready torch snippet: a LambdaLR on your optimizer, for its lr and param groups"),
)
DEFAULT_FILES = {value: file for _, value, file, _ in TARGETS}
#: The report's default file per form (the report function reads the form from the suffix too).
REPORT_FILES = {"html": "design_report.html", "markdown": "design_report.md"}
SUFFIX = {"html": ".html", "markdown": ".md"}
LABEL_MAX = 60  # the report's limit on a compared design's label


def code_for(designer: ScheduleDesigner, language: str, base: float | None = None,
             groups: tuple[float, ...] | None = None) -> str:
    """The generated source for the designer's current design, for one of ``TARGETS``' values
    ("Python", "numpy", "jax", "keras" or "torch"): the exporter's own text, unchanged.

    torch code is for the optimizer's ``lr`` ``base`` (default: the design's peak) and one multiplier per
    param group (``groups``; None: the same rate in every group).
    """
    s, unit, spe = designer.schedule, designer.unit, designer.steps_per_epoch
    held = getattr(designer, "tracks", None)
    if held is not None and language in ("Python", "torch"):
        # the whole tracks value, not the one track the stages edit (which may be a momentum): one function per
        # track and group, or the snippet that sets every group's lr and tracked keys (its rates are absolute)
        if language == "torch":
            from ..track_export import to_torch_tracks

            return to_torch_tracks(held, unit=unit, steps_per_epoch=spe)
        return export.to_python(held, name="lr_at", unit=unit, steps_per_epoch=spe)
    if held is not None:
        s = group_tracks(held, designer.group).rate  # numpy, JAX and Keras take one rate design: the edited group's rate
    if language == "torch":
        if base is None:
            peak = designer.facts.peak if designer.facts is not None else 0.0
            base = peak if peak > 0 else 1.0
        return export.to_torch(s, base_lr=base, unit=unit, groups=list(groups) if groups else None,
                               steps_per_epoch=spe)
    if language == "Python":
        return export.to_python(s, name="lr_at", unit=unit, steps_per_epoch=spe)
    if language == "numpy":
        return export.to_python(s, name="lr_at", unit=unit, steps_per_epoch=spe, array=True)
    if language == "jax":
        return export_jax.to_jax(s, name="lr_at", unit=unit, steps_per_epoch=spe)
    if language == "keras":
        return export_keras.to_keras(s, unit=unit, steps_per_epoch=spe)
    raise complain("export", "code", language, "one of " + ", ".join(repr(v) for _, v, _, _ in TARGETS))


def report_label(name: str) -> str:
    r"""A pin's name as the report's label of a compared design: one line of at most 60 characters.

    >>> report_label("lower\npeak"), len(report_label("x" * 80))
    ('lower peak', 60)
    """
    words = " ".join(str(name).split())
    return words if len(words) <= LABEL_MAX else words[:LABEL_MAX - 1] + "\u2026"


def highlighted(code: str) -> str:
    """``code`` as HTML coloured by pygments (inline styles, a light theme), in a scrolling block."""
    from pygments import highlight
    from pygments.formatters import HtmlFormatter
    from pygments.lexers import PythonLexer

    body = highlight(code, PythonLexer(), HtmlFormatter(noclasses=True, style="friendly", nobackground=True))
    # long lines scroll sideways: the notebook's own CSS wraps a widget's <pre> mid-word ("updat / e")
    keep = "white-space:pre;overflow-wrap:normal;word-break:normal;"
    body = body.replace('<pre style="', f'<pre style="{keep}', 1) if '<pre style="' in body \
        else body.replace("<pre", f'<pre style="{keep}"', 1)
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
    """Code target toggle (``TARGETS``), base rate and group multipliers (torch), the highlighted code (``view``),
    the plain code (``code``, class ``sw-export-code``, for copying), a code file path with a Write button, the
    design report (path, HTML or Markdown, a Write button: the pins as grey ghosts) and spec files."""

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        g = designer.guarded
        self.language = W.ToggleButtons(options=[(words, value) for words, value, _, _ in TARGETS],
                                        value="Python", description="code",
                                        tooltips=[what for _, _, _, what in TARGETS],
                                        style={"button_width": "11em", "description_width": "3.6em"},
                                        layout=dict(TOGGLE))
        self.language.add_class("sw-export-target")
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
        self.code_path = W.Text(value=DEFAULT_FILES["Python"], description="code file",
                                style={"description_width": "5em"},
                                tooltip="where Write puts the code above", layout={"width": "28em"})
        self.code_path.add_class("sw-code-path")
        self.write_button = W.Button(description="Write code file", icon="file-code-o",
                                     tooltip="write the code above to this file (a complete file or none)")
        self.write_button.add_class("sw-write-code")
        self.report_path = W.Text(value=REPORT_FILES["html"], description="report", style={"description_width": "5em"},
                                  tooltip="where Write report puts the design report", layout={"width": "28em"})
        self.report_path.add_class("sw-report-path")
        self.report_form = W.ToggleButtons(options=[("HTML", "html"), ("Markdown", "markdown")], value="html",
                                           tooltips=["one page that prints", "renders on code-hosting sites"],
                                           style={"button_width": "7.5em"}, layout=dict(TOGGLE))
        self.report_form.add_class("sw-report-form")
        self.report_button = W.Button(description="Write report", icon="file-text-o",
                                      tooltip="write a report of the current design, its pins drawn as grey ghosts "
                                              "(a complete file or none)")
        self.report_button.add_class("sw-write-report")
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
        self.reported: tuple[str, str, list[str], list[str]] | None = None  # the last report: path, mark, pins
        self.language.observe(g(self._target), names="value")
        self.base.observe(g(lambda _c: self.heard()), names="value")
        self.groups.observe(g(lambda _c: self.heard()), names="value")
        self.code.observe(g(self._typed), names="value")
        self.report_form.observe(g(self._form), names="value")
        self.write_button.on_click(g(lambda _b: self._file(lambda p: f"code written to {self.write_code(p)}",
                                                           self.code_path)))
        self.report_button.on_click(g(lambda _b: self._file(self._reported, self.report_path)))
        self.save_button.on_click(g(lambda _b: self._file(lambda p: f"saved to {os.fspath(self.d.save(p))}",
                                                          self.path)))
        self.load_button.on_click(g(lambda _b: self._file(lambda p: f"loaded from {self.d.load(p)}", self.path)))
        wrap = {"flex_flow": "row wrap", "align_items": "center"}
        self.torch_row = W.HBox([self.base, self.groups], layout=wrap)
        super().__init__([self.language, self.torch_row, self.caution, self.view,
                          W.HBox([self.code_path, self.write_button, self.plain], layout=wrap), self.code,
                          W.HBox([self.report_path, self.report_form, self.report_button], layout=wrap),
                          W.HBox([self.path, self.save_button, self.load_button], layout=wrap), self.message])
        self.listen(designer, tab)

    def base_rate(self) -> float | None:
        """The base rate typed (None: not given, the design's peak is used)."""
        text = str(self.base.value).strip()
        peak = self.d.facts.peak if self.d.facts is not None else None
        return parse_rate(text, peak, "export", "base rate") if text else None

    def settings(self) -> tuple[float | None, tuple[float, ...] | None]:
        """The base rate and group multipliers typed (None: not given)."""
        return self.base_rate(), parse_groups(self.groups.value)

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

    def _target(self, change: dict) -> None:
        """Another target: its default file name replaces a default one (a typed path is kept), then its code."""
        if self.code_path.value.strip() in DEFAULT_FILES.values():
            self.code_path.value = DEFAULT_FILES[change["new"]]
        self.heard()

    def _form(self, change: dict) -> None:
        """HTML or Markdown: the report path's suffix follows when it is one the report reads."""
        text = self.report_path.value.strip()
        if text and Path(text).suffix.lower() in FORMS:
            self.report_path.value = os.fspath(Path(text).with_suffix(SUFFIX[change["new"]]))

    def _plain(self, on: bool) -> None:
        """Show the plain text in place of the coloured view (or back)."""
        self.code.layout.display = None if on else "none"
        self.view.layout.display = "none" if on else None

    def write_code(self, path: str | os.PathLike | None = None) -> str:
        """Write the code shown to ``path`` (None: the code file box's) atomically (the core's ``spec.write_atomic``).

        The code is regenerated first when the panel has not drawn the current design (its tab is hidden), so
        the file is always the current design's code for the chosen target.
        """
        if self.stale or self.shows() != self._painted:
            self.paint()
            self._painted = self.shows()
        target = Path(os.fspath(self.code_path.value if path is None else path)).expanduser()
        specs.write_atomic(target, self._generated, owner="export", name="code file")
        return os.fspath(target)

    def report_pins(self) -> tuple[list[tuple[str, Schedule]], list[str]]:
        """The pins the report draws as ghosts, as ``(label, design)`` pairs (``report_label``), and the names of
        the pins it leaves out: those pinned on the other clock (steps or epochs), which one picture cannot hold."""
        keep, left = [], []
        for p in self.d.pinned:
            if p.unit == self.d.unit:
                keep.append((report_label(p.name), p.schedule))
            else:
                left.append(p.name)
        return keep, left

    def write_report(self, path: str | os.PathLike | None = None) -> str:
        """Write the report of the current design with its pins (``schedwidget.report.report``) to ``path``
        (None: the report box's), atomically, as the form chosen (HTML or Markdown); the path written.

        The report reads the designer's budget, steps per epoch and batch, the base rate typed (for its torch
        snippet; blank: the peak) and the pins on the design's clock (``report_pins``).  ``reported`` holds
        (path, fingerprint, pins drawn, pins left out).
        """
        d = self.d
        target = os.fspath(Path(os.fspath(self.report_path.value if path is None else path)).expanduser())
        ghosts, left = self.report_pins()
        report(d.schedule, steps=d.steps, steps_per_epoch=d.steps_per_epoch, batch=d.batch, compare=ghosts,
               path=target, form=self.report_form.value, unit=d.unit, base_lr=self.base_rate())
        self.reported = (target, fingerprint(d.schedule, d.unit), [label for label, _ in ghosts], left)
        return target

    def _reported(self, path: str) -> tuple[str, str]:
        """Write the report; the message in words and the fingerprint (shown apart, as code)."""
        self.write_report(path)
        assert self.reported is not None
        target, mark, drawn, left = self.reported
        words = f"report written to {target}, fingerprint"
        tail = f"; pins drawn as ghosts: {', '.join(drawn)}" if drawn else "; no pins to draw"
        if left:
            other = "steps" if self.d.unit == "epoch" else "epochs"
            tail += f"; left out (pinned in {other}, one picture has one clock): {', '.join(left)}"
        return words, f"<code>{mark}</code>" + tidy_html(tail)

    def _typed(self, change: dict) -> None:
        # read-only in effect: put the generated text back after any edit
        if change["new"] != self._generated:
            self.code.value = self._generated

    def _file(self, action, box: W.Text) -> None:
        """Run a file button's ``action`` on the path in ``box``; its words (or the error) go beside the buttons."""
        try:
            said = action(box.value.strip())
        except Exception as exc:  # shown here, next to the buttons, as well as in the error area
            self._say(str(exc), ERROR_RED)
            raise
        words, extra = (said, "") if isinstance(said, str) else said
        self._say(words, OK, extra)

    def _say(self, text: str, colour: str, extra: str = "") -> None:
        """``text`` in the widget's number format, then ``extra`` (HTML as it is: a fingerprint is no number)."""
        self.message.value = lines(f'<span style="color:{colour}">{tidy_html(text)} {extra}</span>'
                                   if extra else f'<span style="color:{colour}">{tidy_html(text)}</span>')


class FileMethods:
    """The designer's spec-file methods (the export panel's buttons call them; ``autosave`` after each change)."""

    def _whole(self) -> Any:
        """What a spec file holds: the tracks or per-group designs when the designer has them (``schedule`` is then
        the one track the stages edit, possibly a momentum), else the schedule."""
        held = getattr(self, "tracks", None)
        return self.schedule if held is None else held

    def to_spec(self) -> dict:
        """The current design as a spec dict, with its unit and steps per epoch (all its tracks and groups)."""
        return specs.to_spec(self._whole(), self.unit, self.steps_per_epoch)

    def save(self, path: str | os.PathLike) -> os.PathLike:
        """Write the current design (all its tracks and groups) to ``path`` atomically (``schedwidget.spec.save``)."""
        return specs.save(self._whole(), path, unit=self.unit, steps_per_epoch=self.steps_per_epoch)

    def load(self, path: str | os.PathLike) -> str:
        """Read a spec file into the editor (validated; loading never runs code)."""
        d = specs.load_design(path)
        with self._one_redraw():
            self.unit = d.unit
            if d.steps_per_epoch is not None:
                self.steps_per_epoch = d.steps_per_epoch
            if d.schedule.length is not None:
                self.steps = d.schedule.length
            if d.tracks is not None:
                self.track, self.group = "rate", 0
                self.tracks = d.tracks
            else:
                self.propose(d.schedule)
        return os.fspath(path)

    @classmethod
    def from_file(cls, path: str | os.PathLike, **kwargs: Any) -> ScheduleDesigner:
        """A designer opened on the spec file at ``path`` (e.g. an autosave file)."""
        d = specs.load_design(path)
        kwargs.setdefault("unit", d.unit)
        kwargs.setdefault("steps_per_epoch", d.steps_per_epoch)
        return cls(d.schedule if d.tracks is None else d.tracks, **kwargs)

    def _autosave(self) -> None:
        if self.autosave is not None and self.to_spec() != self._saved:
            self.save(self.autosave)
            self._saved = self.to_spec()
