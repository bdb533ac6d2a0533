"""Rate traces in: sequences, pairs, arrays, pandas, CSV, TensorBoard; several groups; bounded, with clear errors."""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import numpy as np
import pytest

import schedwidget.trace as trace_mod
from schedwidget.schedule import ScheduleError
from schedwidget.trace import Trace, read_trace, read_traces


class TestSequences:
    def test_a_list_is_the_rate_at_ticks_0_1_2(self):
        t = read_trace([0.1, 0.2, 0.3])
        assert t.ticks.tolist() == [0, 1, 2] and t.rates.tolist() == [0.1, 0.2, 0.3] and t.every == 1

    def test_logged_every_k_ticks(self):
        t = read_trace(np.array([0.1, 0.2, 0.3]), every=50)
        assert t.ticks.tolist() == [0, 50, 100] and t.every == 50

    def test_pairs_and_an_n_by_2_array(self):
        a = read_trace([(0, 0.1), (10, 0.2), (25, 0.3)])
        b = read_trace(np.array([[0, 0.1], [10, 0.2], [25, 0.3]]))
        assert a == b and a.ticks.tolist() == [0, 10, 25] and a.every is None

    def test_a_trace_passes_through(self):
        t = Trace(np.arange(3), [0.1, 0.1, 0.1], "lr")
        assert read_trace(t) is t and read_trace(t, name="x").name == "x"

    def test_a_2d_array_is_one_trace_per_group(self):
        groups = read_traces(np.array([[0.1, 1.0, 2.0], [0.05, 0.5, 1.0]]), every=10)
        assert list(groups) == ["group0", "group1", "group2"]
        assert groups["group1"].rates.tolist() == [1.0, 0.5] and groups["group1"].ticks.tolist() == [0, 10]


class TestPandas:
    def test_a_series_takes_its_ticks_from_its_index(self):
        pd = pytest.importorskip("pandas")
        t = read_trace(pd.Series([0.1, 0.05], index=[0, 500], name="lr"))
        assert t.ticks.tolist() == [0, 500] and t.name == "lr"
        assert read_trace(pd.Series([0.1, 0.05]), every=5).ticks.tolist() == [0, 5]

    def test_a_dataframe_finds_its_tick_and_rate_columns(self):
        pd = pytest.importorskip("pandas")
        df = pd.DataFrame({"global_step": [0, 4, 8], "learning_rate": [0.1, 0.2, 0.3], "loss": [3.0, 2.0, 1.0]})
        t = read_trace(df)
        assert t.ticks.tolist() == [0, 4, 8] and t.rates.tolist() == [0.1, 0.2, 0.3] and t.name == "learning_rate"

    def test_several_param_groups_from_a_dataframe(self):
        pd = pytest.importorskip("pandas")
        df = pd.DataFrame({"step": [0, 1], "lr_body": [0.1, 0.05], "lr_head": [1.0, 0.5]})
        groups = read_traces(df)
        assert sorted(groups) == ["lr_body", "lr_head"] and groups["lr_head"].rates.tolist() == [1.0, 0.5]
        with pytest.raises(ScheduleError, match=r"read_trace: column must be one of 'lr_body', 'lr_head'"):
            read_trace(df)
        assert read_trace(df, "lr_head").rates.tolist() == [1.0, 0.5]


