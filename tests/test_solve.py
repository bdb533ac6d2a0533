"""solve(design, parameter, *, rate=, under=, area=, final=): one parameter moved to hit one target (issue 14)."""

from __future__ import annotations

import math
import random
import time

import numpy as np
import pytest

import schedwidget as sw
from schedwidget import ScheduleError, cosine, exp_decay, facts, flat, poly, ramp, solve, stages, triangle, warmup
from schedwidget.inverse import _area, _bounds, _find, _first_under_share
from schedwidget.inverse import paths as solve_paths


class TestIssueQuestions:
    """The inverse questions the issue asks, answered exactly."""

    def test_per_epoch_factor_for_one_percent_by_epoch_200(self):
        """Which per-epoch factor reaches 1 % of the peak by epoch 200?  0.01 ** (1 / 200) (0.977, by hand)."""
        spe = 1404
        s = solve(exp_decay(0.1, 0.95, every=spe, steps=200 * spe), "factor", final=0.001)
        assert s.factor == 0.01 ** (1 / 200)
        assert s(200 * spe) == pytest.approx(0.001, rel=1e-14) and s.every == spe and s.peak == 0.1

    def test_the_same_question_as_a_rate_at_a_tick(self):
        s = solve(exp_decay(0.1, 0.9, every=50), "factor", rate=(200 * 50, 0.001))
        assert s.factor == 0.01 ** (1 / 200)

    def test_the_same_question_as_the_first_tick_under(self):
        """under=(0.01, epoch 200): of the factors that first fall under 1 % at epoch 200, the one where the rate
        there is 1 % of the peak (to facts' level tolerance, 1e-12 relative)."""
        s = solve(exp_decay(0.1, 0.9, every=100, steps=300 * 100), "factor", under=(0.01, 200 * 100))
        assert s.factor == pytest.approx(0.01 ** (1 / 200), rel=1e-14)
        f = facts(s)
        assert f.under_1 == 200 * 100 and s(200 * 100 - 1) > 0.001

    def test_same_area_peak(self):
        """What peak gives the same area as my old design?"""
        old = warmup(cosine(0.1, steps=9000), 500)
        new = warmup(poly(0.1, steps=9000, power=2.0), 500)
        target = facts(old).area
        s = solve(new, "target.peak", area=target)
        assert facts(s).area == pytest.approx(target, rel=1e-12)
        # the poly area is peak * (500 / 2 + sum (1 - t/9000)**2) and the cosine's peak * (500 / 2 + 4500): a ratio
        assert s.target.peak > 0.1 and s.target.peak == pytest.approx(0.1 * target / facts(new).area, rel=1e-12)

    def test_warmup_keeping_the_first_percent_of_updates_under_001(self):
        """How long a warmup keeps the first 1 % of updates under 0.01?  Over 10,000 updates the first 100 are
        ticks 0 .. 99; a linear warmup to 0.1 gives 0.1 * 99 / W at tick 99, at most 0.01 from W = 990 on."""
        n = 10_000
        s = solve(warmup(cosine(0.1, steps=n), 10), "steps", rate=(n // 100 - 1, 0.01))
        assert s.steps == 990
        assert np.all(s(np.arange(n // 100)) <= 0.01 * (1 + 1e-15))  # 0.1 * 99 / 990 is 0.010000000000000002
        assert warmup(cosine(0.1, steps=n), 989)(n // 100 - 1) > 0.01  # the smallest whole value

    def test_a_length_is_the_smallest_whole_value_that_reaches(self):
        s = solve(cosine(0.1, steps=100), "steps", area=1000.0)
        assert _area(s) >= 1000.0 > _area(cosine(0.1, steps=s.steps - 1))


class TestPaths:
    """A parameter is a path of names joined by dots, with [i] after a list of schedules."""

    DESIGN = stages(warmup(cosine(0.1, steps=900), 100), exp_decay(0.01, 0.99, steps=500))

    def test_paths_reach_nested_parameters(self):
        assert _find(self.DESIGN, "parts[1].factor")[2] == 0.99
        assert _find(self.DESIGN, "parts[0].target.peak")[2] == 0.1
        assert _find(self.DESIGN, "parts[0].steps")[2] == 100
        s = solve(self.DESIGN, "parts[1].steps", area=facts(self.DESIGN).area + 1.0)
        assert s.parts[0] == self.DESIGN.parts[0] and s.parts[1].steps > 500

    @pytest.mark.parametrize("path, match", [
        ("parts.steps", r"parameter must be a path .*parts is a list of schedules: name one, e\.g\. parts\[0\]"),
        ("parts[2].steps", r"solve: parameter must be an index < 2 in parts\[\.\.\.\]"),
        ("parts[1].gamma",
         r"solve: parameter must be a parameter of exp_decay \(peak, factor, every, staircase, steps\)"),
        ("parts[0].curve", r"solve: parameter must be a rate, ratio, length or count, got 'parts\[0\]\.curve' "
                           r"\(warmup\.curve is a choice; solve moves one number\)"),
        ("parts[1].factor.x", r"exp_decay\.factor holds no schedule"),
        ("parts[0]target", r"'parts\[0\]target' is not a name or name\[i\]"),
        ("", r"solve: parameter must be a path of parameter names"),
        (3, r"solve: parameter must be a path of parameter names"),
        ("parts[0][1].steps", r"is not a name or name\[i\]"),
    ])
    def test_bad_paths(self, path, match):
        with pytest.raises(ScheduleError, match=match):
            solve(self.DESIGN, path, final=0.001)

    def test_every_movable_parameter_is_listed(self):
        """paths(design): each numeric parameter with its declaration and value; each path is one solve accepts."""
        got = solve_paths(self.DESIGN)
        assert [p for p, _, _ in got] == ["parts[0].target.peak", "parts[0].target.floor", "parts[0].target.steps",
                                          "parts[0].steps", "parts[0].start", "parts[1].peak", "parts[1].factor",
                                          "parts[1].every", "parts[1].steps"]
        for path, decl, value in got:
            assert _find(self.DESIGN, path)[1:] == (decl, value)

    def test_declared_bounds(self):
        p = sw.shapes.ExpDecay.params()["factor"]
        assert _bounds(p) == (5e-324, 1.0, False)  # (0, 1]: the open end moved one float in
        assert _bounds(sw.shapes.Cosine.params()["steps"]) == (1, 2 ** 53, True)


class TestTargets:
    def test_exactly_one_target(self):
        s = cosine(0.1, steps=100)
        with pytest.raises(ScheduleError, match=r"solve: target must be exactly one of rate=\(tick, value\), "
                                                r"under=\(share, tick\), area=value, final=value, got 'none'"):
            solve(s, "peak")
        with pytest.raises(ScheduleError, match=r"got 'area, final'"):
            solve(s, "peak", area=1.0, final=0.1)

    @pytest.mark.parametrize("kw, match", [
        ({"rate": (1.5, 0.1)}, r"solve: rate must be \(tick, value\) with a whole tick >= 0"),
        ({"rate": (3, -0.1)}, r"solve: rate must be \(tick, value\) with a finite rate value >= 0"),
        ({"rate": 0.1}, r"solve: rate must be a pair \(tick, value\)"),
        ({"under": (0.0, 10)}, r"solve: under must be \(share, tick\) with a share of the peak in \(0, 1\]"),
        ({"under": (0.1, -1)}, r"solve: under must be \(share, tick\) with a whole tick >= 0"),
        ({"area": float("nan")}, r"solve: area must be a finite area >= 0"),
        ({"final": "0.1"}, r"solve: final must be a finite rate >= 0"),
    ])
    def test_bad_targets(self, kw, match):
        with pytest.raises(ScheduleError, match=match):
            solve(cosine(0.1, steps=100), "peak", **kw)

    def test_open_ended_designs_have_no_area_or_final(self):
        with pytest.raises(ScheduleError, match=r"solve: area must be a design with a length, got 'an open-ended"):
            solve(exp_decay(0.1, 0.9), "factor", area=1.0)

    def test_not_a_schedule(self):
        with pytest.raises(ScheduleError, match=r"solve: design must be a Schedule"):
            solve(0.1, "peak", final=0.1)


class TestRefusals:
    """No wrong answer: out of reach, not monotone, or a jump over the asked value is a ScheduleError saying why."""

    def test_out_of_reach_names_target_range_parameter_and_bounds(self):
        with pytest.raises(ScheduleError, match=r"solve: no value of floor in \[0\.0, 1e\+100\] gives final rate = "
                                                r"0\.5: reachable: 0\.0 to 0\.1 \(over floor = 0\.0 to 0\.1\)"):
            solve(cosine(0.1, steps=100), "floor", final=0.5)

    def test_a_target_that_does_not_depend_on_the_parameter(self):
        with pytest.raises(ScheduleError, match=r"reachable: 0\.05 to 0\.05"):
            solve(stages(flat(0.05, steps=10), cosine(0.1, steps=10)), "parts[1].peak", rate=(3, 0.07))

    def test_not_monotone_is_refused(self):
        # the rate at tick 15 of a triangle rises and falls as the half period grows: 0.05 is hit more than once
        with pytest.raises(ScheduleError, match=r"solve: rate at tick 15 is not monotone in half_period over "
                                                r"\[1, 9007199254740992\]: the target 0\.05 is hit in more than "
                                                r"one place"):
            solve(triangle(0.0, 0.1, 10), "half_period", rate=(15, 0.05))

    def test_a_jump_over_the_asked_tick(self):
        # a staircase at 200 ticks per level: the first tick under a share is a multiple of 200, never 4321
        with pytest.raises(ScheduleError, match=r"gives first tick under 0\.3 of the peak = 4321: it jumps from "
                                                r"4200\.0 at factor = .* to 4400\.0 at"):
            solve(exp_decay(0.1, 0.9, every=200, steps=10_000), "factor", under=(0.3, 4321))

    def test_bounded_time_on_long_budgets(self):
        """Long designs are read from facts' grid: a few seconds at most (a hang guard, not a benchmark)."""
        start = time.process_time()
        s = solve(warmup(cosine(0.1, steps=2 ** 40), 10_000), "target.steps", area=1e9)
        t = solve(exp_decay(0.1, 0.99), "factor", under=(0.5, 10 ** 7))
        assert time.process_time() - start < 20
        assert _area(s) >= 1e9 and t.factor > 0.99 and _first_under_share(t, 0.5, 10 ** 7) == 10 ** 7


# ------------------------------------------------------------------ a seeded random sample
def _metric(s, what, goal_args):
    if what == "final":
        return s(s.length)
    if what == "area":
        return _area(s)
    if what == "rate":
        return s(goal_args[0])
    share, tick = goal_args
    return _first_under_share(s, share, tick)


FAMILIES = [
    # (builder from a random.Random, parameter, target kind)
    (lambda r: exp_decay(r.uniform(0.01, 1), r.uniform(0.5, 0.999), every=r.randint(1, 50), steps=r.randint(50, 3000)),
     "factor", "final"),
    (lambda r: cosine(r.uniform(0.01, 1), floor=r.uniform(0, 0.005), steps=r.randint(10, 3000)), "peak", "area"),
    (lambda r: cosine(r.uniform(0.01, 1), floor=r.uniform(0, 0.005), steps=r.randint(10, 3000)), "floor", "final"),
    (lambda r: warmup(cosine(r.uniform(0.01, 1), steps=r.randint(300, 1500)), r.randint(1, 200)), "steps", "rate"),
    (lambda r: poly(r.uniform(0.01, 1), steps=r.randint(10, 2000), power=r.uniform(0.2, 4)), "power", "rate"),
    (lambda r: ramp(r.uniform(0.01, 1), r.uniform(0, 0.01), r.randint(10, 3000), curve="sqrt"), "start", "rate"),
    (lambda r: stages(flat(r.uniform(0.01, 1), steps=r.randint(1, 100)), cosine(0.1, steps=r.randint(10, 1000))),
     "parts[1].steps", "area"),
    (lambda r: exp_decay(r.uniform(0.01, 1), r.uniform(0.5, 0.99), every=r.randint(1, 20), steps=r.randint(500, 3000)),
     "factor", "under"),
]


def _goal(r, s, what, param_value):
    """A target near the design's own value, or far off (about a third of the draws are out of reach)."""
    n = s.length
    if what == "rate":
        tick = r.randint(0, n - 1)
        base = s(tick)
        return (tick, base * math.exp(r.uniform(-3, 3)) if base > 0 else r.uniform(0, 0.1)), (tick,)
    if what == "under":  # mostly a tick where a staircase steps (elsewhere the first tick under jumps over it)
        share = r.choice([0.5, 0.1, 0.01])
        tick = r.randint(1, n - 1) if r.random() < 0.3 else s.every * r.randint(1, (n - 1) // s.every)
        return (share, tick), (share, tick)
    base = _metric(s, what, None)
    return (base * math.exp(r.uniform(-4, 4)) if base > 0 else r.uniform(0, 1)), None


def _scan(build, lo, hi, whole, m):
    """Brute force over the bounds: the metric at every whole value up to 3,000 and a dense geometric grid beyond."""
    if whole:
        vals = sorted({*range(int(lo), int(min(hi, 2000)) + 1),
                       *np.unique(np.geomspace(max(lo, 1), hi, 400).astype(np.int64)).tolist()})
    else:
        small = max(lo, 1e-12)
        vals = sorted({lo, hi, *np.geomspace(small, hi, 1500).tolist(), *np.linspace(lo, min(hi, 10.0), 1000).tolist()})
    out = []
    for v in vals:
        try:
            s = build(int(v) if whole else float(v))
        except ScheduleError:
            continue
        y = m(s)
        if math.isfinite(y):
            out.append((v, y))
    return out


def test_random_targets_are_answered_or_refused_correctly():
    """A seeded sample of targets: an answer hits its target when evaluated; a refusal for being out of reach is
    confirmed by a brute-force scan of the bounds; a refusal as not monotone by a scan that goes both ways."""
    import dataclasses

    r = random.Random(20261202)
    answered = refused = 0
    for k in range(120):
        make, path, what = FAMILIES[k % len(FAMILIES)]
        s = make(r)
        segs, p, value = _find(s, path)
        lo, hi, whole = _bounds(p)
        target, args = _goal(r, s, what, value)
        kw = {what: target}
        args = args if what in ("rate", "under") else None
        goal_args = (args[0],) if what == "rate" else args

        def m(d):
            return _metric(d, what, target if what in ("rate", "under") else None)

        try:
            got = solve(s, path, **kw)
        except ScheduleError as exc:
            refused += 1
            text = str(exc)

            def build(v):
                from schedwidget.inverse import _rebuild
                return _rebuild(s, segs, v)

            scan = _scan(build, lo, hi, whole, m)
            ys = [y for _, y in scan]
            goal = target[1] if what == "rate" else (target[1] if what == "under" else target)
            if "reachable" in text and "jumps" not in text:
                tol = 1e-9 * max(abs(goal), 1e-300)
                assert not (min(ys) - tol <= goal <= max(ys) + tol), (s, path, kw, min(ys), max(ys), text)
            elif "not monotone" in text:
                d = np.diff(ys)
                assert (d > 1e-12 * max(map(abs, ys))).any() and (d < -1e-12 * max(map(abs, ys))).any(), (s, path, kw)
            elif "jumps" in text:
                assert what == "under" or not whole, text
                assert goal not in ys or what != "under", (s, path, kw, text)
            else:
                raise AssertionError(text)
            continue
        answered += 1
        v = getattr(_follow(got, segs), segs[-1][0])
        y = m(got)
        if what == "under":
            assert y == target[1], (s, path, kw, y)
        elif whole:
            goal = target[1] if what == "rate" else target
            try:
                prev = m(_rebuild_at(s, segs, v - 1)) if v - 1 >= lo else None
            except ScheduleError:
                prev = None
            if prev is not None:  # the smallest whole value: one less has not reached the target yet
                assert (prev - goal) * (y - goal) <= 0 or abs(y - goal) <= 1e-12 * abs(goal), (s, path, kw, v, prev, y)
        else:
            goal = target[1] if what == "rate" else target
            assert y == pytest.approx(goal, rel=1e-9, abs=1e-300), (s, path, kw, v, y)
        assert dataclasses.replace(got) == got
    assert answered >= 60 and refused >= 15, (answered, refused)


def _follow(s, segs):
    for name, index in segs[:-1]:
        s = getattr(s, name) if index is None else getattr(s, name)[index]
    return s


def _rebuild_at(s, segs, v):
    from schedwidget.inverse import _rebuild

    return _rebuild(s, segs, v)


def test_any_design_any_parameter_ends_in_a_design_or_a_schedule_error():
    """Random designs of every registered kind (the fuzz suite's generator), a random numeric parameter and a
    random target: a design or a ScheduleError, each in a bounded time (a hang guard, not a benchmark)."""
    from tests.fuzz.designs import design

    rng = random.Random(14)
    seen = {"value": 0, "refused": 0}
    for _ in range(60):
        s = design(rng, depth=2, extreme=0.05, finite=rng.random() < 0.8)
        paths = [p for p, _, _ in solve_paths(s)]
        if not paths:
            continue
        path, what = rng.choice(paths), rng.choice(["rate", "under", "area", "final"])
        n = s.length or 1000
        tick = rng.randint(0, min(n - 1, 10 ** 7))
        value = float(s(tick)) * math.exp(rng.uniform(-2, 2))
        target = {"rate": (tick, value), "under": (rng.choice([0.5, 0.1, 0.01]), tick), "area": value * n,
                  "final": value}[what]
        start = time.process_time()
        try:
            got = solve(s, path, **{what: target})
        except ScheduleError:
            seen["refused"] += 1
        else:
            assert isinstance(got, sw.Schedule) and type(got) is type(s)
            seen["value"] += 1
            whole = _bounds(_find(s, path)[1])[2]
            y = _metric(got, what, target if what in ("rate", "under") else None)
            if what == "under":
                assert y == tick, (repr(s)[:300], path, target, y)
            elif not whole:  # a real parameter hits the target to float rounding
                goal = target[1] if what == "rate" else target
                assert y == pytest.approx(goal, rel=1e-9, abs=1e-300), (repr(s)[:300], path, what, target, y)
        assert time.process_time() - start < 15, (repr(s)[:300], path, what, target)
    assert seen["value"] >= 10 and seen["refused"] >= 10, seen


class TestSearch:
    """The search itself on plain functions of the parameter (``build`` returns the value, ``metric`` reads it)."""

    @staticmethod
    def search(f, goal, lo=0.0, hi=10.0, whole=False):
        from schedwidget.inverse import _Search

        return _Search("solve", "x", lo, hi, whole, lambda v: v, f, goal, "f(x)", False).run()

    def test_a_monotone_function_to_the_float(self):
        x = self.search(lambda v: v ** 3, 2.0)
        assert abs(x ** 3 - 2.0) <= abs(math.nextafter(x, 0) ** 3 - 2.0) and abs(x ** 3 - 2.0) < 1e-15
        assert x == pytest.approx(2 ** (1 / 3), rel=1e-15)

    def test_two_crossings_are_refused(self):
        with pytest.raises(ScheduleError, match=r"solve: f\(x\) is not monotone in x over \[0\.0, 10\.0\]: the target "
                                                r"4\.0 is hit in more than one place"):
            self.search(lambda v: (v - 5.0) ** 2, 4.0)

    def test_a_peak_between_grid_values_is_found_before_refusing(self):
        # a narrow bump at 5.05, between the grid's values, reaching 1.0: a target of 0.9 is hit twice in it
        def bump(v):
            return max(0.0, 1.0 - abs(v - 5.05) * 50.0)

        with pytest.raises(ScheduleError, match=r"is not monotone"):
            self.search(bump, 0.9, lo=1.0, hi=10.0)
        with pytest.raises(ScheduleError, match=r"reachable: 0\.0 to 1\.0"):
            self.search(bump, 1.5, lo=1.0, hi=10.0)

    def test_a_jump_over_the_goal_is_refused(self):
        with pytest.raises(ScheduleError, match=r"gives f\(x\) = 0\.5: it jumps from 0\.0 at x = 3\.0 to 1\.0 at "
                                                r"3\.0000000000000004"):
            self.search(lambda v: 0.0 if v <= 3.0 else 1.0, 0.5)

    def test_a_run_on_the_goal_gives_its_smallest_value(self):
        assert self.search(lambda v: min(v, 4.0), 4.0) == 4.0
        assert self.search(lambda v: min(v // 1, 4.0), 4.0, lo=0, hi=100, whole=True) == 4

    def test_whole_values_the_smallest_that_reaches(self):
        assert self.search(lambda v: v * 0.3, 1.0, lo=1, hi=1000, whole=True) == 4  # 1.2 >= 1.0 > 0.9
        assert self.search(lambda v: 10.0 / v, 1.0, lo=1, hi=1000, whole=True) == 10  # falling: first <= 1.0
