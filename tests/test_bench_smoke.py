"""Every benchmark case runs once at its smallest size, so the benchmarks cannot rot (speed is not checked)."""

from __future__ import annotations

import json
import math
import warnings

import pytest

from tests.bench import __main__ as bench
from tests.bench import bench_designer, bench_eval, bench_redraw, bench_spec, bench_step
from tests.bench.harness import FIELDS, Result, Target, table


def _check_rows(rows: list[Result], case: str) -> None:
    assert rows, f"case {case} produced no rows"
    for r in rows:
        assert set(FIELDS) <= set(vars(r)), r
        assert r.case == case
        assert r.status in ("PASS", "MISS", "info"), f"{r.name}: {r.status} ({r.note})"
        assert r.value is not None and math.isfinite(r.value), r  # a difference of two timings may be < 0
        assert r.kind in ("absolute", "ratio")
        assert (r.status == "info") == (r.target == "")


class TestEvalCase:
    """Case 1 (evaluation throughput) runs at 1e3 ticks and reports ours, both floors, np.cos and LambdaLR."""

    def test_runs_and_reports_every_figure(self, torch):
        """Every figure of case 1 is present, including the usual way (a) and the ratios to it."""
        rows = bench_eval.run(quick=True)
        _check_rows(rows, bench_eval.CASE)
        names = {r.name for r in rows}
        assert {"ours s(arange(n))", "floor (b) by hand", "bare np.cos pass", "ours / floor (b)",
                "(a) LambdaLR stepped per tick", "(a) / ours (speed-up)"} <= names


class TestRedrawCase:
    """Case 2 (redraw cost) runs at a budget of 1e3 through the slider and through assignment."""

    def test_runs_and_reports_every_figure(self):
        """Both paths report the time to new marks and the bytes of the update."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)  # bqplot's trait declarations on import
            rows = bench_redraw.run(quick=True)
        _check_rows(rows, bench_redraw.CASE)
        names = {r.name for r in rows}
        for path in ("slider", "assign schedule"):
            assert f"{path}: mark update bytes" in names
            assert any(n.startswith(f"{path}: to new marks") for n in names)
        assert all(r.value > 0 for r in rows if r.unit == "KB"), "a redraw sent no mark data"


class TestDesignerCase:
    """Case 6 (one change of the whole designer) runs at a budget of 1e3 with 0 and 5 pins."""

    def test_runs_and_reports_every_figure(self):
        """Both pin counts and their ratio are reported, each against its target."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)  # bqplot's trait declarations on import
            rows = bench_designer.run(quick=True)
        _check_rows(rows, bench_designer.CASE)
        assert [r.name for r in rows] == ["one change, 0 pins (median of 5)", "one change, 5 pins (median of 5)",
                                          "5 pins / 0 pins"]
        assert all(r.target for r in rows) and all(r.value > 0 for r in rows)


class TestStepCase:
    """Case 3 (per-step cost) runs over a short reference design."""

    def test_runs_and_reports_every_figure(self, torch):
        """The generated function, LambdaLR with our factor and with a constant lambda are all reported."""
        rows = bench_step.run(quick=True)
        _check_rows(rows, bench_step.CASE)
        assert {"generated lr_at(t) per call", "LambdaLR.step() with our factor",
                "LambdaLR.step() with a constant lambda", "factor adds to LambdaLR.step()"} <= {r.name for r in rows}


class TestSpecCase:
    """Case 4 (spec and export) runs on the 20-stage design."""

    def test_runs_and_reports_every_figure(self):
        """Round trip, to_python and the JSON size are reported for 20 stages."""
        rows = bench_spec.run(quick=True)
        _check_rows(rows, bench_spec.CASE)
        assert {r.size for r in rows if r.name != "to_python, reference design"} == {20}
        assert {"to_python", "spec JSON size", "round trip via JSON text"} <= {r.name for r in rows}


class TestTarget:
    """A target decides PASS or MISS on the right side of its bound."""

    def test_bounds(self):
        """``<=`` and ``>=`` include the bound itself; a row without a target is info."""
        assert Target("<=", 1.5).met(1.5) and not Target("<=", 1.5).met(1.51)
        assert Target(">=", 200).met(200) and not Target(">=", 200).met(199.9)
        assert Result.measured("c", "n", 1, 2.0, "x", target=Target("<=", 1.5)).status == "MISS"
        assert Result.measured("c", "n", 1, 2.0, "x").status == "info"


class TestCommandLine:
    """``python -m tests.bench`` prints the table and writes the JSON record where --out says."""

    def test_quick_run_writes_json(self, tmp_path, capsys, monkeypatch):
        """A quick run of case 4 prints a table with PASS/MISS and writes every row with the machine."""
        out = tmp_path / "r" / "bench.json"
        assert bench.main(["--quick", "--only", "4", "--out", str(out)]) == 0
        printed = capsys.readouterr().out
        assert "to_python" in printed and "target" in printed
        record = json.loads(out.read_text())
        assert record["machine"]["cores"] >= 1 and record["quick"] is True
        assert {r["case"] for r in record["results"]} == {bench_spec.CASE}
        assert table([]).startswith("case")

    def test_unknown_case_is_refused(self, capsys):
        """An unknown case number stops the run with a message naming the allowed ones."""
        with pytest.raises(SystemExit):
            bench.main(["--only", "9"])
        assert "case numbers from 1, 2, 3, 4" in capsys.readouterr().err
