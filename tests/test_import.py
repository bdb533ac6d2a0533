"""Training code imports schedwidget: the core must not pull in ipywidgets, bqplot or torch."""

from __future__ import annotations

import subprocess
import sys


def test_core_import_is_light():
    code = ("import sys, schedwidget; "
            "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('ipywidgets', 'bqplot', 'torch', 'traitlets')); "
            "print(bad); assert not bad, bad")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr
