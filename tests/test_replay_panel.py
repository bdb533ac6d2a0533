"""Replay and rescale panels, headless: set controls through their traits, read marks, tables and messages."""

from __future__ import annotations

import datetime
import html
import math

import numpy as np
import pytest
from traitlets import HasTraits, Instance, Int, Unicode, observe

from schedwidget import Schedule, cosine, flat, warmup
from schedwidget.budget import Budget, scale_for_batch
from schedwidget.metrics import demo_path, read_metric
from schedwidget.plateau import replay_plateau
from schedwidget.sample import trace
from schedwidget.widget.replay import NUM, ReplayPanel, epoch_base, step_line
from schedwidget.widget.rescale import RescalePanel


class Stand(HasTraits):
    """The designer's traits that the panels read and write, and its ``revision`` they observe."""

    schedule = Instance(Schedule)
    unit = Unicode("epoch")
    steps = Int(90)
    steps_per_epoch = Int(None, allow_none=True)
    batch = Int(None, allow_none=True)
    error = Unicode("")
    revision = Int(0)

    @observe("schedule", "unit", "steps", "steps_per_epoch", "batch")
    def _bump(self, _change):
        self.revision += 1

    def guarded(self, fn):
        return fn


def epoch_design(s: Schedule | None = None) -> Stand:
    return Stand(schedule=s or warmup(flat(0.1), 5), unit="epoch", steps=90)


def step_design(spe: int = 1150, batch: int = 128, epochs: int = 90, warm: int = 5) -> Stand:
    s = warmup(cosine(0.1, steps=(epochs - warm) * spe), warm * spe)
    return Stand(schedule=s, unit="step", steps=s.length, steps_per_epoch=spe, batch=batch)


def classes(w) -> list[str]:
    return list(w._dom_classes)


def said(panel) -> str:
    """The panel's message line as plain text."""
    return html.unescape(panel.message.value)


class TestStepLine:
    """step_line draws each epoch's rate over [i, i + 1]."""

    def test_vertical_edges(self):
        """A change of rate is a vertical edge at the epoch where it starts."""
        x, y = step_line(np.array([0.1, 0.1, 0.01]), 0.001)
        assert x.tolist() == [0, 1, 1, 2, 2, 3, 3]
        assert y.tolist() == [0.1, 0.1, 0.1, 0.1, 0.01, 0.01, 0.001]


