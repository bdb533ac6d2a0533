"""Plateau replay: the rule, torch's ReduceLROnPlateau as reference, warmup + plateau, generated class."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from schedwidget import ScheduleError, cosine, flat, ramp, stages, warmup
from schedwidget.plateau import Drop, PlateauReplay, PlateauRule, lead_in, plateau_source, replay_plateau

START = 0.1
FACTORS = (0.1, 0.25, 0.5, 0.7)
FLOORS = (3e-6, 5e-5, 2e-3, 0.03)  # kept well above 1e-7, where torch skips tiny changes (eps=1e-8)
TOLERANCES = {True: (0.0, 1e-4, 1e-2, 0.05), False: (0.0, 1e-4, 0.01, 0.1)}


@st.composite
def histories(draw, max_len: int = 40) -> list[float]:
    """Metric series built from plateaus, rises, noise and exact ties with the best so far."""
    out: list[float] = []
    level = draw(st.floats(-1.0, 2.0, allow_nan=False, allow_infinity=False))
    while len(out) < max_len:
        kind = draw(st.sampled_from(["plateau", "rise", "fall", "noise", "tie", "edge"]))
        n = draw(st.integers(1, 6))
        if kind == "plateau":
            out += [level] * n
        elif kind in ("rise", "fall"):
            step = draw(st.sampled_from([1e-5, 1e-3, 0.02, 0.1])) * (1 if kind == "rise" else -1)
            out += [level + step * (k + 1) for k in range(n)]
            level = out[-1]
        elif kind == "noise":
            out += [round(level + draw(st.floats(-0.05, 0.05)), 3) for _ in range(n)]
        elif kind == "tie" and out:
            out += [draw(st.sampled_from(out))] * n
        elif kind == "edge" and out:  # right at a relative margin of an earlier value
            v = draw(st.sampled_from(out))
            out += [v * (1 + draw(st.sampled_from([1e-4, 1e-2, -1e-4, -1e-2])))]
        if draw(st.booleans()) and len(out) >= 1:
            break
    return out[:max_len]


def rule_kwargs(draw, relative: bool) -> dict:
    return dict(factor=draw(st.sampled_from(FACTORS)), patience=draw(st.integers(0, 6)),
                tolerance=draw(st.sampled_from(TOLERANCES[relative])), relative=relative,
                wait_after_drop=draw(st.integers(0, 4)), floor=draw(st.sampled_from(FLOORS)))


def torch_rates(torch, values, goal, factor, patience, tolerance, relative, wait_after_drop, floor,
                start=START, initial_wait=0):
    """The rate before the first step and after each ``scheduler.step(metric)``, as torch 2.13 sets it."""
    p = torch.nn.Parameter(torch.zeros(1))
    opt = torch.optim.SGD([p], lr=start)
    sch = torch.optim.lr_scheduler.ReduceLROnPlateau(
        opt, mode=goal, factor=factor, patience=patience, threshold=tolerance,
        threshold_mode="rel" if relative else "abs", cooldown=wait_after_drop, min_lr=floor)
    sch.cooldown_counter = initial_wait  # torch's own cooldown, used to hold the count during a warmup
    out = [opt.param_groups[0]["lr"]]
    for a in values:
        sch.step(a)
        out.append(opt.param_groups[0]["lr"])
    return out


def run_source(src: str, values, name: str = "PlateauRate", round_trip_at: int | None = None):
    """Rates a generated class gives: before each update and after the last; optional JSON state round trip."""
    ns: dict = {}
    exec(src, ns)
    rule = ns[name]()
    out = [rule.rate]
    for i, a in enumerate(values):
        if i == round_trip_at:
            saved = json.loads(json.dumps(rule.state()))
            rule = ns[name]()
            rule.load_state(saved)
        out.append(rule.update(a))
    return out


def all_rates(r: PlateauReplay) -> list[float]:
    return r.rates.tolist() + [r.next_rate]


class TestReplayPlateau:
    """replay_plateau follows the rule of DESIGN.md section 2b, evaluation by evaluation."""

    def test_drop_applies_from_the_next_epoch(self):
        """A drop decided at evaluation i changes rates from epoch i + 1."""
        r = replay_plateau([0.5, 0.5, 0.5], 0.1, patience=1)  # evals 1, 2 do not improve: count 2 > 1 at eval 2
        assert r.rates.tolist() == [0.1, 0.1, 0.1]
        assert r.next_rate == pytest.approx(0.01)
        assert r.drops == (Drop(epoch=3, rate_before=0.1, rate_after=0.1 * 0.1, best=0.5, best_at=0, stale=2),)

    def test_equality_never_improves(self):
        """With tolerance 0 an equal value counts as no improvement."""
        r = replay_plateau([1.0, 1.0], 0.1, patience=0, tolerance=0.0)
        assert r.drop_epochs == (2,)

    def test_relative_and_absolute_margins(self):
        """1.05 beats 1.0 by an absolute 0.05, but not by a relative 10 %."""
        assert replay_plateau([1.0, 1.05], 0.1, patience=0, tolerance=0.1, relative=True).drop_epochs == (2,)
        assert replay_plateau([1.0, 1.05], 0.1, patience=0, tolerance=0.01, relative=False).drop_epochs == ()
        assert replay_plateau([1.0, 1.05], 0.1, patience=0, tolerance=0.05, relative=False).drop_epochs == (2,)

    def test_min_goal(self):
        """For a loss, a lower value is an improvement and a higher one is not."""
        r = replay_plateau([2.0, 1.0, 1.5, 1.2], 0.1, goal="min", patience=1, tolerance=0.0)
        assert (r.best, r.best_at, r.drop_epochs) == (1.0, 1, (4,))

    def test_wait_holds_the_count(self):
        """After a drop, wait_after_drop evaluations do not count; the next drop comes that much later."""
        flatline = [1.0] * 12
        assert replay_plateau(flatline, 0.1, patience=1, wait_after_drop=0).drop_epochs == (3, 5, 7, 9, 11)
        assert replay_plateau(flatline, 0.1, patience=1, wait_after_drop=2).drop_epochs == (3, 7, 11)

    def test_best_updates_during_the_wait(self):
        """An improvement inside the wait still becomes the best."""
        r = replay_plateau([1.0, 1.0, 1.0, 3.0, 2.0], 0.1, patience=1, wait_after_drop=2)
        assert (r.best, r.best_at) == (3.0, 3)

    def test_floor_stops_drops_and_is_not_listed(self):
        """At the floor no further drop is listed and the rate stays."""
        r = replay_plateau([1.0] * 10, 0.1, patience=0, factor=0.5, floor=0.03)
        assert r.rates.tolist() == [0.1, 0.1, 0.05, 0.03, 0.03, 0.03, 0.03, 0.03, 0.03, 0.03]
        assert r.drop_epochs == (2, 3)

    def test_floor_reached_up_to_rounding(self):
        """A drop that would change the rate by rounding only (0.1 * 0.1**4 vs a floor of 1e-5) is no drop."""
        r = replay_plateau([1.0] * 10, 0.1, patience=0, floor=1e-5)
        assert r.drop_epochs == (2, 3, 4, 5)
        assert r.next_rate == 0.1 * 0.1 * 0.1 * 0.1 * 0.1 > 1e-5  # 1.0000000000000004e-05, held

    def test_record_is_frozen(self):
        """The record and its rates cannot be changed."""
        r = replay_plateau([1.0, 0.5], 0.1)
        with pytest.raises(ValueError):
            r.rates[0] = 1.0
        with pytest.raises(AttributeError):
            r.best = 2.0  # type: ignore[misc]

    def test_accepts_arrays(self):
        """A numpy array gives the same replay as a list."""
        values = [0.3, 0.4, 0.4, 0.4]
        assert replay_plateau(np.array(values), 0.1, patience=1).drops == replay_plateau(values, 0.1, patience=1).drops


class TestTorchReference:
    """Same rate at every epoch as torch 2.13's ReduceLROnPlateau on generated histories."""

    @pytest.mark.parametrize("goal", ["max", "min"])
    @pytest.mark.parametrize("relative", [True, False])
    @settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(data=st.data())
    def test_same_rates_as_torch(self, torch, goal, relative, data):
        """Compared with optimizer.param_groups[0]['lr'] after each scheduler.step(metric)."""
        values = data.draw(histories())
        kw = rule_kwargs(data.draw, relative)
        ours = replay_plateau(values, START, goal=goal, **kw)
        # torch skips a change smaller than its eps=1e-8; keep to changes well above it
        assume(all(d.rate_before - d.rate_after > 1e-7 for d in ours.drops))
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0
        assert all_rates(ours) == torch_rates(torch, values, goal, **kw)

    def test_floor_at_a_power_of_ten_like_torch(self, torch):
        """Where the floor is reached up to rounding, torch also leaves the rate (its eps rule)."""
        values = [1.0] * 12
        kw = dict(factor=0.1, patience=0, tolerance=1e-4, relative=True, wait_after_drop=0, floor=1e-5)
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0
        assert all_rates(replay_plateau(values, START, **kw)) == torch_rates(torch, values, "max", **kw)

    def test_demo_histories_like_torch(self, torch):
        """Each shipped demo history replays like torch (rates above 1e-7 by the floor)."""
        from schedwidget.metrics import DEMO_NAMES, demo_path, read_metric

        for name in DEMO_NAMES:
            values = read_metric(demo_path(name)).tolist()
            kw = dict(factor=0.1, patience=3, tolerance=1e-4, relative=True, wait_after_drop=1, floor=3e-6)
            # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0
            assert all_rates(replay_plateau(values, START, **kw)) == torch_rates(torch, values, "max", **kw)


