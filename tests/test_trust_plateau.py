"""Plateau replay against torch at every rate (min_drop), huge numbers and unsafe class names refused (issue 10)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from schedwidget import ScheduleError, cosine, warmup
from schedwidget.metrics import DEMO_NAMES, demo_path, read_metric
from schedwidget.plateau import MEMBERS, TORCH_MIN_DROP, lead_in, plateau_source, replay_plateau

from .test_plateau import START, all_rates, histories, run_source

# the three shipped demo histories (invented demo data), with no floor, so the rule keeps dropping: without
# torch's skip rule its rate falls far below 1e-8 (1e-9 to 1e-13 after 90 epochs at factor 0.1)
DEMO_RULE = dict(factor=0.1, patience=3, tolerance=1e-4, relative=True, wait_after_drop=1, floor=0.0)
# factor 0.01: torch's own rate falls below 1e-8 too (1e-7 -> 1e-9 is a drop of 9.9e-8, which it applies)
STEEP_RULE = DEMO_RULE | dict(factor=0.01)


def torch_default_eps(torch, values, goal, factor, patience, tolerance, relative, wait_after_drop, floor,
                      start=START):
    """Rates of torch's ReduceLROnPlateau with its own default eps (1e-8): before the first step and after each."""
    p = torch.nn.Parameter(torch.zeros(1))
    opt = torch.optim.SGD([p], lr=start)
    sch = torch.optim.lr_scheduler.ReduceLROnPlateau(
        opt, mode=goal, factor=factor, patience=patience, threshold=tolerance,
        threshold_mode="rel" if relative else "abs", cooldown=wait_after_drop, min_lr=floor)
    assert sch.eps == TORCH_MIN_DROP  # torch 2.13's default, read from its scheduler
    out = [opt.param_groups[0]["lr"]]
    for a in values:
        sch.step(a)
        out.append(opt.param_groups[0]["lr"])
    return out


def demo(name: str) -> list[float]:
    return read_metric(demo_path(name)).tolist()


class TestTorchAtEveryRate:
    """min_drop=1e-8 is torch's skip rule: the same rates bit for bit, also after the rate falls below 1e-8."""

    @pytest.mark.parametrize("name", DEMO_NAMES)
    def test_demo_histories_bit_for_bit(self, torch, name):
        """Each demo history, floor 0, past the epoch where the default rule falls below 1e-8: torch's rates."""
        values = demo(name)
        ours = replay_plateau(values, START, min_drop=TORCH_MIN_DROP, **DEMO_RULE)
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0, default eps
        assert all_rates(ours) == torch_default_eps(torch, values, "max", **DEMO_RULE)
        assert min(all_rates(replay_plateau(values, START, **DEMO_RULE))) < 1e-8  # the regime that diverged

    @pytest.mark.parametrize("name", DEMO_NAMES)
    def test_demo_histories_steep_factor(self, torch, name):
        """Factor 0.01: torch's own rate falls below 1e-8, and the replay with min_drop follows it there."""
        values = demo(name)
        ours = replay_plateau(values, START, min_drop=TORCH_MIN_DROP, **STEEP_RULE)
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0, default eps
        ref = torch_default_eps(torch, values, "max", **STEEP_RULE)
        assert min(ref) < 1e-8 and all_rates(ours) == ref

    @pytest.mark.parametrize("name", DEMO_NAMES)
    def test_demo_histories_without_the_option(self, torch, name):
        """Off (the default), the two agree up to the first drop of 1e-8 or less, and differ from there."""
        values = demo(name)
        ours = replay_plateau(values, START, **DEMO_RULE)
        ref = torch_default_eps(torch, values, "max", **DEMO_RULE)
        small = [d for d in ours.drops if d.rate_before - d.rate_after <= 1e-8]
        assert small, "the demo rule must reach drops of 1e-8 or less for this check"
        first = small[0].epoch
        assert all_rates(ours)[:first] == ref[:first]
        assert all_rates(ours)[first] < ref[first]

    @pytest.mark.parametrize("goal", ["max", "min"])
    @settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(data=st.data())
    def test_generated_histories_bit_for_bit(self, torch, goal, data):
        """Any rule, floors from 0 to far above 1e-8, with min_drop=1e-8: torch's rates, no assumption needed."""
        values = data.draw(histories())
        relative = data.draw(st.booleans())
        kw = dict(factor=data.draw(st.sampled_from([0.1, 0.5, 0.9, 1e-3])), patience=data.draw(st.integers(0, 3)),
                  tolerance=data.draw(st.sampled_from([0.0, 1e-4, 0.01])), relative=relative,
                  wait_after_drop=data.draw(st.integers(0, 2)),
                  floor=data.draw(st.sampled_from([0.0, 1e-12, 1e-9, 5e-9, 3e-6, 0.01])))
        start = data.draw(st.sampled_from([START, 1e-7, 2e-8, 5e-9, 3.0]))
        kw["floor"] = min(kw["floor"], start)
        ours = replay_plateau(values, start, goal=goal, min_drop=TORCH_MIN_DROP, **kw)
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0, default eps
        assert all_rates(ours) == torch_default_eps(torch, values, goal, start=start, **kw)

    @settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(data=st.data())
    def test_when_the_default_agrees(self, torch, data):
        """Default min_drop=0: equal to torch exactly when every applied drop is larger than 1e-8 (floor <= 10)."""
        values = data.draw(histories())
        kw = dict(factor=data.draw(st.sampled_from([0.1, 0.5])), patience=data.draw(st.integers(0, 2)),
                  tolerance=1e-4, relative=True, wait_after_drop=0,
                  floor=data.draw(st.sampled_from([0.0, 1e-9, 3e-6])))
        start = data.draw(st.sampled_from([START, 1e-7, 3e-8]))
        kw["floor"] = min(kw["floor"], start)
        ours = replay_plateau(values, start, **kw)
        large = all(d.rate_before - d.rate_after > 1e-8 for d in ours.drops)
        assert (all_rates(ours) == torch_default_eps(torch, values, "max", start=start, **kw)) == large


