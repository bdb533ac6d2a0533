"""The teaching and the replay-and-rescale notebooks in JupyterLab: run all, open every tab, no widget errors.

The tour's module drives the designer in detail; this one guards the other shipped
notebooks against errors that only a browser shows (a figure first laid out in a
display: none tab logged bqplot "negative width/height (-156/-60)" errors; hidden
panes now keep their width, see ``Tabs`` in the designer).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from .conftest import new_page
from .pages import open_and_run, shot, wait_active, wait_for_curve, widget_error_shown
from .server import jupyter_server

NOTEBOOKS = Path(__file__).resolve().parents[2] / "notebooks"
NAMES = ("teaching.ipynb", "replay_and_rescale.ipynb")


@pytest.fixture(scope="module")
def other_server():
    with jupyter_server("lab", {name: NOTEBOOKS / name for name in NAMES}) as server:
        yield server


@pytest.mark.parametrize("name", NAMES)
def test_runs_and_every_tab_opens_cleanly(browser, other_server, name):
    """Run all; the first designer draws; each of its tabs opens, slowly then quickly; no page, console or
    widget error."""
    context, page, watch = new_page(browser)
    try:
        open_and_run(page, other_server.url(name))
        if page.locator(".sw-designer").count():
            wait_for_curve(page, ".sw-designer")
            tabs = page.locator(".sw-designer").first.locator(".sw-tabs button")
            for i in range(tabs.count()):
                tabs.nth(i).click()
                wait_active(page, tabs.nth(i))
            # then quickly, the way the old tab widget lost the race (a pane hidden before its figure was laid out)
            for _ in range(2):
                for i in (3, 2, 1, 0, 2, 3):
                    tabs.nth(i).click()
            wait_active(page, tabs.nth(3))
            # the last pane shown (Rescale) is on screen with its figure
            page.locator(".sw-designer").first.locator(".sw-rescale-figure").first.wait_for(state="visible")
        shot(page, f"other-{Path(name).stem}")
        assert not widget_error_shown(page), "the page shows 'Error displaying widget'"
        assert not watch.problems(), "\n".join(watch.problems())
    except AssertionError:
        raise
    except Exception as exc:
        raise AssertionError(f"{exc}\n--- server log ---\n{other_server.tail()}") from None
    finally:
        context.close()