class TestReplayPanel:
    """ReplayPanel shows the replay of the loaded history under the rule set in its controls."""

    def test_starts_on_demo_a(self):
        """The first demo history is replayed with the rule's defaults and the opening lowest rate (1e-3 x the
        start rate: at most three drops by 10x, common practice, no source), and drawn."""
        p = ReplayPanel(epoch_design())
        values = read_metric(demo_path("a"))
        ref = replay_plateau(values, 0.1, floor=1e-4)
        assert p.rule["floor"] == 1e-4 and len(ref.drops) == 3 and min(ref.rates[5:]) == pytest.approx(1e-4)
        x, y = step_line(ref.rates, ref.next_rate)
        assert np.array_equal(p.rate_line.x, x) and np.array_equal(p.rate_line.y, y)
        assert np.array_equal(p.metric_line.y, values)
        assert p.metric_line.x.tolist() == list(range(1, 91))  # each metric is read at the end of its epoch
        assert p.drop_marks.x.tolist() == list(ref.drop_epochs)
        assert p.message.value == ""
        assert "90 evaluations" in p.status.value

    def test_controls_change_the_rule(self):
        """Patience, factor and goal set through the controls reach the replay, the markers and the table."""
        p = ReplayPanel(epoch_design())
        values = read_metric(demo_path("a"))
        p.controls["patience"].text.value = 6
        p.controls["factor"].text.value = 0.5
        ref = replay_plateau(values, 0.1, patience=6, factor=0.5)
        assert p.replay.drop_epochs == ref.drop_epochs
        assert p.drop_marks.x.tolist() == list(ref.drop_epochs)
        np.testing.assert_array_equal(p.drop_marks.y, [ref.rates[e] if e < 90 else ref.next_rate
                                                       for e in ref.drop_epochs])
        assert p.table.value.count("<tr>") == len(ref.drops) + 1
        assert f"<td {NUM}>{ref.drop_epochs[0]}</td>" in p.table.value

    def test_what_if_strip(self):
        """The what-if strip lists the drop epochs of patience 1..8, each an independent replay."""
        p = ReplayPanel(epoch_design())
        p.controls["wait_after_drop"].text.value = 2
        values = read_metric(demo_path("a"))
        lines = p.what_if_text().splitlines()
        assert len(lines) == 8
        for k, line in enumerate(lines, start=1):
            epochs = replay_plateau(values, 0.1, patience=k, wait_after_drop=2, floor=1e-4).drop_epochs
            words = [str(e) if e < 90 else f"{e} (after the run)" for e in epochs]  # 90 evaluations
            assert line == f"patience {k}: " + (", ".join(words) or "none")
        assert f"<td {NUM}><b>3</b></td>" in p.whatif.value  # the current patience is the bold row

    def test_path_and_column(self, tmp_path):
        """A CSV path and a column name load that history."""
        f = tmp_path / "run.csv"
        f.write_text("epoch,loss,acc\n0,2.0,0.5\n1,1.9,0.5\n2,1.95,0.5\n3,1.97,0.5\n", encoding="utf-8")
        p = ReplayPanel(epoch_design())
        p.column.value = "acc"  # demo a has no column 'acc': a message, and the demo stays
        assert "column must be one of 'epoch', 'val_acc', got 'acc'" in said(p)
        p.path.value = str(f)
        assert p.values.tolist() == [0.5, 0.5, 0.5, 0.5] and p.message.value == ""
        p.controls["patience"].text.value = 1
        assert p.replay.drop_epochs == (3,)
        p.controls["goal"].text.value = "min"
        p.column.value = "loss"
        assert p.values.tolist() == [2.0, 1.9, 1.95, 1.97]
        assert p.replay.drop_epochs == (4,)  # 1.95 and 1.97 do not beat 1.9: count 2 > 1 at evaluation 3

    def test_upload(self):
        """An uploaded CSV (FileUpload value) is read."""
        p = ReplayPanel(epoch_design())
        content = b"# invented\nepoch,val_acc\n0,0.3\n1,0.4\n2,0.4\n"
        p.upload.value = ({"name": "up.csv", "type": "text/csv", "size": len(content),
                           "content": memoryview(content), "last_modified": datetime.datetime(2024, 1, 1)},)
        assert p.values.tolist() == [0.3, 0.4, 0.4]
        assert p.source_name == "up.csv"

    def test_errors_keep_the_last_picture(self, tmp_path):
        """A bad file or a bad rule value shows a message and leaves the marks as they were."""
        p = ReplayPanel(epoch_design())
        x0, y0 = p.rate_line.x.copy(), p.rate_line.y.copy()
        p.path.value = str(tmp_path / "missing.csv")
        assert "read_metric: source must be an existing CSV file" in said(p)
        p.controls["factor"].text.value = 1.5
        assert "replay_plateau: factor must be a finite number in (0, 1), got 1.5" in said(p)
        assert np.array_equal(p.rate_line.x, x0) and np.array_equal(p.rate_line.y, y0)
        bad = tmp_path / "bad.csv"
        bad.write_text("epoch,val_acc\n0,0.5\n1,oops\n", encoding="utf-8")
        p.controls["factor"].text.value = 0.1
        p.path.value = str(bad)
        assert "'val_acc' at line 3 of " in said(p) and "got 'oops'" in said(p)

    def test_follows_a_warmup(self):
        """Following a warmup design: warmup rates first, then the plateau rule's."""
        d = epoch_design(warmup(flat(0.1), 5))
        p = ReplayPanel(d)
        p.follow.value = True
        assert p.start.disabled
        values = read_metric(demo_path("a"))
        ref = replay_plateau(values, None, base=d.schedule, floor=1e-4)
        assert p.replay.rates[:5].tolist() == d.schedule(np.arange(5)).tolist()
        assert np.array_equal(p.replay.rates, ref.rates)
        d.schedule = warmup(flat(0.2), 10)  # the panel follows the design
        assert p.replay.rates[:10].tolist() == d.schedule(np.arange(10)).tolist()
        assert p.replay.rates[10] == 0.2

    def test_follows_a_design_in_steps(self):
        """A design in steps is read at the first step of each epoch."""
        d = step_design()
        p = ReplayPanel(d)
        p.follow.value = True
        assert p.replay.lead_in == 5
        np.testing.assert_array_equal(p.replay.rates[:5], d.schedule(np.arange(5) * 1150))
        d.steps_per_epoch = None
        assert "replay: steps_per_epoch must be a whole number >= 1 to follow a design in steps" in said(p)

    def test_epoch_base_needs_whole_epochs(self):
        """A design in steps that does not fill whole epochs cannot be followed."""
        with pytest.raises(Exception, match=r"design length must be a whole number of epochs"):
            epoch_base(cosine(0.1, steps=1000), "step", 300)

    def test_dom_hooks(self):
        """The panel, its path box and its message line carry their classes."""
        p = ReplayPanel(epoch_design())
        assert "sw-replay" in classes(p)
        assert "sw-replay-path" in classes(p.path)
        assert "sw-replay-error" in classes(p.message)
        assert p.rate_line.get_state()["colors"] == ["#0f766e"]


