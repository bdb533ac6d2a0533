"""``python -m tests.fuzz [--seed N] [--scale X] [--findings FILE]``: run the suite and print the counts."""

from __future__ import annotations

import argparse
import sys

from . import MIX, SEED, run


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m tests.fuzz", description=__doc__)
    ap.add_argument("--seed", type=int, default=SEED)
    ap.add_argument("--scale", type=float, default=1.0, help="multiply every generator's case count")
    ap.add_argument("--only", nargs="*", help="run only these generators")
    ap.add_argument("--findings", help="write the Markdown report (counts, failure classes, repros) here")
    ap.add_argument("--notes", help="a Markdown file appended to the findings (hand-written context)")
    args = ap.parse_args(argv)
    mix = {k: max(1, round(v * args.scale)) for k, v in MIX.items() if not args.only or k in args.only}
    report = run(args.seed, mix)
    print(report.text_table())
    fails = report.failures()
    print(f"\n{len(fails)} failure classes")
    for fc in fails:
        print(f"  {fc.count:>5}  {fc.klass}")
    if args.findings:
        notes = ""
        if args.notes:
            with open(args.notes, encoding="utf-8") as fh:
                notes = fh.read()
        with open(args.findings, "w", encoding="utf-8") as fh:
            fh.write(report.markdown() + notes)
        print(f"findings written to {args.findings}")
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
