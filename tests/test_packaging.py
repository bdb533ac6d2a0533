"""Packaging promises: the README's test command is what CI runs, and no extra pins the user's torch."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _readme_test_command() -> str:
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```bash\n(.*?)```", text.split("## Two commands", 1)[1], flags=re.S)
    (command,) = [b.strip() for b in blocks if "pytest" in b]
    return command


class TestPackaging:
    def test_ci_runs_the_readme_test_command(self):
        """.ci/run calls the README's test command word for word."""
        assert _readme_test_command() in (ROOT / ".ci" / "run").read_text()

    def test_extras_state_ranges_not_pins(self):
        """Installing an extra into a training environment never replaces the user's torch (no == pin)."""
        project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
        for extra, reqs in project["optional-dependencies"].items():
            for req in reqs:
                assert "==" not in req, f"extra {extra!r} pins {req!r}: state a range, pin in .ci/constraints.txt"

    def test_ci_pins_the_cpu_torch_through_constraints(self):
        """The exact CPU build CI needs is pinned in the constraints file the test command passes to pip."""
        assert "-c .ci/constraints.txt" in _readme_test_command()
        pins = [ln.strip() for ln in (ROOT / ".ci" / "constraints.txt").read_text().splitlines()
                if ln.strip() and not ln.startswith("#")]
        assert "torch==2.13.0" in pins