class TestReplayReading:
    """The replay panel says what its numbers mean: echoes, counterfactual drops, tiny rates, the rate axis."""

    def test_set_from_code_moves_the_slider(self):
        """A value typed into the box is shown by the slider too."""
        p = ReplayPanel(epoch_design())
        p.controls["factor"].text.value = 0.5
        assert p.controls["factor"].slider.value == 0.5 and p.rule["factor"] == 0.5

    def test_slider_echo_keeps_the_rule(self):
        """A slider snapped to a neighbour of the typed factor (less than a step away) leaves the rule."""
        p = ReplayPanel(epoch_design())
        p.controls["factor"].text.value = 0.1003
        before = p.replay.drop_epochs
        p.controls["factor"].slider.set_state({"value": 0.1002})  # the snapped value a browser sent back
        assert p.rule["factor"] == 0.1003 and p.controls["factor"].text.value == 0.1003
        assert p.replay.drop_epochs == before

    def test_counterfactual_note_and_indicative_drops(self):
        """The note says replays are counterfactual; drops after the first are marked indicative."""
        p = ReplayPanel(epoch_design())
        assert "counterfactual" in p.note.value and "indicative only" in p.note.value
        assert len(p.replay.drops) >= 2
        assert p.table.value.count("indicative") == len(p.replay.drops) - 1
        assert "faithful if the logged run used this rate up to here" in p.table.value

    def test_tiny_rate_caution_and_what_if_title(self):
        """Floor 0 and many drops: an amber caution; the what-if strip names the history and the floor."""
        p = ReplayPanel(epoch_design())
        p.controls["floor"].text.value = 0.0
        p.controls["patience"].text.value = 1
        assert min(p.replay.rates) < 1e-6 * 0.1  # demo a at patience 1 drops often enough
        # the panel's own words and number format (issue 13): "lowest rate", not "floor"; 1e-5, not 1e-05
        assert "below a millionth of the start rate 0.1" in html.unescape(p.caution.value)
        assert "history demo a" in p.whatif.value and "lowest rate 0," in p.whatif.value
        p.controls["floor"].text.value = 1e-5
        assert p.caution.value == ""
        assert "lowest rate 1e-5," in p.whatif.value

    def test_drop_after_the_run_is_not_counted(self):
        """A drop from epoch >= the history's length is marked and not counted."""
        f = [0.5, 0.6, 0.6, 0.6]  # invented: no improvement after epoch 1
        p = ReplayPanel(epoch_design())
        p.values, p.source_name = np.array(f), "invented"
        p.controls["patience"].text.value = 1
        assert p.replay.drop_epochs == (4,)
        assert "patience 1: 4 (after the run)" in p.what_if_text()
        assert "0 drops (+1 after the run)" in p.status.value

    def test_rate_axis_toggle(self):
        """The rate axis starts logarithmic and can be linear; the x axis starts at 0 with whole epochs."""
        p = ReplayPanel(epoch_design())
        assert p.rate_axis.value == "log" and p.rate_line.scales["y"] is p.ys_log
        p.rate_axis.value = "linear"
        assert p.rate_line.scales["y"] is p.ys_linear and p.y_axis.scale is p.ys_linear
        assert p.xs.min == 0 and p.xs.max == 90
        assert p.x_axis.tick_values.tolist() == list(range(0, 91, 10))


