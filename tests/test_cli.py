"""The command line: show, export, check and schema over spec files; bad input is one line and exit code 1."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from importlib import resources

import numpy as np
import pytest

from schedwidget import cosine, drops, load, save, warmup
from schedwidget.__main__ import main
from schedwidget.budget import Budget, scale_for_batch
from schedwidget.spec import json_schema

DEMO_DIR = resources.files("schedwidget").joinpath("demo")
COSINE = str(DEMO_DIR.joinpath("flakes_warmup_cosine.json"))
EPOCHS = str(DEMO_DIR.joinpath("flakes_drops_epochs.json"))
BIG = str(DEMO_DIR.joinpath("flakes_batch1024.json"))
# Invented demo scenario (DESIGN section 5): 90 epochs x 1,150 steps at batch 128, later batch 1,024.
SPE = 1150
DEMO = warmup(cosine(0.1, steps=85 * SPE), steps=5 * SPE)


def one_line_error(capsys, argv) -> str:
    """Run ``main(argv)``; it must fail with exit code 1 and exactly one line on stderr, no traceback."""
    assert main(argv) == 1
    out = capsys.readouterr()
    assert out.err.endswith("\n") and out.err.count("\n") == 1, out.err
    assert "Traceback" not in out.err and out.out == ""
    return out.err


class TestDemoFiles:
    """The shipped demo specs are the scenario's designs."""

    def test_demo_specs(self):
        """Warmup + cosine at batch 128, drops per epoch, and the same design moved to batch 1,024."""
        assert load(COSINE) == DEMO
        assert load(EPOCHS) == drops(0.1, at=(30, 60, 80), steps=90)
        big = Budget(samples=SPE * 128, batch=1024, epochs=90)
        assert load(BIG) == scale_for_batch(DEMO, 128, 1024, steps=big.steps)
        assert json.loads(DEMO_DIR.joinpath("flakes_batch1024.json").read_text())["steps_per_epoch"] == 143


class TestShow:
    """show prints the facts sentence, the numbers and the boundary table."""

    def test_show_demo(self, capsys):
        """The warmup + cosine demo: peak at the join, both sides of the join in the table."""
        assert main(["show", COSINE]) == 0
        out = capsys.readouterr().out
        assert "peaks at 0.1 at step 5,750 (epoch 5.0)" in out
        assert "peak               0.1 at step 5,750" in out
        assert "where" in out and "join 1: first tick after    5,750   5.000         0.1" in out

    def test_show_epochs(self, capsys):
        """A design in epochs is read in epochs."""
        assert main(["show", EPOCHS]) == 0
        out = capsys.readouterr().out
        assert "unit epoch, 90 epochs" in out and "jumps              3" in out


class TestExport:
    """export writes Python or a torch snippet, to stdout or atomically to a file."""

    def test_python_to_stdout(self, capsys):
        """The printed function equals the design."""
        assert main(["export", COSINE, "--to", "python", "--name", "flake_rate"]) == 0
        ns = {}
        exec(capsys.readouterr().out, ns)
        t = np.arange(0, 103_600, 97)
        np.testing.assert_allclose([ns["flake_rate"](int(i)) for i in t], DEMO(t), rtol=1e-12, atol=1e-16)

    def test_torch_to_file(self, tmp_path, capsys):
        """The snippet lands in the file, nothing is left behind, and the base rate defaults to the peak."""
        target = tmp_path / "schedule_snippet.py"
        assert main(["export", BIG, "--to", "torch", "--groups", "1.0,0.1", "-o", str(target)]) == 0
        assert capsys.readouterr().out == ""
        text = target.read_text()
        assert "BASE_LR = 0.8" in text and "GROUP_MULTIPLIERS = (1.0, 0.1)" in text
        assert "Budget: 12,870 steps (90 epochs of 143 steps)" in text
        assert [p.name for p in tmp_path.iterdir()] == ["schedule_snippet.py"]
        assert main(["export", BIG, "--to", "torch", "--base-lr", "0.5", "-o", str(target)]) == 0
        assert "BASE_LR = 0.5" in target.read_text()

    def test_budget_mismatch(self, capsys):
        """--steps of another length is one line naming both numbers."""
        err = one_line_error(capsys, ["export", COSINE, "--to", "torch", "--steps", "12870"])
        assert "length of 103,500 steps, got 12,870 steps" in err

    @pytest.mark.parametrize("argv,words", [
        (["export", COSINE, "--to", "python", "--name", "lr_at()"], "name must be a plain Python identifier"),
        (["export", COSINE, "--to", "torch", "--base-lr", "-1"], "base_lr must be a finite number > 0"),
        (["export", COSINE, "--to", "torch", "--groups", "1,x"], "--groups must be comma-separated numbers"),
        (["export", COSINE, "--to", "java"], "invalid choice: 'java'"),
        (["export", COSINE], "the following arguments are required: --to"),
        (["export", COSINE, "--to", "python", "-o", "/nonexistent/dir/x.py"], "-o must name a file in an existing"),
    ])
    def test_bad_arguments(self, capsys, argv, words):
        """Bad names, rates, groups and output paths are one line with exit code 1."""
        assert words in one_line_error(capsys, argv)


