"""Issue 14: the published shapes complete (the 1-sqrt cooldown, the two-phase one-cycle, unequal triangles),
each against its formula or a reference library, and through generated source and the torch factor."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from schedwidget import (ScheduleError, flat, from_spec, json_schema, one_cycle, ramp, restarts, stages, to_spec,
                         torch_factor, triangle, warmup)
from tests.test_export import assert_matches


def assert_factor_matches(s, base=0.5):
    """torch_factor(s, base)(t) * base equals s(t) at every tick of the budget and a margin past it."""
    f = torch_factor(s, base)
    t = np.arange((s.length or 600) + 20)
    got = np.array([f(int(i)) for i in t]) * base
    np.testing.assert_allclose(got, s(t), rtol=1e-12, atol=1e-15)


def assert_every_route(s):
    assert_matches(s)
    assert_factor_matches(s)
    assert from_spec(to_spec(s)) == s and eval(repr(s), {**globals()}) == s


class TestSqrtCooldown:
    """ramp(peak, end, L, curve='sqrt') is the (1-sqrt) cooldown of warmup-stable-decay runs."""

    def test_the_published_formula(self):
        # Hägele et al. 2024, Sec. 3, the (1-sqrt) cooldown (form from memory): lr(n) = peak * (1 - sqrt((n - n0) / N))
        # over a cooldown of N steps starting at n0 (here n0 = 0 on the stage's clock)
        peak, n = 3e-4, 2000
        t = np.arange(n + 1)
        got = ramp(peak, 0.0, n, curve="sqrt")(t)
        assert np.array_equal(got, peak * (1.0 - np.sqrt(t / n)))  # bit for bit: the same operations
        assert got[0] == peak and got[n] == 0.0

    def test_warmup_stable_decay_at_every_tick(self):
        # Hägele et al. 2024: warmup, constant, then (1-sqrt) cooldown over the last 20 % of the run (from memory)
        peak, w, total = 1e-3, 100, 5000
        cool = total // 5
        s = stages(ramp(0.0, peak, w), flat(peak, steps=total - w - cool), ramp(peak, 0.0, cool, curve="sqrt"))
        t = np.arange(total)
        n0 = total - cool
        cooled = peak * (1.0 - np.sqrt(np.clip(t - n0, 0, None) / cool))
        want = np.where(t < w, peak * t / w, np.where(t < n0, peak, cooled))
        np.testing.assert_allclose(s(t), want, rtol=1e-14, atol=0)
        assert s.length == total and s(total) == 0.0

    def test_a_floor_reduces_to_the_formula(self):
        """With end > 0 the cooldown ends on that floor: end + (start - end) * (1 - sqrt(t / L)); end = 0 is the
        paper's form exactly."""
        peak, floor, n = 0.1, 0.01, 64
        t = np.arange(n + 1)
        got = ramp(peak, floor, n, curve="sqrt")(t)
        np.testing.assert_allclose(got, floor + (peak - floor) * (1.0 - np.sqrt(t / n)), rtol=1e-15)
        assert got[0] == peak and got[n] == pytest.approx(floor, rel=1e-15) and np.all(np.diff(got) < 0)

    def test_the_nearest_other_shape_is_far_off(self):
        """The issue's reason: a cosine or linear cooldown differs from 1-sqrt by a large share of the peak."""
        n = 1000
        t = np.arange(n)
        sq = ramp(1.0, 0.0, n, curve="sqrt")(t)
        worst = min(np.max(np.abs(sq - ramp(1.0, 0.0, n, curve=c)(t))) for c in ("linear", "cosine"))
        assert worst > 0.2

    def test_a_rising_sqrt_ramp(self):
        """start < end rises as start + (end - start) * sqrt(t / L): the same formula read the other way."""
        assert ramp(0.0, 0.1, 16, curve="sqrt")(4) == pytest.approx(0.05, rel=1e-15)  # 0.1 * sqrt(4 / 16)

    @pytest.mark.parametrize("s", [ramp(0.2, 0.0, 37, curve="sqrt"), ramp(0.2, 0.02, 9, curve="sqrt"),
                                   ramp(0.0, 0.3, 11, curve="sqrt"),
                                   stages(flat(0.1, steps=30), ramp(0.1, 0.0, 20, curve="sqrt")),
                                   warmup(ramp(0.1, 0.001, 40, curve="sqrt"), 8)], ids=repr)
    def test_every_route_equals_the_core(self, s):
        assert_every_route(s)

    def test_schema_and_declaration(self):
        assert "sqrt" in json_schema()["$defs"]["ramp"]["properties"]["curve"]["enum"]


