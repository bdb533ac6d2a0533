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


#: Test modules that load JAX into the test process (Keras runs on JAX here).
_JAX_MODULES = ("test_export_jax.py", "test_export_keras.py")


def pytest_collection_modifyitems(session, config, items):
    """Run the JAX and Keras checks after everything else.

    JAX starts threads and registers an at-fork hook that warns (an error here: warnings are errors) whenever the
    process forks afterwards, because a forked child of a multithreaded JAX process may deadlock.  The fuzz suite
    runs each case in a forked child, so it must run before JAX is loaded; a stable sort keeps every other order.
    """
    items.sort(key=lambda item: item.path.name in _JAX_MODULES)
