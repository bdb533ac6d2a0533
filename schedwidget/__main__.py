"""Command line over spec files: show, export, check, schema.

    python -m schedwidget show SPEC.json
    python -m schedwidget export SPEC.json --to python|numpy|jax|keras|torch [--name NAME] [--base-lr X] [-o FILE]
    python -m schedwidget check SPEC.json [--steps N]
    python -m schedwidget schema
    python -m schedwidget report SPEC.json [--compare OTHER.json ...] -o design.html|design.md

A spec of tracks (momentum, beta2, weight decay beside the rate) or of one design per param group is
shown track by track and exported as one function per track and group (``--to python``) or as
``to_torch_tracks``'s snippet (``--to torch``; ``--groups`` copies one set of tracks per multiplier).

Bad input ends with exit code 1 and one line on stderr, never a traceback.
Spec files must be regular files of at most 16 MiB (``spec.MAX_SPEC_BYTES``):
a pipe or a device is refused before it is opened, so the command never blocks.
When the reader of stdout goes away (``... | head -c1``) the command stops
quietly with exit code 141 (128 + SIGPIPE, what a shell reports for a program
ended by a closed pipe); when stdout is closed it says so in one line, exit 1.
An interrupt (Ctrl-C) exits quietly with 130 (128 + SIGINT).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path
from typing import Sequence

from .schedule import ScheduleError
from .spec import write_atomic

PROG = "python -m schedwidget"
#: Exit codes: a broken pipe (128 + SIGPIPE) and an interrupt (128 + SIGINT), as a shell reports them.
EXIT_PIPE, EXIT_INTERRUPT = 141, 130


class _Usage(Exception):
    """A command-line mistake; reported in one line like every other bad input."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str):  # type: ignore[override]
        raise _Usage(f"{message} (see {self.prog} --help)")


class _StdoutClosed(Exception):
    """stdout is closed: nothing can be written."""


def _whole(text: str) -> int:
    t = text.strip().replace("_", "")
    if not (t.lstrip("-").isdigit() and len(t) <= 20):
        raise argparse.ArgumentTypeError(f"--steps must be a whole number of at most 20 digits, got {text[:40]!r}"
                                         + (" ..." if len(text) > 40 else ""))
    return int(t)


def _groups(text: str) -> list[float]:
    try:
        return [float(x) for x in text.split(",")]
    except ValueError:
        raise argparse.ArgumentTypeError(f"--groups must be comma-separated numbers such as 1.0,0.1, got {text!r}")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog=PROG, description="Read, check and export schedwidget spec files (JSON). "
                "Loading a spec validates it against the shipped JSON Schema and never runs code from it.",
                epilog="Exit code 0 on success, 1 on bad input (with one line on stderr).")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    show = sub.add_parser("show", help="facts, numbers and the boundary table of a design",
                          description="Print the facts sentence, the numbers and the table of rates on both "
                                      "sides of every stage join, in the spec's unit.")
    show.add_argument("spec", metavar="SPEC.json")
    ex = sub.add_parser("export", help="write the design as Python, numpy, JAX, Keras or a torch snippet",
                        description="Write the design as one stdlib-only Python function (--to python), the same "
                                    "for integer arrays of ticks with numpy (--to numpy), a jax.jit-traceable "
                                    "function (--to jax), a Keras 3 LearningRateSchedule class (--to keras) or a "
                                    "ready torch snippet (--to torch), to FILE or stdout. A spec of tracks or "
                                    "per-group designs gives one function per track and group, and a snippet "
                                    "whose clock sets each group's lr and tracked keys (no --base-lr).")
    ex.add_argument("spec", metavar="SPEC.json")
    ex.add_argument("--to", required=True, choices=EXPORT_TARGETS,
                    help="what to write: python (stdlib function), numpy (the same on integer arrays, "
                         "branch-free), jax (jax.jit-traceable, an optax schedule), keras (a Keras 3 "
                         "LearningRateSchedule class) or torch (a ready snippet)")
    ex.add_argument("--name", default=None,
                    help="name of the generated function (default: lr_at) or Keras class (default: ExportedSchedule)")
    ex.add_argument("--base-lr", type=float, default=None, metavar="X",
                    help="torch: the optimizer's lr for every param group (default: the design's peak; "
                         "not for tracks, whose rates are absolute)")
    ex.add_argument("--groups", type=_groups, default=None, metavar="M,M,...",
                    help="torch: one rate multiplier per param group, e.g. 1.0,0.1 (default: one rate for all)")
    ex.add_argument("--steps", type=_whole, default=None, metavar="N",
                    help="the budget in ticks of the spec's unit; a design of another length is an error")
    ex.add_argument("-o", "--output", default=None, metavar="FILE",
                    help="write here (atomically: a temporary file, then a rename) instead of stdout")
    ck = sub.add_parser("check", help="validate a spec file (exit 0 'ok: ...' or 1 with the problem)",
                        description="Validate a spec file; with --steps also check its length against a budget.")
    ck.add_argument("spec", metavar="SPEC.json")
    ck.add_argument("--steps", type=_whole, default=None, metavar="N", help="the budget in ticks of the spec's unit")
    sub.add_parser("schema", help="print the JSON Schema of spec files",
                   description="Print the JSON Schema (draft 2020-12) that spec files are validated against.")
    return p


