"""Whole-run designs (issue 14, part A): a warmup laid over the run's first ticks, and lengths as shares of the run."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import schedwidget as sw
from schedwidget import ScheduleError, cosine, drops, exp_decay, facts, flat, restarts, stages, warmup
from schedwidget.budget import ROUNDINGS, Budget, parse_length, share_ticks
from schedwidget.export import to_python
from schedwidget.factor import torch_factor
from schedwidget.plateau import plateau_source, replay_plateau
from schedwidget.sample import trace
from schedwidget.svg import render_svg
from tests.test_export import assert_matches, compile_fresh, schedule

# Goyal et al. 2017 ("Accurate, Large Minibatch SGD"), section 2.2 and 5.1: ResNet-50 on ImageNet for 90 epochs,
# lr 0.1 x k/256 (k = 8,192: 3.2), gradual warmup from 0.1 over the first 5 epochs, x0.1 at epochs 30, 60 and 80
# counted from the start of the run.  ImageNet's 1,281,167 training images at 8,192 per update (the incomplete
# last batch dropped): 156 updates per epoch.
GOYAL_BUDGET = Budget(samples=1_281_167, batch=8192, epochs=90)
E = GOYAL_BUDGET.steps_per_epoch
PEAK = 0.1 * 8192 / 256
GOYAL = warmup(drops(PEAK, at=(30 * E, 60 * E, 80 * E), steps=90 * E), 5 * E, start=0.1, place="over")


class TestGoyal:
    """The 90-epoch large-batch recipe written as published: warmup over the first 5 epochs of the run."""

    def test_budget(self):
        assert E == 156 and GOYAL.length == 90 * E == GOYAL_BUDGET.steps
        assert PEAK == 3.2

    def test_published_rates(self):
        # Goyal et al. 2017, section 2.2: start at 0.1, reach 3.2 after 5 epochs; x0.1 at epochs 30, 60, 80
        assert GOYAL(0) == 0.1
        assert GOYAL(5 * E) == 3.2
        assert GOYAL(30 * E - 1) == 3.2  # the last tick of epoch 29
        assert GOYAL(30 * E) == pytest.approx(0.32, rel=1e-15) and GOYAL(30 * E) == 3.2 * 0.1
        assert GOYAL(60 * E) == pytest.approx(0.032, rel=1e-15)
        assert GOYAL(80 * E) == pytest.approx(0.0032, rel=1e-15)
        assert GOYAL(90 * E - 1) == GOYAL(80 * E) and GOYAL(10 ** 9) == GOYAL(80 * E)

    def test_constant_increment_per_update(self):
        # "increment it by a constant amount at each iteration" (section 2.2)
        t = np.arange(5 * E + 1)
        y = GOYAL(t)
        expected = 0.1 + (PEAK - 0.1) * t / (5 * E)
        np.testing.assert_allclose(y, expected, rtol=1e-15, atol=0)
        assert np.ptp(np.diff(y)) < 1e-12

    def test_before_shifts_the_drops(self):
        """The same parts with place="before" put the drops 5 epochs late: the issue's silent shift."""
        before = warmup(GOYAL.target, 5 * E, start=0.1)
        assert before.length == 95 * E
        assert before(35 * E - 1) == 3.2 and before(35 * E) == 3.2 * 0.1

    def test_generated_source_at_every_tick(self):
        fn, _ = compile_fresh(to_python(GOYAL, unit="step", steps_per_epoch=E))
        t = np.arange(90 * E + 20)
        gen = np.array([fn(int(i)) for i in t])
        assert np.array_equal(gen, GOYAL(t))  # same operations in the same order: bit for bit

    def test_torch_factor_at_every_tick(self):
        factor = torch_factor(GOYAL, PEAK)
        t = np.arange(90 * E + 20)
        got = np.array([factor(int(i)) * PEAK for i in t])
        np.testing.assert_allclose(got, GOYAL(t), rtol=1e-15, atol=0)

    def test_torch_reference(self, torch):
        """torch's own warmup and step decay chained on one clock give the same rates (torch as a reference)."""
        model = torch.nn.Linear(2, 1)
        opt = torch.optim.SGD(model.parameters(), lr=PEAK)
        warm = torch.optim.lr_scheduler.LinearLR(opt, start_factor=0.1 / PEAK, end_factor=1.0, total_iters=5 * E)
        steps = torch.optim.lr_scheduler.MultiStepLR(opt, milestones=[30 * E, 60 * E, 80 * E], gamma=0.1)
        chained = torch.optim.lr_scheduler.ChainedScheduler([warm, steps])
        seen = []
        for _ in range(90 * E):
            seen.append(opt.param_groups[0]["lr"])
            opt.step()
            chained.step()
        np.testing.assert_allclose(np.array(seen), GOYAL(np.arange(90 * E)), rtol=1e-12, atol=0)

    def test_through_make_scheduler(self, torch):
        from schedwidget.scheduler import make_scheduler

        opt = torch.optim.SGD(torch.nn.Linear(2, 1).parameters(), lr=PEAK)
        sched = make_scheduler(opt, GOYAL, base_lr=PEAK)
        seen = []
        for _ in range(31 * E):
            seen.append(opt.param_groups[0]["lr"])
            opt.step()
            sched.step()
        np.testing.assert_allclose(np.array(seen), GOYAL(np.arange(31 * E)), rtol=1e-15, atol=0)

    def test_on_the_epoch_clock(self):
        g = warmup(drops(PEAK, at=(30, 60, 80), steps=90), 5, start=0.1, place="over")
        assert [g(t) for t in (0, 5, 29)] == [0.1, 3.2, 3.2]
        assert g(30) == 3.2 * 0.1 and g(60) == pytest.approx(0.032, rel=1e-15)
        assert g(80) == pytest.approx(0.0032, rel=1e-15)

    def test_readout_states_the_place_and_the_drops(self):
        f = facts(GOYAL, steps_per_epoch=E)
        assert f.warmup_place == "over" and "; warmup laid over the schedule's first 780 steps (5 epochs)." in f.sentence
        assert f.joins == (5 * E,) and f.breaks == (30 * E, 60 * E, 80 * E)
        drops_rows = [r for r in f.boundary if r[0].startswith("drop")]
        assert drops_rows == [("drop 1: last tick before", 30 * E - 1, 3.2), ("drop 1: first tick after", 30 * E, 3.2 * 0.1),
                              ("drop 2: last tick before", 60 * E - 1, 3.2 * 0.1),
                              ("drop 2: first tick after", 60 * E, GOYAL(60 * E)),
                              ("drop 3: last tick before", 80 * E - 1, GOYAL(60 * E)),
                              ("drop 3: first tick after", 80 * E, GOYAL(80 * E))]
        before = facts(warmup(GOYAL.target, 5 * E, start=0.1), steps_per_epoch=E)
        assert before.warmup_place == "before" and "; warmup of 780 steps (5 epochs) before the schedule." in before.sentence
        assert facts(GOYAL.target).warmup_place is None and "warmup" not in facts(GOYAL.target).sentence

    def test_readout_through_stretch_scale_and_clip(self):
        from schedwidget.facts import warmup_of

        assert warmup_of(GOYAL) == ("over", 5 * E)
        assert warmup_of((GOYAL * 0.5).clip(high=1.0)) == ("over", 5 * E)
        assert warmup_of(GOYAL.stretch(45 * E)) == ("over", math.ceil(5 * E / 2))  # the first whole tick at or after
        assert warmup_of(restarts(warmup(cosine(0.1, steps=9), 2), cycles=2)) is None  # a cycle's, not the design's
        assert warmup_of(stages(flat(0.1, steps=3), warmup(cosine(0.1, steps=9), 2))) is None

    def test_generated_docstring_says_which_warmup(self):
        text = to_python(GOYAL, steps_per_epoch=E)
        assert "Warmup: laid over the first 780 steps; every later tick (drops, restarts) counts from the start" in text
        before = to_python(warmup(cosine(0.1, steps=50), 5))
        assert "Warmup: 5 steps before the schedule, whose own ticks start after it." in before
        assert "Warmup" not in to_python(cosine(0.1, steps=50))

    def test_svg_says_which_warmup(self):
        svg = render_svg(GOYAL, steps_per_epoch=E)
        assert 'data-warmup="over"' in svg and "warmup laid over the first 780 steps" in svg
        assert 'data-warmup="before"' in render_svg(warmup(cosine(0.1, steps=50), 5))
        assert "data-warmup" not in render_svg(cosine(0.1, steps=50))


