"""Shared test helpers: optional reference libraries that CI demands."""

from __future__ import annotations

import importlib
import os

import pytest


def optional_module(name: str, demand_var: str):
    """Import ``name``; skip the test if missing, unless ``demand_var`` is set to 1 (then fail)."""
    try:
        return importlib.import_module(name)
    except ImportError:
        if os.environ.get(demand_var) == "1":
            pytest.fail(f"{name} is required here ({demand_var}=1) but cannot be imported")
        pytest.skip(f"{name} is not installed (install the 'test' extra to run this check)")


@pytest.fixture(scope="session")
def torch():
    """PyTorch 2.13 as a reference library: skipped when absent, a failure when CI demands it."""
    mod = optional_module("torch", "SCHEDWIDGET_REQUIRE_TORCH")
    if not mod.__version__.startswith("2.13."):
        pytest.fail(f"the torch reference checks are pinned to torch 2.13, found {mod.__version__}")
    return mod
