"""The compare panel: pin designs under a name, draw them as ghosts, read them side by side.

Up to five pins.  For each: its facts next to the current design's, the
largest rate difference against the current design (and where), and the
ratio of the areas.  A pin can be restored into the editor.
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import TYPE_CHECKING

import ipywidgets as W
import numpy as np

from ..facts import Facts, facts
from ..sample import breaks
from ..schedule import Schedule, complain

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["Pin", "ComparePanel", "largest_difference", "MAX_PINS", "DIFF_EXACT"]

MAX_PINS = 5
DIFF_EXACT = 2 ** 16  # budgets up to this are compared tick by tick; longer ones on a grid plus every jump


@dataclass(frozen=True)
class Pin:
    """A pinned design with the clock it was pinned with."""

    name: str
    schedule: Schedule
    steps: int
    unit: str
    steps_per_epoch: int | None


def largest_difference(a: Schedule, b: Schedule, steps: int) -> tuple[float, int]:
    """``max |a(t) - b(t)|`` over ``t < steps`` and the first tick where it is reached.

    Every tick up to ``DIFF_EXACT`` ticks; above that an even grid of
    ``DIFF_EXACT // 2`` ticks plus every jump of either design and its neighbour.

    >>> from schedwidget import flat
    >>> largest_difference(flat(0.1), flat(0.05), 10)
    (0.05, 0)
    """
    if steps <= DIFF_EXACT:
        t = np.arange(steps, dtype=np.int64)
    else:
        grid = np.linspace(0, steps - 1, DIFF_EXACT // 2).astype(np.int64)
        jumps = np.concatenate([breaks(a, steps), breaks(b, steps)]).astype(np.int64)
        t = np.unique(np.concatenate([grid, jumps, np.maximum(jumps - 1, 0)]))
    d = np.abs(a(t) - b(t))
    i = int(np.argmax(d))
    return float(d[i]), int(t[i])


def number(x: float) -> str:
    """The one number format of the Compare table: 4 significant digits, thousands separated.

    >>> number(0.1), number(4975.04), number(1.0)
    ('0.1', '4,975', '1')
    """
    return f"{x:,.0f}" if abs(x) >= 1000 else f"{x:.4g}"


def at(tick: int | None, unit: str) -> str:
    """A tick in words: ``3,450 steps`` on the step clock, ``epoch 13`` on the epoch clock."""
    if tick is None:
        return "—"
    return f"epoch {tick:,}" if unit == "epoch" else f"step {tick:,}"


class ComparePanel(W.VBox):
    """Pin row (``pin_row``: name box ``sw-pin-name`` and button ``sw-pin``, laid out under the curve),
    and this panel: the side-by-side table, restore and remove."""

    def __init__(self, designer: ScheduleDesigner) -> None:
        self.d = designer
        g = designer.guarded
        self.pins: list[Pin] = []
        self._facts: dict[tuple, Facts] = {}
        self.name = W.Text(placeholder="name of this design", description="pin as",
                           tooltip="pin the current design under this name (up to five)",
                           style={"description_width": "4em"}, layout={"width": "18em"})
        self.name.add_class("sw-pin-name")
        self.pin_button = W.Button(description="Pin", icon="thumb-tack", tooltip="pin the current design")
        self.pin_button.add_class("sw-pin")
        self.pin_button.on_click(g(lambda _b: self.pin(self.name.value)))
        self.pin_row = W.HBox([self.name, self.pin_button])
        self.choice = W.Dropdown(options=[], description="pin", style={"description_width": "3em"})
        self.restore_button = W.Button(description="Restore", tooltip="put this pin back into the editor")
        self.restore_button.add_class("sw-restore")
        self.remove_button = W.Button(description="Remove pin", tooltip="forget this pin")
        self.restore_button.on_click(g(lambda _b: self.restore(self.choice.value)))
        self.remove_button.on_click(g(lambda _b: self.unpin(self.choice.value)))
        self.table = W.HTML("<i>No pins yet: name the current design under the curve and press Pin.</i>")
        self.table.add_class("sw-compare")
        super().__init__([self.table, W.HBox([self.choice, self.restore_button, self.remove_button])])

    # ---------------------------------------------------------------- pins
    def pin(self, name: str | None = None) -> Pin:
        """Pin the current design under ``name`` (a pin of the same name is replaced)."""
        d = self.d
        label = (name or "").strip() or f"pin {len(self.pins) + 1}"
        pin = Pin(label, d.schedule, d.steps, d.unit, d.steps_per_epoch)
        names = [p.name for p in self.pins]
        if label in names:
            self.pins[names.index(label)] = pin
        elif len(self.pins) >= MAX_PINS:
            raise complain("compare", "pins", len(self.pins) + 1, f"at most {MAX_PINS}",
                           "remove a pin in the Compare panel first")
        else:
            self.pins.append(pin)
        if self.name.value:
            self.name.value = ""
        self.refresh(ghosts=True)
        return pin

    def unpin(self, name: str | None) -> None:
        """Forget the pin called ``name``."""
        self.pins = [p for p in self.pins if p.name != self._find(name).name]
        self.refresh(ghosts=True)

    def restore(self, name: str | None) -> None:
        """Put the pin called ``name`` back into the editor (design, budget and clock)."""
        p = self._find(name)
        self.d.restore(p.schedule, p.steps, p.unit, p.steps_per_epoch)

    def _find(self, name: str | None) -> Pin:
        for p in self.pins:
            if p.name == name:
                return p
        raise complain("compare", "pin", name, "the name of a pin: " + (", ".join(repr(p.name) for p in self.pins)
                                                                        or "(there are none yet)"))

    # ------------------------------------------------------------- drawing
    def _facts_of(self, p: Pin) -> Facts:
        key = (p.schedule, p.steps, p.unit, p.steps_per_epoch)
        if key not in self._facts:
            self._facts[key] = facts(p.schedule, p.steps, p.steps_per_epoch, p.unit, exact_up_to=2 ** 16)
        return self._facts[key]

    def refresh(self, ghosts: bool = False) -> None:
        """Redraw the table (and the ghost marks when ``ghosts``) against the current design."""
        d = self.d
        if ghosts:
            for i in range(MAX_PINS):
                if i < len(self.pins):
                    p = self.pins[i]
                    d.canvas.ghost(i, p.name, p.schedule, p.steps, d.clock_for(p.unit, p.steps_per_epoch))
                else:
                    d.canvas.ghost(i, None)
            keep = {(p.schedule, p.steps, p.unit, p.steps_per_epoch) for p in self.pins}
            self._facts = {k: v for k, v in self._facts.items() if k in keep}
            names = [p.name for p in self.pins]
            if list(self.choice.options) != names:
                keep = self.choice.value if self.choice.value in names else (names[-1] if names else None)
                self.choice.options = names
                self.choice.value = keep
        if not self.pins:
            self._put("<i>No pins yet: name the current design under the curve and press Pin.</i>")
            return
        self._put(self._html())

    def _put(self, text: str) -> None:
        if self.table.value != text:
            self.table.value = text

    def _html(self) -> str:
        d = self.d
        cur = d.readout.facts
        e = html.escape
        cell = 'style="text-align:right;padding:1px 8px"'
        left = 'style="text-align:left;padding:1px 8px"'
        cols: list[tuple[str, list[str]]] = []

        def column(name: str, f: Facts, diff: str, ratio: str) -> tuple[str, list[str]]:
            return name, [number(f.peak), at(f.peak_at, f.unit), number(f.final), number(f.area),
                          at(f.under_10, f.unit), f"{f.steps:,} {f.unit}s", diff, ratio]

        if cur is not None:
            cols.append(column("current", cur, "—", number(1.0)))
        for p in self.pins:
            f = self._facts_of(p)
            if p.unit != d.unit:
                diff, ratio = f"n/a (pinned in {p.unit}s)", "n/a"
            else:
                v, t = largest_difference(p.schedule, d.schedule, max(p.steps, d.steps))
                diff = f"{number(v)} at {at(t, d.unit)}"
                ratio = number(f.area / cur.area) if cur is not None and cur.area > 0 else "—"
            cols.append(column(p.name, f, diff, ratio))
        rows = ["peak rate", "peak at", "final rate", "area (sum of per-tick rates)", "under 10 % of the peak from",
                "budget",
                "largest |rate difference| vs current", "area / current area"]
        head = f"<tr><th {left}></th>" + "".join(f"<th {cell}>{e(n)}</th>" for n, _ in cols) + "</tr>"
        body = "".join(f"<tr><th {left}>{e(r)}</th>" + "".join(f"<td {cell}>{e(v[i])}</td>" for _, v in cols)
                       + "</tr>" for i, r in enumerate(rows))
        return f"<table>{head}{body}</table>"

