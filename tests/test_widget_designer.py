"""ScheduleDesigner, headless: set controls through traits, assert on marks, readout, errors and files."""

from __future__ import annotations

import json

import numpy as np
import pytest

from schedwidget import ScheduleDesigner, ScheduleError, cosine, drops, exp_decay, warmup
from schedwidget.facts import facts
from schedwidget.sample import trace
from schedwidget.widget.designer import READOUT_EXACT, demo_design
from schedwidget.widget.theme import tidy_html


def tick_points(mark):
    """Mark points that are plain samples (not the extra point that draws a jump's vertical edge)."""
    x, y = np.asarray(mark.x, float), np.asarray(mark.y, float)
    repeated = np.zeros(x.size, bool)
    repeated[1:] = x[1:] == x[:-1]
    first_of_pair = np.zeros(x.size, bool)
    first_of_pair[:-1] = repeated[1:]
    keep = ~first_of_pair  # at a jump the second point of the pair is the tick's own value
    return x[keep], y[keep]


class TestScheduleDesignerStart:
    """A new designer starts from the demo scenario and draws it at once."""

    def test_default_is_the_demo_scenario(self):
        """Without a schedule it opens on 90 epochs x 1,150 steps at batch 128, warmup then cosine."""
        d = ScheduleDesigner()
        assert d.schedule == warmup(cosine(0.1, 0.0, steps=85 * 1150), steps=5 * 1150)
        assert (d.steps, d.steps_per_epoch, d.batch, d.unit) == (103_500, 1150, 128, "step")
        assert d.error == "" and d.redraws == 1
        assert "sw-designer" in d._dom_classes

    def test_open_ended_needs_steps(self):
        """An open-ended design without a budget is refused with the core's message form."""
        with pytest.raises(ScheduleError, match=r"ScheduleDesigner: steps must be a whole number >= 1 for an "
                                                r"open-ended design, got None"):
            ScheduleDesigner(exp_decay(0.1, 0.95))

    def test_bad_unit(self):
        """An unknown clock unit names the allowed ones."""
        with pytest.raises(ScheduleError, match=r"unit must be one of 'step', 'epoch', got 'hour'"):
            ScheduleDesigner(cosine(0.1, steps=10), unit="hour")


