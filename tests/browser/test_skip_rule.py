"""Without Chromium the browser tests skip with the reason, unless CI demands them (then they fail)."""

from __future__ import annotations

import importlib.util

import pytest

from . import conftest

# without playwright installed, that is the reason given first
REASON = (r"/nonexistent/chromium is missing" if importlib.util.find_spec("playwright")
          else r"the playwright package is not installed")


class TestRequireBrowser:
    """require_browser skips or fails according to SCHEDWIDGET_REQUIRE_BROWSER."""

    def test_skips_without_chromium(self, monkeypatch):
        """A missing Chromium is a skip that names the missing path."""
        monkeypatch.setattr(conftest, "CHROMIUM", "/nonexistent/chromium")
        monkeypatch.delenv(conftest.DEMAND, raising=False)
        with pytest.raises(pytest.skip.Exception, match=rf"browser tests skipped: {REASON}"):
            conftest.require_browser()

    def test_fails_when_demanded(self, monkeypatch):
        """With SCHEDWIDGET_REQUIRE_BROWSER=1 a missing Chromium is a failure."""
        monkeypatch.setattr(conftest, "CHROMIUM", "/nonexistent/chromium")
        monkeypatch.setenv(conftest.DEMAND, "1")
        with pytest.raises(pytest.fail.Exception, match=rf"required here \(SCHEDWIDGET_REQUIRE_BROWSER=1\) but {REASON}"):
            conftest.require_browser()
