"""Combinators: joins land where DESIGN.md section 2 says, operators are sugar for named nodes."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, exp_decay, flat, ramp, restarts, stages, triangle, warmup
from schedwidget.combine import Product, Scaled, Stages, Stretch, Sum


class TestStages:
    """One stage after another, each on its own clock."""

    def test_join_ticks(self):
        a, b = ramp(0.0, 1.0, 10), cosine(1.0, steps=20)
        s = stages(a, b)
        assert s.length == 30
        assert [s(t) for t in range(10)] == [a(t) for t in range(10)]
        assert [s(10 + t) for t in range(25)] == [b(t) for t in range(25)]

    def test_own_clock_for_drops(self):
        s = stages(flat(1.0, steps=100), drops(1.0, at=(5,), factor=0.5))
        assert s(104) == 1.0 and s(105) == 0.5

    def test_flatten_and_operators(self):
        a, b, c = flat(1.0, steps=1), flat(2.0, steps=2), flat(3.0)
        s = a >> b >> c
        assert isinstance(s, Stages) and len(s.parts) == 3
        assert s == stages(a, b, c) == a.then(b, c) == a.then(b).then(c)

    def test_foreign_operand(self):
        assert cosine(1.0, steps=3).__rshift__(3) is NotImplemented
        assert cosine(1.0, steps=3).__mul__("x") is NotImplemented
        with pytest.raises(TypeError):
            cosine(1.0, steps=3) + 1.0


class TestWarmup:
    """warmup(s, W) is stages(ramp(start, s(0), W), s): the peak lands at tick W."""

    def test_peak_at_w(self):
        target = cosine(0.1, steps=1000)
        s = warmup(target, steps=50)
        assert s.length == 1050
        assert s(0) == 0.0 and s(25) == pytest.approx(0.05, rel=1e-15) and s(50) == 0.1
        t = np.arange(1100)
        assert np.array_equal(s(t), stages(ramp(0.0, 0.1, 50), target)(t))

    def test_start_and_curve(self):
        s = warmup(flat(1.0, steps=10), steps=4, start=0.5, curve="cosine")
        assert s(0) == 0.5 and s(2) == pytest.approx(0.75) and s(4) == 1.0


class TestRestarts:
    """Warm restarts: cycles follow each other with no gap, scaled by peak_decay**k."""

    def test_lengths_and_decay(self):
        s = restarts(cosine(1.0, steps=10), cycles=3, growth=2.0, peak_decay=0.5)
        assert s.length == 10 + 20 + 40
        assert s(0) == 1.0 and s(10) == 0.5 and s(30) == 0.25
        assert s(70) == 0.0 and s(10**6) == 0.0  # holds the last cycle's floor

    def test_open_ended(self):
        s = restarts(triangle(0.0, 1.0, half_period=2, steps=4))
        assert s.length is None and s(4 * 10**8 + 2) == 1.0

    def test_shrinking_cycles(self):
        s = restarts(ramp(1.0, 0.0, 8), growth=0.5)
        # cycle lengths 8, 4, 2, 1, 1, 1, ...: starts at 0, 8, 12, 14, 15, 16, ...
        starts = [t for t in range(1, 30) if s(t) == 1.0 * 1.0]
        assert starts == [8, 12, 14] + list(range(15, 30))


class TestOperators:
    """Products, sums, scales, clips and stretches."""

    def test_values(self):
        a, b = cosine(1.0, steps=10), flat(0.5)
        t = np.arange(15)
        assert isinstance(a * b, Product) and np.allclose((a * b)(t), a(t) * 0.5)
        assert isinstance(a + b, Sum) and np.allclose((a + b)(t), a(t) + 0.5)
        assert isinstance(a * 2, Scaled) and isinstance(2 * a, Scaled) and (a * 2)(0) == 2.0
        assert np.all(a.clip(low=0.2)(t) >= 0.2) and (a * 3).clip(high=1.5)(0) == 1.5

    def test_stretch_moves_joins_in_proportion(self):
        s = stages(flat(1.0, steps=3), flat(0.5, steps=7))
        st = s.stretch(100)
        assert isinstance(st, Stretch) and st.length == 100
        assert st(29) == 1.0 and st(30) == 0.5  # join at 3/10 of the budget
        odd = s.stretch(15)  # join at 4.5: first integer tick at or after it is 5
        assert odd(4) == 1.0 and odd(5) == 0.5
        assert s.stretch(10) is s and s.stretch(100).stretch(15) == s.stretch(15)

    def test_staircase_floors_scaled_argument(self):
        s = exp_decay(1.0, 0.5, every=2, steps=10).stretch(25)  # stairs at 5, 10, 15, 20
        assert [s(t) for t in (4, 5, 9, 10)] == [1.0, 0.5, 0.5, 0.25]


class TestNestedClocks:
    """Restarts of a stretched design read the inner clock in one rounding (review finding)."""

    def test_drop_lands_on_its_exact_tick(self):
        # exact position 1876 + 130 * 2814 / 210 = 3618 (whole): the drop takes effect there, not a tick later
        s = restarts(drops(1.0, at=(130,), factor=0.5, steps=210).stretch(1876), cycles=3, growth=1.5)
        assert [s(t) for t in (3617, 3618)] == [1.0, 0.5]
        from fractions import Fraction
        start, span = 1876, 2814  # second cycle: round(1876 * 1.5)
        for t in range(start, start + span, 37):
            inner = Fraction(t - start) * 210 / span
            assert s(t) == (0.5 if inner >= 130 else 1.0)
