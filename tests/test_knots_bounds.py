"""Knots bound every interval by its ends and the knots inside it, read in one pass whatever the knot count."""

from __future__ import annotations

import time

import numpy as np
import pytest

from schedwidget import knots
from schedwidget.schedule import monotone_range


def _loop_reference(k, a, b):
    """The bound as a loop over the knots (what knots computed before, one knot at a time)."""
    lo, hi = monotone_range(k._at, a, b)
    for x, y in zip(*k._xy()):
        inside = (a <= x) & (x <= b)
        lo, hi = np.where(inside, np.minimum(lo, y), lo), np.where(inside, np.maximum(hi, y), hi)
    return lo, hi


class TestKnotsBounds:
    @pytest.mark.parametrize("seed", range(6))
    def test_equal_to_the_loop_over_knots(self, seed):
        """Random knots and intervals (overlapping, unsorted, 2-d): the same bounds as the knot-by-knot loop."""
        rng = np.random.default_rng(seed)
        for _ in range(50):
            xs = np.concatenate([[0], np.unique(rng.integers(1, 500, rng.integers(1, 60)))])
            ys = rng.random(xs.size) + 1e-3
            k = knots(list(zip(xs.tolist(), ys.tolist())), interp=str(rng.choice(["linear", "log", "hold"])))
            a = rng.uniform(0, xs[-1], 40)
            b = np.minimum(a + rng.uniform(0, xs[-1] / 3, 40), xs[-1])
            if rng.random() < 0.3:
                a, b = np.outer(a, np.ones(3)), np.outer(b, np.ones(3))
            lo, hi = k._range(a, b)
            rlo, rhi = _loop_reference(k, a, b)
            assert lo.shape == a.shape and np.array_equal(lo, rlo) and np.array_equal(hi, rhi)

    def test_many_knots_bound_at_once(self):
        """100,000 knots and 10,000 intervals: milliseconds (the loop took about 0.7 s a call)."""
        k = knots([(i, 0.1 * (1 + i % 7)) for i in range(100_000)], interp="hold")
        a = np.linspace(0, 99_990, 10_000)
        k._range(a, a + 9)  # builds the knot arrays once
        t0 = time.process_time()
        lo, hi = k._range(a, a + 9)
        assert time.process_time() - t0 < 0.5  # generous: a hang guard, not a benchmark
        assert lo.min() == pytest.approx(0.1) and hi.max() == pytest.approx(0.7)
