"""The tour in Notebook 7: open, run all, see the curve, move a rate slider.

In Notebook 7 under headless Chromium arrow keys do not reach the slider handle,
so the move is a click on the slider's track.  Notebook 7 logs a few errors of its
own on every load; those are recorded (printed), while page and console errors
that mention the widget stack or our package fail the test.
"""

from __future__ import annotations

import re

import pytest

from .conftest import new_page
from .pages import NOTEBOOK7_OWN, figure, open_and_run, shot, text_of, wait_for_change, wait_for_curve, widget_error_shown
from .server import jupyter_server

DESIGNER = ".sw-designer"


@pytest.fixture(scope="module")
def notebook7(browser, tour_path):
    with jupyter_server("notebook", {"tour.ipynb": tour_path}) as server:
        context, page, watch = new_page(browser, host_page_errors=NOTEBOOK7_OWN)
        try:
            open_and_run(page, server.url("tour.ipynb"))
            yield page, watch
        except Exception as exc:
            raise AssertionError(f"{exc}\n--- server log ---\n{server.tail()}") from None
        finally:
            context.close()


class TestTourInNotebook7:
    """The designer in the tour opens, draws and follows a slider in Notebook 7."""

    def test_open_run_draw_move(self, notebook7):
        """Run all draws the teal curve; a click on the peak slider's track redraws it and the readout."""
        page, watch = notebook7
        before = wait_for_curve(page, DESIGNER)
        shot(page, "nb7-1-drawn", page.locator(DESIGNER).first)
        readout = text_of(page.locator(DESIGNER).first, ".sw-sentence")
        label = page.locator(".widget-label", has_text=re.compile(r"^peak rate$"))
        slider = page.locator(DESIGNER).first.locator(".sw-rate").filter(has=label).first
        slider.scroll_into_view_if_needed()
        track, handle = slider.locator(".noUi-base").first, slider.locator(".noUi-handle").first
        tb, hb = track.bounding_box(), handle.bounding_box()
        assert tb and hb and tb["width"] > 20, f"the slider track is too narrow to click: {tb}"
        # click a quarter of the track away from the handle, on whichever side has room
        centre = hb["x"] + hb["width"] / 2
        x = centre - tb["width"] / 4 if centre - tb["x"] > tb["width"] / 2 else centre + tb["width"] / 4
        page.mouse.click(x, tb["y"] + tb["height"] / 2)
        after = wait_for_change(page, before, DESIGNER)
        assert after != before and len(re.findall(r"[ML]", figure(page, DESIGNER)["curve"])) > 20
        page.wait_for_function("([sel, old]) => document.querySelector(sel).innerText !== old",
                               arg=[f"{DESIGNER} .sw-sentence", readout])
        shot(page, "nb7-2-moved", page.locator(DESIGNER).first)
        if watch.host:
            print("Notebook 7's own console errors (recorded, not failed):", *watch.host, sep="\n  ")
        assert not widget_error_shown(page), "the page shows 'Error displaying widget'"
        assert not watch.problems(), "\n".join(watch.problems())