class TestCheckAndSchema:
    """check validates a spec; schema prints the JSON Schema."""

    def test_check_ok(self, capsys):
        """A valid spec prints ok with its kind and length."""
        assert main(["check", COSINE]) == 0
        assert capsys.readouterr().out == f"ok: {COSINE}: warmup, 103,500 steps, 1,150 steps per epoch\n"
        assert main(["check", BIG, "--steps", "12870"]) == 0

    def test_check_budget(self, capsys):
        """--steps of another length fails in one line."""
        assert "steps must equal the design's length" in one_line_error(capsys, ["check", BIG, "--steps", "103500"])

    def test_schema(self, capsys):
        """schema prints the generated JSON Schema."""
        assert main(["schema"]) == 0
        assert json.loads(capsys.readouterr().out) == json_schema()

    def test_help(self, capsys):
        """--help lists the subcommands and exits 0."""
        assert main(["--help"]) == 0
        out = capsys.readouterr().out
        assert all(word in out for word in ("show", "export", "check", "schema", "never runs code"))


def _bad_files(tmp_path):
    (tmp_path / "not.json").write_text("{ this is not json", "utf-8")
    (tmp_path / "schema.json").write_text(json.dumps({"version": 1, "schedule": {"kind": "cosine", "peak": "high"}}))
    (tmp_path / "newer.json").write_text(json.dumps({"version": 99, "schedule": {"kind": "flat", "lr": 0.1}}))
    (tmp_path / "code.json").write_text(json.dumps({"version": 1, "schedule": {"kind": "__import__('os')"}}))
    save(warmup(cosine(0.1, steps=10), steps=2), tmp_path / "good.json")
    return {
        "missing": (tmp_path / "missing.json", "path must name an existing file"),
        "not json": (tmp_path / "not.json", "is not JSON (line 1, column 3"),
        "wrong schema": (tmp_path / "schema.json", "schedule.peak: 'high' is not of type 'number'"),
        "newer version": (tmp_path / "newer.json", "written by a newer schedwidget"),
        "code as kind": (tmp_path / "code.json", "spec: "),
        "a folder": (tmp_path, "cannot be read"),
    }


class TestBadFiles:
    """Missing, non-JSON, wrong-schema and newer-version files: exit code 1 and one line, for every subcommand."""

    @pytest.mark.parametrize("case", ["missing", "not json", "wrong schema", "newer version", "code as kind",
                                      "a folder"])
    @pytest.mark.parametrize("command", [["show"], ["check"], ["export", "--to", "python"]])
    def test_bad_file(self, tmp_path, capsys, case, command):
        """Each bad file gives exit code 1 and a one-line message naming the problem."""
        path, words = _bad_files(tmp_path)[case]
        err = one_line_error(capsys, command[:1] + [str(path)] + command[1:])
        assert err.startswith("schedwidget: error: ") and words in err

    def test_subprocess(self, tmp_path):
        """As a real process: check passes on a demo spec, a bad file is one stderr line, no traceback."""
        ok = subprocess.run([sys.executable, "-m", "schedwidget", "check", COSINE], capture_output=True, text=True,
                            timeout=120)
        assert ok.returncode == 0 and ok.stdout.startswith("ok: ") and ok.stderr == ""
        path, _ = _bad_files(tmp_path)["newer version"]
        bad = subprocess.run([sys.executable, "-m", "schedwidget", "show", str(path)], capture_output=True,
                             text=True, timeout=120)
        assert bad.returncode == 1 and bad.stdout == "" and bad.stderr.count("\n") == 1
        assert "Traceback" not in bad.stderr and "newer schedwidget" in bad.stderr


