"""Training code imports schedwidget: the core must not pull in jsonschema, the widget stack or torch.

Each check runs in a fresh interpreter, so modules other tests imported cannot hide (or fake) a heavy import.
The time itself is a benchmark figure (tests/bench/bench_import.py), not a unit test.
"""

from __future__ import annotations

import json
import subprocess
import sys

#: Top-level packages `import schedwidget` must not load: the schema validator (about 0.8 s of format
#: checkers), the widget stack (ipywidgets, bqplot, traitlets) and torch.
HEAVY = ("jsonschema", "ipywidgets", "bqplot", "traitlets", "torch")


def _loaded_after(code: str) -> list[str]:
    """Heavy top-level packages in ``sys.modules`` after running ``code`` in a fresh interpreter."""
    probe = (f"{code}\nimport sys, json\n"
             f"print(json.dumps(sorted({{m.split('.')[0] for m in sys.modules}} & set({list(HEAVY)!r}))))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stdout + out.stderr
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_core_import_is_light():
    """`import schedwidget` loads none of the heavy packages."""
    assert _loaded_after("import schedwidget") == []


def test_public_names_resolve_without_heavy_imports():
    """Touching every public name (except the designer) still loads none of them."""
    assert _loaded_after("import schedwidget as sw\n[getattr(sw, n) for n in sw.__all__]") == []


def test_loading_a_valid_spec_needs_no_validator_import():
    """A valid spec (the shipped demo file) loads and exports without importing jsonschema."""
    code = ("import schedwidget as sw\nfrom importlib import resources\n"
            "p = resources.files('schedwidget').joinpath('demo', 'flakes_warmup_cosine.json')\n"
            "s = sw.load(str(p)); sw.from_spec(s.to_spec()); sw.to_python(s)")
    assert _loaded_after(code) == []


def test_a_bad_spec_still_gets_the_validator_message():
    """The validator is imported when a spec needs its message, and the message is the schema's."""
    code = ("import schedwidget as sw\n"
            "try:\n    sw.from_spec({'version': 1, 'schedule': {'kind': 'cosine', 'peak': '0.1', 'steps': 10}})\n"
            "except sw.ScheduleError as exc:\n    assert \"'0.1' is not of type 'number'\" in str(exc), exc\n"
            "else:\n    raise AssertionError('accepted')")
    assert _loaded_after(code) == ["jsonschema"]


def test_cli_check_of_a_valid_spec_is_light():
    """`python -m schedwidget check` on a valid file loads no heavy package either."""
    code = ("import sys\nfrom importlib import resources\nfrom schedwidget.__main__ import main\n"
            "p = resources.files('schedwidget').joinpath('demo', 'flakes_warmup_cosine.json')\n"
            "assert main(['check', str(p)]) == 0")
    assert _loaded_after(code) == []


def test_import_benchmark_case_runs():
    """Case 5 of the benchmarks runs (two rounds) and reports the ratio to numpy with its target."""
    import math

    from tests.bench import bench_import
    from tests.bench.harness import FIELDS

    rows = bench_import.run(quick=True)
    assert {r.name for r in rows} >= {"python -c 'import numpy'", "python -c 'import schedwidget'",
                                      "import schedwidget / import numpy"}
    for r in rows:
        assert set(FIELDS) <= set(vars(r)) and r.case == bench_import.CASE
        assert r.value is not None and math.isfinite(r.value) and r.status in ("PASS", "MISS", "info")
    ratio = next(r for r in rows if r.kind == "ratio")
    assert ratio.target == "<= 2" and ratio.value > 0


def test_no_public_name_is_shadowed_by_its_module():
    """Once every core module is imported, each public name is still the function or class, never a submodule of
    the same name: check_run, exported lazily from a module of that name, read as the module once that module had
    been imported anywhere, and the README's ``check_run(design, trace)`` raised "'module' object is not callable"
    (the modules are now run_check, recovery and inverse, and a test of the whole list guards it)."""
    code = (
        "import importlib, pkgutil, types, schedwidget\n"
        "for m in pkgutil.iter_modules(schedwidget.__path__):\n"
        "    if m.name not in ('widget', '__main__'):\n"
        "        importlib.import_module('schedwidget.' + m.name)\n"
        "bad = [n for n in schedwidget.__all__ if isinstance(getattr(schedwidget, n), types.ModuleType)]\n"
        "print(bad)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr
