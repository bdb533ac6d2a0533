"""Hypothesis properties over random valid compositions at least three levels deep."""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import schedwidget as sw
from schedwidget import from_spec
from tests.strategies import any_schedule, leaves, schedules

NAMESPACE = {name: getattr(sw, name) for name in sw.__all__}
FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def ticks_of(s, cap=20_000):
    n = s.length if s.length is not None else 1000
    base = np.arange(min(n, cap) + 50)
    return np.unique(np.concatenate([base, [n, n + 1, 3 * n + 7]]))


@FAST
@given(schedules)
def test_finite_and_non_negative(s):
    y = s(ticks_of(s))
    assert np.all(np.isfinite(y)) and np.all(y >= 0)


@FAST
@given(any_schedule, st.data())
def test_scalar_and_array_agree(s, data):
    t = ticks_of(s)
    picks = data.draw(st.lists(st.sampled_from(list(t)), min_size=1, max_size=20))
    arr = s(np.array(picks))
    # numpy's vectorised power/cos may differ from its scalar path by an ulp; nothing more
    np.testing.assert_allclose([s(int(p)) for p in picks], arr, rtol=4e-16 * 8, atol=0)


@FAST
@given(any_schedule)
def test_spec_and_repr_round_trip(s):
    assert from_spec(s.to_spec()) == s
    assert eval(repr(s), NAMESPACE) == s  # noqa: S307 - repr is valid Python by design
    assert hash(from_spec(s.to_spec())) == hash(s)


@FAST
@given(schedules, st.integers(2, 5))
def test_stretch_keeps_shape(s, k):
    # the value at the same fraction of the budget is the same
    L = s.length
    t = np.arange(0, L + 1, max(1, L // 200))
    assert np.array_equal(s.stretch(k * L)(k * t), s(t))


@FAST
@given(leaves(), schedules)
def test_joins_land_where_design_says(a, b):
    s = sw.stages(a, b)
    La = a.length
    t = np.arange(min(La, 5000))
    assert np.array_equal(s(t), a(t))
    u = np.arange(min(b.length, 5000) + 3)
    assert np.array_equal(s(La + u), b(u))


@FAST
@given(schedules)
def test_past_the_end_holds(s):
    L = s.length
    assert s(L) == s(L + 1) == s(10 * L + 3)


@settings(max_examples=60, deadline=None)
@given(st.floats(0.9, 0.999999), st.integers(1, 100))
def test_exp_decay_no_drift(factor, every):
    # closed form at tick 10**7 to 1e-12 relative (no repeated multiplication)
    import mpmath
    mpmath.mp.dps = 40
    s = sw.exp_decay(0.1, factor, every=every)
    k = 10**7 // every
    exact = float(mpmath.mpf(0.1) * mpmath.power(mpmath.mpf(factor), k))
    got = s(10**7)
    assert abs(got - exact) <= 1e-12 * exact or (exact < 1e-300 and got < 1e-300)


@FAST
@given(schedules, st.data())
def test_interval_bounds_hold_every_value(s, data):
    # the bands of the curve panel and the peak search rely on these bounds
    L = s.length
    a = data.draw(st.integers(0, L))
    b = data.draw(st.integers(a, min(L + 20, a + 3000)))
    lo, hi = s._span(np.array([float(a)]), np.array([float(b)]))
    y = s(np.arange(a, b + 1))
    tol = 1e-12 * max(1.0, float(np.max(np.abs(y))))
    assert y.min() >= lo[0] - tol and y.max() <= hi[0] + tol
