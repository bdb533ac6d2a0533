"""The compare panel: pin designs under a name, draw them as ghosts, read them side by side.

Up to five pins.  For each: its facts next to the current design's, the
largest rate difference against the current design (and where), and the
ratio of the areas.  A pin can be restored into the editor.  The pins are the
designer's ``pinned`` trait; the curve panel draws their ghosts.

The largest difference is read on one grid per budget (every tick up to
``DIFF_GRID`` ticks, else an even grid of ``DIFF_GRID`` ticks) plus every jump of
either design and the tick before it.  A pin's values there are computed once
per pin; on a change of the design only the design is evaluated, once for all
pins (the jumps come from the facts, so nothing is sorted or deduplicated).
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

import ipywidgets as W
import numpy as np

from ..facts import Facts
from ..sample import Trace, breaks
from ..schedule import Schedule, complain
from .guard import Panel
from .theme import cell, epochs, number, pct, rate_html

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["Pin", "ComparePanel", "PinMethods", "largest_difference", "MAX_PINS", "DIFF_GRID"]

MAX_PINS = 5
DIFF_GRID = 4096  # budgets up to this are compared tick by tick; longer ones on this many ticks plus every jump


@dataclass(frozen=True)
class Pin:
    """A pinned design with the clock it was pinned with."""

    name: str
    schedule: Schedule
    steps: int
    unit: str
    steps_per_epoch: int | None


def grid(n: int) -> np.ndarray:
    """The ticks every comparison over ``n`` ticks reads: all of them up to ``DIFF_GRID``, else an even grid."""
    if n <= DIFF_GRID:
        return np.arange(n, dtype=np.int64)
    return np.linspace(0, n - 1, DIFF_GRID).astype(np.int64)


def near(jumps: Sequence[int] | np.ndarray) -> np.ndarray:
    """Each jump's tick and the tick before it (where a difference across a jump is largest)."""
    j = np.asarray(jumps, dtype=np.int64)
    return np.concatenate([j, np.maximum(j - 1, 0)])


def cells(f: Facts, unit: str | None = None, steps_per_epoch: int | None = None) -> list[str]:
    """The HTML table cells of a design's facts: peak, where, final, sum of rates, under 10 %, run length;
    converted to the clock ``unit`` (the designer's) when the design counts in the other unit and steps per
    epoch are known (positions then read ``epoch 3.0`` or ``step 3,450``; the sum of rates per step is the
    sum per epoch times steps per epoch).  Rates are the readout's (``theme.rate_html``: a tiny one is ``~0``
    with its exact value on hover)."""
    unit = unit or f.unit
    spe = steps_per_epoch or f.steps_per_epoch
    e = html.escape
    if unit == f.unit or not spe:
        return [rate_html(f.peak), e(at(f.peak_at, f.unit)), rate_html(f.final), e(number(f.area)),
                e(at(f.under_10, f.unit)), e(f"{f.steps:,} {f.unit}s")]
    if unit == "step":  # an epoch design read on the step clock
        where = (lambda t: None if t is None else at(t * spe, "step"))
        area, length = f.area * spe, f"{f.steps * spe:,} steps"
    else:
        where = (lambda t: None if t is None else f"epoch {epochs(t / spe)}")
        area, length = f.area / spe, f"{f.steps / spe:,.4g} epochs"
    return [rate_html(f.peak), e(where(f.peak_at) or "—"), rate_html(f.final), e(number(area)),
            e(where(f.under_10) or "—"), e(length)]


def ticks_of(tr: Trace | None, n: int) -> np.ndarray | None:
    """The rate at every tick ``0 .. n-1`` from a trace that read every tick (None if it did not).

    An exact trace holds each tick once, plus one extra point before each jump (the jump's vertical
    edge: the same x twice, the first with the rate before the jump), which is dropped.
    """
    if tr is None or not tr.exact or tr.steps != n:
        return None
    keep = np.ones(tr.x.size, dtype=bool)
    keep[:-1] = tr.x[1:] != tr.x[:-1]
    return tr.y[keep]


