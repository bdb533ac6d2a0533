"""Tracks: momentum, beta2 and weight decay on the rate's clock, per-group designs, the momentum companion,
specs, generated source, readouts and pictures; torch 2.13's one-cycle and cyclic schedulers as references."""

from __future__ import annotations

import json
import random
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, flat, from_spec, load, ramp, save, stages, to_python, to_spec
from schedwidget import one_cycle, triangle, warmup
from schedwidget.pieces import _piecewise
from schedwidget.track_readouts import decay_per_step, track_facts, tracks_sentence, tracks_svg
from schedwidget.tracks import (GroupDesigns, Tracks, inverse_momentum, load_tracks, per_group, tracks,
                                tracks_from_spec)


def close(ours, ref, rel=1e-12):
    """Relative agreement, with an absolute floor for the smallest values."""
    np.testing.assert_allclose(ours, ref, rtol=rel, atol=rel * float(np.max(np.abs(ref))))


def stepped(torch, make, n, optimizer):
    """(lr, momentum) a torch scheduler gives at ticks 0..n-1; momentum is SGD's "momentum" or Adam's betas[0]."""
    p = torch.nn.Parameter(torch.zeros(1))
    opt = torch.optim.SGD([p], lr=0.1, momentum=0.9) if optimizer == "sgd" else torch.optim.Adam([p], lr=0.1)
    sched = make(opt)

    def read():
        g = opt.param_groups[0]
        return g["lr"], (g["momentum"] if optimizer == "sgd" else g["betas"][0])

    out = [read()]
    for _ in range(n - 1):
        opt.step()
        sched.step()
        out.append(read())
    lr, m = zip(*out)
    return np.array(lr), np.array(m)


ONE = one_cycle(0.1, steps=1000, tail=0.1)
FULL = tracks(ONE, momentum=inverse_momentum(ONE), beta2=flat(0.999), weight_decay=cosine(0.05, 0.01, steps=1000))


