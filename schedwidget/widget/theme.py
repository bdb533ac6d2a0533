"""The designer's look in one place: colours, fonts, figure sizes and margins, table cells, the tab bar.

The curve colours are the static picture's own (``schedwidget.svg``), so the live and the
saved curve cannot drift apart.  DESIGN.md section 4: the curve deep teal, pins in muted
greys, stage joins thin dotted slate, cautions amber; no dark theme.
"""

from __future__ import annotations

import ipywidgets as W
from traitlets import Int, observe

from ..svg import CURVE, GHOSTS, JOIN

__all__ = ["CURVE", "GHOSTS", "JOIN", "METRIC", "AMBER", "ERROR_RED", "OK", "HOVER", "BORDER",
           "LABEL_SIZE", "CURVE_FIGURE", "REPLAY_FIGURE", "RESCALE_FIGURE", "figure_layout", "cell", "Tabs"]

METRIC = "#9ca3af"     # muted grey: a metric history on its own axis, the design before a rescale
AMBER = "#b45309"      # cautions
ERROR_RED = "#b91c1c"  # messages about a refused change
OK = "#0f766e"         # a file saved or loaded (the curve's teal)
HOVER = "#94a3b8"      # the hover line
BORDER = "#e5e7eb"     # light frames around stages and under the tab bar

LABEL_SIZE = 11        # px: names at the right end of the lines

# Figures: (height in px, margins). Every figure also gets a minimum width, so that its plot area
# (width - left - right) is positive however narrow the notebook is.
CURVE_FIGURE = (320, {"top": 16, "bottom": 48, "left": 72, "right": 112})
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
                                   style={"button_width": "7em"})
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
