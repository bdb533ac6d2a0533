"""Issue 10 follow-ups: bounded work on the factor route, in deep readouts, and one check for steps_per_epoch."""

from __future__ import annotations

import time

import numpy as np
import pytest

import schedwidget as sw
import schedwidget.spec as spec_module
from schedwidget import ScheduleError
from schedwidget.shapes import Cosine


def nested(levels: int) -> sw.Schedule:
    """The design of the report: each level repeats the one below, followed by a low flat stage, twice."""
    s = sw.flat(0.1, steps=3) >> sw.cosine(0.1, steps=5)
    for _ in range(levels):
        s = sw.restarts(s >> sw.flat(0.01, steps=2), cycles=2)
    return s


class TestFactorRouteRefusesEarly:
    """A design too large to write as source is refused before its spec text is made and read back."""

    def design(self) -> sw.Schedule:
        return sw.from_spec({"version": 1, "schedule": {"kind": "knots", "points": [[i, 0.1] for i in range(100_000)],
                                                        "steps": None}})

    def test_refused_without_the_spec_round_trip(self, monkeypatch):
        s = self.design()

        def no_spec(*args, **kwargs):
            raise AssertionError("the spec text was built for a design that cannot be written as source")

        monkeypatch.setattr(spec_module, "to_spec", no_spec)
        with pytest.raises(ScheduleError, match=r"knots: points must be at most 65,536 entries"):
            sw.torch_factor(s, 0.1)

    def test_answers_in_well_under_a_second(self):
        s = self.design()
        t0 = time.process_time()
        with pytest.raises(ScheduleError, match="65,536"):
            sw.torch_factor(s, 0.1)
        assert time.process_time() - t0 < 1.0  # generous: took 1.6 s in the spec round trip, ~0.07 s now

    def test_a_fresh_factor_still_equals_one_rebuilt_from_its_text(self):
        s = sw.warmup(sw.cosine(0.1, steps=90), steps=10)
        f = sw.torch_factor(s, 0.1)
        g = sw.torch_factor(sw.from_spec(s.to_spec()), 0.1)
        assert f.design == g.design
        assert [f(t) for t in range(0, 120, 7)] == [float(s(t)) / 0.1 for t in range(0, 120, 7)]