class TestTracks:
    """tracks(...) holds a rate and optional designs on its clock, each checked for its own range."""

    def test_values_at_a_tick(self):
        v = FULL(450)
        # SGDR eq. 5 (Loshchilov & Hutter 2017) for the weight decay's cosine
        wd = 0.01 + (0.05 - 0.01) * (1 + np.cos(np.pi * 450 / 1000)) / 2
        assert v == {"rate": 0.1, "momentum": 0.85, "beta2": 0.999, "weight_decay": pytest.approx(wd, rel=1e-15)}
        assert FULL.length == 1000 and FULL.names() == ("rate", "momentum", "beta2", "weight_decay")

    def test_repr_rebuilds(self):
        ns = {"tracks": tracks, "one_cycle": one_cycle, "stages": stages, "ramp": ramp, "flat": flat,
              "cosine": cosine}
        assert eval(repr(FULL), ns) == FULL

    @pytest.mark.parametrize("name", ["momentum", "beta2"])
    def test_momentum_at_one_is_refused(self, name):
        with pytest.raises(ScheduleError, match=rf"tracks: {name} must be a design whose values stay in \[0, 1\) "
                                                r"at every tick, got .* \(it reaches 1.0 at tick 30"):
            tracks(ramp(0.9, 1.0, 30), **{name: stages(flat(0.5, steps=30), flat(1.0))})

    def test_bound_that_is_not_tight_reads_the_ticks(self):
        # the product's interval bound (0.99 * 1.02 > 1) does not settle it; the ticks never reach 1
        m = ramp(0.99, 0.5, 100) * ramp(0.5, 1.02, 100)
        assert m._span(np.array([0.0]), np.array([100.0]))[1][0] >= 1.0
        assert float(np.max(m(np.arange(101)))) < 1.0
        assert tracks(flat(0.1, steps=100), momentum=m).momentum is m

    def test_long_budget_with_loose_bounds_is_refused(self):
        """Over 2**21 ticks not every tick is read: bounds that reach 1 refuse, a clip makes them tight."""
        n = 10 ** 7
        m = ramp(0.99, 0.5, n) * ramp(0.5, 1.02, n)
        with pytest.raises(ScheduleError, match=r"its interval bounds reach 1.0098.*too long to read every tick"):
            tracks(flat(0.1, steps=n), momentum=m)
        assert tracks(flat(0.1, steps=n), momentum=m.clip(high=0.99)).momentum == m.clip(high=0.99)

    def test_fuzzed_values_outside_their_range_are_refused(self):
        """Seeded: a momentum or beta2 design is refused exactly when some tick (or its held value) reaches 1."""
        rng = random.Random(15)
        refused = accepted = 0
        for _ in range(300):
            n = rng.randrange(2, 400)
            a, b = rng.uniform(0.0, 1.3), rng.uniform(0.0, 1.3)
            shape = rng.choice(["flat", "ramp", "cosine", "triangle", "knots"])
            if shape == "flat":
                s = flat(a, steps=n)
            elif shape == "ramp":
                s = ramp(a, b, n)
            elif shape == "cosine":
                s = cosine(max(a, b), min(a, b), steps=n)
            elif shape == "triangle":
                s = triangle(min(a, b), max(a, b), half_period=rng.randrange(1, 50), shrink=rng.uniform(0.2, 1.0),
                             steps=n)
            else:
                from schedwidget import knots
                s = knots([(0, a), (rng.randrange(1, n), b), (n, rng.uniform(0.0, 1.3))])
            top = float(np.max(s(np.arange(n + 2))))
            name = rng.choice(["momentum", "beta2"])
            if top >= 1.0:
                with pytest.raises(ScheduleError, match=rf"tracks: {name} must be .* \[0, 1\) at every tick"):
                    tracks(flat(0.1, steps=n), **{name: s})
                refused += 1
            else:
                assert getattr(tracks(flat(0.1, steps=n), **{name: s}), name) is s
                accepted += 1
        assert refused > 50 and accepted > 50

    def test_a_negative_weight_decay_cannot_be_built(self):
        with pytest.raises(ScheduleError, match=r"flat: lr must be"):
            tracks(ONE, weight_decay=flat(-0.01))

    def test_other_length_is_refused(self):
        with pytest.raises(ScheduleError, match=r"tracks: momentum's length must be the rate's length \(1,000\) "
                                                r"or None, got 500"):
            tracks(ONE, momentum=flat(0.9, steps=500))

    def test_not_a_schedule(self):
        with pytest.raises(ScheduleError, match=r"tracks: momentum must be a Schedule .*got 0.9 \(a constant is "
                                                r"flat\(value\)\)"):
            tracks(ONE, momentum=0.9)
        with pytest.raises(ScheduleError, match=r"tracks: rate must be a Schedule"):
            tracks("cosine")


class TestPerGroup:
    """per_group(...) holds one design per param group, by list or by name."""

    def test_list_and_mapping(self):
        g = per_group([ONE, FULL])
        assert isinstance(g, GroupDesigns) and len(g) == 2 and g.names is None
        assert g.groups[0] == Tracks(ONE) and g.groups[1] is FULL
        m = per_group({"backbone": ONE, "head": FULL})
        assert m.names == ("backbone", "head")

    def test_builtin_names_are_group_names(self):
        assert per_group({"input": ONE, "max": ONE}).names == ("input", "max")

    def test_bad_names(self):
        with pytest.raises(ScheduleError, match=r"per_group: group name 0: per_group: name must be a plain Python"):
            per_group({"back bone": ONE})
        with pytest.raises(ScheduleError, match=r"per_group: designs\[1\] must be a Schedule or tracks"):
            per_group([ONE, 0.1])
        with pytest.raises(ScheduleError, match=r"per_group: designs must be between 1 and"):
            per_group([])


