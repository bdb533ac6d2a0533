"""The editable form (warmup + list of stages) and the generated controls."""

from __future__ import annotations

import ipywidgets as W
import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, exp_decay, flat, knots, restarts, stages, warmup
from schedwidget.shapes import Cosine, Drops, ExpDecay, Knots, Ramp
from schedwidget.widget.controls import ParamControl, parse_points, parse_ticklist
from schedwidget.widget.form import LEAVES, Form, Warm, fit_total, new_stage, read_form, scale_ticks


class TestReadForm:
    """Designs that fit the form round-trip through it; others are recognised as not editable."""

    @pytest.mark.parametrize("s", [
        cosine(0.1, steps=100),
        warmup(cosine(0.1, steps=100), steps=10),
        stages(flat(0.1, steps=5), drops(0.1, at=(10,), steps=20), exp_decay(0.01, 0.9)),
        warmup(stages(restarts(cosine(0.1, steps=10), cycles=3), flat(0.001)), steps=4, start=0.01, curve="cosine"),
    ])
    def test_round_trip(self, s):
        """read_form then build gives the same value back."""
        assert read_form(s).build() == s

    @pytest.mark.parametrize("s", [
        cosine(0.1, steps=100) * 0.5,
        cosine(0.1, steps=100).clip(low=0.01),
        cosine(0.1, steps=100).stretch(50),
        restarts(warmup(cosine(0.1, steps=10), steps=2), cycles=2),
        stages(flat(0.1, steps=3), warmup(cosine(0.1, steps=10), steps=2)),
    ])
    def test_not_editable(self, s):
        """Products, clips, stretches and nested combinators are edited in code."""
        assert read_form(s) is None

    def test_empty_form(self):
        """A form without stages names the problem and the fix."""
        with pytest.raises(ScheduleError, match=r"designer: stages must be at least one stage, got 0"):
            Form(()).build()


class TestNewStage:
    """Every shape in the add menu has a valid starting stage."""

    @pytest.mark.parametrize("kind", list(LEAVES))
    def test_every_kind(self, kind):
        """The new stage is of that kind, starts near the given rate and lasts the given ticks."""
        s = new_stage(kind, 0.05, 400)
        assert s.kind == kind and s.length == 400
        assert max(s(np.arange(400))) == pytest.approx(0.05)

    def test_unknown_kind(self):
        """An unknown shape lists the known ones."""
        with pytest.raises(ScheduleError, match=r"designer: shape must be one of 'cosine', 'ramp'"):
            new_stage("sawtooth", 0.1, 10)


class TestProportions:
    """Changing the total scales every stage's ticks by the same ratio."""

    def test_scale_ticks(self):
        """Ticks, tick lists, periods and knots scale; rates and factors stay."""
        f = Form((drops(0.1, at=(30, 60), factor=0.5, steps=90), exp_decay(0.01, 0.9, every=10, steps=20),
                  knots([(0, 0.01), (10, 0.001)])), Warm(5))
        g = scale_ticks(f, 2.0)
        assert g.warm == Warm(10)
        assert g.stages[0] == Drops(peak=0.1, at=(60, 120), factor=0.5, steps=180)
        assert g.stages[1] == ExpDecay(peak=0.01, factor=0.9, every=20, steps=40)
        assert g.stages[2] == Knots(points=((0, 0.01), (20, 0.001)))

    def test_fit_total_is_exact(self):
        """Rounding is absorbed by the last stage, so the total is the one asked for."""
        f = read_form(warmup(cosine(0.1, steps=97_750), steps=5750))
        for total in (1000, 12_345, 10**9):
            assert fit_total(f, total).build().length == total

    def test_rounding_that_breaks_the_design(self):
        """Shrinking two drops onto one tick is refused by the core."""
        f = Form((drops(0.1, at=(30, 31), steps=90),))
        with pytest.raises(ScheduleError, match=r"drops: at\[1\] must be a tick > at\[0\]"):
            scale_ticks(f, 0.01)


class TestParamControl:
    """Controls are generated from the Param declarations."""

    def test_rate(self):
        """A rate gets a log slider (sw-rate) 1.5 decades either side of its value and an exact box (sw-value)."""
        p = Cosine.params()["peak"]
        c = ParamControl("cosine", "peak", p, 0.1, 1000, lambda n, v: None)
        assert isinstance(c.slider, W.FloatLogSlider) and isinstance(c.text, W.Text) and c.text.value == "0.1"
        assert (c.slider.min, c.slider.max) == (-2.5, 0.5)
        assert "sw-rate" in c.slider._dom_classes and "sw-value" in c.text._dom_classes
        assert c.slider.tooltip == p.doc

    def test_ticks_follow_the_budget(self):
        """A length is a box taking steps, epochs or a share of the run, with the other units beside it."""
        got = []
        c = ParamControl("cosine", "steps", Cosine.params()["steps"], 500, 2000, lambda n, v: got.append(v),
                         context=lambda: ("step", 100, 2000, None))
        assert c.slider is None and c.text.value == "500" and "5 epochs · 25\u2009% of the run" in c.words.value
        c.text.value = "3 ep"
        c.text.value = "6 %"
        c.text.value = "1,234"
        assert got == [300, 120, 1234]

    def test_choice_flag_list_points(self):
        """Choices are dropdowns, flags checkboxes, tick lists and knots text boxes."""
        assert isinstance(ParamControl("ramp", "curve", Ramp.params()["curve"], "linear", 10, print).text, W.Dropdown)
        assert isinstance(ParamControl("exp_decay", "staircase", ExpDecay.params()["staircase"], True, 10,
                                       print).text, W.Checkbox)
        c = ParamControl("drops", "at", Drops.params()["at"], (30, 60), 90, print)
        assert c.text.value == "30; 60"  # positions of the run, '; ' between them (a comma also marks thousands)
        k = ParamControl("knots", "points", Knots.params()["points"], ((0, 0.1), (5, 0.01)), 5, print)
        assert k.text.value == "0: 0.1, 5: 0.01"

    def test_optional_length(self):
        """An open-ended length is a ticked 'open-ended' box and greyed-out slider and text."""
        got = []
        c = ParamControl("flat", "steps", flat(0.1).params()["steps"], None, 100, lambda n, v: got.append(v))
        assert c.none.value is True and c.text.disabled and c.text.value == ""
        c.none.value = False
        assert got == [100]  # unticking starts from the whole budget

    def test_showing_reports_nothing(self):
        """Writing a value from the design does not call back; a person's edit does."""
        got = []
        c = ParamControl("cosine", "peak", Cosine.params()["peak"], 0.1, 10, lambda n, v: got.append((n, v)))
        c.show(0.2)
        assert got == []
        c.text.value = 0.3
        assert got == [("peak", 0.3)]


class TestParsers:
    """Text boxes for tick lists and knots read plain comma-separated text."""

    def test_ticklist(self):
        """Commas or semicolons; underscores as thousands separators."""
        assert parse_ticklist("drops", "at", "34_500; 69_000, 92000") == (34_500, 69_000, 92_000)
        with pytest.raises(ScheduleError, match=r"drops: at\[0\] must be a whole number of ticks, got '1.5'"):
            parse_ticklist("drops", "at", "1.5")

    def test_points(self):
        """tick: rate pairs."""
        assert parse_points("knots", "points", "0: 0.1, 10: 1e-3") == ((0, 0.1), (10, 0.001))
        with pytest.raises(ScheduleError, match=r"knots: points\[1\] must be a pair tick: rate, got '10'"):
            parse_points("knots", "points", "0: 0.1, 10")
