"""The designer's look in one place: colours, fonts, figure sizes and margins, table cells, the tab bar.

The curve colours are the static picture's own (``schedwidget.svg``), so the live and the
saved curve cannot drift apart.  DESIGN.md section 4: the curve deep teal, pins in muted
greys, stage joins thin dotted slate, cautions amber; no dark theme.
"""

from __future__ import annotations

import html
import math
import re
import warnings

import ipywidgets as W
import numpy as np
from traitlets import Int, observe

from ..svg import CURVE, GHOSTS, JOIN, nice_ticks

with warnings.catch_warnings():
    # bqplot 0.13 / bqscales declare traits the pre-4.1 way; traitlets says so on import. Not ours.
    warnings.filterwarnings("ignore", message="metadata .* was set from the constructor", category=DeprecationWarning)
    from bqplot import Axis, LinearScale, LogScale

__all__ = ["CURVE", "GHOSTS", "JOIN", "METRIC", "AMBER", "ERROR_RED", "OK", "HOVER", "BORDER", "TOGGLE",
           "LABEL_SIZE", "CURVE_FIGURE", "REPLAY_FIGURE", "RESCALE_FIGURE", "figure_layout", "cell", "Tabs",
           "rate", "rate_html", "number", "count", "epochs", "lines", "share", "pct", "tidy_html", "THIN", "RateAxes",
           "legend_html", "nice_ceiling"]

METRIC = "#9ca3af"     # muted grey: a metric history on its own axis, the design before a rescale
AMBER = "#b45309"      # cautions
ERROR_RED = "#b91c1c"  # messages about a refused change
OK = "#0f766e"         # a file saved or loaded (the curve's teal)
HOVER = "#94a3b8"      # the hover line
BORDER = "#e5e7eb"     # light frames around stages and under the tab bar

LABEL_SIZE = 11        # px: names at the right end of the lines
#: A toggle row's layout: its label beside its buttons, as wide as both (ipywidgets lays a toggle row out as a
#: block, so its label sat above the buttons, out of line with the labels of the boxes beside it).
TOGGLE = {"width": "auto", "flex": "0 0 auto", "display": "flex", "align_items": "center", "margin": "2px 0"}

# Figures: (height in px, margins). Every figure also gets a minimum width, so that its plot area
# (width - left - right) is positive however narrow the notebook is.
CURVE_FIGURE = (290, {"top": 16, "bottom": 48, "left": 64, "right": 24})
REPLAY_FIGURE = (300, {"top": 16, "bottom": 44, "left": 72, "right": 84})
RESCALE_FIGURE = (280, {"top": 16, "bottom": 44, "left": 64, "right": 24})
MIN_PLOT_WIDTH = 200   # px of plot area at the least


def figure_layout(spec: tuple[int, dict]) -> dict:
    """The ``layout`` of a figure: full width, its height, and a minimum size that keeps the plot area positive.

    >>> figure_layout(RESCALE_FIGURE)["min_width"]
    '288px'
    """
    height, m = spec
    return {"width": "100%", "height": f"{height}px", "min_width": f"{m['left'] + m['right'] + MIN_PLOT_WIDTH}px",
            "min_height": f"{height}px"}


def cell(align: str = "right", pad: str = "1px 8px", extra: str = "") -> str:
    """The style attribute of a table cell.

    >>> cell("left")
    'style="text-align:left;padding:1px 8px"'
    """
    return f'style="text-align:{align};padding:{pad}{";" + extra if extra else ""}"'


class Tabs(W.VBox):
    """Panes under a tab bar (``bar``, toggle buttons, class ``sw-tabs``); ``children[i]`` is pane ``i``.

    A hidden pane is not taken out of the layout (``display: none``) as a tab widget's pane would be:
    it keeps its width, gets ``height: 0`` and ``visibility: hidden``.  A bqplot figure lays itself out
    from its element's size when it first renders, and in a ``display: none`` pane that size is 0, so
    the plot area came out negative (width 0 - 156 px of margins); the browser's bar has no hidden
    state of its own either, so a pane filled by the kernel after the person moved on is never 0-sized.
    """

    selected_index = Int(0, help="the pane shown")

    def __init__(self, titles: tuple[str, ...]) -> None:
        self.titles = tuple(titles)
        self.bar = W.ToggleButtons(options=[(t, i) for i, t in enumerate(self.titles)], value=0,
                                   style={"button_width": "7em"}, layout=dict(TOGGLE))
        self.bar.add_class("sw-tabs")
        super().__init__([W.Box([]) for _ in self.titles],
                         layout={"border_top": f"1px solid {BORDER}", "padding": "4px 0 0 0"})
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

    def fill(self, i: int, panel: W.Widget) -> None:
        """Put ``panel`` into pane ``i``."""
        self.children[i].children = (panel,)