class TestInverseMomentum:
    """The momentum companion of a one-cycle or triangular rate (Smith 2018, cyclical momentum)."""

    @pytest.mark.parametrize("steps,curve,phases", [(1000, "linear", 3), (1001, "linear", 3), (977, "cosine", 3),
                                                    (1000, "cosine", 2), (333, "linear", 2), (7, "linear", 3)])
    def test_exact_at_every_tick(self, steps, curve, phases):
        r = one_cycle(0.1, steps=steps, curve=curve, phases=phases)
        m = inverse_momentum(r, high=0.95, low=0.85)
        xs, _ = r._knots()
        ys = np.array([0.85 if i == 1 else 0.95 for i in range(len(xs))])  # lowest at the peak, highest elsewhere
        t = np.arange(steps + 3)
        close(m(t), _piecewise(xs, ys, np.minimum(t, steps).astype(float), curve), rel=1e-15)

    def test_whole_phase_ends_read_as_stages(self):
        assert inverse_momentum(one_cycle(0.1, steps=1000)) == stages(ramp(0.95, 0.85, 450), ramp(0.85, 0.95, 450),
                                                                      flat(0.95, steps=100))

    def test_scaled_and_stretched(self):
        t = np.arange(2003)
        assert inverse_momentum(ONE * 0.5) == inverse_momentum(ONE)
        close(inverse_momentum(ONE.stretch(2000))(t), inverse_momentum(one_cycle(0.1, steps=2000))(t), rel=1e-15)

    def test_defaults_and_refusals(self):
        m = inverse_momentum(ONE)
        assert (m(0), m(450), m(900), m(1000)) == (0.95, 0.85, 0.95, 0.95)  # common practice, no source
        with pytest.raises(ScheduleError, match=r"inverse_momentum: low must be <= high = 0.9, got 0.95"):
            inverse_momentum(ONE, high=0.9, low=0.95)
        with pytest.raises(ScheduleError, match=r"inverse_momentum: high must be a momentum in \[0, 1\), got 1.0"):
            inverse_momentum(ONE, high=1.0)
        with pytest.raises(ScheduleError, match=r"inverse_momentum: design must be a one_cycle\(...\) or "
                                                r"triangle\(...\) design"):
            inverse_momentum(cosine(0.1, steps=10))

    @pytest.mark.parametrize("optimizer", ["sgd", "adam"])
    @pytest.mark.parametrize("phases,curve,anneal", [(3, "linear", "linear"), (2, "cosine", "cos"),
                                                     (3, "cosine", "cos"), (2, "linear", "linear")])
    def test_torch_one_cycle(self, torch, optimizer, phases, curve, anneal):
        """torch 2.13 OneCycleLR with cycle_momentum (three_phase True/False, linear and cosine), tick by tick."""
        total, share = 101, 0.3
        ref_lr, ref_m = stepped(torch, lambda o: torch.optim.lr_scheduler.OneCycleLR(
            o, max_lr=0.1, total_steps=total, pct_start=share, anneal_strategy=anneal, three_phase=phases == 3,
            base_momentum=0.85, max_momentum=0.95), total, optimizer)
        # torch's phases end at pct_start * total - 1 (and 2 * pct_start * total - 2), the last at total - 1
        if phases == 3:
            r = one_cycle(0.1, steps=total - 1, low=0.004, final=4e-7, tail=1 - 2 * (share * total - 1) / (total - 1),
                          curve=curve)
        else:
            r = one_cycle(0.1, steps=total - 1, low=0.004, final=4e-7, phases=2, rise=(share * total - 1) / (total - 1),
                          curve=curve)
        t = np.arange(total)
        close(r(t), ref_lr, rel=1e-11)
        close(inverse_momentum(r, high=0.95, low=0.85)(t), ref_m)

    @pytest.mark.parametrize("curve,anneal", [("linear", "linear"), ("cosine", "cos")])
    def test_torch_two_phase_on_its_ticks(self, torch, curve, anneal):
        """one_cycle(phases=2, ends='on') is torch 2.13's two-phase tick convention: the momentum follows it."""
        total = 100
        ref_lr, ref_m = stepped(torch, lambda o: torch.optim.lr_scheduler.OneCycleLR(
            o, max_lr=0.1, total_steps=total, pct_start=0.3, anneal_strategy=anneal, three_phase=False,
            base_momentum=0.85, max_momentum=0.95), total, "adam")
        r = one_cycle(0.1, steps=total, low=0.004, final=4e-7, phases=2, rise=0.3, curve=curve, ends="on")
        m = inverse_momentum(r)
        assert m.length == r.length == total and tracks(r, momentum=m).momentum is m
        t = np.arange(total)
        close(r(t), ref_lr, rel=1e-11)
        close(m(t), ref_m)
        assert m(total + 5) == 0.95

    @pytest.mark.parametrize("optimizer", ["sgd", "adam"])
    @pytest.mark.parametrize("mode,shrink", [("triangular", 1.0), ("triangular2", 0.5)])
    def test_torch_cyclic(self, torch, optimizer, mode, shrink):
        """torch 2.13 CyclicLR with cycle_momentum (base 0.8, max 0.9), 700 ticks."""
        ref_lr, ref_m = stepped(torch, lambda o: torch.optim.lr_scheduler.CyclicLR(
            o, base_lr=0.001, max_lr=0.006, step_size_up=50, mode=mode, base_momentum=0.8, max_momentum=0.9),
            700, optimizer)
        tri = triangle(0.001, 0.006, half_period=50, shrink=shrink, steps=None if shrink == 1.0 else 700)
        t = np.arange(700)
        close(tri(t), ref_lr)
        close(inverse_momentum(tri, high=0.9, low=0.8)(t), ref_m)

    def test_torch_cyclic_unequal(self, torch):
        """torch 2.13 CyclicLR with step_size_down != step_size_up and momentum cycling."""
        ref_lr, ref_m = stepped(torch, lambda o: torch.optim.lr_scheduler.CyclicLR(
            o, base_lr=0.001, max_lr=0.006, step_size_up=30, step_size_down=70, base_momentum=0.8,
            max_momentum=0.9), 500, "sgd")
        tri = triangle(0.001, 0.006, half_period=30, fall=70)
        t = np.arange(500)
        close(tri(t), ref_lr)
        close(inverse_momentum(tri, high=0.9, low=0.8)(t), ref_m)


