"""Press-to-redraw time in JupyterLab at budgets of 1e3, 1e6 and 1e9 ticks (measured and reported, not asserted).

The clock starts at the keydown event in the page and stops when the teal path's
``d`` attribute changes (a MutationObserver), so it covers the round trip
browser -> kernel (trace, facts) -> browser -> bqplot redraw.
"""

from __future__ import annotations

import json
import re
import statistics

import pytest

from .conftest import new_page
from .notebooks import timing
from .pages import FIGURE_JS, SCREENSHOTS, open_and_run, shot, wait_for_curve, widget_error_shown
from .server import jupyter_server

BUDGETS = (10**3, 10**6, 10**9)
PRESSES = 20

ARM_JS = f"""(scope) => {{
    const figure = {FIGURE_JS};
    const old = figure(scope).curve;
    const fig = document.querySelector(scope).querySelector('.sw-curve');
    const t = window.__swTiming = {{down: null, changed: null}};
    document.addEventListener('keydown', () => {{ if (t.down === null) t.down = performance.now(); }},
                              {{capture: true, once: true}});
    const mo = new MutationObserver(() => {{
        if (t.changed === null && figure(scope).curve !== old) {{ t.changed = performance.now(); mo.disconnect(); }}
    }});
    mo.observe(fig, {{attributes: true, subtree: true, attributeFilter: ['d']}});
}}"""


@pytest.fixture(scope="module")
def timing_page(browser):
    with jupyter_server("lab", {"timing.ipynb": timing(BUDGETS)}) as server:
        context, page, watch = new_page(browser)
        try:
            open_and_run(page, server.url("timing.ipynb"))
            for n in BUDGETS:
                wait_for_curve(page, f".sw-budget-{n}")
            yield page, watch
        except Exception as exc:
            raise AssertionError(f"{exc}\n--- server log ---\n{server.tail()}") from None
        finally:
            context.close()


def press_to_redraw(page, scope: str, presses: int) -> list[float]:
    """Milliseconds from keydown to the changed curve, for ``presses`` alternating arrow presses."""
    label = page.locator(".widget-label", has_text=re.compile(r"^peak rate$"))
    handle = page.locator(scope).locator(".sw-rate").filter(has=label).first.locator(".noUi-handle")
    out = []
    sentence = f"{scope} .sw-sentence"
    for i in range(presses):
        said = page.evaluate("(sel) => document.querySelector(sel).innerText", sentence)
        handle.focus()
        page.evaluate(ARM_JS, scope)
        page.keyboard.press("ArrowRight" if i % 2 == 0 else "ArrowLeft")
        page.wait_for_function("() => window.__swTiming.changed !== null", timeout=30_000, polling=20)
        t = page.evaluate("() => window.__swTiming")
        out.append(t["changed"] - t["down"])
        # the readout's own update lands before the next press (the sentence names the new peak)
        page.wait_for_function("([sel, old]) => document.querySelector(sel).innerText !== old",
                               arg=[sentence, said], timeout=30_000, polling=20)
    return out


class TestPressToRedraw:
    """A rate key press redraws the curve at every budget; the medians are written to timings.json."""

    def test_medians(self, timing_page):
        """20 presses per budget; every press redraws; medians printed and saved (not asserted)."""
        page, watch = timing_page
        result = {}
        for n in BUDGETS:
            ms = press_to_redraw(page, f".sw-budget-{n}", PRESSES)
            result[str(n)] = {"median_ms": round(statistics.median(ms), 1), "min_ms": round(min(ms), 1),
                              "max_ms": round(max(ms), 1), "presses": len(ms)}
        SCREENSHOTS.mkdir(exist_ok=True)
        (SCREENSHOTS / "timings.json").write_text(json.dumps(result, indent=2) + "\n")
        for n, r in result.items():
            print(f"press-to-redraw at 1e{len(n) - 1} ticks: median {r['median_ms']} ms "
                  f"(min {r['min_ms']}, max {r['max_ms']}, {r['presses']} presses)")
        shot(page, "timing-budgets")
        assert not widget_error_shown(page)
        assert not watch.problems(), "\n".join(watch.problems())