class TestOver:
    """warmup(..., place="over") is the ramp on [0, steps), then the target on the run's own clock."""

    def test_definition(self):
        target = cosine(0.1, steps=100)
        s = warmup(target, 10, start=0.01, place="over")
        t = np.arange(130)
        ramp = sw.ramp(0.01, target(10), 10)
        expected = np.where(t < 10, ramp(np.minimum(t, 10)), target(t))
        assert s.length == 100 and np.array_equal(s(t), expected)
        assert s(10) == target(10) and s.ramp() == ramp

    @pytest.mark.parametrize("curve", ["linear", "cosine", "geometric"])
    def test_curves_end_exactly_at_the_targets_rate(self, curve):
        target = exp_decay(0.1, 0.9, steps=50)
        s = warmup(target, 7, start=0.001, curve=curve, place="over")
        assert s(0) == pytest.approx(0.001, rel=1e-14) and s(7) == target(7)  # the target's own rate from tick 7
        assert s.ramp()(7) == pytest.approx(target(7), rel=1e-14)
        assert np.all(np.diff(s(np.arange(8))) > 0)

    def test_steps_longer_than_the_target_is_refused(self):
        with pytest.raises(ScheduleError, match=r"warmup: steps must be <= 90 \(the length of the schedule it is laid "
                                                r"over\), got 91 \(with place='over'.*place='before' puts it in front"):
            warmup(cosine(0.1, steps=90), 91, place="over")
        assert warmup(cosine(0.1, steps=90), 90, place="over").length == 90  # the whole run may be warmup

    def test_bad_place_is_refused(self):
        with pytest.raises(ScheduleError, match=r"warmup: place must be one of 'before', 'over', got 'after'"):
            warmup(cosine(0.1, steps=90), 5, place="after")

    def test_geometric_warmup_to_zero_is_refused(self):
        with pytest.raises(ScheduleError, match=r"warmup: target must be a schedule whose rate at tick 5 is > 0 "
                                                r"with curve='geometric'"):
            warmup(drops(0.1, at=(2,), factor=1.0, steps=9) * 0.0, 5, start=0.01, curve="geometric", place="over")

    def test_open_ended_target(self):
        target = exp_decay(0.1, 0.99)
        s = warmup(target, 20, place="over")
        assert s.length is None and s(20) == target(20) and s(10 ** 6) == target(10 ** 6)
        assert sw.schedule.window(s) >= sw.schedule.window(target)
        assert sw.schedule.window(warmup(flat(0.1), 40, place="over")) >= 41
        f = facts(s, steps=500)
        assert f.half_life == pytest.approx(math.log(0.5) / math.log(0.99)) and f.warmup_place == "over"

    def test_drops_inside_the_warmup_are_covered(self):
        """A drop of the target before the warmup ends is under the ramp: no jump there, none reported."""
        s = warmup(drops(0.1, at=(3, 20), steps=30), 5, place="over")
        y = s(np.arange(30))
        assert s(5) == pytest.approx(0.01) and np.all(np.diff(y[:6]) > 0)
        assert facts(s).breaks == (20,) and facts(s).joins == (5,)
        assert s._edges(30.0).tolist() == [5.0, 20.0]

    def test_restarts_keep_their_run_positions(self):
        cyc = restarts(cosine(0.1, steps=100), cycles=3)
        s = warmup(cyc, 10, place="over")
        assert s.length == 300 and facts(s).breaks == (100, 200)
        assert [s(t) for t in (100, 200)] == [cyc(100), cyc(200)]

    def test_spec_and_repr_round_trip(self):
        for s in (GOYAL, warmup(cosine(0.1, steps=40), 4, start=0.001, curve="geometric", place="over"),
                  warmup(exp_decay(0.1, 0.9), 3, place="over"), restarts(warmup(cosine(0.1, steps=9), 2, place="over"))):
            assert sw.from_spec(s.to_spec()) == s and eval(repr(s), vars(sw)) == s
            assert s.to_spec()["schedule"]["kind"] in ("warmup", "restarts")
        assert "place='over'" in repr(GOYAL)
        before = warmup(cosine(0.1, steps=40), 4)
        assert "place" not in repr(before) and before.to_spec()["schedule"]["place"] == "before"
        old = {"version": before.to_spec()["version"],
               "schedule": {k: v for k, v in before.to_spec()["schedule"].items() if k != "place"}}
        assert sw.from_spec(old) == before  # a spec written before place existed reads as "before"

    def test_places_are_different_values(self):
        a, b = warmup(cosine(0.1, steps=40), 4), warmup(cosine(0.1, steps=40), 4, place="over")
        assert a != b and a.length == 44 and b.length == 40

    def test_as_stages_only_before(self):
        assert warmup(cosine(0.1, steps=40), 4).as_stages().length == 44
        with pytest.raises(ScheduleError, match="as_stages"):
            warmup(cosine(0.1, steps=40), 4, place="over").as_stages()

    def test_bounds_hold_every_tick(self):
        s = warmup(restarts(cosine(0.1, steps=30), cycles=3, peak_decay=0.5), 12, start=0.2, curve="cosine", place="over")
        y = s(np.arange(91))
        rng = np.random.default_rng(7)
        a = rng.integers(0, 90, 200)
        b = np.minimum(a + rng.integers(0, 40, 200), 90)
        lo, hi = s._span(a.astype(float), b.astype(float))
        for i in range(a.size):
            seg = y[a[i]:b[i] + 1]
            assert lo[i] <= seg.min() + 1e-15 and seg.max() <= hi[i] + 1e-15
        assert s._top() >= y.max()

    def test_drawing(self):
        tr = trace(GOYAL, points=200)
        assert tr.joins.tolist() == [5 * E] and tr.breaks.tolist() == [30 * E, 60 * E, 80 * E]
        assert np.max(tr.y) == PEAK and 'data-role="join"' in render_svg(GOYAL)

    def test_lead_in_and_rescale(self):
        s = warmup(flat(0.1), 5, place="over")
        assert sw.plateau.lead_in(s) == 5
        # a rising warmup as a design's first stage is the design's lead-in, in either place
        assert sw.plateau.lead_in(stages(warmup(flat(0.1, steps=10), 5, place="over"), flat(0.01))) == 5
        assert sw.plateau.lead_in(stages(warmup(flat(0.1, steps=10), 5), flat(0.01))) == 5
        assert sw.plateau.lead_in(stages(warmup(flat(0.1, steps=10), 5, start=0.2), flat(0.01))) == 0  # falls
        big = sw.scale_for_batch(s, 128, 1024)  # open-ended and constant after the warmup: the warmup moves
        moved = big._pointwise_target()  # the rates x8 (linear rule), the warmup to the same samples seen
        assert moved.place == "over" and moved.steps == 1 and big(1) == pytest.approx(0.8)
        fixed = sw.scale_for_batch(GOYAL, 8192, 4096)
        assert fixed.length == 180 * E and fixed(60 * E) == pytest.approx(1.6 * 0.1)


