"""The README's short example runs and prints what the README shows."""

from __future__ import annotations

import contextlib
import io
import re
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"


def test_short_example_output():
    text = README.read_text()
    section = text.split("## A short example", 1)[1]
    code, shown = re.findall(r"```(?:python)?\n(.*?)```", section, flags=re.S)[:2]
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        exec(compile(code, "README.md", "exec"), {})  # noqa: S102 - our own README
    assert out.getvalue().strip() == shown.strip()