def _run_cli(*args: str, **kw) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "schedwidget", *args], capture_output=True, text=True, timeout=60,
                          **kw)


class TestHostileFiles:
    """Issue 10: the CLI blocked forever on a FIFO, printed a MemoryError on /dev/zero and a traceback when stdout
    was closed.  Each case is a real process with a timeout, so a hang fails the test instead of the run."""

    def test_fifo_is_refused_without_blocking(self, tmp_path):
        """A FIFO with no writer: refused after a stat, never opened."""
        fifo = tmp_path / "spec.json"
        os.mkfifo(fifo)
        for command in (["show"], ["check"], ["export", "--to", "python"]):
            out = _run_cli(command[0], str(fifo), *command[1:])
            assert out.returncode == 1 and out.stdout == "" and out.stderr.count("\n") == 1, out.stderr
            assert "it is a pipe (FIFO); only regular files are read" in out.stderr

    def test_dev_zero_is_refused(self):
        """/dev/zero never ends: refused as a device instead of read until memory runs out."""
        if not os.path.exists("/dev/zero"):
            pytest.skip("no /dev/zero here")
        out = _run_cli("show", "/dev/zero")
        assert out.returncode == 1 and out.stderr.count("\n") == 1 and "it is a character device" in out.stderr

    def test_oversized_file_states_the_cap(self, tmp_path, capsys):
        """A regular file over 16 MiB is refused before reading, and the message says the cap."""
        big = tmp_path / "big.json"
        with open(big, "wb") as fh:
            fh.truncate(16 * 2 ** 20 + 10)
        err = one_line_error(capsys, ["check", str(big)])
        assert "at most 16,777,216 bytes (16 MiB) are read" in err

    def test_deep_and_huge_specs_are_one_line(self, tmp_path, capsys):
        """JSON nested past the parser's recursion and a 5,000-digit integer: one line each."""
        deep = tmp_path / "deep.json"
        deep.write_text('{"version": 1, "schedule": ' + "[" * 50_000 + "]" * 50_000 + "}")
        assert "nests JSON arrays or objects too deeply" in one_line_error(capsys, ["show", str(deep)])
        huge = tmp_path / "huge.json"
        huge.write_text('{"version": 1, "schedule": {"kind": "flat", "lr": 1' + "0" * 4999 + "}}")
        assert "schedule.lr: an integer must be smaller than 2**1024" in one_line_error(capsys, ["show", str(huge)])

    def test_export_onto_a_fifo_is_refused(self, tmp_path):
        """-o naming a FIFO: refused (an atomic rename would replace it; opening it would block)."""
        fifo = tmp_path / "out.py"
        os.mkfifo(fifo)
        out = _run_cli("export", COSINE, "--to", "python", "-o", str(fifo))
        assert out.returncode == 1 and "export: -o must be a regular file or a new name" in out.stderr
        assert out.stderr.count("\n") == 1

    def test_export_through_a_symlink_keeps_the_link(self, tmp_path, capsys):
        real = tmp_path / "real.py"
        real.write_text("old\n")
        os.chmod(real, 0o640)
        link = tmp_path / "link.py"
        link.symlink_to(real)
        assert main(["export", COSINE, "--to", "python", "-o", str(link)]) == 0
        assert link.is_symlink() and "def lr_at" in real.read_text()
        assert (os.stat(real).st_mode & 0o777) == 0o640