class TestCsv:
    def test_any_column_names_and_comments(self, tmp_path):
        p = tmp_path / "run.csv"
        p.write_text("# invented demo data\n\niteration,lr/group_0,lr/group_1,wall_time\n0,0.1,1.0,5.0\n"
                     "100,0.05,0.5,6.0\n")
        groups = read_traces(p)
        assert list(groups) == ["lr/group_0", "lr/group_1"]
        assert groups["lr/group_0"].ticks.tolist() == [0, 100]
        assert read_trace(str(p), column="lr/group_1").rates.tolist() == [1.0, 0.5]

    def test_no_tick_column_numbers_the_rows(self):
        t = read_trace(b"rate\n0.1\n0.2\n", every=3)
        assert t.ticks.tolist() == [0, 3] and t.name == "rate"

    def test_a_headerless_pair_file_is_tick_rate_rows(self):
        t = read_trace(b"0,0.1\n10,0.2\n")
        assert t.ticks.tolist() == [0, 10] and t.rates.tolist() == [0.1, 0.2]

    def test_a_named_tick_column(self):
        t = read_trace(b"when,lr\n2,0.1\n4,0.2\n", column="lr", tick_column="when")
        assert t.ticks.tolist() == [2, 4]

    def test_a_cell_that_is_not_a_number_is_named(self):
        with pytest.raises(ScheduleError, match=r"read_trace: 'lr' at line 3 of the uploaded file must be a number, "
                                                r"got 'oops'"):
            read_trace(b"step,lr\n0,0.1\n1,oops\n")

    def test_a_bad_cell_in_a_column_not_read_is_ignored(self):
        assert read_trace(b"step,lr,note\n0,0.1,warm\n1,0.2,cool\n").rates.tolist() == [0.1, 0.2]

    def test_an_unknown_column_lists_the_columns(self):
        with pytest.raises(ScheduleError, match=r"read_trace: column must be one of 'step', 'LR', got 'lr' "
                                                r"\(the columns of the uploaded file; did you mean 'LR'\?\)"):
            read_trace(b"step,LR\n0,0.1\n", column="lr")

    def test_a_missing_file(self, tmp_path):
        with pytest.raises(ScheduleError, match=r"read_trace: source must be an existing CSV file, got .*no such file"):
            read_trace(str(tmp_path / "nope.csv"))


def _summary_writer(torch):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # tensorboard's own imports, not ours
        from torch.utils.tensorboard import SummaryWriter
    return SummaryWriter


class TestTensorBoard:
    def test_a_log_folder_and_an_event_file(self, torch, tmp_path):
        """Scalars written by torch's SummaryWriter come back through tensorboard's reader (float32 values)."""
        pytest.importorskip("tensorboard")
        writer = _summary_writer(torch)(str(tmp_path))
        for t in range(0, 100, 10):
            writer.add_scalar("lr/body", 0.1 / (1 + t), t)
            writer.add_scalar("lr/head", 1.0 / (1 + t), t)
            writer.add_scalar("loss", 2.0, t)
        writer.close()
        groups = read_traces(str(tmp_path))
        assert sorted(groups) == ["lr/body", "lr/head"]
        body = groups["lr/body"]
        assert body.ticks.tolist() == list(range(0, 100, 10))
        assert np.allclose(body.rates, [0.1 / (1 + t) for t in range(0, 100, 10)], rtol=1e-7)
        (event_file,) = tmp_path.glob("*tfevents*")
        assert read_trace(str(event_file), column="lr/head") == groups["lr/head"]
        with pytest.raises(ScheduleError, match=r"read_trace: column must be one of the scalar tags"):
            read_trace(str(tmp_path))
        with pytest.raises(ScheduleError, match=r"read_trace: column must be one of the scalar tags .*got 'lr'"):
            read_trace(str(tmp_path), column="lr")

    def test_without_tensorboard_the_message_says_what_to_install(self, tmp_path, monkeypatch):
        (tmp_path / "events.out.tfevents.1.host").write_bytes(b"")
        for name in [m for m in sys.modules if m.split(".")[0] == "tensorboard"] + ["tensorboard"]:
            monkeypatch.setitem(sys.modules, name, None)  # as if it were not installed
        with pytest.raises(ScheduleError, match=r"pip install 'schedwidget\[tensorboard\]'"):
            read_trace(str(tmp_path))

    def test_a_folder_without_event_files(self, tmp_path):
        pytest.importorskip("tensorboard")
        with pytest.raises(ScheduleError, match=r"no file with 'tfevents' in its name was found"):
            read_trace(str(tmp_path))

    def test_event_files_are_capped_in_size(self, tmp_path, monkeypatch):
        pytest.importorskip("tensorboard")
        (tmp_path / "events.out.tfevents.1.host").write_bytes(b"x" * 100)
        monkeypatch.setattr(trace_mod, "MAX_EVENT_BYTES", 50)
        with pytest.raises(ScheduleError, match=r"event files of at most 50 bytes in all"):
            read_trace(str(tmp_path))


