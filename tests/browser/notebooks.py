"""Notebooks the browser tests build for themselves (written into the server's temporary root).

They are generated here rather than stored as ``.ipynb`` files so that nbval,
which collects every notebook under ``tests/``, does not run them on its own.
"""

from __future__ import annotations

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

KERNEL = {"kernelspec": {"display_name": "Python 3 (ipykernel)", "language": "python", "name": "python3"}}


def _nb(*cells: str, title: str) -> dict:
    nb = new_notebook(cells=[new_markdown_cell(f"# {title}")] + [new_code_cell(c) for c in cells], metadata=KERNEL)
    nbformat.validate(nb)
    return nb


def plain_widgets() -> dict:
    """A slider driving a bqplot line, with the designer's class names: checks the harness on its own."""
    return _nb('''\
import ipywidgets as W, bqplot as bq, numpy as np
x = np.arange(200.0)
sx, sy = bq.LinearScale(), bq.LinearScale(min=0.0, max=1.0)
line = bq.Lines(x=x, y=0.1 * (1 + np.cos(x / 40)), scales={"x": sx, "y": sy}, colors=["#0f766e"])
fig = bq.Figure(marks=[line], axes=[bq.Axis(scale=sx), bq.Axis(scale=sy, orientation="vertical")])
fig.add_class("sw-curve")
rate = W.FloatLogSlider(value=0.1, min=-4, max=-0.5, step=0.05, description="peak")
rate.add_class("sw-rate")
readout = W.Label("peak 0.1")
readout.add_class("sw-readout")
def redraw(change):
    with line.hold_sync():
        line.y = change.new * (1 + np.cos(x / 40))
    readout.value = f"peak {change.new:.3g}"
rate.observe(redraw, "value")
W.VBox([rate, fig, readout])''', title="harness check: plain ipywidgets and bqplot")


def timing(budgets: tuple[int, ...] = (10**3, 10**6, 10**9)) -> dict:
    """One designer per budget, each in its own output, labelled by a class with the budget."""
    setup = '''\
from schedwidget import ScheduleDesigner, cosine, warmup

def design(n):
    w = max(1, n // 20)
    return warmup(cosine(0.1, floor=0.001, steps=n - w), w)'''
    cells = [setup]
    for n in budgets:
        cells.append(f'''\
d{n} = ScheduleDesigner(design({n}))
d{n}.add_class("sw-budget-{n}")
d{n}''')
    return _nb(*cells, title="press-to-redraw timing: one designer per budget")


def designer() -> dict:
    """One designer on the demo scenario (DESIGN.md section 5): stands in for the tour where needed."""
    return _nb('''\
from schedwidget import ScheduleDesigner, cosine, warmup
d = ScheduleDesigner(warmup(cosine(0.1, floor=0.0005, steps=85 * 1150), 5 * 1150), steps_per_epoch=1150)
d''', title="one designer (demo scenario)")