def _peak(s) -> float:
    from .facts import facts

    return facts(s, steps=s.length or 10_000).peak


def _rows(f, unit: str, rate: bool = True) -> list[str]:
    """The numbers of one design's facts, aligned; a rate's shares of its peak and area only for a rate."""
    def at(t):
        return f"{unit} {t:,}" if t is not None else "never"
    rows = [("peak", f"{f.peak:.6g} at {at(f.peak_at)}"), ("first", f"{f.first:.6g}"),
            ("final", f"{f.final:.6g} at {at(f.steps - 1)}"), ("after the budget", f"{f.after:.6g}"),
            ("minimum", f"{f.minimum:.6g} at {at(f.minimum_at)}"), ("mean", f"{f.mean:.6g}")]
    if rate:
        rows += [("area", f"{f.area:.6g} (sum of rates)"), ("jumps", f"{len(f.breaks):,}"),
                 ("under 10% of peak", at(f.under_10)), ("under 1% of peak", at(f.under_1))]
    else:
        rows += [("jumps", f"{len(f.breaks):,}")]
    if rate and f.half_life is not None:
        rows.append(("half-life", f"{f.half_life:.4g} {unit}s"))
    width = max(len(k) for k, _ in rows)
    return [f"{k.ljust(width)}  {v}" for k, v in rows]


def _show(d, path: str) -> str:
    from .facts import facts

    if d.tracks is not None:
        return _show_tracks(d, path)
    s, unit, spe = d.schedule, d.unit, d.steps_per_epoch
    f = facts(s, steps=s.length or 10_000, unit=unit, steps_per_epoch=spe if unit == "step" else None)
    head = f"{path}: {s.kind}, unit {unit}, " + (f"{s.length:,} {unit}s" if s.length else "open-ended (read over "
                                                 f"{f.steps:,} {unit}s)")
    if spe and unit == "step":
        head += f", {spe:,} steps per epoch"
    lines = [head, f.sentence, ""] + _rows(f, unit)
    lines += [f"caution: {c}" for c in f.cautions] + ["", f.table()]
    return "\n".join(lines) + "\n"


def _budget_of(g) -> int | None:
    """The budget every group is read over: None when every rate has a length, else the longest (or 10,000)."""
    lengths = [t.length for t in g.groups]
    if all(n is not None for n in lengths):
        return None
    return max([n for n in lengths if n is not None] or [10_000])


def _what(d, g) -> str:
    """``tracks (rate, momentum)`` or ``2 param groups (backbone: rate; head: rate, momentum)``."""
    if len(g) == 1 and g.names is None:
        return f"tracks ({', '.join(n.replace('_', ' ') for n in g.groups[0].names())})"
    parts = [f"{g.names[i] if g.names else i}: {', '.join(n.replace('_', ' ') for n in t.names())}"
             for i, t in enumerate(g.groups)]
    return f"{len(g)} param groups ({'; '.join(parts)})"