class TestBounds:
    @pytest.mark.parametrize("source, match", [
        ([], r"source must be a non-empty list or array of rates, \(tick, rate\) pairs, .*, got \[\]"),
        ([0.1, float("nan")], r"rates\[1\] must be a finite rate >= 0, got nan"),
        ([0.1, -1.0], r"rates\[1\] must be a finite rate >= 0, got -1.0"),
        ([(0, 0.1), (0, 0.2)], r"ticks\[1\] must be a tick > ticks\[0\] = 0, got 0"),
        ([(0, 0.1), (1.5, 0.2)], r"ticks\[1\] must be a whole number of ticks in \[0, 2\*\*53\], got 1.5"),
        ([(-1, 0.1)], r"ticks\[0\] must be a whole number of ticks in \[0, 2\*\*53\], got -1.0"),
        ([(0, 0.1), (1, 0.2, 3)], r"source\[1\] must be a \(tick, rate\) pair"),
        (np.zeros((2, 3)), r"source must be a 1-D array of rates or an \(n, 2\) array"),
        ("x", r"source must be an existing CSV file"),
        ({"a": 1}, r"source must be a non-empty list or array of rates.*got 'a dict'"),
        (["a"], r"source\[0\] must be a number, got 'a'"),
    ])
    def test_bad_traces_name_the_parameter_and_the_range(self, source, match):
        with pytest.raises(ScheduleError, match=match):
            read_trace(source)

    @pytest.mark.parametrize("every", [0, -1, 1.5, True, 2 ** 60])
    def test_every_is_a_whole_number_of_ticks(self, every):
        with pytest.raises(ScheduleError, match=r"read_trace: every must be a whole number of ticks in \[1, 2\*\*53\]"):
            read_trace([0.1], every=every)

    def test_a_column_for_a_list_is_refused(self):
        with pytest.raises(ScheduleError, match=r"read_trace: column must be None for a list or an array"):
            read_trace([0.1], column="lr")

    def test_the_number_of_points_is_capped(self, monkeypatch):
        monkeypatch.setattr(trace_mod, "MAX_TRACE_POINTS", 10)
        with pytest.raises(ScheduleError, match=r"rates must be at most 10 points, got '11 points'"):
            read_trace([0.1] * 11)
        assert len(read_trace([0.1] * 10)) == 10


def test_reading_traces_imports_neither_pandas_nor_tensorboard():
    """The core reads pandas objects by duck typing and TensorBoard only when asked (fresh interpreter)."""
    code = ("import schedwidget.trace as T, schedwidget.run_check, schedwidget.recovery, sys, json\n"
            "T.read_trace(b'step,lr\\n0,0.1\\n')\n"
            "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules} & {'pandas', 'tensorboard', 'torch'})))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout.strip().splitlines()[-1]) == []


def test_a_wide_folder_is_refused_not_walked(tmp_path, monkeypatch):
    """A folder is searched for event files only up to MAX_FOLDER_ENTRIES entries: recover(Path('/')) walked the
    whole file system (found by the fuzz suite as a call over its 1 s CPU limit)."""
    pytest.importorskip("tensorboard")
    monkeypatch.setattr(trace_mod, "MAX_FOLDER_ENTRIES", 5)
    for i in range(3):
        sub = tmp_path / f"run{i}"
        sub.mkdir()
        for j in range(2):
            (sub / f"note{j}.txt").write_text("x")
    with pytest.raises(ScheduleError, match="at most 5 files and folders"):
        read_trace(tmp_path)


@pytest.mark.parametrize("call", [
    lambda: __import__("schedwidget").read_range_test([0.857] * 21, onset=10 ** 400),
    lambda: __import__("schedwidget").sweep_rates(-(10 ** 400), 1.0, 10),
    lambda: __import__("schedwidget").run_range_test(None, None, None, None, stop_above=10 ** 400),
])
def test_huge_integers_are_refused_by_name(call):
    """A 400-digit int where a number is asked gets a ScheduleError, not float()'s OverflowError (fuzz finding)."""
    with pytest.raises(ScheduleError):
        call()