class TestSpec:
    """Specs hold tracks and per-group designs; the shipped schema describes them."""

    @pytest.mark.parametrize("value", [
        FULL, tracks(ONE), tracks(flat(0.1), momentum=flat(0.9)),
        per_group([ONE, FULL]),
        per_group({"backbone": stages(flat(0.0, steps=100), warmup(cosine(0.01, steps=800), steps=100)),
                   "head": tracks(flat(0.01, steps=1000), weight_decay=flat(0.05))}),
    ])
    def test_round_trip(self, value, tmp_path):
        spec = to_spec(value, unit="step", steps_per_epoch=100)
        assert tracks_from_spec(json.loads(json.dumps(spec))) == value
        save(value, tmp_path / "d.json")
        assert load_tracks(tmp_path / "d.json") == value

    def test_one_schedule_readers_refuse_tracks(self, tmp_path):
        """from_spec and load promise one schedule (a checkpoint's factor and the command line rely on it)."""
        save(FULL, tmp_path / "d.json")
        with pytest.raises(ScheduleError, match=r"^load: the spec must hold one schedule, got tracks or one design "
                                                r"per param group \(read those with schedwidget.tracks.load_tracks"):
            load(tmp_path / "d.json")
        with pytest.raises(ScheduleError, match=r"^spec: the spec must hold one schedule, .*tracks_from_spec"):
            from_spec(to_spec(per_group([ONE])))
        assert tracks_from_spec(to_spec(ONE)) == tracks(ONE)

    def test_a_crafted_factor_state_holding_tracks(self):
        """A RateFactor state whose design text is a spec of tracks is a ScheduleError, not an AttributeError."""
        from schedwidget import torch_factor

        f = torch_factor(ONE, 0.1)
        state = {**f.__dict__, "design": json.dumps(to_spec(FULL))}
        with pytest.raises(ScheduleError, match=r"the spec must hold one schedule"):
            f.__dict__.update(state)
            f(3)

    def test_shipped_schema_validates(self):
        import jsonschema

        from schedwidget.schema import shipped_schema

        check = jsonschema.Draft202012Validator(shipped_schema())
        assert check.is_valid(to_spec(FULL)) and check.is_valid(to_spec(per_group([ONE, FULL])))
        bad = to_spec(FULL)
        bad["tracks"]["gamma"] = bad["tracks"]["beta2"]
        assert not check.is_valid(bad)

    def test_depth_limits_agree_with_the_loader(self):
        """A spec of tracks or groups holds objects above each design: to_spec refuses what load would."""
        from schedwidget.spec import MAX_DEPTH

        def deep(d):
            s = flat(0.5)
            for _ in range(d - 1):
                s = s * 1.0
            return s

        for value in (tracks(deep(MAX_DEPTH), momentum=deep(MAX_DEPTH - 1)),
                      per_group([tracks(deep(MAX_DEPTH - 1), momentum=deep(MAX_DEPTH - 2))])):
            assert tracks_from_spec(to_spec(value)) == value
        with pytest.raises(ScheduleError, match=rf"to_spec: s must be at most {MAX_DEPTH - 1} nested schedules"):
            to_spec(tracks(flat(0.1), momentum=deep(MAX_DEPTH)))
        with pytest.raises(ScheduleError, match=rf"to_spec: s must be at most {MAX_DEPTH - 2} nested schedules"):
            to_spec(per_group([tracks(flat(0.1), momentum=deep(MAX_DEPTH - 1))]))

    def test_out_of_range_track_in_a_file(self):
        spec = to_spec(FULL)
        spec["tracks"]["beta2"] = {"kind": "flat", "lr": 1.0}
        with pytest.raises(ScheduleError, match=r"spec: tracks: beta2 must be a design whose values stay in \[0, 1\)"):
            from_spec(spec)

    def test_messages_name_paths(self):
        spec = to_spec(per_group([ONE, FULL]))
        spec["groups"][1]["tracks"]["momentum"] = {"kind": "flat", "lr": "high"}
        with pytest.raises(ScheduleError, match=r"spec: groups\[1\]\.tracks\.momentum\.lr: 'high' is not of type"):
            from_spec(spec)
        with pytest.raises(ScheduleError, match=r"spec: a spec must hold 'schedule' .* or 'groups'"):
            from_spec({"version": 1})
        with pytest.raises(ScheduleError, match=r"got both"):
            from_spec({**to_spec(per_group([ONE])), "schedule": to_spec(ONE)["schedule"]})


