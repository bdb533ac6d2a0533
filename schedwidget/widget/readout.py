"""The readout panel: the facts of the current design in numbers, one plain sentence, cautions in amber.

The numbers come from ``schedwidget.facts.facts``; this module only lays them out
as HTML (escaped) for two HTML widgets: the readout and the cautions.
"""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

import ipywidgets as W

from ..facts import OVER_HINT, Facts
from ..svg import render_svg
from .form import read_form
from .guard import Panel
from .solve_row import SolveRow
from .theme import AMBER, epochs, number, pct, rate, rate_html, tidy_html

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["ReadoutPanel", "DisplayMethods", "AMBER", "facts_html", "cautions_html", "when"]


def when(t: int | None, f: Facts) -> str:
    """A tick in words: ``step 5,750 (epoch 5.00)``; em dash for None."""
    if t is None:
        return "—"
    words = f"{f.unit} {t:,}"
    if f.steps_per_epoch and f.unit == "step":
        words += f" (epoch {epochs(t / f.steps_per_epoch)})"
    return words


def _g(x: float) -> str:
    return rate(x)


def _length(n: float, f: Facts) -> str:
    """A length in the clock's unit, with epochs when they are known: ``15,540 steps (13.5 epochs)``."""
    words = f"{n:,.0f} {f.unit}s"
    if f.steps_per_epoch and f.unit == "step":
        words += f" ({n / f.steps_per_epoch:,.3g} epochs)"
    return words


#: The core's boundary labels in plain words.
BOUNDARY_WORDS = (("last tick before", "last {u} before"), ("first tick after", "first {u} after"),
                  ("first tick", "start"), ("last tick", "end"), ("join", "stage change"),
                  ("after the run (held)", "after the run"))


def _plain(label: str, unit: str) -> str:
    for a, b in BOUNDARY_WORDS:
        label = label.replace(a, b.format(u=unit))
    return label


def facts_html(f: Facts) -> str:
    """The readout as HTML: sentence, a table of numbers, the boundary table."""
    e = html.escape
    unit = f.unit
    half = "—" if f.half_life is None else e(_length(f.half_life, f))
    rh = rate_html
    rows = [  # (label, cell as HTML)
        ("peak", f"{rh(f.peak)} at {e(when(f.peak_at, f))}"),
        ("final", f"{rh(f.final)} at {e(when(f.steps - 1, f))}; {rh(f.after)} after the run"),
        ("minimum", f"{rh(f.minimum)} at {e(when(f.minimum_at, f))}"),
        ("sum of rates", e(f"{number(f.area)} over the run (mean rate ") + rh(f.mean) + ")"),
        ("half-life", half),
        (pct("under 10 % of peak"), e(f"from {when(f.under_10, f)}" if f.under_10 is not None else "never")),
        (pct("under 1 % of peak"), e(f"from {when(f.under_1, f)}" if f.under_1 is not None else "never")),
        ("sudden drops or jumps", e(f"{len(f.breaks):,}" + (f" (first at {when(f.breaks[0], f)})"
                                                            if f.breaks else ""))),
    ]
    if not f.exact:
        rows.append(("read from", e(f"an even grid of {unit}s plus every jump and stage change (the run is long)")))
    cell = 'style="text-align:left;padding:0 10px 0 0;line-height:1.5"'
    num = f"<table>{''.join(f'<tr><th {cell}>{e(k)}</th><td {cell}>{v}</td></tr>' for k, v in rows)}</table>"
    head = "".join(f"<th {cell}>{e(h)}</th>" for h in ("where stages change", unit,
                                                       "epoch" if f.steps_per_epoch and unit == "step" else "",
                                                       "rate"))
    body = []
    for label, t, r in f.boundary:
        ep = epochs(t / f.steps_per_epoch) if f.steps_per_epoch and unit == "step" else ""
        shown = f'<span title="exactly {r!r}">{e(_g(r))}</span>'
        body.append("<tr>" + "".join(f"<td {cell}>{c}</td>" for c in (e(_plain(label, unit)), f"{t:,}", ep, shown))
                    + "</tr>")
    boundary = f"<table><tr>{head}</tr>{''.join(body)}</table>"
    return (f"<div style=\"margin:0 0 4px 0;line-height:1.4\">{tidy_html(f.sentence)}</div>"
            f"<div style=\"display:flex;flex-wrap:wrap;gap:4px 24px;align-items:flex-start\">{num}{boundary}</div>")


def cautions_html(f: Facts, run_positions: bool = False) -> str:
    """The cautions as HTML lines (empty string when there are none).

    ``run_positions``: the designer already shows the design's positions on the run's clock (its stages panel
    does for an editable design), so the caution that suggests code for them (``facts.OVER_HINT``) is left out.
    """
    said = [c for c in f.cautions if not (run_positions and c.endswith(OVER_HINT))]
    return "".join(f'<div style="line-height:1.4;margin:0 0 2px 0">&#9888; {tidy_html(c)}</div>' for c in said)


class ReadoutPanel(Panel, W.VBox):
    """The readout: the amber cautions (class ``sw-caution``) and the sentence (``sentence``) under the curve,
    and the full readout (``text``, class ``sw-readout``: sentence and tables) for the Numbers tab.

    It shows the designer's ``facts`` (computed once per change by the designer, never here).
    """

    def __init__(self, designer: ScheduleDesigner) -> None:
        self.text = W.HTML("")
        self.text.add_class("sw-readout")
        self.cautions = W.HTML("", style={"text_color": AMBER})
        self.cautions.add_class("sw-caution")
        self.sentence = W.HTML("")
        self.sentence.add_class("sw-sentence")
        self.solver = SolveRow(designer)
        super().__init__([self.cautions, self.sentence, self.solver])
        self.listen(designer)

    @property
    def facts(self) -> Facts | None:
        """The facts shown (the designer's)."""
        return self.d.facts

    def shows(self) -> tuple:
        return self.d.facts, self.d.schedule

    def paint(self) -> None:
        if self.d.facts is not None:
            self.show(self.d.facts)

    def show(self, f: Facts) -> None:
        """Show ``f`` (writes only what changed)."""
        text, warn = facts_html(f), cautions_html(f, read_form(self.d.schedule) is not None)
        if self.text.value != text:
            self.text.value = text
        said = f'<div style="line-height:1.4;color:#374151">{tidy_html(f.sentence)}</div>'
        if self.sentence.value != said:
            self.sentence.value = said
        if self.cautions.value != warn:
            self.cautions.value = warn


class DisplayMethods:
    """The designer's text and static picture beside the widget (a saved notebook shows them)."""

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
