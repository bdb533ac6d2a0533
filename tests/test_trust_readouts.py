"""Readouts that match the hand calculation, in bounded work, with a ScheduleError for every bad input (issue 10)."""

from __future__ import annotations

import math
import time
import tracemalloc

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, flat, inv_sqrt, knots, restarts, stages, triangle, warmup
from schedwidget.facts import LEVEL_TOLERANCE, facts
from schedwidget.sample import at_ticks, breaks, budget_of, trace


class TestShareOfPeak:
    """The 10 % and 1 % readouts count a rate that is exactly that share of the peak, up to rounding."""

    # hand calculation: x0.1 at epoch 30 leaves 10 % of the peak from epoch 30, x0.1 again at 60 leaves 1 %
    @pytest.mark.parametrize("design", [
        drops(0.05, at=(30, 60), factor=0.1, steps=90),
        drops(0.05, at=(30, 60, 80), factor=0.1, steps=90),
        warmup(drops(0.05, at=(25, 55), factor=0.1, steps=85), 5),               # warmup before: run clock
        drops(0.1, at=(30, 60), factor=0.1, steps=90),
        drops(3e-4, at=(30, 60), factor=0.1, steps=90),
    ], ids=["0.05", "0.05-three-drops", "warmup-before", "0.1", "3e-4"])
    def test_exact_drops_tick_at_their_epochs(self, design):
        """Drops x0.1 at epochs 30 and 60 give the 10 % and 1 % ticks at exactly those epochs."""
        f = facts(design, unit="epoch")
        assert (f.under_10, f.under_1) == (30, 60)
        assert "under 10 % of the peak from epoch 30" in f.sentence

    def test_equality_and_rounding_are_why(self):
        """After one drop the rate equals a tenth of the peak; after two it is an ulp above a hundredth."""
        s = drops(0.05, at=(30, 60), factor=0.1, steps=90)
        assert s(30) == 0.1 * 0.05                 # "under" with a strict < missed the equal rate
        assert 0.01 * 0.05 < s(60) <= 0.01 * 0.05 * (1 + LEVEL_TOLERANCE)  # 0.0005000000000000001

    def test_clearly_above_does_not_count(self):
        """A rate a millionth above 10 % of the peak is not under it; the tolerance is 1e-12 relative."""
        s = knots([(0, 1.0), (10, 0.1 * (1 + 1e-6)), (20, 0.1), (30, 0.1)], interp="hold")
        f = facts(s)
        assert f.under_10 == 20

    def test_grid_reading_keeps_the_tolerance(self):
        """Above the exact limit the jump ticks are on the grid, so the drops still tick at their own tick."""
        s = drops(0.05, at=(300_000, 600_000), factor=0.1, steps=900_000)
        f = facts(s, exact_up_to=2 ** 16)
        assert not f.exact and (f.under_10, f.under_1) == (300_000, 600_000)