class TestReplayWarmupOver:
    """The plateau replay's base may be a warmup laid over its first epochs: no drop during the warmup."""

    def test_replay_and_its_twin(self):
        base = warmup(flat(0.1), 5, start=0.01, place="over")
        metric = [0.5] * 12
        r = replay_plateau(metric, None, patience=1, base=base)
        assert r.lead_in == 5 and r.rates[:5].tolist() == base(np.arange(5)).tolist()
        assert r.drop_epochs and r.drop_epochs[0] >= 5 + 2
        ns: dict = {}
        exec(plateau_source(None, patience=1, base=base), ns)
        rule = ns["PlateauRate"]()
        got = [rule.rate]
        for a in metric:
            got.append(rule.update(a))
        assert got[:-1] == r.rates.tolist() and got[-1] == r.next_rate


# ------------------------------------------------------------------ random designs with a warmup laid over them
@st.composite
def over_designs(draw):
    """A random nested design, warmed up over its first ticks, sometimes inside another combinator."""
    inner = draw(st.integers(1, 3).flatmap(lambda d: schedule(d)))
    if inner.length is not None and inner.length > 3000:
        inner = inner.stretch(3000)
    n = inner.length
    w = draw(st.integers(1, 25 if n is None else min(n, 25)))
    curve = draw(st.sampled_from(["linear", "cosine", "geometric"]))
    if curve == "geometric" and inner(w) <= 0:
        curve = "linear"
    start = draw(st.sampled_from([0.0, 1e-4, 0.05])) if curve != "geometric" else inner(w) / 50
    s = warmup(inner, w, start=start, curve=curve, place="over")
    outer = draw(st.sampled_from(["none", "none", "restarts", "stretch", "stages", "scale", "warmup"]))
    if outer == "restarts" and s.length is not None:
        s = restarts(s, cycles=draw(st.integers(1, 3)), growth=draw(st.sampled_from([1.0, 1.5])))
    elif outer == "stretch" and s.length is not None:
        s = s.stretch(draw(st.integers(1, 400)))
    elif outer == "stages" and s.length is not None:
        s = stages(s, cosine(0.01, steps=20))
    elif outer == "scale":
        s = s * 0.5
    elif outer == "warmup":
        most = 5 if s.length is None else min(5, s.length)  # either place refuses a warmup longer than its target
        s = warmup(s, draw(st.integers(1, most)), place=draw(st.sampled_from(["before", "over"])))
    return s


