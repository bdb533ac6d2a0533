"""The box, the slider and the design agree after any sequence of changes, from code or from the browser.

A change from the browser is applied the way ipywidgets applies it (``Widget.set_state``, which
locks the trait while its observers run); a change from code is a plain assignment.
"""

from __future__ import annotations

import dataclasses
import math

import ipywidgets as W
from ipywidgets.widgets.widget import _instances  # open widgets (Widget.widgets is deprecated)
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from schedwidget import ScheduleDesigner, cosine, restarts, warmup
from tests.bench.design import CYCLES, GROWTH, PEAK, Sizing


def editable(n: int):
    """The benchmark's slider design (tests/bench/bench_redraw.py, ``_editable``)."""
    z = Sizing(n)
    return warmup(restarts(cosine(PEAK, 0.0, steps=z.L0), cycles=CYCLES, growth=GROWTH), steps=z.W)


def slider_position(slider: W.Widget, value: float) -> float:
    """Where a value sits on the slider's own axis (log10 for a log slider)."""
    return math.log(value, slider.base) if isinstance(slider, W.FloatLogSlider) else value


def clamp(slider: W.Widget, value: float) -> float:
    lo, hi = ((slider.base ** slider.min, slider.base ** slider.max) if isinstance(slider, W.FloatLogSlider)
              else (slider.min, slider.max))
    return min(max(value, lo), hi)


def assert_agree(d: ScheduleDesigner, exact_slider: bool) -> None:
    """The design's peak is the box's value; the slider shows it (exactly, or within half a step after an echo)."""
    c = d.control(0, "peak")
    peak = d.schedule.target.target.peak
    assert float(c.text.value) == peak, (c.text.value, peak)
    want = clamp(c.slider, peak)
    if exact_slider:
        assert c.slider.value == want, (c.slider.value, want)
    else:
        gap = abs(slider_position(c.slider, c.slider.value) - slider_position(c.slider, want))
        assert gap <= 0.5 * c.slider.step * (1 + 1e-9), (c.slider.value, want)
    assert float(d.canvas.curve.y.max()) == peak


class TestCodeDrivenSlider:
    """The slider sequence of the redraw benchmark (``python -m tests.bench``), which crashed before."""

    def test_every_small_step_from_code_reaches_the_design(self):
        """peak = 0.1 * (0.5 + 0.01 i) for i < 50: the steps 0.087 -> 0.088 (under half a log step) included."""
        d = ScheduleDesigner(editable(10**3), unit="step")
        slider = d.control(0, "peak").slider
        for i in range(50):
            want = PEAK * (0.5 + 0.01 * (i % 40))
            slider.value = want
            assert d.error == ""
            got = float(d.canvas.curve.y.max())
            assert abs(got - want) <= 1e-9 * want, (i, got, want)
            assert_agree(d, exact_slider=True)

    def test_a_tiny_change_from_code_is_not_an_echo(self):
        """0.0870 -> 0.0871 from code (a tenth of a log step) changes the design; the same from the browser does not."""
        d = ScheduleDesigner(editable(10**3), unit="step")
        c = d.control(0, "peak")
        c.slider.value = 0.087
        c.slider.value = 0.0871
        assert d.schedule.target.target.peak == 0.0871
        c.slider.set_state({"value": 0.0872})  # a browser's snap of the shown value: an echo
        assert d.schedule.target.target.peak == 0.0871 and float(c.text.value) == 0.0871


# one operation: (who, what, number in 0..1)
OPS = st.lists(st.tuples(st.sampled_from(["code", "browser"]), st.sampled_from(["slider", "box", "design"]),
                         st.floats(0.0, 1.0)), min_size=1, max_size=25)


class TestRandomSequences:
    """Random sequences of slider, box and design changes from code and from the browser."""

    @settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(OPS)
    def test_box_slider_and_design_always_agree(self, ops):
        """After every operation the box holds the design's value and the slider shows it."""
        d = ScheduleDesigner(editable(10**3), unit="step")
        c = d.control(0, "peak")
        s = c.slider
        loose = False  # the slider may sit at a browser's snapped grid point until something moves it
        for who, what, u in ops:
            before = (d.schedule, s.value)
            if what == "slider":
                # anywhere on the slider, or a snap of the shown value to the nearest grid point (an echo)
                if u < 0.3:
                    pos = slider_position(s, s.value)
                    k = round((pos - s.min) / s.step)
                    v = s.base ** (s.min + k * s.step)
                else:
                    v = s.base ** (s.min + (s.max - s.min) * u)
                if who == "code":
                    s.value = v
                else:
                    s.set_state({"value": v})
            elif what == "box":
                v = float(f"{1e-4 + 0.5 * u:.6g}")
                if who == "code":
                    c.text.value = v
                else:
                    c.text.set_state({"value": v})
            else:
                v = float(f"{1e-4 + 0.5 * u:.6g}")
                leaf = d.schedule.target.target
                d.schedule = dataclasses.replace(d.schedule, target=dataclasses.replace(
                    d.schedule.target, target=dataclasses.replace(leaf, peak=v)))
            assert d.error == ""
            if who == "browser" and what == "slider":
                loose = True
            elif (d.schedule, s.value) != before:
                loose = False
            assert_agree(d, exact_slider=not loose)


class TestRecentre:
    """A typed rate far from the slider's range gets a new slider built around it: no browser can clamp it."""

    def test_typed_peak_far_below_the_range(self):
        """0.1 -> 3e-4 typed in the box: a new slider around 3e-4 replaces the old one, which is closed.

        Moving the shown slider's range let the browser clamp or re-snap its value and send that back
        (3e-4 typed became 0.0095, 0.00316 or 0.00949 in browser runs); a new slider's first state is consistent.
        """
        d = ScheduleDesigner(warmup(cosine(0.1, steps=1000), steps=50))
        c = d.control(0, "peak")
        old = c.slider
        c.text.value = 3e-4
        new = c.slider
        assert new is not old and old.comm is None  # closed
        assert new in c.box.children and old not in c.box.children
        assert new.value == 3e-4 and new.min < math.log10(3e-4) < new.max
        assert d.schedule.target.peak == 3e-4
        new.set_state({"value": 1e-3})  # the new slider is live: a move from the browser edits the design
        assert math.isclose(d.schedule.target.peak, 1e-3, rel_tol=1e-2)
        assert float(c.text.value) == d.schedule.target.peak

    def test_replacements_do_not_pile_up(self):
        """Typing rates far apart again and again keeps the widget count flat (every replaced slider is closed)."""
        d = ScheduleDesigner(warmup(cosine(0.1, steps=1000), steps=50))
        c = d.control(0, "peak")
        c.text.value = 3e-4
        c.text.value = 0.1
        count = len(_instances)
        for v in (3e-4, 0.1) * 10:
            d.control(0, "peak").text.value = v
        assert len(_instances) <= count + 2