class TestSource:
    """Generated source: one function per track and group, equal to the core at every tick."""

    @pytest.mark.parametrize("value", [FULL, per_group({"backbone": FULL, "head": tracks(flat(0.01, steps=1000), beta2=ramp(
        0.9, 0.999, 1000))}), per_group([tracks(one_cycle(0.1, steps=1001, curve="cosine", phases=2),
                                                momentum=inverse_momentum(one_cycle(0.1, steps=1001, curve="cosine",
                                                                                    phases=2))), ONE])])
    def test_equal_to_the_core(self, value):
        from schedwidget.export import track_function_names
        from schedwidget.tracks import as_groups

        ns: dict = {}
        exec(to_python(value), ns)
        g = as_groups("test", value)
        t = np.arange(1105)
        for tr, names in zip(g.groups, track_function_names(g)):
            for track, s in tr.items():
                fn = ns[names[track]]
                assert [fn(int(k)) for k in t] == s(t).tolist(), names[track]

    def test_names(self):
        from schedwidget.export import track_function_names

        assert track_function_names(FULL) == [{"rate": "lr_at", "momentum": "momentum_at", "beta2": "beta2_at",
                                               "weight_decay": "weight_decay_at"}]
        assert track_function_names(per_group({"head": ONE}), "rate_at") == [{"rate": "head_rate_at"}]
        assert track_function_names(per_group([ONE, ONE])) == [{"rate": "group0_lr_at"}, {"rate": "group1_lr_at"}]
        text = to_python(FULL)
        assert '"""Momentum (SGD momentum or the first Adam beta) at tick t' in text


