"""to_python(..., array=True): numpy source, branch-free, equal to the core bit for bit at every tick."""

from __future__ import annotations

import ast
import random

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from schedwidget import ScheduleError, cosine, flat, restarts, tracks, warmup
from schedwidget.export import to_python
from schedwidget.schedule import KINDS, Schedule
from tests import strategies
from tests.fuzz.designs import design
from tests.test_export import DEMO, EXAMPLES, INJECTIONS, schedule

FAR = np.array([0, 1, 999, 10 ** 5 + 3, 10 ** 7 + 11, 2 ** 40 + 1, 2 ** 52, 2 ** 53])


def array_fn(s: Schedule, name: str = "lr_at"):
    namespace: dict = {}
    exec(to_python(s, name=name, array=True), namespace)
    assert set(namespace) == {"__builtins__", "np", name}  # numpy and the function, nothing else
    return namespace[name]


def ticks_of(s: Schedule, margin: int = 300, window: int = 3000) -> np.ndarray:
    """Every tick of the budget and ``margin`` past it (a window for an open-ended design; a grid past 2e5)."""
    n = s.length if s.length is not None else window
    if n <= 200_000:
        return np.arange(n + margin)
    t = np.unique(np.concatenate([np.arange(100_000), np.linspace(0, n, 100_000).astype(np.int64),
                                  n + np.arange(margin)]))
    return t[t <= 2 ** 53]


def assert_equal_everywhere(s: Schedule) -> None:
    fn = array_fn(s)
    t = ticks_of(s)
    np.testing.assert_array_equal(fn(t), s(t), err_msg=repr(s))
    np.testing.assert_array_equal(fn(FAR), s(FAR), err_msg=repr(s))


class TestEqualToTheCore:
    """The numpy source gives the core's float64 values bit for bit, in the budget and past it."""

    @pytest.mark.parametrize("s", [d for ds in EXAMPLES.values() for d in ds], ids=repr)
    def test_every_example_of_every_kind(self, s):
        assert_equal_everywhere(s)

    @pytest.mark.parametrize("kind", list(KINDS))
    def test_fuzz_designs_of_every_registered_kind(self, kind):
        """Five random designs whose top node is each registered kind (the fuzz suite's generator)."""
        rng = random.Random(f"array-{kind}")
        for _ in range(5):
            assert_equal_everywhere(design(rng, depth=2, kind=kind))

    @settings(max_examples=120, deadline=None, database=None, derandomize=True,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much, HealthCheck.data_too_large])
    @given(st.integers(2, 4).flatmap(lambda depth: schedule(depth)))
    def test_random_nested_designs(self, s):
        assert_equal_everywhere(s)

    @settings(max_examples=60, deadline=None, database=None, derandomize=True,
              suppress_health_check=[HealthCheck.too_slow])
    @given(strategies.combine(strategies.combine(strategies.leaves())))
    def test_property_strategy_designs(self, s):
        assert_equal_everywhere(s)

    def test_the_demo_at_every_tick(self):
        """The invented demo design: all 103,500 ticks and 500 past the end."""
        t = np.arange(103_500 + 500)
        np.testing.assert_array_equal(array_fn(DEMO)(t), DEMO(t))

    def test_open_ended_restarts_far_out_need_no_loop(self):
        """Growing open-ended cycles are one table reaching 2**53: equal far out, and no loop in the text."""
        for s in (restarts(cosine(0.1, steps=40), growth=1.5), restarts(cosine(0.1, steps=3), growth=1.01),
                  restarts(cosine(0.1, steps=40), growth=0.7)):
            fn = array_fn(s)
            np.testing.assert_array_equal(fn(FAR), s(FAR))
            np.testing.assert_array_equal(fn(np.arange(20_000)), s(np.arange(20_000)))


