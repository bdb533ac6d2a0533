"""Fixtures for the end-to-end tests: Debian's Chromium through Playwright, one Jupyter server per module.

Skip rule: without /usr/bin/chromium or the playwright package these tests skip with
the reason, unless SCHEDWIDGET_REQUIRE_BROWSER=1 (set by .ci/run), where that is a failure.
"""

from __future__ import annotations

import importlib.util
import os
from pathlib import Path

import pytest

from .pages import CHROMIUM, CHROMIUM_ARGS, Watch

DEMAND = "SCHEDWIDGET_REQUIRE_BROWSER"


def missing_browser() -> str | None:
    """Why the browser tests cannot run here, or None when they can."""
    if importlib.util.find_spec("playwright") is None:
        return "the playwright package is not installed (install the 'test' extra)"
    if not os.access(CHROMIUM, os.X_OK):
        return f"{CHROMIUM} is missing (apt-get install chromium)"
    return None


def require_browser() -> None:
    why = missing_browser()
    if why is None:
        return
    if os.environ.get(DEMAND) == "1":
        pytest.fail(f"browser tests are required here ({DEMAND}=1) but {why}")
    pytest.skip(f"browser tests skipped: {why}")


@pytest.fixture(scope="session")
def browser():
    """One headless Chromium for the session (each module still gets its own server and page)."""
    require_browser()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        chromium = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            yield chromium
        finally:
            chromium.close()


def new_page(browser, width: int = 1280, height: int = 1400, host_page_errors=()):
    """A fresh browser context and page with a watch on console and page errors."""
    context = browser.new_context(viewport={"width": width, "height": height})
    page = context.new_page()
    page.set_default_timeout(60_000)
    return context, page, Watch(host_page_errors=tuple(host_page_errors)).attach(page)


@pytest.fixture(scope="session")
def tour_path() -> Path:
    path = Path(__file__).resolve().parents[2] / "notebooks" / "tour.ipynb"
    if not path.exists():
        pytest.fail(f"the tour notebook is missing: {path}")
    return path