# ------------------------------------------------------------------ one number format for the whole widget
TINY = 1e-9  # a rate this small relative to nothing else is shown as ~0 (the exact value goes in a tooltip)
THIN = "\u2009"  # thin space: between a number and its % sign, everywhere on screen
_PERCENT = re.compile(r"(\d)[ \u00a0\u202f]?%")
#: A number written in exponent form (2.58e-11, 1.554e+04), with no digit or dot glued to its front.
_EXPONENT = re.compile(r"(?<![\w.])-?\d+(?:\.\d+)?[eE][-+]?\d+(?![\w.])")


#: "~0 (5.16e-11)": a tiny value the core already wrote as ~0 with its exact value beside it.
_SAID_TINY = re.compile(r"~0 \((-?\d+(?:\.\d+)?[eE][-+]?\d+)\)")


def lines(body: str) -> str:
    """HTML text set at a reading line height (an HTML widget's lines are otherwise as tall as a control row);
    empty stays empty.

    >>> lines(""), lines("a")
    ('', '<div style="line-height:1.4">a</div>')
    """
    return f'<div style="line-height:1.4">{body}</div>' if body else ""


def rate(x: float) -> str:
    """A rate to 3 significant digits; a tiny positive value as ``~0``.

    >>> rate(0.1), rate(3e-4), rate(2.58e-11), rate(0.0), rate(0.099982), rate(3e-5)
    ('0.1', '0.0003', '~0', '0', '0.1', '3e-5')
    """
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    if abs(x) < TINY:
        return "~0"
    return f"{x:.3g}".replace("e-0", "e-").replace("e+0", "e+")  # 3e-5 as the log axis writes it, not 3e-05


def rate_html(x: float) -> str:
    """A rate as HTML: ``rate(x)``, and a tiny value's exact value on hover (a ``title``).

    >>> rate_html(2.58e-11), rate_html(0.1)
    ('<span title="exactly 2.58e-11">~0</span>', '0.1')
    """
    shown = rate(x)
    return f'<span title="exactly {x!r}">{shown}</span>' if shown == "~0" else html.escape(shown)


def number(x: float) -> str:
    """Any other quantity (a sum of rates, a ratio): 4 significant digits, thousands separated, no exponent
    for large values, ``~0`` for tiny ones.

    >>> number(0.1), number(4975.04), number(1.0), number(51_750.3), number(2e-12)
    ('0.1', '4,975', '1', '51,750', '~0')
    """
    if x != 0 and math.isfinite(x) and abs(x) < TINY:
        return "~0"
    if abs(x) >= 1000:
        return f"{x:,.0f}"
    return f"{x:.4g}".replace("e-0", "e-")


def epochs(x: float) -> str:
    """An epoch position or count: up to three decimals, trailing zeros dropped, thousands separated.

    >>> epochs(5.0), epochs(72.5913), epochs(4.99913), epochs(1234.5)
    ('5', '72.591', '4.999', '1,234.5')
    """
    return f"{x:,.3f}".rstrip("0").rstrip(".")


def count(n: float) -> str:
    """A whole count with thousands separators: ``103,500``."""
    return f"{int(n):,}"


def share(x: float) -> str:
    """A share as a percentage with a thin space: ``3.3\u2009%``.

    >>> share(0.033) == "3.3" + THIN + "%"
    True
    """
    return f"{100 * x:.2g}{THIN}%"


def pct(text: str) -> str:
    """``text`` with every ``%`` after a number set off by a thin space (``10%``, ``10 %`` -> ``10\u2009%``).

    Words from the core (the facts sentence, length words, messages) go through this on their way to the
    screen, so one format holds whatever their source writes.

    >>> pct("under 10% of the peak; 6 % of the run") == f"under 10{THIN}% of the peak; 6{THIN}% of the run"
    True
    """
    return _PERCENT.sub(lambda m: m.group(1) + THIN + "%", text)


_NUMBERS = re.compile(f"{_SAID_TINY.pattern}|{_EXPONENT.pattern}")


def _tiny(m: re.Match) -> str:
    if m.group(1) is not None:  # "~0 (5.16e-11)"
        return f'<span title="exactly {m.group(1)}">~0</span>'
    v = float(m.group(0))
    if v != 0 and abs(v) < TINY:
        return f'<span title="exactly {m.group(0)}">~0</span>'
    if abs(v) >= 1e4 and float(v).is_integer():
        return f"{v:,.0f}"
    return re.sub(r"e([-+])0+(\d)", r"e\1\2", m.group(0))  # 2.97e-06 as the widget writes it: 2.97e-6


def tidy_html(text: str) -> str:
    """Plain ``text`` as HTML in the widget's one number format: escaped, ``%`` after a thin space, a tiny
    number in exponent form as ``~0`` with its exact value on hover, a large whole one with separators.

    >>> tidy_html("ends at 2.58e-11 at step 9, half-life 1.554e+04 steps")
    'ends at <span title="exactly 2.58e-11">~0</span> at step 9, half-life 15,540 steps'
    >>> tidy_html("ends at ~0 (5.16e-11) at step 9, 0.00989 of the peak (2.97e-06)")
    'ends at <span title="exactly 5.16e-11">~0</span> at step 9, 0.00989 of the peak (2.97e-6)'
    """
    return _NUMBERS.sub(_tiny, pct(html.escape(text)))