class TestBoundedFacts:
    """facts reads any design in bounded time and memory."""

    def test_many_stages_linear(self):
        """6,000 stages: every join's two sides come from one vectorised call (was one call per side)."""
        s = stages(*[flat(0.01 * (i % 7 + 1), steps=3) for i in range(6000)])
        t0 = time.perf_counter()
        f = facts(s)
        elapsed = time.perf_counter() - t0
        assert len(f.joins) == 5999 and len(f.boundary) == 2 * 5999 + 3
        assert f.boundary[2] == ("join 1: first tick after", 3, s(3))
        assert elapsed < 3.0  # generous: catches the quadratic reading (about 9 s here), not a benchmark

    def test_huge_budget_bounded_memory(self):
        """inv_sqrt over 2**53 - 1 ticks once tried to allocate 64 GiB to refine its peak."""
        tracemalloc.start()
        try:
            f = facts(inv_sqrt(0.1, warmup=1000, steps=2 ** 53 - 1))
            _, top = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
        assert top < 256 * 2 ** 20
        # Vaswani et al. 2017, eq. 3: the rate peaks at step_num = warmup_steps
        assert not f.exact and f.peak == 0.1 and f.peak_at == 1000
        # and falls as sqrt(warmup / t): 10 % of the peak at t = 100 * warmup, 1 % at 10,000 * warmup
        assert (f.under_10, f.under_1) == (100_000, 10_000_000)

    def test_grid_reading_finds_the_first_tick_under(self):
        """On a grid the gap before the first grid tick under the level is searched: the hand tick, not the grid's."""
        n = 10 ** 9
        s = cosine(0.1, steps=n)
        f = facts(s)
        # Loshchilov & Hutter 2017, eq. 5: 0.1 (1 + cos(pi t / n)) / 2 <= 0.01 from cos(pi t / n) <= -0.8
        hand = math.ceil(n * math.acos(-0.8) / math.pi)
        assert not f.exact and abs(f.under_10 - hand) <= 1
        assert s(f.under_10) <= 0.01 * (1 + LEVEL_TOLERANCE) < s(f.under_10 - 1)

    def test_grid_reading_finds_a_peak_after_the_grid_peak(self):
        """A triangle over 10**8 ticks peaks between two grid ticks, after the highest grid tick."""
        # Smith 2017 (triangular policy): high at half_period, back to low at 2 * half_period
        s = triangle(0.0, 1.0, half_period=298, shrink=0.999, steps=100_000_006)
        f = facts(s)
        assert not f.exact and (f.peak, f.peak_at) == (1.0, 298)
        # 1 - (t - 298) / 298 <= 0.1 from t >= 566.2, <= 0.01 from t >= 593.02
        assert (f.under_10, f.under_1) == (567, 594)

    def test_grid_reading_finds_a_dip_between_grid_ticks(self):
        """Restarts over 2**53 ticks: the first cycle dips under 10 % long before any grid tick does."""
        s = restarts(warmup(cosine(1.0, steps=3700), steps=300))
        f = facts(s, steps=2 ** 53)
        # Loshchilov & Hutter 2017, eq. 5 after a 300-tick warmup: cos(pi u / 3700) <= -0.8 (10 %), -0.98 (1 %)
        hand = [300 + math.ceil(3700 * math.acos(c) / math.pi) for c in (-0.8, -0.98)]
        assert not f.exact and f.peak_at == 300 and [f.under_10, f.under_1] == hand == [3243, 3765]

    def test_exact_reading_in_chunks(self):
        """An exact reading longer than one chunk agrees with every tick evaluated at once."""
        s = warmup(cosine(0.1, steps=590_000), steps=10_000)
        f = facts(s, exact_up_to=2 ** 20)
        y = s(np.arange(600_000))
        assert f.exact and f.peak == y.max() and f.peak_at == int(np.argmax(y))
        assert f.area == pytest.approx(y.sum(), rel=1e-12) and f.minimum == y.min()
        after = np.arange(y.size) >= f.peak_at
        assert f.under_10 == int(np.flatnonzero((y <= 0.01 * (1 + LEVEL_TOLERANCE)) & after)[0])
        assert f.under_1 == int(np.flatnonzero((y <= 0.001 * (1 + LEVEL_TOLERANCE)) & after)[0])


S = cosine(0.1, steps=100)


