"""The logs panel, headless: check a run, recover its design, read a range test, adopt, refuse bad files, close."""

from __future__ import annotations

import datetime
import warnings

import numpy as np
import pytest
from ipywidgets.widgets.widget import _instances  # ipywidgets' registry of open widgets

import schedwidget as sw
from schedwidget.run_check import check_run
from schedwidget.range_test import read_range_test
from schedwidget.recovery import recover
from schedwidget.trace import read_trace
from schedwidget.widget.logs import MAX_DRAWN, DesignerLogs, LogsPanel, envelope

STEPS_PER_EPOCH = 20
#: 40 updates of warmup, then a cosine over 200: 12 epochs of 20 updates.
DESIGN = sw.warmup(sw.cosine(0.1, 0.001, steps=200), 40)
TICKS = np.arange(240)
#: The rate a loop logs when it steps its scheduler once per epoch while the design counts updates (a stand-in
#: for the torch loop of tests/test_check_run.py: the scheduler's tick is the epoch count).
PER_EPOCH = DESIGN(TICKS // STEPS_PER_EPOCH)


def range_log(n: int = 300, noise: float = 0.0, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """A synthetic range test: a loss that falls around 1e-2 and blows up past 0.5 (invented)."""
    rates = np.geomspace(1e-6, 3.0, n)
    x = np.log10(rates)
    loss = 1.79 - 1.35 / (1 + np.exp(-(x + 1.9) / 0.28)) + 0.08 * np.exp(2.6 * (x + 0.3))
    return rates, loss + np.random.default_rng(seed).normal(0.0, noise, n)


def upload(content: bytes, name: str = "log.csv") -> tuple[dict, ...]:
    """A FileUpload value as the front end sends it."""
    return ({"name": name, "type": "text/csv", "size": len(content), "content": memoryview(content),
             "last_modified": datetime.datetime(2024, 1, 1)},)


class TestCheckARun:
    """A trace picked from the variables is checked against the design and drawn over it."""

    def test_per_epoch_mistake(self):
        """The verdict is check_run's, its fault code and sentence are on screen, the departure is marked."""
        p = LogsPanel(DESIGN, traces={"per epoch": PER_EPOCH})
        expected = check_run(DESIGN, PER_EPOCH)
        assert p.verdict == expected and p.verdict.fault == "per_epoch" and p.verdict.first_tick == 1
        text = p.verdict_text.value
        assert "<b>per_epoch</b>" in text and "stepped once per epoch of 20 updates" in text
        assert "departs from the design at tick 1" in text
        assert p.departure.visible and p.departure_line.visible
        assert p.departure.x.tolist() == [1.0] and p.departure.y.tolist() == [expected.logged]
        assert np.ravel(p.departure_line.x).tolist() == [1.0, 1.0]
        assert p.logged_line.y.tolist() == PER_EPOCH.tolist()  # short traces are drawn point by point
        assert p.design_line.visible and float(p.design_line.y.max()) == pytest.approx(0.1)
        assert "departs at tick 1" in p.legend.value
        assert p.error == "" and p.trace_message.value == ""

    def test_a_matching_run(self):
        """The design's own rates match: no departure drawn, the word 'matches' on screen."""
        p = LogsPanel(DESIGN, traces={"as designed": DESIGN(TICKS)})
        assert p.verdict.matches and "<b>matches</b>" in p.verdict_text.value
        assert not p.departure.visible and not p.departure_line.visible

    def test_a_new_design_checks_again(self):
        """Assigning ``design`` (what the designer will do) checks the same trace again."""
        p = LogsPanel(DESIGN, traces=DESIGN(TICKS) * 2)
        assert p.verdict.fault == "scaled"
        p.design = DESIGN * 2.0
        assert p.verdict.matches

    def test_no_design(self):
        """Without a design the trace is only recovered, and the recovered design is drawn."""
        p = LogsPanel(None, traces=DESIGN(TICKS))
        assert p.verdict is None and "No design to check" in p.verdict_text.value
        assert p.recovery is None and not p.design_line.visible
        p.recover_button.click()
        assert p.recovery == recover(DESIGN(TICKS)) and p.design_line.visible
        assert "the recovered design" in p.legend.value

    def test_steps_per_epoch_is_passed_on(self):
        """A given epoch length reaches check_run (the evidence names it)."""
        p = LogsPanel(DESIGN, traces=PER_EPOCH, steps_per_epoch=STEPS_PER_EPOCH)
        assert p.verdict == check_run(DESIGN, PER_EPOCH, steps_per_epoch=STEPS_PER_EPOCH)

    def test_a_dataframe_and_a_trace(self):
        """A DataFrame with a tick column (logged every 4 updates) and a Trace are picked by name."""
        pd = pytest.importorskip("pandas")
        frame = pd.DataFrame({"global_step": TICKS[::4], "lr": PER_EPOCH[::4], "loss": 0.5})
        p = LogsPanel(DESIGN, traces={"frame": frame, "trace": read_trace(DESIGN(TICKS))})
        assert p.trace == read_trace(frame) and p.verdict.fault == "per_epoch" and p.verdict.first_tick == 4
        p.pick.value = "trace"
        assert p.verdict.matches and "logged: trace" in p.legend.value

    def test_long_traces_are_drawn_bounded(self):
        """A trace of 103,500 points is drawn from at most MAX_DRAWN points that keep its lowest and highest."""
        d = sw.warmup(sw.cosine(0.1, 0.0, steps=97_750), 5_750)
        rates = d(np.arange(103_500) // 1_150)
        p = LogsPanel(d, traces=rates)
        assert p.verdict.fault == "per_epoch" and p.verdict.evidence["steps_per_epoch"] == 1_150
        assert p.logged_line.x.size <= MAX_DRAWN
        assert p.logged_line.y.max() == rates.max() and p.logged_line.y.min() == rates.min()


class TestAdopt:
    """The two buttons set ``adopted`` and call ``on_adopt`` with recover()'s design and the range test's."""

    def test_use_the_recovered_design(self):
        """Pressing the button adopts exactly what recover() finds for the trace."""
        got = []
        old = sw.warmup(sw.restarts(sw.cosine(0.1, 0.001, steps=60), cycles=3, growth=2.0), 20)
        trace = old(np.arange(old.length))
        p = LogsPanel(DESIGN, traces={"old run": trace}, on_adopt=got.append)
        assert p.adopted is None and p.use_recovered.disabled and p.recovery is None
        p.recover_button.click()
        assert not p.use_recovered.disabled
        p.use_recovered.click()
        assert p.adopted == recover(trace).design == old
        assert got == [old]
        assert "a design of 3 node(s)" in p.recovery_text.value
        p.pick.value = "none"
        p.use_trace(PER_EPOCH, "another run")  # a new trace: its design is not recovered yet
        assert p.recovery is None and p.use_recovered.disabled and p.adopted == old

    def test_use_the_suggested_peak(self):
        """The published and the common-practice readings each give the reading's own starting design."""
        rates, loss = range_log()
        reading = read_range_test(rates, loss)
        p = LogsPanel(DESIGN, range_logs={"sweep": (rates, loss)})
        assert p.steps_box.value == DESIGN.length == 240
        p.use_peak.click()
        assert p.adopted == reading.design(240) and p.adopted.peak == reading.peak
        p.reading_choice.value = "common practice"
        p.shape_choice.value = "warmup + cosine"
        p.steps_box.value = 1_000
        p.use_peak.click()
        assert p.adopted == reading.design(1_000, "common", "cosine")
        assert "published reading (Smith 2017, sec. 3.3)" in p.reading_text.value
        assert "common practice, no source" in p.reading_text.value
        assert p.loss_smooth.visible and p.marks_at.x.shape == (3, 2)  # low, peak, common peak

    def test_a_failing_callback_is_words(self):
        """A callback that raises does not reach the notebook; the design is still adopted."""
        def fails(_s):
            raise RuntimeError("boom")
        p = LogsPanel(DESIGN, traces=PER_EPOCH, on_adopt=fails)
        p.recover_button.click()
        p.use_recovered.click()
        assert p.adopted == p.recovery.design
        assert "RuntimeError: boom" in p.trace_message.value


class TestFiles:
    """Uploads are read by the core's readers; bad ones leave a message and the last reading."""

    def test_upload_a_csv_trace(self):
        """A CSV logged every 5 updates is read and checked."""
        t = TICKS[::5]
        content = ("step,lr\n" + "".join(f"{a},{b!r}\n" for a, b in zip(t.tolist(), PER_EPOCH[::5].tolist()))).encode()
        p = LogsPanel(DESIGN)
        p.upload.value = upload(content, "run7.csv")
        assert p.trace == read_trace(content) and p.verdict.fault == "per_epoch"
        assert "logged: run7.csv" in p.legend.value

    def test_upload_a_tensorboard_event_file(self, torch, tmp_path):
        """An event file written by torch's SummaryWriter, uploaded as bytes, is read by tensorboard's reader."""
        pytest.importorskip("tensorboard")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)  # tensorboard's own imports, not ours
            from torch.utils.tensorboard import SummaryWriter
        writer = SummaryWriter(str(tmp_path))
        for t, lr in enumerate(PER_EPOCH.tolist()):
            writer.add_scalar("train/lr", lr, t)
        writer.close()
        (path,) = tmp_path.glob("*tfevents*")
        p = LogsPanel(DESIGN)
        assert "event file" in p.upload.description and p.upload.accept == ""
        p.upload.value = upload(path.read_bytes(), path.name)
        assert p.error == "" and p.verdict.fault == "per_epoch" and len(p.trace) == PER_EPOCH.size
        assert np.allclose(p.trace.rates, PER_EPOCH.astype(np.float32), rtol=0, atol=0)  # float32 in the file

    def test_a_bad_csv_shows_the_error(self):
        """A cell that is not a number: read_trace's message on screen, the last verdict kept."""
        p = LogsPanel(DESIGN, traces=PER_EPOCH)
        before = p.verdict
        p.upload.value = upload(b"step,lr\n0,0.1\n1,oops\n", "bad.csv")
        assert "read_trace: &#x27;lr&#x27; at line 3 of the uploaded file must be a number, got &#x27;oops&#x27;" \
            in p.trace_message.value
        assert p.error.startswith("read_trace: 'lr' at line 3") and "Traceback" not in p.error
        assert p.verdict == before

    def test_a_bad_range_log_shows_the_error(self):
        """A range-test file with one row: the core's message on the range test's line."""
        p = LogsPanel(DESIGN)
        p.range_upload.value = upload(b"lr,loss\n0.001,2.3\n")
        assert p.range_message.value != "" and p.error.startswith("read_range_test") and p.reading is None
        assert p.use_peak.disabled

    def test_a_bad_step_count_shows_the_error(self):
        """A starting design of 0 steps is refused in words; the button is off until it is fixed."""
        rates, loss = range_log()
        p = LogsPanel(DESIGN, range_logs=(rates, loss))
        p.steps_box.value = 0
        assert "steps" in p.error and p.use_peak.disabled
        p.steps_box.value = 500
        assert p.error == "" and not p.use_peak.disabled

    def test_bad_arguments(self):
        """The constructor refuses a design that is not a Schedule and a reserved name."""
        with pytest.raises(sw.ScheduleError, match="LogsPanel: design must be a Schedule or None"):
            LogsPanel(design=[0.1])
        with pytest.raises(sw.ScheduleError, match="LogsPanel: names must be a non-empty name other than 'none'"):
            LogsPanel(DESIGN, traces={"none": PER_EPOCH})


class TestClose:
    """Closing the panel leaves no open widget behind (figures, marks, axes and scales included)."""

    def test_close_leaves_no_widgets(self):
        """The count of open widgets is back where it was, after use, an error and both adoptions."""
        before = len(_instances)
        rates, loss = range_log()
        p = LogsPanel(DESIGN, traces={"a": PER_EPOCH, "b": DESIGN(TICKS)}, range_logs=(rates, loss))
        p.pick.value = "b"
        p.rate_axis.value = "log"
        p.upload.value = upload(b"step,lr\n0,0.1\n1,oops\n", "bad.csv")
        p.recover_button.click()
        p.use_recovered.click()
        p.use_peak.click()
        assert len(_instances) > before + 50
        p.close()
        assert len(_instances) == before


class TestInTheDesigner:
    """DesignerLogs: the panel as a designer tab reads the designer's design and proposes what it adopts."""

    def test_follows_and_adopts(self):
        """A new design is checked again; the recovered design and the suggested peak become the designer's."""
        d = sw.ScheduleDesigner()  # the demo: 90 epochs of 1,150 steps
        rates, loss = range_log()
        p = DesignerLogs(d, range_logs=(rates, loss))
        t = np.arange(d.steps)
        p.use_trace(d.schedule(t // 1_150), "per epoch")
        assert p.verdict.fault == "per_epoch" and p.steps_per_epoch == 1_150 and p.steps_box.value == 103_500
        other = sw.warmup(sw.cosine(0.05, 0.0, steps=97_750), 5_750)
        d.schedule = other
        assert p.design == other and p.verdict.fault == "other"
        p.use_trace(other(t), "as designed")
        assert p.verdict.matches
        p.recover_button.click()
        p.use_recovered.click()
        assert d.schedule == p.recovery.design == other and d.error == ""
        p.use_peak.click()
        assert d.schedule == read_range_test(rates, loss).design(103_500) and d.error == ""

    def test_hidden_tab_waits_and_close_stops(self):
        """In a hidden tab it reads the design only when shown; closed, it no longer follows and leaves nothing."""
        d = sw.ScheduleDesigner(sw.cosine(0.1, steps=100))
        before = len(_instances)
        p = DesignerLogs(d, tab=4)  # as if in the Numbers pane: hidden while Compare (0) is shown
        assert p.design == d.schedule
        d.schedule = sw.cosine(0.2, steps=100)
        assert p.stale and p.design == sw.cosine(0.1, steps=100)
        d.tabs.selected_index = 4
        assert not p.stale and p.design == sw.cosine(0.2, steps=100)
        d.tabs.selected_index = 0
        p.close()
        assert len(_instances) == before
        d.tabs.selected_index = 4
        d.schedule = sw.cosine(0.3, steps=100)
        assert p.design == sw.cosine(0.2, steps=100) and d.error == ""


def test_envelope_keeps_order_and_extremes():
    """The envelope of a long series keeps each bin's lowest and highest point, in tick order."""
    x = np.arange(100_000, dtype=float)
    y = np.sin(x / 777.0) + (x == 54_321) * 5.0
    ex, ey = envelope(x, y, most=1_000)
    assert ex.size <= 1_000 and np.all(np.diff(ex) >= 0)
    assert ey.max() == y.max() and ey.min() == y.min() and 54_321.0 in ex.tolist()