class TestGeneratedClassOption:
    """plateau_source carries min_drop: the same rates as the replay, across a state round trip."""

    @settings(max_examples=40, deadline=None)
    @given(data=st.data())
    def test_same_rates_as_replay(self, data):
        values = data.draw(histories())
        kw = dict(factor=data.draw(st.sampled_from([0.1, 0.01])), patience=data.draw(st.integers(0, 2)),
                  floor=data.draw(st.sampled_from([0.0, 5e-9])))
        start = data.draw(st.sampled_from([START, 1e-7]))
        at = data.draw(st.integers(0, len(values)))
        expected = all_rates(replay_plateau(values, start, min_drop=TORCH_MIN_DROP, **kw))
        assert run_source(plateau_source(start, min_drop=TORCH_MIN_DROP, **kw), values, round_trip_at=at) == expected

    def test_demo_history_like_torch(self, torch):
        """The generated class gives torch's rates on a demo history, below 1e-8 too."""
        values = demo(list(DEMO_NAMES)[0])
        got = run_source(plateau_source(START, min_drop=TORCH_MIN_DROP, **STEEP_RULE), values)
        # reference: torch.optim.lr_scheduler.ReduceLROnPlateau, torch 2.13.0, default eps
        ref = torch_default_eps(torch, values, "max", **STEEP_RULE)
        assert min(ref) < 1e-8 and got == ref

    def test_off_by_default_keeps_the_state_format(self):
        """Without the option the settings have no min_drop key, so states saved before it still load."""
        ns: dict = {}
        exec(plateau_source(START), ns)
        assert "min_drop" not in ns["PlateauRate"].SETTINGS
        exec(plateau_source(START, min_drop=1e-8, name="Skip"), ns)
        assert ns["Skip"].SETTINGS["min_drop"] == 1e-8

    def test_with_a_warmup_base(self):
        """min_drop acts on the rule's own rate under a base, like the replay."""
        values = demo(list(DEMO_NAMES)[1])
        base = warmup(cosine(START, steps=90), 5)
        expected = all_rates(replay_plateau(values, None, base=base, min_drop=1e-8, **DEMO_RULE))
        got = run_source(plateau_source(None, base=base, min_drop=1e-8, name="Warm", **DEMO_RULE), values, "Warm")
        np.testing.assert_allclose(got, expected, rtol=1e-12, atol=0)


