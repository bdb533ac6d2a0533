"""Slider echoes: a browser snapping a slider to its grid never changes the design; round slider steps."""

from __future__ import annotations

import math

import pytest

from schedwidget import ScheduleDesigner, cosine, warmup
from schedwidget.plateau import PlateauRule
from schedwidget.widget.controls import ParamControl, round_step


class TestRoundStep:
    """round_step picks 1, 2 or 5 x 10^k so that common values lie on the grid."""

    def test_common_values_on_the_grid(self):
        """0.1, 0.25 and 0.5 are whole steps from 0.05 on the plateau factor slider (0.05 .. 0.9)."""
        step = round_step(0.05, 0.9)
        assert step == 0.002
        for v in (0.1, 0.25, 0.5):
            k = (v - 0.05) / step
            assert abs(k - round(k)) < 1e-9


class TestParamControlEcho:
    """A slider value less than one step from the shown value is an echo and is ignored."""

    def control(self, value=0.1):
        seen = []
        c = ParamControl("replay_plateau", "factor", PlateauRule.params()["factor"], value, 100,
                         lambda n, v: seen.append(v))
        return c, seen

    def test_snapped_neighbour_is_ignored(self):
        """The box's exact 0.1003 stays when the slider comes back snapped to 0.1 + 0.4 steps away."""
        c, seen = self.control(0.1003)
        c.slider.set_state({"value": 0.1003 - 0.4 * c.slider.step})  # what a browser snapping to its grid sends
        assert seen == [] and float(c.text.value) == 0.1003

    def test_a_whole_step_is_an_edit(self):
        """Moving the slider by one step is a real edit (rounded to the grid's digits)."""
        c, seen = self.control(0.1)
        c.slider.set_state({"value": 0.1 + c.slider.step})
        assert seen == [0.102]

    def test_log_slider_echo(self):
        """On a log slider a snapped 10**-1.30 for a shown 0.05 is ignored; the next grid step is an edit."""
        d = ScheduleDesigner(warmup(cosine(0.05, steps=900), 100))
        c = d.control(0, "peak")
        before = d.schedule
        c.slider.set_state({"value": 10 ** -1.30})  # 0.0501..., the grid point next to log10(0.05) = -1.30103
        assert d.schedule == before and float(c.text.value) == 0.05 and d.error == ""
        c.slider.set_state({"value": 10 ** -1.31})
        assert d.schedule.target.peak == pytest.approx(float(f"{10 ** -1.31:.3g}"))

    def test_log_slider_hides_its_readout(self):
        """A log slider shows no readout (a value of 0 would read as its lowest end); the box shows 0."""
        d = ScheduleDesigner(warmup(cosine(0.1, steps=900), 100))
        c = d.control("warmup", "start")
        assert c.slider.readout is False and float(c.text.value) == 0.0
        assert math.isclose(c.slider.value, c.slider.base ** c.slider.min)