def _show_tracks(d, path: str) -> str:
    """Every track of every group: its sentence, its numbers, and for each rate its boundary table."""
    from .track_readouts import track_facts, tracks_sentence
    from .tracks import as_groups

    g = as_groups("show", d.tracks)
    unit, spe = d.unit, (d.steps_per_epoch if d.unit == "step" else None)
    n = _budget_of(g)
    sizes = sorted({t.length for t in g.groups}, key=lambda x: (x is None, x or 0))
    size = ", ".join(f"{x:,} {unit}s" if x is not None else f"open-ended (read over {n:,} {unit}s)" for x in sizes)
    head = f"{path}: {_what(d, g)}, unit {unit}, {size}"
    if spe:
        head += f", {spe:,} steps per epoch"
    lines = [head, tracks_sentence(d.tracks, n, spe, unit)]
    for key, f in track_facts(d.tracks, n, spe, unit).items():
        track = key.split(".")[-1]
        if track == "decay_per_step":  # the sentence above says what it is; its numbers follow the rate's
            continue
        lines += ["", f"{key.replace('_', ' ')}:"] + ["  " + x for x in _rows(f, unit, rate=track == "rate")]
        lines += [f"  caution: {c}" for c in f.cautions]
        if track == "rate":
            lines += ["", f.table()]
    return "\n".join(lines) + "\n"


def _check_steps(d, steps: int, owner: str) -> None:
    """Every rate the spec holds (one schedule, tracks, or one per group) has the budget's length."""
    from .budget import check_length
    from .tracks import as_groups

    g = None if d.tracks is None else as_groups(owner, d.tracks)
    for s in [d.schedule] if g is None else [t.rate for t in g.groups]:
        check_length(s, steps, d.unit, owner=owner)


def _out(text: str) -> None:
    """Write to stdout (a closed stdout is reported, not a traceback)."""
    if sys.stdout is None:
        raise _StdoutClosed
    try:
        sys.stdout.write(text)
    except (ValueError, OSError) as exc:  # ValueError: the stream object was closed
        if isinstance(exc, BrokenPipeError):
            raise
        if isinstance(exc, ValueError) or getattr(exc, "errno", None) == 9:  # EBADF: the descriptor is closed
            raise _StdoutClosed from None
        raise


def _write(text: str, output: str | None) -> None:
    if output is None:
        _out(text)
        return
    target = Path(output)
    if not target.parent.is_dir() or target.is_dir():
        raise ScheduleError(f"export: -o must name a file in an existing folder, got {output!r}")
    write_atomic(target, text, owner="export", name="-o")


def _run(args: argparse.Namespace) -> int:
    from .spec import json_schema, load_design

    if args.command == "schema":
        _out(json.dumps(json_schema(), indent=2) + "\n")
        return 0
    d = load_design(args.spec)
    s, unit, spe = d.schedule, d.unit, d.steps_per_epoch
    spe = spe if unit == "step" else None
    if args.command == "show":
        _out(_show(d, args.spec))
        return 0
    if args.command == "check":
        if args.steps is not None:
            _check_steps(d, args.steps, "check")
        if d.tracks is None:
            size = f"{s.length:,} {unit}s" if s.length is not None else f"open-ended, unit {unit}"
            _out(f"ok: {args.spec}: {s.kind}, {size}" + (f", {spe:,} steps per epoch" if spe else "") + "\n")
        else:
            from .tracks import as_groups

            g = as_groups("check", d.tracks)
            sizes = sorted({t.length for t in g.groups}, key=lambda x: (x is None, x or 0))
            size = ", ".join(f"{x:,} {unit}s" if x is not None else f"open-ended, unit {unit}" for x in sizes)
            _out(f"ok: {args.spec}: {_what(d, g)}, {size}" + (f", {spe:,} steps per epoch" if spe else "") + "\n")
        return 0
    from .export import to_python, to_torch

    args.name = args.name if args.name is not None else ("ExportedSchedule" if args.to == "keras" else "lr_at")
    if args.to in ("numpy", "jax", "keras"):
        if d.tracks is not None:
            raise ScheduleError(f"export: --to {args.to} writes one schedule, got a spec of tracks or per-group "
                                "designs; export them with --to python or --to torch")
        if args.steps is not None:
            _check_steps(d, args.steps, "export")
        text = _array_export(args.to, s, args.name, unit, spe)
    elif args.to == "python":
        if args.steps is not None:
            _check_steps(d, args.steps, "export")
        text = to_python(s if d.tracks is None else d.tracks, name=args.name, unit=unit, steps_per_epoch=spe)
    elif d.tracks is not None:  # tracks or one design per group: the snippet sets each group's values directly
        from .track_export import to_torch_tracks
        from .tracks import as_groups

        if args.base_lr is not None:
            raise ScheduleError(f"export: --base-lr is for a spec of one schedule, got {args.base_lr!r} with a spec "
                                "of tracks or per-group designs, whose rates are absolute (the snippet sets each "
                                "group's lr directly); leave --base-lr out")
        text = to_torch_tracks(as_groups("export", d.tracks, args.groups), unit=unit, steps=args.steps,
                               name=args.name, steps_per_epoch=spe)
    else:
        base = args.base_lr if args.base_lr is not None else _peak(s)
        if args.base_lr is None and base <= 0:
            raise ScheduleError("export: the design's peak is 0, so it cannot be the optimizer's base rate; "
                                "pass --base-lr X (the lr every param group is built with)")
        text = to_torch(s, base, unit=unit, groups=args.groups, steps=args.steps, name=args.name,
                        steps_per_epoch=spe)
    _write(text, args.output)
    return 0


