"""Case 5: the cost of ``import schedwidget`` in a fresh interpreter, as a ratio to ``import numpy``.

Every training script that uses the exported factor pays this import, so it is
measured the way a script meets it: a new ``python -c "import schedwidget"``
process, timed from start to exit.  Three commands run interleaved, round after
round, so every contender sees the same load: ``pass`` (the interpreter alone),
``import numpy`` (the floor: the core needs numpy) and ``import schedwidget``.
The minimum over the rounds is the figure least disturbed by other processes.
The files are in the page cache after the first round (a warm start); a cold
start from disk is slower for every contender alike.

Targets (issue 10): the ratio to ``import numpy`` at most 2x, and under 0.3 s
on the development machine (absolute: does not carry to other machines).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

from .harness import Result, Target

CASE = "5 import"
RATIO = Target("<=", 2.0)
SECONDS = Target("<=", 0.3)
COMMANDS = {"pass": "pass", "numpy": "import numpy", "schedwidget": "import schedwidget"}


def _env() -> dict[str, str]:
    """This process's environment, with the schedwidget tree it imported first on the path."""
    import schedwidget

    root = str(Path(schedwidget.__file__).resolve().parent.parent)
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([root] + [p for p in env.get("PYTHONPATH", "").split(os.pathsep) if p])
    return env


def fresh(code: str, env: dict[str, str]) -> float:
    """Wall seconds of ``python -c code`` in a new interpreter (start to exit); raises if it fails."""
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120)
    seconds = time.perf_counter() - t0
    if out.returncode != 0:
        raise AssertionError(f"python -c {code!r} failed: {out.stderr.strip()[-400:]}")
    return seconds


def heaviest(env: dict[str, str], top: int = 3) -> list[tuple[str, float]]:
    """The ``top`` modules with the largest own import time (``-X importtime`` self time, ms) that
    ``import schedwidget`` loads, numpy's own modules left out (they are the floor)."""
    out = subprocess.run([sys.executable, "-X", "importtime", "-c", "import schedwidget"], env=env,
                         capture_output=True, text=True, timeout=120)
    rows = []
    for line in out.stderr.splitlines():
        parts = line.split("|")
        if len(parts) != 3 or not parts[1].strip().isdigit():
            continue
        own, name = parts[0].split(":")[-1].strip(), parts[2].strip()
        if own.isdigit() and name.split(".")[0] not in ("numpy", "site"):
            rows.append((name, int(own) / 1e3))
    return sorted(rows, key=lambda r: -r[1])[:top]


def run(quick: bool = False) -> list[Result]:
    """Every row of case 5 (``quick``: two rounds)."""
    env = _env()
    rounds = 2 if quick else 15
    samples: dict[str, list[float]] = {k: [] for k in COMMANDS}
    for _ in range(rounds):
        for name, code in COMMANDS.items():
            samples[name].append(fresh(code, env))
    best = {k: min(v) for k, v in samples.items()}
    ours, floor, bare = best["schedwidget"], best["numpy"], best["pass"]
    top = heaviest(env)
    note = "largest own import times besides numpy (-X importtime): " + (
        ", ".join(f"{n} {ms:.1f} ms" for n, ms in top) or "none")
    return [
        Result.measured(CASE, "python -c 'pass'", None, bare, "s", note="the interpreter alone"),
        Result.measured(CASE, "python -c 'import numpy'", None, floor, "s"),
        Result.measured(CASE, "python -c 'import schedwidget'", None, ours, "s", target=SECONDS,
                        note=f"minimum of {rounds} warm starts, interleaved; " + note),
        Result.measured(CASE, "import schedwidget / import numpy", None, ours / floor, "x", kind="ratio",
                        target=RATIO),
        Result.measured(CASE, "added over numpy", None, (ours - floor) * 1e3, "ms",
                        note="schedwidget's own modules and the standard library they need"),
    ]
