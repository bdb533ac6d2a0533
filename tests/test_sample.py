"""sample.trace: bounded points whatever the budget, jumps as vertical edges, bands that hold every value."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import cosine, drops, restarts, triangle, warmup
from schedwidget.sample import trace

DESIGNS = {
    "drops": drops(0.1, at=(320, 480), steps=640),
    "restarts": restarts(warmup(cosine(1.0, steps=370), steps=30), growth=2.0).clip(low=0.05),
    "triangle": triangle(0.001, 0.006, half_period=7, shrink=0.9),
}


@pytest.mark.parametrize("name", DESIGNS)
@pytest.mark.parametrize("n", [10**3, 10**5, 10**6, 10**7, 10**9])
def test_point_count_bounded(name, n):
    tr = trace(DESIGNS[name], steps=n)
    assert len(tr.x) == len(tr.y) <= 5000
    assert np.all(np.diff(tr.x) >= 0)


@pytest.mark.parametrize("n", [640, 10**6, 10**9])
def test_breaks_are_vertical_edges(n):
    s = drops(0.1, at=(320, 480), steps=640).stretch(n)
    tr = trace(s)
    for k in tr.breaks:
        at = np.flatnonzero(tr.x == k)
        assert at.size >= 2, k
        assert set(np.round(tr.y[at], 12)) >= {round(s(int(k) - 1), 12), round(s(int(k)), 12)}
    assert len(tr.breaks) == 2


def test_small_budget_is_exact():
    s = DESIGNS["drops"]
    tr = trace(s)
    assert tr.exact
    plain = np.ones(tr.x.size, bool)
    plain[np.searchsorted(tr.x, tr.breaks)] = False  # the inserted (k, rate at k - 1) points
    assert np.array_equal(tr.y[plain], s(tr.x[plain].astype(int)))


@pytest.mark.parametrize("name", ["restarts", "triangle"])
def test_band_holds_every_true_value(name):
    s = DESIGNS[name]
    n = 3_000_000
    tr = trace(s, steps=n)
    assert tr.band_x0.size > 0  # sub-pixel cycles are drawn as a band here
    t = np.arange(n)
    y = s(t)
    for x0, x1, lo, hi in zip(tr.band_x0, tr.band_x1, tr.band_lo, tr.band_hi):
        seg = y[int(x0):int(x1) + 1]
        assert seg.min() >= lo - 1e-15 and seg.max() <= hi + 1e-15