# ------------------------------------------------------------------ two-phase one-cycle
def torch_rates(torch, ticks, **kw):
    """The lr torch's OneCycleLR gives at ticks 0 .. ticks-1 (one scheduler.step() per optimizer.step())."""
    p = [torch.nn.Parameter(torch.zeros(1))]
    opt = torch.optim.SGD(p, lr=kw["max_lr"])
    sched = torch.optim.lr_scheduler.OneCycleLR(opt, total_steps=ticks, cycle_momentum=False, **kw)
    out = []
    for _ in range(ticks):
        out.append(opt.param_groups[0]["lr"])
        opt.step()
        sched.step()
    return np.array(out)


class TestTwoPhaseOneCycle:
    """one_cycle(..., phases=2): a rise to the peak over a share of the run, then one fall to ``final``."""

    def test_the_published_form(self):
        # the two-phase cosine one-cycle as documented by fastai (Howard & Gugger 2020; docs of combined_cos and
        # SchedCos, a function of the share of training done p in [0, 1]): start + (1 + cos(pi * (1 - p))) *
        # (end - start) / 2 from low to peak over p in [0, rise], then from peak to final over [rise, 1]
        peak, low, final, n, rise = 1.0, 0.04, 4e-6, 1000, 0.25
        s = one_cycle(peak, n, low=low, final=final, phases=2, rise=rise, curve="cosine")
        p = np.arange(n + 1) / n

        def half(start, end, x):
            return start + (1.0 + np.cos(np.pi * (1.0 - x))) * (end - start) / 2.0

        want = np.where(p <= rise, half(low, peak, p / rise), half(peak, final, (p - rise) / (1.0 - rise)))
        np.testing.assert_allclose(s(np.arange(n + 1)), want, rtol=1e-12, atol=1e-15)
        assert s(250) == peak and s(0) == low

    @pytest.mark.parametrize("n, rise, curve", [(10, 0.3, "cosine"), (1000, 0.3, "cosine"), (777, 0.25, "cosine"),
                                                (1000, 0.3, "linear"), (64, 0.5, "linear")])
    def test_against_torch_tick_by_tick(self, torch, n, rise, curve):
        """torch 2.13's OneCycleLR(three_phase=False) ends each phase on a tick of its own: found by running it
        (see test_torch_conventions), the peak lands on tick rise * n - 1 and the final rate on the last tick
        n - 1.  Our default (ends='after') reads the share on the continuous clock as every shape here does and
        as the published form above does (positions as shares of training done): the peak at tick rise * n and
        the final rate reached at tick n, held after it; the same curve one tick later.  ends='on' is torch's
        convention and matches it at every tick."""
        peak, div, final_div = 0.5, 25.0, 1e4
        low = peak / div
        strategy = "cos" if curve == "cosine" else "linear"
        ref = torch_rates(torch, n, max_lr=peak, pct_start=rise, anneal_strategy=strategy, three_phase=False,
                          div_factor=div, final_div_factor=final_div)
        on = one_cycle(peak, n, low=low, final=low / final_div, phases=2, rise=rise, curve=curve, ends="on")
        np.testing.assert_allclose(on(np.arange(n)), ref, rtol=1e-12, atol=1e-15)
        assert on(n - 1) == on(n + 5) == pytest.approx(low / final_div, rel=1e-9)  # held from the last tick on
        after = one_cycle(peak, n, low=low, final=low / final_div, phases=2, rise=rise, curve=curve)
        assert int(np.argmax(after(np.arange(n)))) == round(rise * n) and int(np.argmax(ref)) == round(rise * n) - 1
        # the two conventions are the same curve shifted by one tick over the fall
        k = np.arange(round(rise * n) + 1, n)
        np.testing.assert_allclose(after(k), ref[k - 1], rtol=1e-9, atol=1e-15)

    def test_torch_conventions(self, torch):
        """torch 2.13 OneCycleLR, two phases, found by running it: tick 0 is max_lr / div_factor, the peak is on
        tick pct_start * total - 1, the last tick (total - 1) is exactly max_lr / div_factor / final_div_factor."""
        ref = torch_rates(torch, 10, max_lr=1.0, pct_start=0.3, anneal_strategy="cos", three_phase=False,
                          div_factor=10.0, final_div_factor=100.0)
        assert ref[0] == pytest.approx(0.1) and ref[2] == 1.0 and ref[9] == 0.001 and np.argmax(ref) == 2

    def test_phases_3_is_smith_2018_unchanged(self):
        # Smith 2018 three-phase linear cycle: low -> peak -> low over (1 - tail) of the run, then the tail
        s = one_cycle(1.0, steps=100, tail=0.2)
        assert (s(0), s(40), s(80), s(100)) == (0.1, 1.0, 0.1, 0.001)
        assert repr(s) == "one_cycle(peak=1.0, steps=100, low=0.1, final=0.001, tail=0.2, curve='linear')"

    def test_rules(self):
        with pytest.raises(ScheduleError, match=r"one_cycle: rise must be None with phases=3"):
            one_cycle(1.0, 100, rise=0.3)
        with pytest.raises(ScheduleError, match=r"one_cycle: rise must be a share that leaves at least one tick"):
            one_cycle(1.0, 10, phases=2, rise=0.05)
        with pytest.raises(ScheduleError, match=r"one_cycle: final must be <= peak = 1.0"):
            one_cycle(1.0, 10, phases=2, final=2.0)
        with pytest.raises(ScheduleError, match=r"one_cycle: phases must be a whole number >= 2 and <= 3"):
            one_cycle(1.0, 10, phases=4)
        with pytest.raises(ScheduleError, match=r"one_cycle: ends must be 'after' with phases=3"):
            one_cycle(1.0, 10, ends="on")
        with pytest.raises(ScheduleError, match=r"one_cycle: rise must be a share .* with ends='on'"):
            one_cycle(1.0, 10, phases=2, rise=0.15, ends="on")  # the peak would be on tick 0.5
        assert one_cycle(1.0, 100, phases=2).rise == 0.3  # common practice, no source
        # two phases may end above low (one fall from the peak)
        assert one_cycle(1.0, 10, low=0.1, final=0.2, phases=2, rise=0.5)(10) == pytest.approx(0.2)

    @pytest.mark.parametrize("s", [one_cycle(0.4, 41, phases=2, rise=0.3, curve="cosine"),
                                   one_cycle(0.4, 97, phases=2, rise=0.25),
                                   warmup(one_cycle(0.2, 50, phases=2, rise=0.5, curve="cosine"), 5),
                                   stages(one_cycle(0.1, 30, phases=2, rise=0.2), flat(0.001, steps=5)),
                                   one_cycle(0.3, 23, phases=2, rise=0.3, curve="cosine", ends="on"),
                                   stages(one_cycle(0.1, 30, phases=2, rise=0.2, ends="on"), flat(0.01, steps=5)),
                                   warmup(one_cycle(0.2, 17, phases=2, rise=0.4, ends="on", curve="cosine"), 3)],
                         ids=repr)
    def test_every_route_equals_the_core(self, s):
        assert_every_route(s)