class TestCurvePanel:
    """The curve's marks hold the core's values at the sampled ticks, with joins and jumps where they are."""

    def test_slider_change_redraws_exact_values(self):
        """Moving the peak slider puts s(t) into the teal curve at every drawn tick."""
        d = ScheduleDesigner(cosine(0.1, steps=1000))
        c = d.control(0, "peak")
        assert "sw-rate" in c.slider._dom_classes
        c.slider.value = 0.25
        assert d.schedule == cosine(0.25, steps=1000)
        x, y = tick_points(d.canvas.curve)
        assert np.array_equal(x, np.arange(1000))
        assert np.allclose(y, d.schedule(x.astype(int)), rtol=0, atol=1e-15)
        assert d.canvas.curve.colors == ["#0f766e"] and d.canvas.curve.stroke_width == 2

    def test_long_budget_points_are_exact_where_not_a_band(self):
        """At 1e9 ticks the curve is a few thousand points, each exactly the core's value."""
        s = warmup(cosine(0.1, steps=10**9 - 10**7), steps=10**7)
        d = ScheduleDesigner(s)
        d.control(0, "peak").text.value = 0.05
        x, y = tick_points(d.canvas.curve)
        assert len(d.canvas.curve.x) <= 2100
        assert np.allclose(y, d.schedule(x.astype(np.int64)), rtol=1e-12, atol=0)

    def test_jump_is_a_vertical_edge(self):
        """A drop at epoch 30 of 90 (x 1,150 steps) is two points at x = 34,500: before and after."""
        s = drops(0.1, at=(30 * 1150, 60 * 1150, 80 * 1150), factor=0.1, steps=90 * 1150)
        d = ScheduleDesigner(s, steps_per_epoch=1150)
        x, y = np.asarray(d.canvas.curve.x), np.asarray(d.canvas.curve.y)
        at = np.flatnonzero(x == 34_500)
        assert len(at) == 2
        assert np.allclose(y[at], [0.1, 0.01])

    def test_join_markers(self):
        """Stage joins are dotted slate lines spanning the plot; one more stage, one more line (the cosine makes
        room for the new stage, so the run keeps its 103,500 steps)."""
        d = ScheduleDesigner()
        j = d.canvas.joins
        assert j.visible and j.line_style == "dotted" and set(j.colors) == {"#64748b"}
        assert np.array_equal(np.atleast_2d(j.x), [[5750, 5750]])
        assert np.array_equal(np.atleast_2d(j.y), [[0.0, 1.0]])
        d.stages.shape.value = "flat"
        d.stages.add.click()
        assert np.array_equal(np.asarray(j.x)[:, 0], [5750, 103_500 - 10_350])
        assert d.schedule.length == d.steps == 103_500

    def test_x_axis_in_epochs(self):
        """The epochs toggle divides the ticks by steps per epoch; the design is unchanged."""
        d = ScheduleDesigner()
        before = d.schedule
        d.canvas.x_choice.value = "epochs"
        tr = trace(d.schedule, d.steps)
        assert np.allclose(d.canvas.curve.x, tr.x / 1150)
        assert np.allclose(np.atleast_2d(d.canvas.joins.x), [[5.0, 5.0]])
        assert d.canvas.x_axis.label == "epoch" and d.schedule == before

    def test_log_rate_axis(self):
        """The log toggle swaps the rate scale (same figure) and puts zeros a decade under the smallest rate."""
        d = ScheduleDesigner()
        fig = d.canvas.figure
        y = trace(d.schedule, d.steps).y
        d.canvas.rate_axis.value = "log"
        assert type(d.canvas.curve.scales["y"]).__name__ == "LogScale"
        assert d.canvas.y_axis.scale is d.canvas.curve.scales["y"]
        assert d.canvas.figure is fig
        # issue 13: the log axis stops five decades under the peak (a cosine to 0 reached 2.6e-11, so the axis
        # spanned eleven decades, most of them empty); a zero sits a decade under the smallest positive rate above it
        assert np.min(d.canvas.curve.y) == pytest.approx(max(float(np.min(y[y > 0])) / 10, 0.1 * 1e-5))
        assert np.min(d.canvas.curve.y) == pytest.approx(1e-6)
        shown = y > 0.1 * 1e-5
        assert np.all(np.isin(d.canvas.curve.y[shown], y[shown]))  # positive rates above the floor: drawn as they are
        ticks = np.log10(d.canvas.y_axis.tick_values)
        assert np.allclose(ticks, np.round(ticks))  # powers of ten
        d.canvas.rate_axis.value = "linear"
        assert np.min(d.canvas.curve.y) == 0.0

    def test_hover_readout(self):
        """Pointing at x reads the exact rate at that step, with the epoch; the reading follows a new design."""
        d = ScheduleDesigner()
        d.canvas.hover_at(5750.4)
        assert d.canvas.hover_label.value == "step 5,750 · epoch 5 · rate 0.1"
        d.control(0, "peak").text.value = 0.2
        assert d.canvas.hover_label.value == "step 5,750 · epoch 5 · rate 0.2"

    def test_hover_band_message(self):
        """A hover message from a band of the plot (what the browser sends, no click) reads that band's step."""
        d = ScheduleDesigner()
        from schedwidget.widget.canvas import HOVER_BANDS
        d.canvas._band_hovered(d.canvas.bands, {"event": "hover", "data": {"index": HOVER_BANDS // 2}})
        x = (HOVER_BANDS // 2 + 0.5) / HOVER_BANDS * 103_499
        assert d.canvas.hover_label.value.startswith(f"step {int(x + 0.5):,} · epoch")
        assert np.allclose(d.canvas.hover_line.x, [[x, x]]) and d.canvas.hover_line.visible

    @pytest.mark.parametrize("n", [10**3, 10**6, 10**9])
    def test_sent_state_is_bounded(self, n):
        """Whatever the budget, the curve mark's state is at most a few tens of kilobytes."""
        d = ScheduleDesigner(warmup(cosine(0.1, steps=n - n // 20), steps=n // 20))
        state = d.canvas.curve.get_state()
        size = sum(np.asarray(state[k]["value"]).nbytes if isinstance(state[k], dict) and "value" in state[k]
                   else len(json.dumps(state[k], default=str)) for k in state)
        assert size < 80_000


class TestReadoutPanel:
    """The readout shows the facts, the boundary table and the sentence; cautions are amber."""

    def test_readout_follows_the_design(self):
        """After a change the readout holds the new peak, where it is, and the facts sentence."""
        d = ScheduleDesigner()
        d.control(0, "peak").text.value = 0.2
        f = facts(d.schedule, 103_500, 1150, "step", 128, exact_up_to=READOUT_EXACT)
        html = d.readout.text.value
        assert "0.2 at step 5,750 (epoch 5)" in html  # one epoch format: 3 decimals at most, no trailing zeros
        assert tidy_html(f.sentence) in html  # the sentence in the widget's one number format (issue 13)
        # the core's boundary labels in plain words (issue 13: no "tick", "join", "budget" on screen)
        assert "stage change 1: first step after" in html and "after the run" in html
        assert "tick" not in html.replace(f.sentence, "") and "join" not in html
        assert "sw-readout" in d.readout.text._dom_classes

    def test_cautions_in_amber(self):
        """No warmup at batch 1,024 is flagged, in amber text (Goyal et al. 2017 rule in the core)."""
        d = ScheduleDesigner(cosine(0.4, steps=1000), batch=1024)
        assert "no warmup at batch 1,024" in d.readout.cautions.value
        assert d.readout.cautions.style.text_color == "#b45309"
        d.stages.shape.value = "warmup"
        d.stages.add.click()
        assert "no warmup" not in d.readout.cautions.value


class TestNeverBroken:
    """An invalid combination shows the core's message and keeps the last valid design and curve."""

    def test_warmup_longer_than_the_budget(self):
        """Typing a warmup past the run: message under the controls, old curve, controls put back."""
        d = ScheduleDesigner()
        before, y = d.schedule, np.array(d.canvas.curve.y)
        box = d.control("warmup", "steps").text
        box.value = 200_000
        # the run is the frame (issue 13): the cosine fills the rest of the 103,500 steps, and cannot go below 1
        assert d.error.startswith("warmup: steps must be at most 103,499 steps in a run of 103,500, got 200000")
        # the message set at a reading line height (issue 13: a refusal ran over seven double-spaced lines)
        assert d.error_line.value.startswith('<div style="line-height:1.4">warmup: steps must be')
        assert "sw-error" in d.error_line._dom_classes
        assert d.schedule == before and np.array_equal(d.canvas.curve.y, y)
        assert box.value == "5,750"

    def test_floor_above_peak(self):
        """A cosine floor above its peak is refused with the core's hint."""
        d = ScheduleDesigner()
        d.control(0, "floor").text.value = 0.5
        assert "cosine: floor must be <= peak = 0.1, got 0.5" in d.error
        assert d.schedule == demo_design()

    def test_value_outside_hard_bounds(self):
        """A negative rate typed into the exact box names the allowed range; the slider is only visual."""
        d = ScheduleDesigner()
        d.control(0, "peak").text.value = -1.0
        assert d.error == "cosine: peak must be a finite rate >= 0, got -1.0"

    def test_text_accepts_values_beyond_the_slider(self):
        """The exact box takes a rate above the slider's range; the slider clamps what it shows."""
        d = ScheduleDesigner()
        c = d.control(0, "peak")
        c.text.value = 3.0
        assert d.schedule.target.peak == 3.0 and d.error == ""
        assert c.slider.value == pytest.approx(3.0)  # the slider is centred on the typed value
        assert c.slider.min < np.log10(3.0) < c.slider.max

    def test_bad_tick_list_text(self):
        """Unreadable drop positions say which item of which box, and how to write them (the box now reads
        positions of the run, so the message names the box 'drops at' and the forms it takes, issue 13)."""
        d = ScheduleDesigner(drops(0.1, at=(30, 60), steps=90), unit="epoch")
        d.control(0, "at").text.value = "30, sixty"
        assert d.error == ("drops: drops at item 2 must be a position of the run: 34500, '30 ep' (epoch 30 of the "
                           "run), '33 %' of the run, or '+25 ep' from this stage's start; commas or semicolons "
                           "between positions, got 'sixty'")
        d.control(0, "at").text.value = "60, 30"
        assert "ticks must increase strictly" in d.error
        d.control(0, "at").text.value = "20, 60"
        assert d.error == "" and d.schedule.at == (20, 60)

    def test_error_clears_on_the_next_valid_change(self):
        """The message goes away once a valid edit lands."""
        d = ScheduleDesigner()
        d.control(0, "floor").text.value = 0.5
        d.control(0, "floor").text.value = 0.001
        assert d.error == "" and d.error_line.value == ""

    def test_a_bug_in_a_redraw_reaches_no_one(self, monkeypatch):
        """If drawing fails, the design goes back to the last valid one and the message says so."""
        d = ScheduleDesigner()
        before = d.schedule
        real = d.canvas.draw

        def broken(s, n, clock):
            if s != before:
                raise RuntimeError("boom")
            return real(s, n, clock)

        monkeypatch.setattr(d.canvas, "draw", broken)
        d.control(0, "peak").text.value = 0.3
        assert d.schedule == before
        assert d.error.startswith("RuntimeError: boom (this is a bug in schedwidget")


class TestRedraws:
    """One redraw per change, none for a value set to itself."""

    def test_counts(self):
        """Slider, same value, budget and restore each cost exactly what they should."""
        d = ScheduleDesigner()
        assert d.redraws == 1
        c = d.control(0, "peak")
        c.slider.value = 0.2
        assert d.redraws == 2
        c.slider.value = 0.2
        c.text.value = 0.2
        assert d.redraws == 2
        d.schedule = d.schedule  # same value
        assert d.redraws == 2
        d.stages.total.value = 50_000  # steps and schedule change together: one redraw
        assert d.redraws == 3
        d.pin("a")  # a pin is a change of what is drawn (its ghost) and read (the compare table): one redraw
        assert d.redraws == 4
        d.control(0, "peak").text.value = 0.3
        d.compare.restore("a")
        assert d.redraws == 6
        d.control(0, "floor").text.value = 0.9  # invalid: no redraw
        assert d.redraws == 6


class TestDisplayBundle:
    """Saved notebooks get a static picture and a one-line summary beside the widget."""

    def test_mimebundle(self):
        """The bundle holds the widget view, an SVG with the teal curve, and one line of text."""
        d = ScheduleDesigner()
        data = d._repr_mimebundle_()
        assert "application/vnd.jupyter.widget-view+json" in data
        assert "#0f766e" in data["image/svg+xml"] and data["image/svg+xml"].lstrip().startswith("<svg")
        assert "\n" not in data["text/plain"] and data["text/plain"].startswith("ScheduleDesigner · 103,500 steps")