class TestWarmupThenPlateau:
    """A warmup base runs undisturbed, then the plateau rule takes over from the warmup's peak."""

    def test_hand_example(self):
        """A stale metric during a 3-epoch warmup causes no drop; afterwards patience 1 drops from epoch 5."""
        base = warmup(flat(0.1), 3)
        r = replay_plateau([0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5], None, patience=1, base=base)
        # evaluations 0-2 hold the count; 3 and 4 are stale: count 2 > 1 at evaluation 4, new rate from epoch 5;
        # 5 and 6 are stale again: the next rate, for epoch 7, is another tenth lower
        assert r.rates[:3].tolist() == base(np.arange(3)).tolist()
        assert r.rates[3:].tolist() == pytest.approx([0.1, 0.1, 0.01, 0.01])
        assert (r.lead_in, r.drop_epochs, r.next_rate) == (3, (5, 7), pytest.approx(0.001))

    @settings(max_examples=40, deadline=None)
    @given(data=st.data())
    def test_warmup_then_torch_rule(self, torch, data):
        """rates == warmup's rates before its end, == torch's rule (count held during the warmup) after."""
        values = data.draw(histories())
        relative = data.draw(st.booleans())
        goal = data.draw(st.sampled_from(["max", "min"]))
        kw = rule_kwargs(data.draw, relative)
        w = data.draw(st.integers(1, 8))
        base = warmup(flat(START), w)
        ours = replay_plateau(values, None, goal=goal, base=base, **kw)
        assume(all(d.rate_before - d.rate_after > 1e-7 for d in ours.drops))
        n = len(values)
        expected_warm = base(np.arange(min(w, n + 1))).tolist()
        # reference: torch 2.13 ReduceLROnPlateau, its cooldown counter set to the warmup length at the start
        ref = torch_rates(torch, values, goal, initial_wait=w, **kw)
        got = all_rates(ours)
        assert got[:w] == expected_warm
        assert got[w:] == ref[w:]

    @pytest.mark.parametrize("peak", [0.37, 3e-3, 1.7])
    def test_warmup_rates_exact_for_any_peak(self, peak):
        """Before the first drop the rates are the warmup's own, to the last bit."""
        base = warmup(flat(peak), 7)
        r = replay_plateau([0.1, 0.2, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3], None, patience=1, base=base)
        assert r.rates[:7].tolist() == base(np.arange(7)).tolist()
        assert r.drop_epochs == (9,) and r.rates[8] == peak

    def test_base_shape_is_multiplied(self):
        """After the warmup a decaying base keeps its shape, scaled by factor at each drop."""
        base = warmup(cosine(0.1, steps=30), 4)
        values = [0.5] * 20
        r = replay_plateau(values, None, patience=2, factor=0.5, base=base)
        t = np.arange(20)
        k = np.array([sum(e <= i for e in r.drop_epochs) for i in t])
        np.testing.assert_allclose(r.rates, base(t) * 0.5 ** k, rtol=1e-13)
        assert r.drop_epochs[0] == 4 + 3  # evaluations 4, 5, 6 are stale; the first drop applies from epoch 7

    def test_lead_in(self):
        """lead_in reads a warmup node or a rising first ramp stage, and is 0 otherwise."""
        assert lead_in(warmup(flat(0.1), 5)) == 5
        assert lead_in(stages(ramp(0.0, 0.1, 7), flat(0.1))) == 7
        assert lead_in(stages(ramp(0.1, 0.0, 7), flat(0.0))) == 0
        assert lead_in(cosine(0.1, steps=10)) == 0
        assert lead_in(warmup(cosine(0.1, steps=85 * 1150), 5 * 1150).stretch(90)) == 5  # steps read per epoch
        assert lead_in(warmup(cosine(0.1, steps=95), 5).stretch(50)) == 3  # 2.5 epochs: the first whole one after

    def test_start_from_base(self):
        """start_lr=None takes the base's rate at the end of its warmup."""
        r = replay_plateau([1.0, 2.0, 3.0, 4.0], None, base=warmup(flat(0.2), 2))
        assert r.rates.tolist() == [0.0, 0.1, 0.2, 0.2]