class TestRandomOver:
    """Every design with a warmup laid over it: exact source, bounds, spec, readouts."""

    @settings(max_examples=120, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much, HealthCheck.data_too_large])
    @given(over_designs())
    def test_source_matches_and_values_are_sound(self, s):
        assert_matches(s)
        n = s.length if s.length is not None else sw.schedule.window(s)
        y = s(np.arange(n + 1))
        assert np.all(np.isfinite(y)) and np.all(y >= 0) and s._top() >= y.max() * (1 - 1e-12)
        lo, hi = s._span(np.array([0.0]), np.array([float(n)]))
        assert lo[0] <= y.min() * (1 + 1e-12) + 1e-300 and y.max() <= hi[0] * (1 + 1e-12) + 1e-300
        assert sw.from_spec(s.to_spec()) == s
        f = facts(s, steps=None if s.length is not None else n)
        assert f.peak == y[:n].max()


# ------------------------------------------------------------------ shares of the run
class TestShares:
    """A length as a share of the run, rounded by a stated rule (default up: common practice, no source)."""

    def test_fine_tuning_warmup_ratio(self):
        # a 6 % warmup ratio is a common fine-tuning recipe (from memory: RoBERTa's GLUE settings, Liu et al. 2019);
        # trainers round the ratio up (common practice, no source): 0.06 x 1,404 = 84.24 -> 85
        b = Budget(samples=14_976, batch=32, epochs=3)
        assert b.steps == 1404
        assert b.share(0.06) == 85 and b.share(0.06, rounding="down") == 84 and b.share(0.06, rounding="nearest") == 84
        s = warmup(cosine(2e-5, steps=b.steps), b.share(0.06), place="over")
        assert s.length == 1404 and s(85) == cosine(2e-5, steps=1404)(85)

    @pytest.mark.parametrize("fraction, total, up, down, nearest", [
        (0.07, 100, 7, 7, 7),           # 0.07 * 100 = 7.000000000000001 in floats: exact arithmetic says 7
        (0.29, 100, 29, 29, 29),        # 0.29 * 100 = 28.999999999999996 in floats
        (0.1, 3, 1, 0, 0),
        (0.5, 3, 2, 1, 2),              # nearest: halves up
        (1 / 3, 3, 1, 0, 1),            # 1/3 as a float is 0.3333333333333333, a little under a third
        (Fraction(1, 3), 3, 1, 1, 1),   # an exact third
        (0.0, 103_500, 0, 0, 0),
        (1.0, 2 ** 53, 2 ** 53, 2 ** 53, 2 ** 53),
        (0.06, 103_500, 6210, 6210, 6210),
    ])
    def test_rounding_rules(self, fraction, total, up, down, nearest):
        assert [share_ticks(fraction, total, r) for r in ROUNDINGS] == [up, down, nearest]

    def test_budget_share_in_epochs(self):
        b = Budget(samples=147_200, batch=128, epochs=90)
        assert b.share(0.06, unit="epoch") == 6 and b.share(0.05, unit="epoch") == 5  # 5.4 and 4.5 epochs round up
        assert b.share(0.05, unit="epoch", rounding="down") == 4 and b.share(0.05, unit="epoch", rounding="nearest") == 5

    def test_typed_share_uses_the_same_exact_rule(self):
        assert parse_length("7 %", "step", None, 100) == 7 == share_ticks(0.07, 100)
        assert parse_length("29 %", "step", None, 100) == 29
        assert parse_length("6 %", "step", 1150, 103_500) == 6210 == Budget(samples=147_200, batch=128, epochs=90).share(0.06)

    @pytest.mark.parametrize("fraction", [1.5, -0.01, float("nan"), float("inf"), True, "0.06", None, np.array([0.1])])
    def test_bad_fractions(self, fraction):
        with pytest.raises(ScheduleError, match=r"Budget.share: fraction must be a share of the run between 0 and 1"):
            Budget(samples=100, batch=10, epochs=1).share(fraction)

    def test_bad_rounding_and_unit(self):
        b = Budget(samples=100, batch=10, epochs=1)
        with pytest.raises(ScheduleError, match=r"Budget.share: rounding must be one of 'up', 'down', 'nearest', got 'ceil'"):
            b.share(0.5, rounding="ceil")
        with pytest.raises(ScheduleError, match=r"Budget.share: unit must be one of 'step', 'epoch', got 'batch'"):
            b.share(0.5, unit="batch")
        with pytest.raises(ScheduleError, match=r"share: total must be a whole number of ticks >= 0"):
            share_ticks(0.5, -3)
