"""The tour in a real JupyterLab: run all, draw, move a rate by keyboard, add a stage, a bad value, pin.

One server and one page for the module (starting JupyterLab costs seconds); each test
reads the state it needs before acting, so any one of them can run alone.
"""

from __future__ import annotations

import re

import pytest

from .conftest import new_page
from .notebooks import plain_widgets
from .pages import (figure, open_and_run, shot, text_of, wait_for, wait_for_change, wait_for_curve,
                    widget_error_shown)
from .server import jupyter_server

DESIGNER = ".sw-designer"          # the first designer in the tour


@pytest.fixture(scope="module")
def lab_server(tour_path):
    """A JupyterLab server whose root holds a copy of the tour and the harness check notebook."""
    with jupyter_server("lab", {"tour.ipynb": tour_path, "harness.ipynb": plain_widgets()}) as server:
        yield server


@pytest.fixture(scope="module")
def lab(browser, lab_server):
    """The tour open in JupyterLab with every cell run and the first designer's curve drawn."""
    context, page, watch = new_page(browser)
    try:
        open_and_run(page, lab_server.url("tour.ipynb"))
        wait_for_curve(page, DESIGNER)
        yield page, watch
    except Exception as exc:
        raise AssertionError(f"{exc}\n--- server log ---\n{lab_server.tail()}") from None
    finally:
        if watch.host:
            print("JupyterLab's own console errors (recorded, not failed):", *watch.host, sep="\n  ")
        context.close()


@pytest.fixture
def clean(lab):
    """The page, checked after the test for page errors, our console errors and widget error text."""
    page, watch = lab
    yield page
    assert not widget_error_shown(page), "the page shows 'Error displaying widget'"
    assert not watch.problems(), "\n".join(watch.problems())


def designer(page):
    return page.locator(DESIGNER).first


def rate_row(page, name: str):
    """The row (slider and exact-value box) of the first rate parameter called ``name``."""
    label = page.locator(".widget-label", has_text=re.compile(rf"^{name}$"))
    return designer(page).locator(".sw-rate").filter(has=label).first.locator("xpath=..")