class TestRescalePanel:
    """RescalePanel overlays the design and its rescaled version and applies it to the designer."""

    def goyal(self) -> Stand:
        # invented round numbers near ImageNet's: 5,000 steps per epoch at batch 256, a 5-epoch warmup to 0.1,
        # then a flat rate, so that the drawn peak is the scaled rate itself
        s = warmup(flat(0.1, steps=85 * 5000), 5 * 5000)
        return Stand(schedule=s, unit="step", steps=s.length, steps_per_epoch=5000, batch=256)

    @pytest.mark.parametrize("batch, processes, peak", [(1024, 1, 0.4), (1024, 8, 3.2)])
    def test_goyal_linear_rule(self, batch, processes, peak):
        """0.1 at batch 256 gives 0.4 at 1,024 and 3.2 at 8,192; the warmup stays 5 epochs of samples."""
        d = self.goyal()
        p = RescalePanel(d)
        p.batch.value, p.processes.value = batch, processes
        new = p.result.new
        # Goyal et al. 2017, section 2.1: linear scaling rule, 0.1 per 256 samples
        assert float(np.max(p.new_line.y)) == pytest.approx(peak, rel=1e-12)
        assert new(new.length - 1) == pytest.approx(peak, rel=1e-12)
        assert f">{peak:.4g}</td>" in p.summary.value
        # Goyal et al. 2017, section 2.2: gradual warmup over 5 epochs; the new budget is whole epochs
        spe = 5000 * 256 // (batch * processes)  # the incomplete last global batch is dropped
        join = trace(new, p.result.new_steps).joins[0]
        assert join == 5 * spe and p.result.new_steps == 90 * spe and p.result.new_spe == spe
        assert f"90 epochs x {spe:,} steps per epoch = {90 * spe:,} steps" in html.unescape(p.summary.value)

    def test_curves_and_x_axis(self):
        """Old and new curves are drawn in samples or in steps."""
        d = self.goyal()
        p = RescalePanel(d)
        p.batch.value = 1024
        old, new = trace(d.schedule, d.steps), trace(p.result.new, p.result.new_steps)
        np.testing.assert_array_equal(p.old_line.x, old.x * 256)
        np.testing.assert_array_equal(p.new_line.x, new.x * 1024)
        p.x_axis.value = "steps"
        np.testing.assert_array_equal(p.new_line.x, new.x)
        assert p.x_label.label == "optimizer step"
        assert p.result.new_steps == round(d.steps * 256 / 1024)

    def test_sqrt_rule_and_keep_steps(self):
        """The square-root rule doubles the rate for four times the batch; keep steps leaves the clock."""
        d = self.goyal()
        p = RescalePanel(d)
        p.batch.value = 1024
        p.rule.value = "sqrt"
        p.keep.value = "steps"
        assert p.result.new_steps == d.steps
        assert float(np.max(p.new_line.y)) == pytest.approx(0.2, rel=1e-12)  # 0.1 * sqrt(4), from memory

    def test_apply(self):
        """Apply sets the designer's schedule, batch, budget and steps per epoch."""
        d = step_design()
        p = RescalePanel(d)
        p.batch.value = 1024
        p.apply_button.click()
        steps = Budget(samples=1150 * 128, batch=1024, epochs=90).steps
        assert d.schedule == scale_for_batch(warmup(cosine(0.1, steps=85 * 1150), 5 * 1150), 128, 1024, steps=steps)
        assert (d.batch, d.steps) == (1024, d.schedule.length) == (1024, 90 * 143)
        assert d.steps_per_epoch == math.floor(1150 * 128 / 1024)  # the incomplete last batch is dropped
        assert p.from_batch.value == 1024
        assert "applied: global batch 1,024" in said(p)

    def test_bad_input_keeps_the_curves(self):
        """A batch of 0 shows a message and leaves the curves."""
        p = RescalePanel(step_design())
        x0 = p.new_line.x.copy()
        p.batch.value = 0
        assert "rescale: new batch must be a whole number >= 1, got 0" in said(p)
        np.testing.assert_array_equal(p.new_line.x, x0)

    def test_epoch_design(self):
        """A design in epochs keeps its epochs and scales its rates, with a note."""
        d = epoch_design(warmup(cosine(0.1, steps=85), 5))
        d.batch = 128
        p = RescalePanel(d)
        p.batch.value = 512
        assert p.result.new_steps == 90
        assert float(np.max(p.new_line.y)) == pytest.approx(0.4)
        assert "an epoch clock already counts samples" in said(p)

    def test_open_ended_design(self):
        """An open-ended design in steps cannot keep samples, but can keep steps."""
        d = Stand(schedule=warmup(flat(0.1), 100), unit="step", steps=1000, batch=128)
        p = RescalePanel(d)
        assert "rescale: design length must be a length to rescale the clock in samples" in said(p)
        p.keep.value = "steps"
        assert float(np.max(p.new_line.y)) == pytest.approx(0.1 * 8)

    def test_unknown_batch_is_asked_for(self):
        """With no batch on the designer nothing is assumed: the message asks for the current batch."""
        d = step_design()
        d.batch = None
        p = RescalePanel(d)
        assert p.from_batch.value == 0 and "type it in 'batch now'" in said(p)
        p.from_batch.value = 128
        assert p.result is not None and p.result.new_steps == 90 * 143

    def test_dom_hook(self):
        """The panel carries its class."""
        assert "sw-rescale" in classes(RescalePanel(step_design()))