def nice_ceiling(x: float) -> float:
    """The smallest of 1, 1.2, 1.5, 2, 2.5, 3, 4, 5, 6, 8 x 10^k at or above ``x`` (> 0).

    >>> nice_ceiling(0.103), nice_ceiling(3e-4), nice_ceiling(0.26)
    (0.12, 0.0003, 0.3)
    """
    if not x > 0 or not math.isfinite(x):
        return 1.0
    k = math.floor(math.log10(x))
    for m in (1, 1.2, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10):
        v = float(f"{m * 10.0 ** k:.12g}")
        if v >= x * (1 - 1e-12):
            return v
    return float(f"{10.0 ** (k + 1):.12g}")  # pragma: no cover


class RateAxes:
    """A rate axis that is linear or logarithmic: two scales, each with an axis of its own, one shown.

    The front end keeps an axis's tick positions when the axis is given another scale (the log labels
    all at one spot, log-spaced ticks back on the linear axis, NaN transforms); so the axes are never
    given another scale: ``show(log)`` only switches which one is visible.
    """

    def __init__(self, colour: str | None = None) -> None:
        self.linear_scale = LinearScale(min=0.0, max=1.0)
        self.log_scale = LogScale(min=1e-6, max=1.0)
        extra = {"color": colour} if colour else {}
        self.linear = Axis(scale=self.linear_scale, side="left", tick_format=".2~g", label="",
                           tick_values=np.array([0.0, 0.5, 1.0]), **extra)
        self.log = Axis(scale=self.log_scale, side="left", tick_format=".0e", label="",
                        visible=False, tick_values=np.array([1e-6, 1e-3, 1.0]), **extra)
        self.axes = [self.linear, self.log]

    @property
    def is_log(self) -> bool:
        return bool(self.log.visible)

    @property
    def shown(self) -> Axis:
        return self.log if self.is_log else self.linear

    def show(self, log: bool) -> None:
        if self.log.visible != log:
            self.log.visible = log
            self.linear.visible = not log

    def fit_linear(self, hi: float) -> None:
        """0 .. a round number above ``hi``, kept while ``hi`` stays above 40 % of it."""
        top = self.linear_scale.max
        if not (hi > 0 and math.isfinite(hi)):
            hi = 1.0
        if top is None or not (hi <= top <= 2.5 * hi):
            new = nice_ceiling(hi * 1.02)
            if self.linear_scale.max != new or self.linear_scale.min != 0.0:
                with self.linear_scale.hold_sync():
                    self.linear_scale.min, self.linear_scale.max = 0.0, new
            # round labels from 0 to the top (the front end's own for a padded domain began at -0.0073)
            ticks = nice_ticks(0.0, new, 6)
            ticks = np.array([float(f"{t:.12g}") for t in ticks if t <= new * (1 + 1e-9)])
            if not np.array_equal(self.linear.tick_values, ticks):
                self.linear.tick_values = ticks

    def fit_log(self, lo: float, hi: float) -> None:
        """Powers of ten from under ``lo`` to over ``hi`` (at most 8 labels)."""
        lo, hi = max(lo, 1e-300), max(hi, 1e-300)
        a, b = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
        if b <= a:
            b = a + 1
        every = max(1, math.ceil((b - a + 1) / 8))
        ticks = 10.0 ** np.arange(a, b + 1, every)
        # a little room below the lowest tick, so its label does not touch the x axis's first label
        lo_s, hi_s = float(10.0 ** (a - 0.3)), float(10.0 ** (b + 0.05))
        if (self.log_scale.min, self.log_scale.max) != (lo_s, hi_s):
            with self.log_scale.hold_sync():
                self.log_scale.min, self.log_scale.max = lo_s, hi_s
        if self.log.tick_values is None or not np.array_equal(self.log.tick_values, ticks):
            self.log.tick_values = ticks


def legend_html(rows: list[tuple[str, str, float]]) -> str:
    """A compact legend in a row above the plot: (colour, name, last rate) per line, the colour as a short bar;
    the row wraps between names and a name is never cut.

    Beside the plot it took width from the figure when a pin arrived, and a bqplot figure does not lay itself
    out again then: the plot's right end (the last ~13 % of the run) slid under the names.
    """
    out = []
    for colour, name, last in rows:
        out.append(f'<div class="sw-legend-item" style="display:flex;align-items:center;gap:6px;max-width:100%;'
                   f'font-size:12px;line-height:1.35;overflow-wrap:anywhere">'
                   f'<span style="display:inline-block;width:18px;height:3px;background:{colour};flex:0 0 auto">'
                   f'</span><span title="{html.escape(name)} (last rate {rate(last)}, exactly {last!r})">'
                   f'{html.escape(name)}</span></div>')
    return f'<div style="display:flex;flex-wrap:wrap;gap:2px 16px">{"".join(out)}</div>' if out else ""