class TestPlateauSource:
    """The generated standard-library class gives the rates of replay_plateau, across a state round trip."""

    @settings(max_examples=60, deadline=None)
    @given(data=st.data())
    def test_same_rates_with_round_trip(self, data):
        """Same rate at every epoch, with a JSON round trip of state() at a random evaluation."""
        values = data.draw(histories())
        relative = data.draw(st.booleans())
        goal = data.draw(st.sampled_from(["max", "min"]))
        kw = rule_kwargs(data.draw, relative)
        at = data.draw(st.integers(0, len(values)))
        expected = all_rates(replay_plateau(values, START, goal=goal, **kw))
        assert run_source(plateau_source(START, goal=goal, **kw), values, round_trip_at=at) == expected

    @settings(max_examples=25, deadline=None)
    @given(data=st.data())
    def test_same_rates_with_warmup(self, data):
        """A warmup base (flat or cosine after it) is written by to_python and gives the replay's rates."""
        values = data.draw(histories())
        kw = rule_kwargs(data.draw, True)
        after = data.draw(st.sampled_from([flat(START), cosine(START, steps=30)]))
        base = warmup(after, data.draw(st.integers(1, 6)))
        at = data.draw(st.integers(0, len(values)))
        expected = all_rates(replay_plateau(values, None, base=base, **kw))
        got = run_source(plateau_source(None, base=base, name="Warm", **kw), values, "Warm", round_trip_at=at)
        # the base is math.* in the generated function and numpy in the replay: equal to the last bit or two
        np.testing.assert_allclose(got, expected, rtol=1e-12, atol=0)

    def test_standard_library_only(self):
        """The source imports nothing but math."""
        src = plateau_source(0.1)
        imports = [line for line in src.splitlines() if line.lstrip().startswith(("import ", "from "))]
        assert imports == ["import math"]

    def test_state_is_plain_json(self):
        """state() survives json and names the rule's settings."""
        ns: dict = {}
        exec(plateau_source(0.1, goal="min", patience=2), ns)
        rule = ns["PlateauRate"]()
        rule.update(1.0)
        d = json.loads(json.dumps(rule.state()))
        assert d["settings"]["goal"] == "min" and d["best"] == 1.0 and d["epoch"] == 1

    def test_refuses_another_rules_state(self):
        """load_state of a state from a different rule is a ValueError."""
        ns: dict = {}
        exec(plateau_source(0.1, patience=2, name="A"), ns)
        exec(plateau_source(0.1, patience=5, name="B"), ns)
        with pytest.raises(ValueError, match="different rule"):
            ns["B"]().load_state(ns["A"]().state())

    def test_rejects_nan_metric(self):
        """update(nan) is a ValueError, not a silent stall."""
        ns: dict = {}
        exec(plateau_source(0.1), ns)
        with pytest.raises(ValueError, match="finite"):
            ns["PlateauRate"]().update(math.nan)

    @pytest.mark.parametrize("name", ["class", "__init__", "Plateau-Rate", "Pläteau", 3])
    def test_bad_names(self, name):
        """A name that cannot be a Python class name is refused."""
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be a plain Python identifier"):
            plateau_source(0.1, name=name)

    def test_taken_names(self):
        """A name the generated code uses itself is refused."""
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be a name the generated code does not"):
            plateau_source(0.1, name="math")

    def test_bad_rule_names_this_function(self):
        """A bad rule parameter is reported under plateau_source."""
        with pytest.raises(ScheduleError, match=r"^plateau_source: factor must be"):
            plateau_source(0.1, factor=2.0)