class TestClosedOutput:
    """A reader that goes away, or no stdout at all: no traceback."""

    def test_broken_pipe_exits_quietly_with_141(self):
        """The reader closed before the first write (what `| head -c1` does to a longer output)."""
        r, w = os.pipe()
        os.close(r)
        try:
            out = subprocess.run([sys.executable, "-m", "schedwidget", "show", COSINE], stdout=w,
                                 stderr=subprocess.PIPE, text=True, timeout=60)
        finally:
            os.close(w)
        assert out.returncode == 141 and out.stderr == "", out.stderr

    def test_head_c1(self):
        """The shell pipeline from the issue: one byte arrives and nothing is printed on stderr."""
        out = subprocess.run(["bash", "-c", f'"{sys.executable}" -m schedwidget schema | head -c1; '
                                            'echo " ${PIPESTATUS[0]}"'], capture_output=True, text=True, timeout=60)
        assert out.stderr == "" and out.stdout.startswith("{ "), out
        assert out.stdout.split()[-1] in ("0", "141")  # 0 when the output fit in the pipe before head left

    def test_closed_stdout_is_one_line(self):
        """stdout closed (`>&-`): one line on stderr, exit 1."""
        out = subprocess.run(["bash", "-c", f'"{sys.executable}" -m schedwidget check "{COSINE}" >&-'],
                             capture_output=True, text=True, timeout=60)
        assert out.returncode == 1 and "Traceback" not in out.stderr, out.stderr
        assert out.stderr == ("schedwidget: error: stdout is closed, so nothing was written "
                              "(pass -o FILE to export to a file)\n")


class TestNeverATraceback:
    """Whatever goes wrong inside, the command line answers in one line with exit code 1."""

    def test_unexpected_exception(self, capsys, monkeypatch):
        import schedwidget.__main__ as cli

        def broken(*a, **k):
            raise TypeError("something inside broke")
        monkeypatch.setattr(cli, "_show", broken)
        err = one_line_error(capsys, ["show", COSINE])
        assert err == "schedwidget: error: internal error, please report it: TypeError: something inside broke\n"

    def test_memory_error(self, capsys, monkeypatch):
        import schedwidget.__main__ as cli

        def broken(*a, **k):
            raise MemoryError
        monkeypatch.setattr(cli, "_show", broken)
        assert "out of memory (MemoryError)" in one_line_error(capsys, ["show", COSINE])

    def test_interrupt_is_quiet(self, capsys, monkeypatch):
        import schedwidget.__main__ as cli

        def stop(*a, **k):
            raise KeyboardInterrupt
        monkeypatch.setattr(cli, "_show", stop)
        assert main(["show", COSINE]) == 130
        assert capsys.readouterr().err == ""

    def test_absurd_steps(self, capsys):
        """A 5,000-digit --steps is refused by the argument parser in one line (int() of it raised ValueError)."""
        err = one_line_error(capsys, ["check", COSINE, "--steps", "9" * 5000])
        assert "--steps must be a whole number of at most 20 digits" in err and len(err) < 300


# ------------------------------------------------------------------ specs of tracks and per-group designs (issue 15)
def _track_specs(tmp_path):
    """A one-cycle rate with its momentum and a weight decay (steps), and a frozen-then-warmed backbone beside a
    constant head (epochs): the two kinds of spec that hold more than one design."""
    from schedwidget import flat, one_cycle, stages
    from schedwidget.tracks import inverse_momentum, per_group, tracks

    rate = one_cycle(0.1, steps=1000)
    full = tracks(rate, momentum=inverse_momentum(rate), weight_decay=flat(5e-4))
    backbone = stages(flat(0.0, steps=10), warmup(cosine(0.01, steps=80), steps=10))
    groups = per_group({"backbone": backbone, "head": flat(0.01, steps=100)})
    save(full, tmp_path / "tracks.json")
    save(groups, tmp_path / "groups.json", unit="epoch")
    return full, groups, str(tmp_path / "tracks.json"), str(tmp_path / "groups.json")