class TestBadInput:
    """Every public readout function raises ScheduleError for bad input, never AttributeError or TypeError."""

    @pytest.mark.parametrize("call, pattern", [
        (lambda: facts(0.1), r"^facts: s must be a Schedule .*, got 0.1 \(a bare rate is flat\(rate, steps=...\)\)"),
        (lambda: facts(None), r"^facts: s must be a Schedule"),
        (lambda: facts(np.float64(0.1)), r"^facts: s must be a Schedule"),
        (lambda: facts(S, steps=True), r"^facts: steps must be a whole number >= 1, got True"),
        (lambda: facts(S, steps=0), r"^facts: steps must be a whole number >= 1, got 0"),
        (lambda: facts(S, steps=1.5), r"^facts: steps must be a whole number >= 1, got 1.5"),
        (lambda: facts(S, steps="100"), r"^facts: steps must be a whole number >= 1, got '100'"),
        (lambda: facts(S, steps=2 ** 53 + 1), r"^facts: steps must be a whole number <= 2\*\*53"),
        (lambda: facts(S, steps=10 ** 400), r"^facts: steps must be a whole number <= 2\*\*53"),
        (lambda: facts(S, steps=float("inf")), r"^facts: steps must be a whole number >= 1, got inf"),
        (lambda: facts(S, steps_per_epoch=True), r"^facts: steps_per_epoch must be a whole number >= 1 or None"),
        (lambda: facts(S, steps_per_epoch=10 ** 400), r"^facts: steps_per_epoch must be a whole number >= 1"),
        (lambda: facts(S, batch=np.bool_(True)), r"^facts: batch must be a whole number >= 1 or None"),
        (lambda: facts(S, exact_up_to=2 ** 40), r"^facts: exact_up_to must be a whole number >= 2 and <= 2\*\*26"),
        (lambda: facts(S, exact_up_to=None), r"^facts: exact_up_to must be a whole number"),
        (lambda: facts(S, unit=["step"]), r"^facts: unit must be one of 'step', 'epoch'"),
        (lambda: trace(0.1), r"^trace: s must be a Schedule"),
        (lambda: trace(S, steps=False), r"^trace: steps must be a whole number >= 1, got False"),
        (lambda: trace(S, steps=2 ** 60), r"^trace: steps must be a whole number <= 2\*\*53"),
        (lambda: trace(S, points=10 ** 12), r"^trace: points must be a whole number >= 4 and <= 2\*\*20"),
        (lambda: trace(S, points=True), r"^trace: points must be a whole number >= 4"),
        (lambda: trace(S, points=2.5), r"^trace: points must be a whole number >= 4"),
        (lambda: breaks(S, 0), r"^breaks: n must be a whole number >= 1, got 0"),
        (lambda: breaks(S, None), r"^breaks: n must be a whole number >= 1, got None"),
        (lambda: breaks("design", 10), r"^breaks: s must be a Schedule"),
        (lambda: budget_of([1], 10, "render_svg"), r"^render_svg: s must be a Schedule"),
        (lambda: at_ticks(S, np.array([1.5, 2.0])), r"^cosine: t must be a whole number of ticks"),
        (lambda: at_ticks(None, np.array([1])), r"^at_ticks: s must be a Schedule"),
        (lambda: facts(S, steps=-10 ** 5000), r"^facts: steps must be a whole number >= 1, got an integer of about"),
        (lambda: facts(S, steps_per_epoch=10 ** 5000), r"^facts: steps_per_epoch must be a whole number >= 1 or "
                                                         r"None, got an integer of about 5001 digits"),
    ])
    def test_messages(self, call, pattern):
        """The message names the function, the parameter, the value and what is allowed."""
        with pytest.raises(ScheduleError, match=pattern):
            call()

    def test_numpy_whole_numbers_are_accepted(self):
        """numpy integers and integral floats are whole numbers like Python ints."""
        a = facts(S, steps=np.int64(100), steps_per_epoch=np.int32(10), batch=np.uint16(256))
        b = facts(S, steps=100, steps_per_epoch=10, batch=256)
        assert a == b and facts(S, steps=np.float64(100.0), steps_per_epoch=10, batch=256) == b
        assert trace(S, steps=np.int64(100), points=np.int64(400)).steps == 100

    def test_at_ticks_any_order(self):
        """at_ticks gives the values of s at scattered ticks, in their order and shape."""
        s = stages(flat(0.1, steps=10), cosine(0.05, steps=10), flat(0.01))
        t = np.array([[25, 3, 12], [0, 25, 19]])
        assert np.array_equal(at_ticks(s, t), s(t))