class TestReadouts:
    """facts per track, the AdamW weight-decay sentence, and small multiples."""

    def test_facts_per_track(self):
        f = track_facts(FULL)
        assert set(f) == {"rate", "momentum", "beta2", "weight_decay", "decay_per_step"}
        assert (f["momentum"].minimum, f["momentum"].minimum_at) == (0.85, 450)
        assert f["rate"].peak == 0.1 and f["weight_decay"].first == 0.05
        g = track_facts(per_group({"backbone": ONE, "head": FULL}))
        assert "backbone.rate" in g and "head.decay_per_step" in g

    def test_decay_per_step(self):
        # torch's AdamW: p.mul_(1 - lr * weight_decay) at every step, read from torch 2.13's source
        d = decay_per_step(FULL)
        t = np.arange(1001)
        assert d(t).tolist() == (FULL.rate(t) * FULL.weight_decay(t)).tolist()
        text = tracks_sentence(FULL)
        assert "p -= lr * wd * p" in text and "decay per step is rate x weight_decay" in text
        assert "momentum: 0.95 at the first step, lowest 0.85 at step 450" in text
        assert decay_per_step(tracks(ONE)) is None

    def test_small_multiples(self):
        svg = tracks_svg(FULL, unit="step")
        root = ET.fromstring(svg)
        ns = "{http://www.w3.org/2000/svg}"
        panels = root.findall(f"{ns}svg")
        assert len(panels) == 4
        assert [p.get("data-steps") for p in panels] == ["1000"] * 4
        labels = [e.text for e in root.findall(f"{ns}text") if e.get("data-role") == "track"]
        assert labels == ["rate", "momentum", "beta2", "weight decay"]
        two = ET.fromstring(tracks_svg(per_group({"backbone": ONE, "head": FULL})))
        assert len(two.findall(f"{ns}svg")) == 5


class TestFollowUps:
    """Pictures and generated docstrings say which hyperparameter they show; a factor refuses anything but one
    schedule, whatever the spec reader returns."""

    def test_panels_titled_for_their_track(self):
        """Each small multiple's title and y axis name its track (not 'learning-rate schedule' four times)."""
        ns = "{http://www.w3.org/2000/svg}"
        root = ET.fromstring(tracks_svg(FULL, unit="step"))
        titles = [p.find(f"{ns}title").text for p in root.findall(f"{ns}svg")]
        assert titles == ["learning-rate schedule over 1,000 steps",
                          "momentum schedule (SGD momentum or the first Adam beta) over 1,000 steps",
                          "second Adam beta schedule over 1,000 steps", "weight-decay schedule over 1,000 steps"]
        axes = [e.text for e in root.iter() if e.get("data-role") == "ylabel"]
        assert axes == ["rate", "momentum", "beta2", "weight decay"]
        two = ET.fromstring(tracks_svg(per_group({"backbone": ONE, "head": FULL})))
        titles = [p.find(f"{ns}title").text for p in two.findall(f"{ns}svg")]
        assert titles[0] == "backbone: learning-rate schedule over 1,000 steps"
        assert titles[2].startswith("head: momentum schedule")

    def test_generated_docstrings_name_their_track(self):
        """Every track's function states its own hyperparameter, in the first line and past the end."""
        ns = {}
        exec(to_python(FULL), ns)
        assert ns["lr_at"].__doc__.startswith("Learning rate at tick t")
        assert ns["momentum_at"].__doc__.startswith("Momentum (SGD momentum or the first Adam beta) at tick t")
        assert "the momentum stays at 0.95" in ns["momentum_at"].__doc__
        assert ns["beta2_at"].__doc__.startswith("Second Adam beta at tick t")
        assert ns["weight_decay_at"].__doc__.startswith("Weight decay at tick t")
        assert "the weight decay stays at 0.01" in ns["weight_decay_at"].__doc__
        assert "the rate stays" not in ns["momentum_at"].__doc__ + ns["weight_decay_at"].__doc__

    def test_factor_refuses_a_reader_that_returns_tracks(self, monkeypatch):
        """_read_design checks the value itself: were the spec reader to hand back tracks, a RateFactor (one
        rate) refuses it with a ScheduleError instead of failing later on a missing attribute."""
        import schedwidget.spec as spec
        from schedwidget.factor import _read_design

        text = json.dumps(to_spec(ONE))
        assert _read_design("RateFactor", text) == ONE
        monkeypatch.setattr(spec, "from_spec", lambda d: FULL)
        with pytest.raises(ScheduleError, match=r"RateFactor: design must be the spec of one schedule \(a factor "
                                                r"sets one rate\), got '\{.*\(tracks and per-group designs run "
                                                r"through make_scheduler's TrackClock\)"):
            _read_design("RateFactor", text)
