"""``python -m tests.bench``: run every benchmark case, print the table, write the JSON record.

Options: ``--quick`` (smallest sizes, few rounds: checks the cases run, says
nothing about speed), ``--only 1,3`` (cases by number), ``--out PATH`` (default
``bench-results/latest.json``).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

from . import bench_designer, bench_eval, bench_import, bench_redraw, bench_spec, bench_step
from .design import Sizing
from .harness import Result, load, machine, table, write_json

CASES = {"1": bench_eval, "2": bench_redraw, "3": bench_step, "4": bench_spec, "5": bench_import, "6": bench_designer}
DEFAULT_OUT = Path("bench-results") / "latest.json"
DESIGN = ("warmup(restarts(cosine(0.1, 0.0, steps=L0), cycles=5, growth=2.0), steps=W).clip(low=1e-4), "
          "unit step, sized to each budget n: L0 = (95 * n // 100) // 31, W = n - 31 * L0 "
          f"(at n = 1e6: {Sizing(10**6)})")


def run_all(only: list[str] | None = None, quick: bool = False) -> list[Result]:
    """Every row of the chosen cases (all of them by default), in case order."""
    rows: list[Result] = []
    for key, module in CASES.items():
        if only and key not in only:
            continue
        rows += module.run(quick=quick)
    return rows


def main(argv: list[str] | None = None) -> int:
    """Command line entry point; the exit status is 0 even when a target is missed (the table says so)."""
    ap = argparse.ArgumentParser(prog="python -m tests.bench", description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smallest sizes, few rounds (a smoke run)")
    ap.add_argument("--only", default="", help="comma-separated case numbers, e.g. 1,3")
    ap.add_argument("--out", type=Path, default=DEFAULT_OUT, help=f"JSON file to write (default {DEFAULT_OUT})")
    args = ap.parse_args(argv)
    only = [c.strip() for c in args.only.split(",") if c.strip()] or None
    unknown = [c for c in only or () if c not in CASES]
    if unknown:
        ap.error(f"--only takes case numbers from {', '.join(CASES)}, got {', '.join(unknown)}")
    load_before = load()
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # third-party import chatter, not ours
        rows = run_all(only, args.quick)
    seconds = time.perf_counter() - t0
    m = machine()
    print(f"machine: {m['cpu']}, {m['cores']} cores, Python {m['python']}, numpy {m.get('numpy', '?')}, "
          f"torch {m.get('torch', '-')}; load average {load_before} before, {load()} after")
    print(f"reference design: {DESIGN}\n")
    print(table(rows))
    missed = [r for r in rows if r.status == "MISS"]
    print(f"\n{sum(r.status == 'PASS' for r in rows)} PASS, {len(missed)} MISS, "
          f"{sum(r.status == 'n/a' for r in rows)} n/a; {seconds:.0f} s")
    write_json(rows, args.out, {"design": DESIGN, "quick": args.quick, "seconds": round(seconds, 1),
                                "load_average_before": load_before})
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