class TestTourInJupyterLab:
    """The designer in the tour works end to end in JupyterLab."""

    def test_curve_drawn(self, clean):
        """After run-all the figure has a teal path with many points and the live widget, not the picture, shows."""
        info = figure(clean, DESIGNER)
        assert len(re.findall(r"[ML]", info["curve"])) > 20
        clean.locator(f"{DESIGNER} .sw-sentence", has_text=re.compile(r"peaks|Starts")).first.wait_for()
        assert clean.locator(f"{DESIGNER} .sw-sentence").first.inner_text().strip()
        child = clean.locator(".jp-OutputArea-child", has=clean.locator(DESIGNER)).first
        assert child.locator(".jp-RenderedSVG").count() == 0
        shot(clean, "lab-1-drawn", designer(clean))

    def test_rate_key_moves_curve(self, clean):
        """ArrowRight on the peak slider's handle changes the curve's path and the sentence under the curve."""
        before, readout = figure(clean, DESIGNER)["curve"], text_of(designer(clean), ".sw-sentence")
        handle = rate_row(clean, "peak rate").locator(".noUi-handle").first
        handle.focus()
        clean.keyboard.press("ArrowRight")
        after = wait_for_change(clean, before, DESIGNER)
        assert after != before
        clean.wait_for_function("([sel, old]) => document.querySelector(sel).innerText !== old",
                                arg=[f"{DESIGNER} .sw-sentence", readout])
        assert text_of(designer(clean), ".sw-sentence") != readout
        shot(clean, "lab-2-key", designer(clean))

    def test_add_stage_adds_join(self, clean):
        """Adding a stage from the shape dropdown and the button draws one more dotted join line."""
        joins = figure(clean, DESIGNER)["joins"]
        d = designer(clean)
        boxes = d.locator(".sw-stage").count()
        d.locator(".sw-add-shape select").first.select_option(label="constant")
        d.locator("button.sw-add-stage").first.click()
        info = wait_for(clean, "info.joins === extra + 1", DESIGNER, joins)
        assert info["joins"] == joins + 1
        # the stage boxes are rebuilt too: the next test must not type into a box that is being replaced
        clean.wait_for_function("([sel, n]) => document.querySelectorAll(sel).length === n",
                                arg=[f"{DESIGNER} .sw-stage", boxes + 1])
        # and the new stage's own controls are drawn (its length box is the last control to appear)
        d.locator(".sw-stage").nth(boxes).locator(".sw-length input").first.wait_for()
        shot(clean, "lab-3-stage", d)

    def test_invalid_value_shows_error(self, clean):
        """A negative peak typed into its box shows the error text, and the last valid curve stays."""
        before = figure(clean, DESIGNER)["curve"]
        box = rate_row(clean, "peak rate").locator(".sw-value input").first
        box.fill("-1")
        box.press("Enter")
        error = designer(clean).locator(".sw-error").first
        error.locator("text=/peak/").wait_for()
        assert "peak" in error.inner_text() and "-1" in error.inner_text()
        # the kernel sends a redraw before the refusal's message on the same channel: none came
        assert figure(clean, DESIGNER)["curve"] == before
        shot(clean, "lab-4-error", designer(clean))

    def test_pin_adds_labelled_ghost(self, clean):
        """Pinning under a name draws a second, grey curve, named in the legend beside the plot."""
        ghosts = len(figure(clean, DESIGNER)["ghosts"])
        d = designer(clean)
        name = f"baseline {ghosts + 1}"
        d.locator(".sw-pin-name input").first.fill(name)
        d.locator("button.sw-pin").first.click()
        info = wait_for(clean, "info.ghosts.length === extra[0] + 1", DESIGNER, [ghosts, name])
        # the names are in the legend beside the plot (issue 13: names at line ends were clipped or piled up)
        d.locator(".sw-legend-item", has_text=name).first.wait_for()
        assert len(info["ghosts"]) == ghosts + 1
        assert info["curve"]
        # every name in the legend is whole (a long one wraps; the tour's 'drops at 30/60/80' was cut to '...8')
        cut = clean.evaluate("""(sel) => [...document.querySelectorAll(sel + ' .sw-legend-item span')]
            .filter(s => s.offsetWidth > 0 && (s.scrollWidth > s.clientWidth + 1 || s.scrollHeight > s.clientHeight + 1))
            .map(s => s.textContent)""", DESIGNER)
        assert not cut, cut
        # and no name lies on the figure (beside it, names once covered the last ~13 % of the run)
        hidden = clean.evaluate("""(sel) => {
            const fig = document.querySelector(sel + ' .sw-curve').getBoundingClientRect();
            return [...document.querySelectorAll(sel + ' .sw-legend-item')].map(e => e.getBoundingClientRect())
                .filter(r => r.left < fig.right && fig.left < r.right && r.top < fig.bottom && fig.top < r.bottom)
                .length;
        }""", DESIGNER)
        assert hidden == 0
        shot(clean, "lab-5-pin", d)


class TestHarness:
    """The harness itself works on plain ipywidgets and bqplot, so a designer failure is the designer's."""

    def test_plain_slider_moves_plain_line(self, browser, lab_server):
        """A FloatLogSlider driving a bqplot line: run all, draw, ArrowRight redraws, no errors."""
        context, page, watch = new_page(browser)
        try:
            open_and_run(page, lab_server.url("harness.ipynb"))
            before = wait_for_curve(page)
            page.locator(".sw-rate .noUi-handle").first.focus()
            page.keyboard.press("ArrowRight")
            assert wait_for_change(page, before) != before
            page.locator(".sw-readout", has_text="peak 0.112").wait_for()
            assert not widget_error_shown(page)
            assert not watch.problems(), "\n".join(watch.problems())
        finally:
            context.close()