class TestTrackSpecs:
    """show, check and export read a spec of tracks or per-group designs as the whole value, not its first rate."""

    def test_show_every_track(self, tmp_path, capsys):
        """Every track gets its line, its numbers and (a rate) its boundary table; the AdamW decay is explained."""
        full, _, path, _ = _track_specs(tmp_path)
        assert main(["show", path]) == 0
        out = capsys.readouterr().out
        assert out.startswith(f"{path}: tracks (rate, momentum, weight decay), unit step, 1,000 steps\n")
        assert "momentum: 0.95 at the first step, lowest 0.85 at step 450" in out
        assert "so the decay per step is rate x weight_decay" in out
        assert "\nmomentum:\n  peak              0.95 at step 0\n" in out
        assert "  minimum           0.85 at step 450\n" in out
        assert "\nweight decay:\n" in out and "  mean              0.0005\n" in out
        assert out.count("where ") == 1  # one boundary table: the rate's
        assert "  under 10% of peak  step 900\n" in out  # the rate's shares, read from its own facts
        assert full.rate(900) < 0.1 * 0.1 <= full.rate(899)  # 0.1 * 0.1 is 0.010000000000000002

    def test_show_groups(self, tmp_path, capsys):
        """Per-group designs are shown group by group, each rate with its table in the spec's unit."""
        _, groups, _, path = _track_specs(tmp_path)
        assert main(["show", path]) == 0
        out = capsys.readouterr().out
        assert out.startswith(f"{path}: 2 param groups (backbone: rate; head: rate), unit epoch, 100 epochs\n")
        assert "backbone.rate: Starts at 0, peaks at 0.01 at epoch 20" in out
        assert "\nhead.rate:\n" in out and out.count("where ") == 2
        assert "join 2: first tick after     20           0.01" in out
        assert groups.groups[0].rate(20) == 0.01 and groups.groups[0].rate(9) == 0.0  # frozen, then warmed

    def test_check(self, tmp_path, capsys):
        """check names what the spec holds and checks every group's rate against --steps."""
        _, _, tpath, gpath = _track_specs(tmp_path)
        assert main(["check", gpath, "--steps", "100"]) == 0
        assert capsys.readouterr().out == f"ok: {gpath}: 2 param groups (backbone: rate; head: rate), 100 epochs\n"
        assert main(["check", tpath]) == 0
        assert capsys.readouterr().out == f"ok: {tpath}: tracks (rate, momentum, weight decay), 1,000 steps\n"
        err = one_line_error(capsys, ["check", tpath, "--steps", "999"])
        assert "steps must equal the design's length of 1,000 steps, got 999" in err

    def test_python_every_track(self, tmp_path, capsys):
        """--to python writes one function per track, each equal to its design at every tick, each docstring
        naming its own hyperparameter."""
        full, _, path, _ = _track_specs(tmp_path)
        assert main(["export", path, "--to", "python"]) == 0
        text = capsys.readouterr().out
        ns = {}
        exec(text, ns)
        t = np.arange(0, 1001)
        for track, fn in (("rate", "lr_at"), ("momentum", "momentum_at"), ("weight_decay", "weight_decay_at")):
            assert [ns[fn](int(i)) for i in t] == getattr(full, track)(t).tolist(), track
        assert '"""Momentum (SGD momentum or the first Adam beta) at tick t' in text
        assert "the momentum stays at 0.95" in text and '"""Weight decay at tick t' in text

    def test_python_groups(self, tmp_path, capsys):
        """Per-group designs: one function per group, named after it; --steps checks every group."""
        _, groups, _, path = _track_specs(tmp_path)
        assert main(["export", path, "--to", "python", "--steps", "100"]) == 0
        ns = {}
        exec(capsys.readouterr().out, ns)
        t = np.arange(0, 101)
        assert [ns["backbone_lr_at"](int(i)) for i in t] == groups.groups[0].rate(t).tolist()
        assert [ns["head_lr_at"](int(i)) for i in t] == [0.01] * 101
        assert "steps must equal the design's length of 100 epochs, got 90" in one_line_error(
            capsys, ["export", path, "--to", "python", "--steps", "90"])

    def test_torch_snippet_is_the_track_snippet(self, tmp_path, capsys):
        """--to torch writes to_torch_tracks's snippet for the loaded value, word for word."""
        from schedwidget.track_export import to_torch_tracks

        full, groups, tpath, gpath = _track_specs(tmp_path)
        assert main(["export", tpath, "--to", "torch", "--steps", "1000"]) == 0
        assert capsys.readouterr().out == to_torch_tracks(full, unit="step")
        assert main(["export", gpath, "--to", "torch", "--name", "rate_at"]) == 0
        text = capsys.readouterr().out
        assert text == to_torch_tracks(groups, unit="epoch", name="rate_at")
        assert "class TrackClock:" in text and "'rate': backbone_rate_at" in text

    def test_torch_multipliers_copy_the_tracks(self, tmp_path, capsys):
        """--groups with one set of tracks: one copy per multiplier, its rate scaled, the other tracks as they are."""
        full, _, path, _ = _track_specs(tmp_path)
        assert main(["export", path, "--to", "torch", "--groups", "1,0.1"]) == 0
        ns = {}
        exec(capsys.readouterr().out, ns)
        assert ns["group1_lr_at"](450) == full.rate(450) * 0.1 and ns["group0_lr_at"](450) == full.rate(450)
        assert ns["group1_momentum_at"](450) == 0.85

    def test_torch_refusals(self, tmp_path, capsys):
        """--base-lr with tracks, and --groups with per-group designs, are one-line refusals that say why."""
        _, _, tpath, gpath = _track_specs(tmp_path)
        err = one_line_error(capsys, ["export", tpath, "--to", "torch", "--base-lr", "0.1"])
        assert "--base-lr is for a spec of one schedule, got 0.1" in err and "leave --base-lr out" in err
        err = one_line_error(capsys, ["export", gpath, "--to", "torch", "--groups", "1,2"])
        assert "groups must be None when a design is given per group" in err
        err = one_line_error(capsys, ["export", gpath, "--to", "torch", "--steps", "90"])
        assert "got 90" in err