class TestDeepDesigns:
    """Readouts and generated source of a design as deep as the spec loader allows cost bounded time."""

    def test_interval_bounds_pass_at_most_twice_the_intervals_down(self, monkeypatch):
        s = nested(20)
        calls: list[int] = []
        original = Cosine._range

        def counted(self, x, y):
            calls.append(int(np.size(x)))
            return original(self, x, y)

        monkeypatch.setattr(Cosine, "_range", counted)
        rng = np.random.default_rng(0)
        a = np.sort(rng.integers(0, s.length, 1000)).astype(float)
        b = a + rng.integers(0, s.length // 100, 1000)
        s._span(a, b)
        # a generic interval splits once into a suffix and a prefix; intervals covering a child whole are
        # answered from that child's kept bounds (before: the count multiplied at every level)
        assert sum(calls) <= 2 * a.size + 1

    def test_whole_interval_bounds_equal_those_of_a_fresh_design(self):
        s, fresh = nested(6), nested(6)
        a = np.array([0.0, 0.0, 3.0, 0.0])
        b = np.array([float(s.length), 17.0, float(s.length), 0.0])
        s._span(a, b)  # keeps the whole-length bounds on every node it passes
        lo, hi = s._span(a, b)
        lo2, hi2 = fresh._range(a, b)
        assert np.array_equal(lo, lo2) and np.array_equal(hi, hi2)

    @pytest.mark.parametrize("levels", [20, 48])
    def test_facts_of_48_levels_in_bounded_time(self, levels):
        s = nested(levels)
        t0 = time.process_time()
        f = sw.facts(s)
        took = time.process_time() - t0
        # generous: 20 levels took 9 s and 48 levels ran out of memory; both take ~0.3 s now
        assert took < 10.0
        assert (f.peak, f.peak_at) == (0.1, 0)
        # cosine(0.1, steps=5) at u = 4 is 0.1 * (1 + cos(4 pi / 5)) / 2 = 0.0095 <= 0.01, after 3 flat ticks
        assert f.under_10 == 7
        assert f.under_1 is None  # the cosine's 0 at u = 5 is never sampled: the flat 0.01 stage starts there

    def test_to_python_of_48_levels_in_bounded_time(self):
        s = nested(48)
        t0 = time.process_time()
        src = sw.to_python(s)
        assert time.process_time() - t0 < 10.0  # generous: 20 levels took 2.4 s, 48 levels ~0.1 s now
        ns: dict = {}
        exec(src, ns)
        ticks = [0, 7, 9, 10, 12345, s.length - 1, s.length]
        assert [ns["lr_at"](t) for t in ticks] == [float(s(t)) for t in ticks]
        assert "Peak: 0.1 at step 0" in src

    def test_the_grid_keeps_its_size_for_ordinary_designs(self):
        from schedwidget.facts import GRID_WORK, _grid, work

        s = sw.warmup(sw.restarts(sw.cosine(0.1, steps=1000), cycles=None), steps=50) * sw.flat(1.0)
        assert work(s) <= 8
        grid, exact = _grid(2 ** 30, 2 ** 21, np.empty(0, np.int64), work(s))
        assert not exact and grid.size == 2 ** 20
        grid, _ = _grid(2 ** 30, 2 ** 21, np.empty(0, np.int64), work(nested(48)))
        assert grid.size == GRID_WORK // work(nested(48))


class TestStepsPerEpochUpFront:
    """steps_per_epoch above 2**53 is refused in the caller's own name, as codegen refuses it."""

    @pytest.mark.parametrize("export", ["to_python", "to_torch"])
    def test_refused_with_the_usual_message(self, export):
        s = sw.cosine(0.1, steps=100)
        call = sw.to_python if export == "to_python" else (lambda d, **k: sw.to_torch(d, 0.1, **k))
        with pytest.raises(ScheduleError, match=rf"^{export}: steps_per_epoch must be a whole number >= 1 "
                                                r"and <= 2\*\*53 or None, got 9007199254740993$"):
            call(s, steps_per_epoch=2 ** 53 + 1)

    def test_2_to_the_53_is_accepted(self):
        assert "def lr_at(t):" in sw.to_torch(sw.cosine(0.1, steps=100), 0.1, steps_per_epoch=2 ** 53)
        assert "def lr_at(t):" in sw.to_python(sw.cosine(0.1, steps=100), steps_per_epoch=2 ** 53)


class TestDeepRestartsClock:
    """Equal cycles of an unstretched target run on the cycle clock itself, exact at any depth."""

    @pytest.mark.parametrize("levels", [20, 46, 48])
    def test_every_early_tick_matches_the_ten_tick_block(self, levels):
        # the first 2**levels blocks repeat stages(flat 0.1 x3, cosine(0.1, 5), flat 0.01 x2) and its
        # nesting; at 48 levels ((u - start) * L) / L rounded above 2**53 and read tick 30 as 29.999...
        s = nested(levels)
        block = sw.flat(0.1, steps=3) >> sw.cosine(0.1, steps=5) >> sw.flat(0.01, steps=2)
        ref = sw.restarts(sw.restarts(block, cycles=2) >> sw.flat(0.01, steps=2), cycles=2)  # 44 ticks
        y = s(np.arange(44))
        assert np.array_equal(y, ref(np.arange(44)))
        ns: dict = {}
        exec(sw.to_python(s), ns)
        assert [ns["lr_at"](t) for t in range(44)] == y.tolist()
        lo, hi = s._span(np.arange(44.0), np.arange(44.0))
        assert np.all(lo <= y) and np.all(y <= hi)


class TestFuzzCorpusFindings:
    """Inputs the fuzz suite found at larger scale: each gets a ScheduleError naming the parameter."""

    def test_unit_as_an_array_or_a_huge_int(self):
        s = sw.flat(0.1)
        for unit in (np.array(["step"]), np.array([0.1, 0.2])):
            with pytest.raises(ScheduleError, match=r"^to_python: unit must be one of 'step', 'epoch', got array"):
                sw.to_python(s, unit=unit)
            with pytest.raises(ScheduleError, match=r"^to_torch: unit must be one of 'step', 'epoch', got array"):
                sw.to_torch(s, 0.1, unit=unit)
        with pytest.raises(ScheduleError, match=r"^to_spec: unit must be one of 'step', 'epoch', got an integer "
                                                r"of about 5001 digits$"):
            sw.to_spec(s, unit=10 ** 5000 - 1)

    def test_metric_as_a_huge_int(self):
        from schedwidget.metrics import read_metric

        with pytest.raises(ScheduleError, match=r"read_metric: source must be .*, got an integer of about 5001 digits"):
            read_metric(10 ** 5000 - 1)

    def test_a_bad_leaf_under_many_levels_is_named_in_bounded_time(self):
        import functools

        leaf = {"kind": "knots", "points": [[i, 0.1] for i in range(100_000)], "steps": 2 ** 53 + 2}
        doc = {"version": 1, "schedule": functools.reduce(
            lambda d, _: {"kind": "scale", "factor": 1.0, "target": d}, range(40), leaf)}
        with pytest.raises(ScheduleError):  # warm: jsonschema's first import is not part of the check's cost
            sw.from_spec({"version": 1, "schedule": {"kind": "flat", "lr": -1}})
        t0 = time.process_time()
        with pytest.raises(ScheduleError, match=r"schedule(\.target){40}\.steps: 9007199254740994"):
            sw.from_spec(doc)
        # generous: each level re-checked its whole subtree (4.3 million predicate calls, 3.5 s); ~0.25 s now
        assert time.process_time() - t0 < 1.5

    def test_groups_as_a_0d_array(self):
        with pytest.raises(ScheduleError, match=r"^to_torch: groups must be a non-empty list of multipliers, one per "
                                                r"param group, got array\(0\.1\)$"):
            sw.to_torch(sw.flat(0.1), 0.1, groups=np.array(0.1))

    def test_many_groups_share_one_build_and_are_capped(self):
        s = sw.cosine(0.1, steps=10)
        t0 = time.process_time()
        factors = sw.torch_factor(s, 0.001, groups=[1.0] * 10_000)
        assert time.process_time() - t0 < 1.0  # generous: one design is built once, not once per group (~0.1 s)
        assert len(factors) == 10_000 and factors[-1](3) == float(s(3)) / 0.001
        with pytest.raises(ScheduleError, match=r"groups must be at most 10,000 multipliers, one per param group, "
                                                r"got a list of 100,000 multipliers"):
            sw.torch_factor(s, 0.001, groups=[1.0] * 100_000)


class TestFactorModule:
    """The factor route moved to schedwidget.factor; what was pickled under schedwidget.export still loads."""

    def test_a_factor_pickled_under_the_old_module_loads(self):
        import pickle

        f = sw.torch_factor(sw.cosine(0.1, steps=10), 0.1)
        data = pickle.dumps(f)
        assert b"schedwidget.factor" in data
        old = data.replace(b"schedwidget.factor", b"schedwidget.export")  # same length: framing unchanged
        g = pickle.loads(old)
        assert type(g) is type(f) and g == f and g(3) == f(3)

    def test_export_names_are_the_factor_names(self):
        from schedwidget import export, factor, scheduler

        assert export.RateFactor is factor.RateFactor and export._COMPILED is factor._COMPILED
        assert export.make_scheduler is scheduler.make_scheduler is sw.make_scheduler