def biggest(t: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[float, int]:
    """``max |a - b|`` over the ticks ``t`` (any order, repeats allowed) and the first tick where it is reached."""
    d = np.abs(a - b)
    top = float(d.max())
    return top, int(t[d == top].min())


def largest_difference(a: Schedule, b: Schedule, steps: int) -> tuple[float, int]:
    """``max |a(t) - b(t)|`` over ``t < steps`` and the first tick where it is reached.

    Every tick up to ``DIFF_GRID`` ticks; above that an even grid of ``DIFF_GRID``
    ticks plus every jump of either design and the tick before it.

    >>> from schedwidget import flat
    >>> largest_difference(flat(0.1), flat(0.05), 10)
    (0.05, 0)
    """
    t = np.concatenate([grid(steps), near(breaks(a, steps)), near(breaks(b, steps))])
    return biggest(t, a(t), b(t))


NO_PINS = "<i>No pins yet: name the current design under the curve and press Pin.</i>"
ROWS = ("peak rate", "peak at", "final rate", "sum of rates", pct("under 10 % of the peak from"), "run length",
        "largest rate difference from current", "sum of rates / current")


def at(tick: int | None, unit: str) -> str:
    """A tick in words: ``3,450 steps`` on the step clock, ``epoch 13`` on the epoch clock."""
    if tick is None:
        return "—"
    return f"epoch {tick:,}" if unit == "epoch" else f"step {tick:,}"


class ComparePanel(Panel, W.VBox):
    """Pin row (``pin_row``: name box ``sw-pin-name`` and button ``sw-pin``, laid out under the curve),
    and this panel: the side-by-side table, restore and remove."""

    def __init__(self, designer: ScheduleDesigner, tab: int | None = None) -> None:
        g = designer.guarded
        # caches keyed by id(pin) (a pin's hash walks its whole design); each entry keeps its pin alive
        self._facts: dict[int, tuple[Pin, Facts, list[str]]] = {}  # -> (pin, its facts, its escaped cells)
        self._values: dict[tuple, tuple] = {}  # (id(pin), n) -> (design's jumps, pin's values there); ("ticks", n)
        self._current: dict = {}              # per change: n -> (ticks read, the design's values there)
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
        self.table = W.HTML(NO_PINS)
        self.table.add_class("sw-compare")
        super().__init__([self.table, W.HBox([self.choice, self.restore_button, self.remove_button])])
        designer.observe(g(self._pins_changed), names="pinned")
        self._pins_changed({"new": designer.pinned})
        self.listen(designer, tab)

    @property
    def pins(self) -> list[Pin]:
        """The designer's pins, oldest first."""
        return list(self.d.pinned)

    # ---------------------------------------------------------------- pins
    def pin(self, name: str | None = None) -> Pin:
        """Pin the current design under ``name`` (a pin of the same name is replaced)."""
        d = self.d
        label = (name or "").strip() or f"pin {len(d.pinned) + 1}"
        pin = Pin(label, d.schedule, d.steps, d.unit, d.steps_per_epoch)
        pins = list(d.pinned)
        names = [p.name for p in pins]
        if label in names:
            pins[names.index(label)] = pin
        elif len(pins) >= MAX_PINS:
            raise complain("compare", "pins", len(pins) + 1, f"at most {MAX_PINS}",
                           "remove a pin in the Compare panel first")
        else:
            pins.append(pin)
        if self.name.value:
            self.name.value = ""
        d.pinned = tuple(pins)
        return pin

    def unpin(self, name: str | None) -> None:
        """Forget the pin called ``name``."""
        gone = self._find(name)
        self.d.pinned = tuple(p for p in self.d.pinned if p is not gone)

    def restore(self, name: str | None) -> None:
        """Put the pin called ``name`` back into the editor (design, budget and clock)."""
        p = self._find(name)
        self.d.restore(p.schedule, p.steps, p.unit, p.steps_per_epoch)

    def _find(self, name: str | None) -> Pin:
        for p in self.d.pinned:
            if p.name == name:
                return p
        raise complain("compare", "pin", name, "the name of a pin: " + (", ".join(repr(p.name) for p in self.d.pinned)
                                                                        or "(there are none yet)"))

    def _pins_changed(self, change: dict) -> None:
        """The pin menu follows the pins at once (it is a control, not a readout); cached values of gone pins go."""
        names = [p.name for p in change["new"]]
        if list(self.choice.options) != names:
            keep = self.choice.value if self.choice.value in names else (names[-1] if names else None)
            self.choice.options = names
            self.choice.value = keep
        for w in (self.choice, self.restore_button, self.remove_button):  # nothing to pick until there is a pin
            if w.disabled != (not names):
                w.disabled = not names
        kept = set(change["new"])
        self._facts = {k: v for k, v in self._facts.items() if v[0] in kept}
        self._values = {}  # the ticks read hold every pin's jumps: read the pins again

    # ------------------------------------------------------------- drawing
    def _facts_of(self, p: Pin) -> Facts:
        key = (id(p), self.d.unit, self.d.steps_per_epoch)
        if key not in self._facts:
            f = self.d.facts_for(p.schedule, p.steps, p.unit, p.steps_per_epoch)
            self._facts[key] = (p, f, cells(f, self.d.unit, self.d.steps_per_epoch or p.steps_per_epoch))
        return self._facts[key][1]

    def _ticks(self, n: int) -> np.ndarray:
        """The grid over ``n`` ticks and every pin's jumps (and the tick before each): fixed while the pins are."""
        if ("ticks", n) not in self._values:
            jumps = [np.asarray(self._facts_of(p).breaks, dtype=np.int64) for p in self.d.pinned]
            self._values[("ticks", n)] = np.concatenate([grid(n), near(np.concatenate(jumps))])
        return self._values[("ticks", n)]

    def difference(self, p: Pin) -> tuple[float, int]:
        """The largest |rate difference| between pin ``p`` and the design, and its first tick (same clock).

        Read at the grid, at every pin's jumps and at the design's jumps: the pin's values there are computed
        once per pin (again only when the design's jumps move); per change the design is evaluated once for
        all pins.
        """
        d, s = self.d, self.d.schedule
        n = max(p.steps, d.steps)
        jumps = d.facts.breaks
        if n not in self._current:
            t = np.concatenate([self._ticks(n), near(jumps)])
            every = ticks_of(d.canvas.current, n)  # the curve's own trace, when it read every tick
            self._current[n] = (t, every[t] if every is not None else s(t))
        t, a = self._current[n]
        seen = self._values.get((id(p), n))
        if seen is None or seen[0] != jumps:  # the design's jumps stay put while a rate is moved
            seen = self._values[(id(p), n)] = (jumps, p.schedule(t), p)
        return biggest(t, a, seen[1])

    def shows(self) -> tuple:
        d = self.d
        return d.schedule, d.facts, d.pinned

    def paint(self) -> None:
        """Redraw the table against the current design."""
        self._current = {}
        text = self._html() if self.d.pinned else NO_PINS
        if self.table.value != text:
            self.table.value = text

    def _html(self) -> str:
        d = self.d
        cur = d.facts
        e = html.escape
        right, left = cell("right"), cell("left")
        names, cols = ["current"], [cells(cur) + ["—", number(1.0)]]
        for p in d.pinned:
            f = self._facts_of(p)
            if p.unit != d.unit:
                diff, ratio = e(f"n/a (pinned in {p.unit}s)"), "n/a"
            else:
                v, t = self.difference(p)
                diff = rate_html(v) + e(f" at {at(t, d.unit)}") if v > 0 else "none (the same rates)"
                ratio = e(number(f.area / cur.area)) if cur.area > 0 else "—"
            names.append(e(p.name))
            cols.append(self._facts[(id(p), d.unit, d.steps_per_epoch)][2] + [diff, ratio])
        head = f"<tr><th {left}></th>" + "".join(f"<th {right}>{n}</th>" for n in names) + "</tr>"
        body = "".join(f"<tr><th {left}>{e(r)}</th>" + "".join(f"<td {right}>{c[i]}</td>" for c in cols) + "</tr>"
                       for i, r in enumerate(ROWS))
        return f"<table>{head}{body}</table>"


class PinMethods:
    """The designer's pin methods (the pins themselves are its ``pinned`` trait)."""

    # ------------------------------------------------------------ pins, files
    @property
    def pins(self) -> list[Pin]:
        """The pinned designs, oldest first."""
        return list(self.pinned)

    def pin(self, name: str | None = None) -> Pin:
        """Pin the current design under ``name`` (drawn as a grey ghost; up to five)."""
        return self.compare.pin(name)
