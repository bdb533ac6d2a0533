"""Generators over whole routes: the command line, and valid transforms of valid designs."""

from __future__ import annotations

import os
import random
from pathlib import Path

import schedwidget as sw

from .atoms import design_src
from .calls import _valid_schedule
from .checks import Broken
from .designs import design
from .runner import Case


# ------------------------------------------------------------------ command line
def _cli_call(argv: list[str]):
    """Run ``python -m schedwidget`` in-process; exit 1 with one clean line counts as a refusal (ScheduleError)."""
    def call():
        import contextlib
        import io

        from schedwidget.__main__ import main

        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(argv)
        text = err.getvalue()
        if "Traceback" in text or "internal error" in text:
            raise Broken("python -m schedwidget", "traceback or internal error on stderr", text.strip()[-200:])
        if code == 1:
            if text.count("\n") != 1:
                raise Broken("python -m schedwidget", "exit 1 without exactly one line on stderr", repr(text[-200:]))
            raise sw.ScheduleError(text.strip())  # the command's refusal: one line, exit code 1
        if code != 0:
            raise Broken("python -m schedwidget", f"exit code {code}", text.strip()[-200:])
        return None
    return call


def cli(rng: random.Random, n: int, folder: Path) -> list[Case]:
    """The command line on hostile spec files, devices, pipes and arguments; never a traceback."""
    if not (folder / "fifo").exists():
        os.mkfifo(folder / "fifo")
    good = folder / "cli_good.json"
    sw.save(design(rng, depth=1), good)
    files = sorted(str(p) for p in folder.glob("spec_*.json"))[:60] + [str(good)] * 10 + [
        str(folder / "fifo"), "/dev/zero", "/dev/null", str(folder), str(folder / "missing.json"), "-", ""]
    out = []
    for _ in range(n):
        spec = rng.choice(files)
        command = rng.choice(["show", "check", "export python", "export torch", "schema", "bogus"])
        argv = command.split()[:1] + ([] if command == "schema" else [spec])
        if command.startswith("export"):
            argv += ["--to", command.split()[1]]
            if rng.random() < 0.5:
                argv += ["--name", rng.choice(["lr_at", "self", "t", "__x", "_x", "class", "x" * 5000, "é", ""])]
            if rng.random() < 0.5:
                argv += ["--base-lr", rng.choice(["0.1", "nan", "inf", "-1", "1e400", "0", "x", "1" * 5000])]
            if rng.random() < 0.3:
                argv += ["--groups", rng.choice(["1,0.1", "nan,1", ",", "1e400", "-1", "1" * 5000])]
            if rng.random() < 0.3:
                argv += ["-o", rng.choice(["out.py", "missing/out.py", ".", "x" * 300])]
        if command == "check" and rng.random() < 0.7:
            argv += ["--steps", rng.choice(["100", "0", "-1", "2**53", "9" * 25, "1_000", "nan", "9007199254740993"])]
        if rng.random() < 0.05:
            argv += [rng.choice(["--help", "--bogus", "-o"])]
        out.append(Case("cli", _cli_call(argv), f"from schedwidget.__main__ import main\nmain({argv!r})"))
    return out


# ------------------------------------------------------------------ valid transforms
def _odd_length(rng: random.Random) -> int:
    return rng.choice([1, 2, 3, 7, 96, 97, 1000, 99_999_989, 100_000_001, 100_000_006, 2 ** 31 - 1, 2 ** 52 + 1,
                       2 ** 53 - 1, 2 ** 53, rng.randint(1, 10 ** 6), rng.randint(1, 2 ** 53)])


def transforms(rng: random.Random, n: int) -> list[Case]:
    """Valid operations on valid designs: stretch to odd lengths, batch rescaling, sums, products, clips, stages.

    Every result is a valid design (or a ScheduleError for a length or rate beyond the limits), so
    every rate it gives must be finite, >= 0 and the same in the core and in the exports.
    """
    out = []
    for _ in range(n):
        a = _valid_schedule(rng, finite=True, extreme=0.15)
        b = _valid_schedule(rng, extreme=0.15)
        op = rng.randrange(7)
        if op == 0:
            k = _odd_length(rng)
            text, call = f"a.stretch({k})", (lambda a=a, k=k: a.stretch(k))
        elif op == 1:
            f, t = rng.choice([1, 3, 96, 128, 256, 1000, 1024, 4096]), rng.choice([1, 3, 96, 128, 256, 1000, 1024, 4096])
            rule, keep = rng.choice(["linear", "sqrt"]), rng.choice(["samples", "steps"])
            text = f"scale_for_batch(a, {f}, {t}, rule={rule!r}, keep={keep!r})"
            call = (lambda a=a, f=f, t=t, rule=rule, keep=keep: sw.scale_for_batch(a, f, t, rule=rule, keep=keep))
        elif op == 2:
            text, call = "a + b", (lambda a=a, b=b: a + b)
        elif op == 3:
            text, call = "a * b", (lambda a=a, b=b: a * b)
        elif op == 4:
            x = rng.choice([0.0, 1e-300, 0.5, 2.0, 1e10, 1e300, 1.7976931348623157e308])
            text, call = f"a * {x!r}", (lambda a=a, x=x: a * x)
        elif op == 5:
            text, call = "a >> b", (lambda a=a, b=b: a >> b)
        else:
            c = rng.choice([1, 2, 3, 10, 1000, 10 ** 6])
            g = rng.choice([1.0, 0.5, 0.99, 1.01, 2.0, 10.0])
            text = f"restarts(a, cycles={c}, growth={g!r})"
            call = (lambda a=a, c=c, g=g: sw.restarts(a, cycles=c, growth=g))
        out.append(Case("transforms", call, f"a = {design_src(a)}\nb = {design_src(b)}\n{text}"))
    return out
