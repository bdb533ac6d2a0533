"""Case 2: redraw cost of one slider change in the designer (no browser), and the bytes of the new mark state.

The designer edits a warmup plus a list of stages; a clip is edited in code, so
the slider path runs on the reference design without its floor clip (warmup,
then restarts of a cosine): setting the cosine's peak slider proposes a new
design, and the designer redraws the curve first.  The time is taken from
setting ``slider.value`` to the moment the bqplot marks hold their new arrays
(the designer's own ``timing["marks_at"]`` stamp, taken as soon as the curve panel,
the first observer of each change, has drawn).  The second path assigns ``designer.schedule`` a new value
of the full reference design (with the clip).  Bytes are what ipywidgets would
send for the marks' update messages: the JSON of each message plus its binary
buffers, captured at the widgets' ``_send``.
"""

from __future__ import annotations

import json
import statistics
import time
import warnings
from contextlib import contextmanager
from typing import Any, Iterator

from .design import CYCLES, GROWTH, PEAK, Sizing, reference
from .harness import Result, Target, unavailable

CASE = "2 redraw"
BUDGETS = (10**3, 10**6, 10**9)
QUICK_BUDGETS = (10**3,)
CHANGES = 50
FAST = Target("<=", 5.0)       # ms, Python side, at every budget
SMALL = Target("<=", 64.0)     # KB per update


def _editable(n: int):
    """The reference design without its clip: what the stages panel edits with sliders."""
    from schedwidget import cosine, restarts, warmup

    z = Sizing(n)
    return warmup(restarts(cosine(PEAK, 0.0, steps=z.L0), cycles=CYCLES, growth=GROWTH), steps=z.W)


@contextmanager
def _sent(widget_cls) -> Iterator[list[tuple[Any, int]]]:
    """Record (widget, bytes) for every message any widget sends while inside."""
    log: list[tuple[Any, int]] = []
    original = widget_cls._send

    def send(self, msg, buffers=None):
        size = len(json.dumps(msg, default=str).encode())
        size += sum(memoryview(b).nbytes for b in (buffers or ()))
        log.append((self, size))
        return original(self, msg, buffers=buffers)

    widget_cls._send = send
    try:
        yield log
    finally:
        widget_cls._send = original


def _measure(designer, change, check, changes: int) -> dict[str, float]:
    """Median ms to the marks, median ms of the whole redraw, median mark bytes and all bytes per change."""
    import ipywidgets
    from bqplot import Mark

    marks, whole, mark_bytes, all_bytes = [], [], [], []
    for i in range(changes):
        with _sent(ipywidgets.Widget) as log:
            t0 = time.perf_counter()
            change(i)
            t1 = time.perf_counter()
        if designer.error:
            raise AssertionError(f"the change was refused: {designer.error}")
        check(i)
        at = designer.timing.get("marks_at")
        marks.append((at if at is not None else t1) - t0)
        whole.append(t1 - t0)
        mark_bytes.append(sum(b for w, b in log if isinstance(w, Mark)))
        all_bytes.append(sum(b for _, b in log))
    return {"marks_ms": 1e3 * statistics.median(marks), "marks_min_ms": 1e3 * min(marks),
            "whole_ms": 1e3 * statistics.median(whole),
            "mark_kb": statistics.median(mark_bytes) / 1024, "all_kb": statistics.median(all_bytes) / 1024}


def _rows(path: str, n: int, got: dict[str, float], changes: int) -> list[Result]:
    return [
        Result.measured(CASE, f"{path}: to new marks (median of {changes})", n, got["marks_ms"], "ms",
                        target=FAST, min=got["marks_min_ms"]),
        Result.measured(CASE, f"{path}: whole redraw (median)", n, got["whole_ms"], "ms",
                        note="whole redraw = marks, then facts, readout, controls and the Compare table "
                             "(the Export tab is hidden, so its code waits until shown)"),
        Result.measured(CASE, f"{path}: mark update bytes", n, got["mark_kb"], "KB", target=SMALL),
        Result.measured(CASE, f"{path}: all widget bytes", n, got["all_kb"], "KB"),
    ]


def run(quick: bool = False) -> list[Result]:
    """Every row of case 2 (``quick``: the smallest budget, a few changes)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # bqplot's trait declarations, on import
        try:
            from schedwidget.widget import ScheduleDesigner
        except ImportError as exc:
            return [unavailable(CASE, "slider change to new marks", f"the designer is not available yet ({exc})")]
    changes = 3 if quick else CHANGES
    rows: list[Result] = []
    for n in QUICK_BUDGETS if quick else BUDGETS:
        d = ScheduleDesigner(_editable(n), unit="step")
        try:
            slider = d.control(0, "peak").slider
        except Exception as exc:  # the control API moved: say so rather than measure something else
            rows.append(unavailable(CASE, "slider change to new marks", f"no peak slider found ({exc})", n))
        else:
            value = lambda i: PEAK * (0.5 + 0.01 * (i % 40))  # noqa: E731 - a new rate on every change

            def slide(i: int) -> None:
                slider.value = value(i)

            def slid(i: int) -> None:
                got, want = float(d.canvas.curve.y.max()), value(i)
                if abs(got - want) > 1e-9 * want:
                    raise AssertionError(f"the curve's peak is {got}, the slider says {want}")

            rows += _rows("slider", n, _measure(d, slide, slid, changes), changes)
        d2 = ScheduleDesigner(reference(n), unit="step")
        designs = [reference(n, peak=PEAK * (0.5 + 0.01 * i)) for i in range(40)]

        def assign(i: int) -> None:
            d2.schedule = designs[i % 40]

        def assigned(i: int) -> None:
            got, want = float(d2.canvas.curve.y.max()), designs[i % 40](Sizing(n).W)
            if abs(got - want) > 1e-9 * want:
                raise AssertionError(f"the curve's peak is {got}, the design's is {want}")

        rows += _rows("assign schedule", n, _measure(d2, assign, assigned, changes), changes)
    return rows