#: What ``export --to`` writes.
EXPORT_TARGETS = ("python", "numpy", "jax", "keras", "torch")


def _array_export(to: str, s, name: str, unit: str, spe) -> str:
    """numpy, JAX or Keras source of one design (the text only: none of them is imported)."""
    if to == "numpy":
        from .export import to_python

        return to_python(s, name=name, unit=unit, steps_per_epoch=spe, array=True)
    if to == "jax":
        from .export_jax import to_jax

        return to_jax(s, name=name, unit=unit, steps_per_epoch=spe)
    from .export_keras import to_keras

    return to_keras(s, name=name, unit=unit, steps_per_epoch=spe)


def _say(line: str) -> None:
    """One line on stderr (nothing when stderr itself is gone)."""
    try:
        if sys.stderr is not None:
            sys.stderr.write(line + "\n")
            sys.stderr.flush()
    except (OSError, ValueError):
        pass


def _quiet_stdout() -> None:
    """Point stdout at the null device, so the interpreter's last flush cannot fail on a broken pipe."""
    try:
        fd = os.open(os.devnull, os.O_WRONLY)
        os.dup2(fd, sys.stdout.fileno())
        os.close(fd)
    except (AttributeError, OSError, ValueError):  # no real descriptor (a test's capture)
        pass


def _one_line(exc: BaseException) -> str:
    if isinstance(exc, OSError) and exc.filename is not None:
        return f"{exc.strerror or type(exc).__name__}: {exc.filename!r}"
    if isinstance(exc, (_Usage, ScheduleError)):
        return " ".join(str(exc).split()) or type(exc).__name__
    if isinstance(exc, MemoryError):
        return "out of memory (MemoryError); the input is too large for this machine"
    if isinstance(exc, RecursionError):
        return "the input is nested too deeply to process (RecursionError)"
    text = " ".join(str(exc).split())
    if len(text) > 300:
        text = text[:297] + "..."
    if isinstance(exc, OSError):
        return text or type(exc).__name__
    return f"internal error, please report it: {type(exc).__name__}" + (f": {text}" if text else "")


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit code (0 ok, 1 bad input, 141 broken pipe, 130 interrupted)."""
    rest = list(sys.argv[1:] if argv is None else argv)
    if rest[:1] == ["report"]:  # the design report has its own options (schedwidget.report.report_main)
        from .report import report_main

        return report_main(rest[1:])
    try:
        args = _parser().parse_args(argv)
        code = _run(args)
        if sys.stdout is not None:
            sys.stdout.flush()  # a broken pipe shows here, not in the interpreter's last flush
        return code
    except SystemExit as exc:  # --help and --version print and exit 0
        return exc.code if isinstance(exc.code, int) else 0
    except BrokenPipeError:
        _quiet_stdout()
        return EXIT_PIPE
    except KeyboardInterrupt:
        return EXIT_INTERRUPT
    except _StdoutClosed:
        _say("schedwidget: error: stdout is closed, so nothing was written (pass -o FILE to export to a file)")
        return 1
    except Exception as exc:  # noqa: BLE001 - the command line promises one line and exit 1, never a traceback
        _say(f"schedwidget: error: {_one_line(exc)}")
        return 1


if __name__ == "__main__":
    sys.exit(main())
