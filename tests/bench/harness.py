"""Timing, result rows, targets, the printed table and the JSON record of a benchmark run."""

from __future__ import annotations

import gc
import json
import math
import os
import platform
import statistics
import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Callable

__all__ = ["Result", "Target", "race", "per_call", "unavailable", "machine", "load", "table", "write_json", "FIELDS"]

#: The fields every result row carries (the smoke test checks them).
FIELDS = ("case", "name", "size", "value", "unit", "kind", "target", "status", "note")


@dataclass(frozen=True)
class Target:
    """A bound a figure must meet: ``value <= bound`` (op "<=") or ``value >= bound`` (op ">=")."""

    op: str
    bound: float

    def met(self, value: float) -> bool:
        """True when ``value`` is on the right side of the bound."""
        return value <= self.bound if self.op == "<=" else value >= self.bound

    def __str__(self) -> str:
        return f"{self.op} {self.bound:g}"


@dataclass
class Result:
    """One row of the table: a measured figure, its unit and, when the issue sets one, its target.

    ``kind`` is "absolute" (a time or size on this machine; does not carry to other
    machines) or "ratio" (two figures measured side by side in one run; carries).
    ``status`` is PASS or MISS against the target, "info" without one, "n/a" when
    the case could not run (``note`` says why).
    """

    case: str
    name: str
    size: int | None
    value: float | None
    unit: str
    kind: str = "absolute"
    target: str = ""
    status: str = "info"
    note: str = ""
    extra: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def measured(cls, case: str, name: str, size: int | None, value: float, unit: str, kind: str = "absolute",
                 target: Target | None = None, note: str = "", **extra: Any) -> Result:
        """A row with its PASS/MISS decided from ``target`` (info when there is none)."""
        status = "info" if target is None else ("PASS" if target.met(value) else "MISS")
        return cls(case, name, size, float(value), unit, kind, "" if target is None else str(target),
                   status, note, dict(extra))


def unavailable(case: str, name: str, reason: str, size: int | None = None) -> Result:
    """A row for a case that cannot run yet (a missing module or library), saying why."""
    return Result(case, name, size, None, "", "absolute", "", "n/a", reason)


def race(fns: dict[str, Callable[[], Any] | tuple[Callable[[], Any], int]], repeat: int,
         number: int = 1) -> dict[str, dict[str, float]]:
    """Time several callables interleaved, ``repeat`` rounds of ``number`` calls each.

    A value may be ``(fn, its_own_number)``.  Interleaving makes the ratios fair on
    a busy machine: every contender sees the same load.  Returns, per name, the
    minimum and the median seconds per call (the minimum is the figure least
    disturbed by other processes).
    """
    plan = {k: (v if isinstance(v, tuple) else (v, number)) for k, v in fns.items()}
    samples: dict[str, list[float]] = {k: [] for k in fns}
    gc_was = gc.isenabled()
    gc.disable()
    try:
        for _ in range(repeat):
            for name, (fn, times) in plan.items():
                t0 = time.perf_counter()
                for _ in range(times):
                    fn()
                samples[name].append((time.perf_counter() - t0) / times)
    finally:
        if gc_was:
            gc.enable()
    return {k: {"min": min(v), "median": statistics.median(v)} for k, v in samples.items()}


def per_call(fn: Callable[[], Any], repeat: int, number: int = 1) -> dict[str, float]:
    """``race`` for one callable."""
    return race({"f": fn}, repeat, number)["f"]


def machine() -> dict[str, Any]:
    """What the figures were measured on: CPU model, cores, Python and library versions."""
    model = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    info: dict[str, Any] = {"cpu": model, "cores": os.cpu_count(), "python": sys.version.split()[0],
                            "platform": platform.platform(), "load_average_1min": load()}
    for mod in ("numpy", "torch", "ipywidgets", "bqplot"):
        m = sys.modules.get(mod)
        if m is not None:
            info[mod] = getattr(m, "__version__", "?")
    return info


def load() -> float | None:
    """The 1-minute load average (other processes disturb absolute figures; interleaved ratios less)."""
    try:
        return round(os.getloadavg()[0], 2)
    except (OSError, AttributeError):
        return None


def _fmt(v: float | None) -> str:
    if v is None:
        return "-"
    if v == 0 or (1e-3 <= abs(v) < 1e6):
        return f"{v:,.3g}" if abs(v) < 1000 else f"{v:,.0f}"
    return f"{v:.3g}"


def _size(n: int | None) -> str:
    if n is None:
        return ""
    e = math.log10(n) if n > 0 else 0
    return f"1e{int(e)}" if n >= 1000 and float(e).is_integer() else f"{n:,}"


def table(rows: list[Result]) -> str:
    """The rows as a plain-text table (one line per figure, targets and PASS/MISS at the right)."""
    head = ("case", "figure", "n", "value", "unit", "kind", "target", "status")
    body = [(r.case, r.name, _size(r.size), _fmt(r.value), r.unit, r.kind, r.target, r.status) for r in rows]
    widths = [max(len(str(x)) for x in col) for col in zip(head, *body)]
    right = {2, 3}
    lines = []
    for i, line in enumerate([head, *body]):
        cells = [str(c).rjust(w) if j in right else str(c).ljust(w) for j, (c, w) in enumerate(zip(line, widths))]
        lines.append("  ".join(cells).rstrip())
        if i == 0:
            lines.append("  ".join("-" * w for w in widths))
    notes = list(dict.fromkeys(f"  [{r.case}] {r.name}: {r.note}" for r in rows if r.note))
    return "\n".join(lines + (["", "notes:"] + notes if notes else []))


def write_json(rows: list[Result], path: Path, meta: dict[str, Any]) -> None:
    """Write the run (machine, settings, every row) as JSON, creating the folder when needed."""
    path.parent.mkdir(parents=True, exist_ok=True)
    record = {"machine": machine(), "when": time.strftime("%Y-%m-%dT%H:%M:%S%z"), **meta,
              "results": [asdict(r) for r in rows]}
    tmp = path.with_suffix(path.suffix + ".tmp")
    tmp.write_text(json.dumps(record, indent=1) + "\n")
    os.replace(tmp, path)