HUGE = 10 ** 400
GIANT = 10 ** 5000  # more digits than Python will turn into a string by default


class TestHugeNumbers:
    """Integers too large for a float are a ScheduleError, not an OverflowError."""

    @pytest.mark.parametrize("kw, pattern", [
        (dict(factor=HUGE), r"factor must be a finite number in \(0, 1\), got an integer of about 401 digits"),
        (dict(factor=-GIANT), r"factor must be a finite number in \(0, 1\), got an integer of about 5001 digits"),
        (dict(start_lr=HUGE), r"start_lr must be a finite rate > 0, got an integer of about 401 digits"),
        (dict(start_lr=GIANT), r"start_lr must be a finite rate > 0"),
        (dict(floor=HUGE), r"floor must be a finite rate >= 0, got an integer of about 401 digits"),
        (dict(tolerance=HUGE), r"tolerance must be a finite number >= 0"),
        (dict(patience=HUGE), r"patience must be a whole number <= 2\*\*53"),
        (dict(min_drop=HUGE), r"min_drop must be a finite rate >= 0, got an integer of about 401 digits"),
        (dict(min_drop=-1e-8), r"min_drop must be a finite rate >= 0, got -1e-08 \(0 applies every drop"),
        (dict(min_drop=math.nan), r"min_drop must be a finite rate >= 0, got nan"),
        (dict(min_drop=True), r"min_drop must be a finite rate >= 0, got True"),
        (dict(min_drop="1e-8"), r"min_drop must be a finite rate >= 0, got '1e-8'"),
    ])
    @pytest.mark.parametrize("owner", ["replay_plateau", "plateau_source"])
    def test_messages(self, owner, kw, pattern):
        args = dict(start_lr=0.1) | kw
        with pytest.raises(ScheduleError, match="^" + owner + ": " + pattern):
            if owner == "replay_plateau":
                replay_plateau([1.0, 2.0, 3.0], **args)
            else:
                plateau_source(**args)

    @pytest.mark.parametrize("base", ["warmup", 5, 0.1])
    def test_lead_in_of_a_non_schedule(self, base):
        """lead_in reads a Schedule or None; anything else is named, not silently 0."""
        with pytest.raises(ScheduleError, match=r"^lead_in: base must be None or a Schedule"):
            lead_in(base)

    def test_whole_numbers_that_fit_are_fine(self):
        """A large integer that fits a float is a number like any other."""
        assert replay_plateau([1.0, 1.0], 10 ** 20, patience=0).rates.tolist() == [1e20, 1e20]


class TestClassNames:
    """Names that would fail at run time or read as the class's own members are refused."""

    @pytest.mark.parametrize("name", ["_x", "_PlateauRate", "_x_", "_9"])
    def test_private_names(self, name):
        """A leading underscore: the base function's name would be mangled inside the class (NameError)."""
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be a name that does not start with '_'"):
            plateau_source(0.1, name=name)

    @pytest.mark.parametrize("name", ["__x", "_", "__PlateauRate"])
    def test_names_check_name_refuses(self, name):
        """Names refused by the shared identifier check (a __ prefix, the soft keyword _) stay refused."""
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be "):
            plateau_source(0.1, name=name)

    @pytest.mark.parametrize("name", sorted(MEMBERS))
    def test_member_names(self, name):
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be a name the generated class does "
                                                r"not use for its own members"):
            plateau_source(0.1, name=name)

    @pytest.mark.parametrize("name", ["max", "float", "math", "__init__"])
    def test_module_names_stay_refused(self, name):
        with pytest.raises(ScheduleError, match=r"^plateau_source: name must be a "):
            plateau_source(0.1, name=name)

    @pytest.mark.parametrize("name", ["PlateauRate", "Rule", "x_", "lr_at", "a", "metric", "k", "self"])
    def test_accepted_names_run_with_a_base(self, name):
        """Every accepted name runs, with a base function beside the class, and round-trips its state."""
        base = warmup(cosine(START, steps=30), 3)
        values = [0.5, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6]
        got = run_source(plateau_source(None, base=base, patience=0, name=name), values, name, round_trip_at=3)
        np.testing.assert_allclose(got, all_rates(replay_plateau(values, None, base=base, patience=0)), rtol=1e-12)