class TestExportArrayJaxKeras:
    """export --to numpy|jax|keras (issue 17): the text of each, for one schedule; tracks are refused."""

    def test_numpy_to_stdout(self, capsys):
        """The printed numpy function takes an array of ticks and equals the design bit for bit."""
        assert main(["export", COSINE, "--to", "numpy", "--name", "flake_rate"]) == 0
        ns = {}
        exec(capsys.readouterr().out, ns)
        t = np.arange(0, 103_600, 7)
        np.testing.assert_array_equal(ns["flake_rate"](t), DEMO(t))

    def test_jax_text(self, capsys):
        """The JAX text imports jax.numpy only and names the function (jax itself: tests/test_export_jax.py)."""
        assert main(["export", COSINE, "--to", "jax", "--steps", "103500"]) == 0
        out = capsys.readouterr().out
        assert out.startswith("import jax.numpy as jnp\n") and "def lr_at(step):" in out and "jnp.where(" in out

    def test_keras_text_to_file(self, tmp_path, capsys):
        """The Keras class lands in the file; its default name is ExportedSchedule, --name renames it."""
        target = tmp_path / "schedule_keras.py"
        assert main(["export", EPOCHS, "--to", "keras", "-o", str(target)]) == 0
        assert capsys.readouterr().out == ""
        assert "class ExportedSchedule(keras.optimizers.schedules.LearningRateSchedule):" in target.read_text()
        assert main(["export", EPOCHS, "--to", "keras", "--name", "FlakeRate", "-o", str(target)]) == 0
        assert "class FlakeRate(" in target.read_text() and "Unit: epoch" in target.read_text()

    @pytest.mark.parametrize("to", ["numpy", "jax", "keras"])
    def test_bad_name_and_budget(self, capsys, to):
        """A name that is not an identifier, or a budget of another length, is one line with exit code 1."""
        assert "name must be a plain Python identifier" in one_line_error(
            capsys, ["export", COSINE, "--to", to, "--name", "x; import os"])
        assert "length of 103,500 steps, got 12,870 steps" in one_line_error(
            capsys, ["export", COSINE, "--to", to, "--steps", "12870"])

    @pytest.mark.parametrize("to", ["numpy", "jax", "keras"])
    def test_tracks_are_refused(self, tmp_path, capsys, to):
        """A spec of tracks has several schedules: one line says to use python or torch."""
        from schedwidget import flat, tracks

        path = tmp_path / "tracks.json"
        save(tracks(DEMO, momentum=flat(0.9)), path)
        assert f"--to {to} writes one schedule" in one_line_error(capsys, ["export", str(path), "--to", to])
