"""Case 6: the Python-side cost of one change of the design in the whole designer, with 0 and with 5 pins.

One change is a new peak typed into the first stage's rate box of the slider
design of case 2 (a warmup, then restarts of a cosine; ``bench_redraw._editable``):
from the assignment to the moment every panel has redrawn what changed for it
(curve and ghosts, facts and readout, stage controls, the Compare table; the
Compare tab is on screen, Export is not).  With 5 pins the Compare table reads
five more designs and the figure carries five ghosts; the ratio (5 pins) /
(0 pins) says what the pins add.  Budgets 1e3, 1e6 and 1e9 ticks: nothing in the
change may grow with the budget.
"""

from __future__ import annotations

import statistics
import time
import warnings

from .bench_redraw import _editable
from .design import PEAK
from .harness import Result, Target, unavailable

CASE = "6 designer"
BUDGETS = (10**3, 10**6, 10**9)
QUICK_BUDGETS = (10**3,)
CHANGES = 60
PINS = 5
WHOLE = Target("<=", 10.0)   # ms per change, Python side, median (on a quiet machine)
RATIO = Target("<=", 1.3)    # (5 pins) / (0 pins)


def one_change_ms(n: int, pins: int, changes: int) -> float:
    """Median milliseconds of one change of the design at budget ``n`` with ``pins`` pins."""
    from schedwidget.widget import ScheduleDesigner

    d = ScheduleDesigner(_editable(n), unit="step")
    box = d.control(0, "peak").text
    for k in range(pins):
        box.value = PEAK * (0.3 + 0.05 * k)
        d.pin(f"pin {k}")
    values = [PEAK * (0.5 + 0.01 * (i % 40)) for i in range(changes + 1)]
    box.value = values[-1]  # warm: the pins' cached values, the first trace
    times = []
    for i in range(changes):
        t0 = time.perf_counter()
        box.value = values[i]
        times.append(time.perf_counter() - t0)
        if d.error or abs(float(d.canvas.curve.y.max()) - values[i]) > 1e-9 * values[i]:
            raise AssertionError(f"the change to {values[i]} was not drawn ({d.error or 'wrong peak'})")
    if len(d.pins) != pins or d.canvas.ghost_traces != pins:
        raise AssertionError(f"{len(d.pins)} pins, {d.canvas.ghost_traces} ghost traces, expected {pins}")
    return 1e3 * statistics.median(times)


def run(quick: bool = False) -> list[Result]:
    """Every row of case 6 (``quick``: the smallest budget, a few changes)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # bqplot's trait declarations, on import
        try:
            import schedwidget.widget  # noqa: F401
        except ImportError as exc:
            return [unavailable(CASE, "one change, whole designer", f"the designer is not available ({exc})")]
    changes = 5 if quick else CHANGES
    rows: list[Result] = []
    for n in QUICK_BUDGETS if quick else BUDGETS:
        got = {p: one_change_ms(n, p, changes) for p in (0, PINS)}
        for p in (0, PINS):
            rows.append(Result.measured(CASE, f"one change, {p} pins (median of {changes})", n, got[p], "ms",
                                        target=WHOLE, note="every panel on screen redrawn; Export hidden"))
        rows.append(Result.measured(CASE, f"{PINS} pins / 0 pins", n, got[PINS] / got[0], "x", kind="ratio",
                                    target=RATIO))
    return rows