class TestBadInput:
    """Bad input gives a ScheduleError naming the parameter, the value and what is allowed."""

    @pytest.mark.parametrize("kw, pattern", [
        (dict(metric=[]), r"metric must be a non-empty history \(at least one value\), got \[\]"),
        (dict(metric=[math.nan, math.nan]), r"metric must be a history with finite values, got '2 values, all nan"),
        (dict(metric=[1.0, 2.0, math.nan, math.inf]), r"metric\[2\] must be a finite number, got nan .*1 more"),
        (dict(metric=[1.0, "x"]), r"metric\[1\] must be a number, got 'x'"),
        (dict(factor=1.0), r"factor must be a finite number in \(0, 1\), got 1.0"),
        (dict(factor=0.0), r"factor must be a finite number in \(0, 1\), got 0.0"),
        (dict(patience=-1), r"patience must be a whole number >= 0, got -1"),
        (dict(patience=1.5), r"patience must be a whole number >= 0, got 1.5"),
        (dict(goal="up"), r"goal must be one of 'max', 'min', got 'up' \('max' for an accuracy"),
        (dict(tolerance=-0.1), r"tolerance must be a finite number >= 0, got -0.1"),
        (dict(tolerance=1.0), r"tolerance must be < 1 when relative=True, got 1.0"),
        (dict(wait_after_drop=-2), r"wait_after_drop must be a whole number >= 0, got -2"),
        (dict(floor=0.5), r"floor must be a rate <= start_lr = 0.1, got 0.5"),
        (dict(start_lr=0.0), r"start_lr must be a finite rate > 0, got 0.0"),
        (dict(relative="yes"), r"relative must be True or False, got 'yes'"),
        (dict(base="warmup"), r"base must be None or a Schedule"),
    ])
    def test_messages(self, kw, pattern):
        """Each bad value is named with its allowed range."""
        args = dict(metric=[1.0, 2.0, 3.0], start_lr=0.1)
        args.update(kw)
        with pytest.raises(ScheduleError, match=r"^replay_plateau: " + pattern):
            replay_plateau(**args)

    def test_zero_base_start(self):
        """A base that is 0 after its warmup cannot give the starting rate."""
        with pytest.raises(ScheduleError, match=r"start_lr must be a rate > 0, got None \(base is 0 at epoch 2"):
            replay_plateau([1.0, 2.0], None, base=warmup(flat(0.0), 2))


class TestPlateauRule:
    """PlateauRule declares each parameter once, with soft ranges for the panel's controls."""

    def test_declarations(self):
        """Every rule parameter has a declaration with a doc line."""
        params = PlateauRule.params()
        assert list(params) == ["goal", "factor", "patience", "tolerance", "relative", "wait_after_drop", "floor"]
        assert all(p.doc for p in params.values())

    def test_improves_matches_the_rule(self):
        """improves() is the section 2b comparison, with the first evaluation always improving."""
        assert PlateauRule().improves(0.0, -math.inf)
        assert not PlateauRule(tolerance=0.0).improves(1.0, 1.0)
        assert PlateauRule(goal="min", relative=False, tolerance=0.5).improves(0.4, 1.0)
        assert not PlateauRule(goal="min", relative=False, tolerance=0.5).improves(0.6, 1.0)