class TestShapeAndChecks:
    """Any shape in, the same shape out; bad ticks raise ValueError as the scalar function does."""

    def test_shapes(self):
        fn = array_fn(DEMO)
        assert isinstance(fn(5750), float) and fn(5750) == DEMO(5750)
        t = np.arange(24).reshape(2, 3, 4) * 5000
        assert fn(t).shape == (2, 3, 4) and fn(t).dtype == np.float64
        np.testing.assert_array_equal(fn(t), DEMO(t))
        assert fn(np.array([], dtype=int)).shape == (0,)
        np.testing.assert_array_equal(fn([0, 1, 2]), DEMO(np.arange(3)))
        np.testing.assert_array_equal(array_fn(flat(0.1))(np.arange(4)), np.full(4, 0.1))  # a constant too

    def test_whole_floats_are_ticks(self):
        assert array_fn(DEMO)(np.array([5750.0]))[0] == DEMO(5750)

    @pytest.mark.parametrize("t", [-1, np.array([3, -2]), np.array([0.5]), np.array([np.nan]), "7",
                                   np.array([1 + 2j])])
    def test_bad_ticks(self, t):
        with pytest.raises(ValueError, match="lr_at: t must be"):
            array_fn(DEMO)(t)

    def test_open_ended_refuses_ticks_past_2_53(self):
        with pytest.raises(ValueError, match=r"t must be <= 2\*\*53"):
            array_fn(restarts(cosine(0.1, steps=10)))(np.array([2 ** 53 + 2], dtype=np.uint64))

    def test_warnings_of_unused_pieces_are_silenced(self):
        """Every piece is computed on every tick (a poly past its end is nan there); no warning leaks."""
        import warnings

        from schedwidget import poly

        s = warmup(cosine(0.1, steps=10), 5) >> restarts(poly(0.1, steps=4, power=0.5), cycles=2) >> flat(0.0, steps=3)
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            fn = array_fn(s.stretch(77) * 2.0)
            np.testing.assert_array_equal(fn(np.arange(200)), (s.stretch(77) * 2.0)(np.arange(200)))


class TestBranchFree:
    """The body has no if, no conditional expression and no loop: np.where picks every piece."""

    @pytest.mark.parametrize("s", [d for ds in EXAMPLES.values() for d in ds], ids=repr)
    def test_no_branch_in_the_body(self, s):
        tree = ast.parse(to_python(s, array=True))
        (with_block,) = [n for n in ast.walk(tree) if isinstance(n, ast.With)]
        kinds = {type(n) for n in ast.walk(with_block)}
        assert not kinds & {ast.If, ast.IfExp, ast.While, ast.For, ast.ListComp}, repr(s)

    def test_small_text(self):
        """The demo's body is a few lines: one np.where for its two stages."""
        body = to_python(DEMO, array=True).split("with np.errstate")[1]
        assert body.count("np.where(") == 1 and len(body.strip().splitlines()) <= 8, body


class TestNamesAndArguments:
    """Names are checked as for to_python; nothing from a spec reaches the text as code."""

    @pytest.mark.parametrize("name", INJECTIONS + ["np", "rate", "t", "u", "r1", "starts1"], ids=ascii)
    def test_injection_attempts_are_refused(self, name):
        with pytest.raises(ScheduleError, match=r"to_python: name must be (a plain Python identifier|a name the "
                                                r"generated code does not use itself)"):
            to_python(DEMO, name=name, array=True)

    def test_plain_name(self):
        assert array_fn(DEMO, name="flake_rate")(5750) == DEMO(5750)

    def test_array_must_be_a_bool(self):
        with pytest.raises(ScheduleError, match="to_python: array must be True or False, got 'yes'"):
            to_python(DEMO, array="yes")

    def test_tracks_are_refused(self):
        with pytest.raises(ScheduleError, match="to_python: array must be False for tracks"):
            to_python(tracks(DEMO, momentum=flat(0.9)), array=True)

    def test_not_a_schedule(self):
        with pytest.raises(ScheduleError, match="to_python"):
            to_python("cosine", array=True)

    def test_only_numbers_and_checked_names_reach_the_text(self):
        """Every name the text loads is numpy, the clock, the argument or a name the text itself assigned."""
        s = restarts(cosine(0.1, steps=10), cycles=3, growth=1.5) >> DEMO.stretch(100)
        tree = ast.parse(to_python(s, array=True))
        stored = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Store)}
        loaded = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Load)}
        assert loaded <= stored | {"np", "t", "float", "bool", "ValueError"}, loaded - stored
        strings = {n.value for n in ast.walk(tree) if isinstance(n, ast.Constant) and isinstance(n.value, str)}
        assert strings <= {"ignore", "right", "iu", "f"} | {s for s in strings if s.startswith(("lr_at:", "Learning"))}