# ------------------------------------------------------------------ unequal triangles
def cyclic_rates(torch, ticks, up, down, mode, low=0.01, high=0.1):
    p = [torch.nn.Parameter(torch.zeros(1))]
    opt = torch.optim.SGD(p, lr=low)
    sched = torch.optim.lr_scheduler.CyclicLR(opt, base_lr=low, max_lr=high, step_size_up=up, step_size_down=down,
                                              mode=mode, cycle_momentum=False)
    out = []
    for _ in range(ticks):
        out.append(opt.param_groups[0]["lr"])
        opt.step()
        sched.step()
    return np.array(out)


class TestUnequalTriangle:
    """triangle(low, high, half_period, fall=...): a rise of half_period ticks, a fall of fall ticks."""

    @pytest.mark.parametrize("up, down", [(3, 7), (20, 5), (1, 1), (4, 4), (13, 29), (2000, 6000)])
    @pytest.mark.parametrize("mode, shrink", [("triangular", 1.0), ("triangular2", 0.5)])
    def test_against_torch_cyclic(self, torch, up, down, mode, shrink):
        # torch 2.13 CyclicLR as a reference library; Smith 2017 (triangular and triangular2, the halving variant)
        n = min(6 * (up + down) + 3, 20_000)
        ref = cyclic_rates(torch, n, up, down, mode)
        s = triangle(0.01, 0.1, half_period=up, fall=down, shrink=shrink)
        np.testing.assert_allclose(s(np.arange(n)), ref, rtol=1e-12, atol=1e-15)

    def test_the_formula(self):
        # Smith 2017 eq. (1)-(3) with a rise of `up` and a fall of `down` ticks: within a cycle of up + down ticks,
        # x = p / up on the way up and (up + down - p) / down on the way down
        up, down, low, high = 3, 5, 0.0, 1.0
        s = triangle(low, high, half_period=up, fall=down)
        t = np.arange(40)
        p = t % (up + down)
        want = np.where(p < up, p / up, (up + down - p) / down)
        np.testing.assert_allclose(s(t), want, rtol=1e-15, atol=1e-15)

    def test_fall_none_or_equal_is_the_symmetric_cycle(self):
        t = np.arange(200)
        a = triangle(0.01, 0.1, 7, shrink=0.5)
        assert np.array_equal(a(t), triangle(0.01, 0.1, 7, shrink=0.5, fall=7)(t))
        assert repr(a) == "triangle(low=0.01, high=0.1, half_period=7, shrink=0.5, steps=None)"

    def test_bounds_hold_over_intervals(self):
        s = triangle(0.01, 0.1, half_period=3, fall=11, shrink=0.7, steps=300)
        rng = np.random.default_rng(5)
        a = rng.integers(0, 300, 400).astype(float)
        b = np.minimum(a + rng.integers(0, 40, 400), 300.0)
        lo, hi = s._range(a, b)
        for i in range(400):
            seg = s(np.arange(int(a[i]), int(b[i]) + 1))
            assert lo[i] <= seg.min() + 1e-15 and seg.max() <= hi[i] + 1e-15

    @pytest.mark.parametrize("s", [triangle(0.01, 0.1, 3, fall=9), triangle(0.0, 1.0, 5, shrink=0.5, fall=2, steps=60),
                                   warmup(triangle(0.01, 0.1, 4, fall=12, steps=64), 6)], ids=repr)
    def test_every_route_equals_the_core(self, s):
        assert_every_route(s)