def mounted(d, title: str):
    """The panel of the designer's tab ``title`` (the designer starts a panel when its tab is first opened)."""
    i = list(d.tabs.titles).index(title)
    d.tabs.selected_index = i
    return d.tabs.children[i].children[0]


class TestMountedInDesigner:
    """The designer mounts both panels in its tabs."""

    def test_mounted(self):
        """ScheduleDesigner() holds a working ReplayPanel and RescalePanel."""
        from schedwidget.widget.designer import ScheduleDesigner

        d = ScheduleDesigner()
        replay, rescale = mounted(d, "Replay"), mounted(d, "Rescale")
        assert isinstance(replay, ReplayPanel) and isinstance(rescale, RescalePanel)
        assert replay.replay is not None and replay.message.value == ""
        rescale.batch.value = 1024
        rescale.apply_button.click()
        assert d.batch == 1024 and d.error == ""
        assert float(np.max(rescale.old_line.y)) == pytest.approx(0.8)

    def test_figures_stay_and_hidden_panes_keep_their_width(self):
        """Figures are never taken out; a hidden pane is zero-high and invisible, never display: none
        (bqplot lays a figure out from its element's size, which is 0 in a display: none tab)."""
        from schedwidget.widget.designer import ScheduleDesigner

        d = ScheduleDesigner()
        replay, rescale = mounted(d, "Replay"), mounted(d, "Rescale")
        d.tabs.selected_index = 0
        assert replay.figure_box.children == (replay.figure,) and rescale.figure_box.children == (rescale.figure,)
        for i in (2, 3):
            layout = d.tabs.children[i].layout
            assert layout.display is None and layout.width is None
            assert (layout.height, layout.visibility) == ("0px", "hidden")


def test_rule_labels_say_what_the_numbers_do():
    """No label is a framework's argument name (issue 13): each says what its number does."""
    p = ReplayPanel(epoch_design())
    shown = {c.slider.description if c.slider is not None else getattr(c.text, "description", "")
             for c in p.controls.values()}
    assert {"multiply rate by", "evaluations to wait", "lowest rate", "pause after a drop"} <= shown
    assert not shown & {"factor", "patience", "mode", "threshold", "cooldown", "min_lr", "floor"}