# ------------------------------------------------------------------ nested, at random
_RATES = st.floats(0.0, 1.0, allow_nan=False)


@st.composite
def new_shape(draw):
    """One of this issue's shapes with drawn parameters."""
    kind = draw(st.sampled_from(["sqrt", "fall", "two_phase"]))
    if kind == "sqrt":
        return ramp(draw(_RATES), draw(_RATES), draw(st.integers(1, 80)), curve="sqrt")
    if kind == "fall":
        a, b = sorted((draw(_RATES), draw(_RATES)))
        return triangle(a, b, half_period=draw(st.integers(1, 9)), fall=draw(st.integers(1, 13)),
                        shrink=draw(st.sampled_from([1.0, 0.5, 0.83])),
                        steps=draw(st.one_of(st.none(), st.integers(1, 120))))
    n = draw(st.integers(6, 120))
    peak = draw(st.floats(1e-4, 1.0))
    return one_cycle(peak, n, low=draw(_RATES) * peak, final=draw(_RATES) * peak, phases=2,
                     rise=draw(st.floats(2.0 / n, 1.0 - 1.0 / n)), curve=draw(st.sampled_from(["linear", "cosine"])),
                     ends=draw(st.sampled_from(["after", "on"])))


@settings(max_examples=150, deadline=None, database=None, suppress_health_check=[HealthCheck.too_slow])
@given(new_shape(), st.sampled_from(["alone", "warmup", "restarts", "stretch", "stages", "scale"]))
def test_nested_new_shapes_equal_the_core_through_every_route(s, how):
    """Inside warmups, restarts, stretches, stages and scales, generated source and the torch factor equal the
    core at every tick."""
    base = s if s.length is not None else s * flat(1.0, steps=50)
    s = {"alone": lambda: s, "warmup": lambda: warmup(base, min(7, base.length)),
         "restarts": lambda: restarts(base, cycles=3, growth=1.5, peak_decay=0.8), "stretch": lambda: base.stretch(31),
         "stages": lambda: stages(base, ramp(0.1, 0.0, 9, curve="sqrt")), "scale": lambda: s * 0.5}[how]()
    assert_matches(s)
    assert_factor_matches(s)
    assert from_spec(to_spec(s)) == s

