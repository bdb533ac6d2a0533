"""to_python: generated stdlib source equals the core at every tick, and no name can inject code."""

from __future__ import annotations

import ast
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from schedwidget import (ScheduleError, cosine, drops, exp_decay, flat, inv_sqrt, knots, one_cycle, poly, ramp,
                         restarts, stages, triangle, warmup)
from schedwidget.combine import Clip, Product, Scaled, Stages, Stretch, Sum
from schedwidget.export import to_python
from schedwidget.schedule import Schedule
from schedwidget.spec import KINDS, from_spec

# ------------------------------------------------------------------ strategies
LEAVES = ("flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle", "one_cycle", "knots")
COMBINATORS = ("stages", "warmup", "restarts", "product", "sum", "scale", "clip", "stretch")

rates = st.one_of(st.just(0.0), st.floats(1e-5, 1.0), st.sampled_from([0.1, 0.01, 1e-3, 0.4]))
positive = st.one_of(st.floats(1e-5, 1.0), st.sampled_from([0.1, 0.02, 1e-3]))
lengths = st.integers(1, 60)


@st.composite
def leaf(draw) -> Schedule:
    kind = draw(st.sampled_from(LEAVES))
    open_ok = draw(st.booleans())
    steps = draw(lengths)
    maybe = None if open_ok else steps
    if kind == "flat":
        return flat(draw(rates), steps=maybe)
    if kind == "ramp":
        curve = draw(st.sampled_from(["linear", "geometric", "cosine"]))
        pick = positive if curve == "geometric" else rates
        return ramp(draw(pick), draw(pick), steps, curve=curve)
    if kind == "cosine":
        a, b = sorted([draw(rates), draw(rates)])
        return cosine(b, floor=a, steps=steps)
    if kind == "exp_decay":
        return exp_decay(draw(rates), draw(st.floats(0.3, 1.0)), every=draw(st.integers(1, 7)),
                         staircase=draw(st.booleans()), steps=maybe)
    if kind == "drops":
        n = draw(st.integers(2, 60))
        at = draw(st.lists(st.integers(1, n - 1), min_size=1, max_size=14, unique=True))
        return drops(draw(rates), at=sorted(at), factor=draw(st.floats(0.05, 1.0)), steps=n)
    if kind == "poly":
        a, b = sorted([draw(rates), draw(rates)])
        return poly(b, floor=a, steps=steps, power=draw(st.sampled_from([1.0, 0.5, 2.0, 3.7])))
    if kind == "inv_sqrt":
        w = draw(st.integers(1, steps))
        return inv_sqrt(draw(rates), warmup=w, steps=maybe)
    if kind == "triangle":
        a, b = sorted([draw(rates), draw(rates)])
        return triangle(a, b, half_period=draw(st.integers(1, 9)), shrink=draw(st.sampled_from([1.0, 0.5, 0.83])),
                        steps=maybe)
    if kind == "one_cycle":
        tail = draw(st.sampled_from([0.1, 0.25, 0.5]))
        n = draw(st.integers(int(2 / (1 - tail)) + 1, 80))
        peak = draw(positive)
        low = draw(st.floats(0.0, 1.0)) * peak
        return one_cycle(peak, n, low=low, final=draw(st.floats(0.0, 1.0)) * low, tail=tail,
                         curve=draw(st.sampled_from(["linear", "cosine"])))
    interp = draw(st.sampled_from(["linear", "log", "hold"]))
    ticks = sorted(draw(st.lists(st.integers(1, 80), min_size=1, max_size=13, unique=True)))
    pick = positive if interp == "log" else rates
    return knots([(0, draw(pick))] + [(t, draw(pick)) for t in ticks], interp=interp)


def _finite(draw, s: Schedule) -> Schedule:
    """``s`` itself if it has a length, else ``s`` times a flat 1.0 of some length (a product takes the known one)."""
    return s if s.length is not None else s * flat(1.0, steps=draw(lengths))


@st.composite
def schedule(draw, depth: int = 3) -> Schedule:
    """A valid schedule whose first child chain is ``depth`` combinators deep."""
    if depth == 0:
        return draw(leaf())
    kind = draw(st.sampled_from(COMBINATORS))
    first = draw(schedule(depth - 1))
    other = lambda: draw(schedule(draw(st.integers(0, max(0, depth - 2)))))  # noqa: E731
    if kind == "stages":
        parts = [_finite(draw, first)] + [other() for _ in range(draw(st.integers(1, 2)))]
        parts = [_finite(draw, p) for p in parts[:-1]] + parts[-1:]
        return stages(*parts) if draw(st.booleans()) else Stages(parts=tuple(parts))
    if kind == "warmup":
        n = first.length
        w = draw(st.integers(1, 20 if n is None else min(n, 20)))
        curve = draw(st.sampled_from(["linear", "cosine", "geometric"]))
        if curve == "geometric" and first(0) <= 0:
            curve = "linear"
        start = draw(positive) * first(0) if curve == "geometric" else draw(rates)
        return warmup(first, steps=w, start=start, curve=curve)
    if kind == "restarts":
        growth = draw(st.sampled_from([1.0, 1.0, 1.5, 2.0, 0.5, 0.8, 1.1]))
        cycles = draw(st.one_of(st.none(), st.integers(1, 4)))
        return restarts(_finite(draw, first), cycles=cycles, growth=growth,
                        peak_decay=draw(st.sampled_from([1.0, 0.5, 0.9])))
    if kind in ("product", "sum"):
        pair = (first, other()) if draw(st.booleans()) else (other(), first)
        return Product(left=pair[0], right=pair[1]) if kind == "product" else Sum(left=pair[0], right=pair[1])
    if kind == "scale":
        return Scaled(target=first, factor=draw(st.sampled_from([0.0, 0.5, 2.0, 1.0 / 3.0])))
    if kind == "clip":
        lo = draw(st.one_of(st.none(), rates))
        hi = draw(st.one_of(st.none() if lo is not None else st.nothing(), rates))
        if lo is not None and hi is not None and lo > hi:
            lo, hi = hi, lo
        return Clip(target=first, low=lo, high=hi)
    target = _finite(draw, first)
    return Stretch(target=target, steps=draw(st.integers(1, 150)))


# ------------------------------------------------------------------ helpers
ALLOWED_NAMES = {"__builtins__", "math", "bisect"}


def compile_fresh(src: str, name: str = "lr_at"):
    """Exec generated source in a namespace holding only the builtins; return the function and the namespace."""
    namespace = {"__builtins__": __builtins__}
    exec(src, namespace)
    assert set(namespace) <= ALLOWED_NAMES | {name}, sorted(namespace)
    assert not any(getattr(v, "__name__", "").startswith(("numpy", "schedwidget")) for v in namespace.values())
    return namespace[name], namespace


def assert_matches(s: Schedule, margin: int = 50, window: int = 600) -> float:
    """Generated code equals ``s(t)`` at every tick of the budget and ``margin`` past it; returns the worst rel. error."""
    fn, _ = compile_fresh(to_python(s))
    n = s.length if s.length is not None else window
    t = np.arange(n + margin)
    core = s(t)
    gen = np.array([fn(int(i)) for i in t])
    scale = max(float(np.max(np.abs(core))), 1e-300)
    err = np.abs(gen - core)
    bad = err > 1e-12 * np.abs(core) + 1e-15 * scale
    assert not bad.any(), (repr(s), t[bad][:5], gen[bad][:5], core[bad][:5])
    big = np.abs(core) > 1e-9 * scale
    return float(np.max(err[big] / np.abs(core[big]), initial=0.0))


# One design per kind, with the branches the writer takes: chains and tables, every restart regime.
EXAMPLES: dict[str, list[Schedule]] = {
    "flat": [flat(0.1), flat(0.02, steps=7)],
    "ramp": [ramp(0.0, 0.1, 17), ramp(1e-4, 0.1, 9, curve="geometric"), ramp(0.1, 0.0, 11, curve="cosine")],
    "cosine": [cosine(0.1, steps=97), cosine(0.3, floor=0.01, steps=5)],
    "exp_decay": [exp_decay(0.1, 0.95), exp_decay(0.1, 0.5, every=7, steps=60),
                  exp_decay(0.2, 0.9, every=3, staircase=False, steps=40)],
    "drops": [drops(0.1, at=(30, 60), steps=90), drops(0.1, at=tuple(range(3, 60, 4)), factor=0.8, steps=64)],
    "poly": [poly(0.1, steps=50), poly(0.1, floor=0.001, steps=33, power=0.9)],
    "inv_sqrt": [inv_sqrt(0.1, warmup=10), inv_sqrt(0.3, warmup=1, steps=20)],
    "triangle": [triangle(0.01, 0.1, half_period=6), triangle(0.0, 1.0, half_period=4, shrink=0.5, steps=50)],
    "one_cycle": [one_cycle(0.1, steps=77), one_cycle(0.4, steps=41, tail=0.25, curve="cosine")],
    "knots": [knots([(0, 0.1), (10, 0.0)]), knots([(0, 0.1), (5, 0.05), (20, 0.001)], interp="log"),
              knots([(i * 3, 0.1 / (i + 1)) for i in range(14)], interp="hold"),
              knots([(i * 3, 0.1 / (i + 1)) for i in range(14)], interp="log"),
              knots([(i * 2, (i % 3) * 0.05) for i in range(12)])],
    "stages": [stages(flat(0.1, steps=5), cosine(0.1, steps=20), flat(0.001)),
               Stages(parts=(cosine(0.1, steps=9), ramp(0.0, 0.1, 4)))],
    "warmup": [warmup(cosine(0.1, steps=97), steps=13), warmup(exp_decay(0.1, 0.97), steps=5, start=0.01,
                                                                 curve="geometric")],
    "restarts": [restarts(cosine(0.1, steps=10), cycles=3), restarts(cosine(0.1, steps=10)),
                 restarts(cosine(0.1, steps=10), cycles=4, growth=2.0, peak_decay=0.5),
                 restarts(drops(0.1, at=(2, 5), steps=7), growth=1.5),
                 restarts(cosine(0.1, steps=40), growth=0.7, peak_decay=0.9),
                 restarts(cosine(0.1, steps=40), cycles=30, growth=0.8)],
    "product": [cosine(0.1, steps=30) * flat(2.0, steps=50), inv_sqrt(1.0, warmup=5) * cosine(0.1, steps=40)],
    "sum": [cosine(0.1, steps=30) + flat(0.001)],
    "scale": [cosine(0.1, steps=30) * 0.5, restarts(ramp(0.0, 0.1, 5)) * 3.0],
    "clip": [restarts(cosine(0.1, steps=20), growth=1.3, peak_decay=0.6).clip(low=0.01),
             triangle(0.0, 0.2, half_period=5).clip(high=0.1), cosine(0.2, steps=40).clip(0.05, 0.1)],
    "stretch": [warmup(cosine(0.1, steps=90), steps=10).stretch(37), drops(0.1, at=(3, 6), steps=9).stretch(100)],
}
DEMO = warmup(cosine(0.1, steps=85 * 1150), steps=5 * 1150)   # invented demo scenario: 90 epochs x 1,150 steps


class TestToPython:
    """to_python writes one stdlib-only function that equals the core at every tick."""

    def test_examples_cover_every_kind(self):
        """The hand-written examples name every kind in the spec registry (a new kind must be taught here)."""
        assert set(EXAMPLES) == set(KINDS)
        for kind, designs in EXAMPLES.items():
            assert all(kind in {n.kind for n in d.walk()} for d in designs), kind

    @pytest.mark.parametrize("s", [d for ds in EXAMPLES.values() for d in ds], ids=repr)
    def test_every_kind_matches_the_core(self, s):
        """Each example equals s(t) at every tick of its budget and a margin past it."""
        assert_matches(s)

    @settings(max_examples=300, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much, HealthCheck.data_too_large])
    @given(st.integers(3, 4).flatmap(lambda depth: schedule(depth)))
    def test_random_nested_schedules_match_the_core(self, s):
        """Random valid designs nested three or four levels deep match at every tick plus a margin."""
        if s.length is not None and s.length > 6000:
            s = s.stretch(6000)
        assert_matches(s)

    def test_demo_matches_every_tick(self):
        """The demo design matches at all 103,500 ticks and 500 past the end."""
        fn, _ = compile_fresh(to_python(DEMO))
        t = np.arange(103_500 + 500)
        gen = np.array([fn(int(i)) for i in t])
        np.testing.assert_allclose(gen, DEMO(t), rtol=1e-12, atol=1e-15 * 0.1)

    def test_far_ticks(self):
        """Open-ended restarts far past their table, and huge ticks, still match."""
        for s in (restarts(drops(0.1, at=(2, 5), steps=7), growth=1.5), restarts(cosine(0.1, steps=40), growth=0.7),
                  restarts(cosine(0.1, steps=10)), exp_decay(0.1, 0.999999, every=5), DEMO):
            fn, _ = compile_fresh(to_python(s))
            t = np.array([0, 1, 999, 10 ** 5 + 3, 10 ** 7 + 11, 2 ** 40 + 1, 2 ** 52])
            got = np.array([fn(int(i)) for i in t])
            np.testing.assert_allclose(got, s(t), rtol=1e-12, atol=1e-15 * 0.1, err_msg=repr(s))

    def test_one_function_importing_only_math(self):
        """The text is imports of stdlib modules plus one top-level def."""
        tree = ast.parse(to_python(DEMO))
        imports = [n for n in tree.body if isinstance(n, ast.Import)]
        assert [a.name for n in imports for a in n.names] == ["math"]
        defs = [n for n in tree.body if not isinstance(n, ast.Import)]
        assert len(defs) == 1 and isinstance(defs[0], ast.FunctionDef) and defs[0].name == "lr_at"
        tables = ast.parse(to_python(drops(0.1, at=tuple(range(1, 40)), steps=50)))
        assert sorted(a.name for n in tables.body if isinstance(n, ast.Import) for a in n.names) == ["bisect", "math"]

    def test_runs_in_an_interpreter_without_numpy(self):
        """A fresh interpreter runs the source and never imports numpy or schedwidget."""
        s = stages(DEMO, restarts(cosine(0.01, steps=100), growth=1.5))
        code = ("import sys; ns = {}; exec(sys.stdin.read(), ns); "
                "print(repr([ns['lr_at'](t) for t in (0, 5750, 50000, 103500, 200000)])); "
                "assert not [m for m in sys.modules if m.split('.')[0] in ('numpy', 'schedwidget')]")
        out = subprocess.run([sys.executable, "-I", "-c", code], input=to_python(s), capture_output=True,
                             text=True, timeout=60)
        assert out.returncode == 0, out.stderr
        got = eval(out.stdout)
        np.testing.assert_allclose(got, s(np.array([0, 5750, 50000, 103500, 200000])), rtol=1e-12)

    def test_small_body_one_branch_per_stage(self):
        """The demo's body is a handful of lines: one branch per stage, constants by repr."""
        src = to_python(DEMO)
        body = src.split('"""')[-1]
        assert body.count("if u < 5750.0:") == 1 and body.count("else:") == 2  # the t check has one too
        assert len(body.strip().splitlines()) <= 16
        assert "0.1 * (u / 5750.0)" in body

    def test_constants_are_bit_exact(self):
        """Rates that print with 17 digits come back bit for bit."""
        rate = 0.1 + 0.2                     # 0.30000000000000004
        fn, _ = compile_fresh(to_python(flat(rate, steps=3) >> flat(1 / 3)))
        assert fn(0) == rate and fn(3) == 1 / 3

    def test_docstring_states_unit_budget_peak_and_end(self):
        """The docstring states the unit, the budget, the peak and what happens past the end."""
        fn, _ = compile_fresh(to_python(DEMO, steps_per_epoch=1150))
        doc = fn.__doc__
        assert "Unit: step" in doc and "after every optimizer.step()" in doc
        assert "Budget: 103,500 steps (90 epochs of 1,150 steps)." in doc
        assert "Peak: 0.1 at step 5,750." in doc
        assert "Past the end (t >= 103,500) the rate stays at 0.0" in doc
        epoch_doc = compile_fresh(to_python(drops(0.1, at=(30, 60, 80), steps=90), unit="epoch"))[0].__doc__
        assert "Unit: epoch" in epoch_doc and "once after each epoch" in epoch_doc
        assert "Budget: 90 epochs." in epoch_doc
        open_doc = compile_fresh(to_python(exp_decay(0.1, 0.9)))[0].__doc__
        assert "open-ended" in open_doc

    def test_docstring_names_what_is_scheduled(self):
        """function_source(..., what=) names the hyperparameter in the docstring's first line and past the end;
        anything but the four tracks is refused."""
        from schedwidget.codegen import function_source

        s = ramp(0.85, 0.95, 100)
        words = {"rate": ("Learning rate", "rate"), "momentum": ("Momentum (SGD momentum or the first Adam beta)",
                                                                  "momentum"),
                 "beta2": ("Second Adam beta", "beta2"), "weight_decay": ("Weight decay", "weight decay")}
        for what, (head, word) in words.items():
            body, _ = function_source(s, "f", what=what)
            ns = {}
            exec("import math\n" + body, ns)
            assert ns["f"].__doc__.startswith(f"{head} at tick t (an int >= 0; t = 0 is the first update).")
            assert f"Past the end (t >= 100) the {word} stays at 0.95" in ns["f"].__doc__
            assert f"else 100.0  # past the end the {word} holds" in body
            assert [ns["f"](i) for i in range(101)] == s(np.arange(101)).tolist()
        assert function_source(s, "f")[0] == function_source(s, "f", what="rate")[0]
        with pytest.raises(ScheduleError, match=r"to_python: what must be one of 'rate', 'momentum', 'beta2', "
                                                r"'weight_decay', got 'lr'"):
            function_source(s, "f", what="lr")

    def test_same_design_same_text(self):
        """A spec round trip gives the same source, so exports diff cleanly."""
        s = EXAMPLES["restarts"][2] >> EXAMPLES["knots"][3] >> flat(0.001)
        assert to_python(s) == to_python(from_spec(s.to_spec()))

    @pytest.mark.parametrize("t", [-1, 2.5, "3", None, True, float("nan"), [1]])
    def test_bad_ticks_raise_value_error(self, t):
        """Negative or non-integer ticks raise ValueError with a clear message."""
        fn, _ = compile_fresh(to_python(DEMO))
        with pytest.raises(ValueError, match=r"lr_at: t must be"):
            fn(t)

    def test_integer_like_ticks_are_accepted(self):
        """Integral floats and numpy integers read as ticks, like the core."""
        fn, _ = compile_fresh(to_python(DEMO))
        assert fn(5750.0) == fn(np.int64(5750)) == fn(5750) == DEMO(5750)


INJECTIONS = ["lr_at()", "lr_at(t):\n    import os\ndef x", "lr\nat", "lr_at\n", "x'; import os; '", 'a"b',
              "__import__", "__init__", "lr_\u0430t", "lr_at\u200b", "\uff4c\uff52", "class", "lambda", "None",
              "match", "_", "1lr", "", "lr at", "lr-at", "lr.at", "math", "bisect", "min", "float", "ValueError"]


class TestNames:
    """Every name that reaches generated source is a plain identifier, else ScheduleError."""

    @pytest.mark.parametrize("name", INJECTIONS, ids=ascii)
    def test_injection_attempts_are_refused(self, name):
        """Parentheses, newlines, quotes, dunders, look-alikes, keywords and taken names are refused."""
        with pytest.raises(ScheduleError, match=r"to_python: name must be (a plain Python identifier|a name the "
                                                r"generated code does not use itself)"):
            to_python(DEMO, name=name)

    @pytest.mark.parametrize("name", [7, None, b"lr_at"])
    def test_non_strings_are_refused(self, name):
        """A name that is not a str is refused the same way."""
        with pytest.raises(ScheduleError, match=r"to_python: name must be a plain Python identifier"):
            to_python(DEMO, name=name)

    def test_message_names_the_value(self):
        """The message quotes the refused name, Cyrillic letter included."""
        with pytest.raises(ScheduleError, match="got 'lr_\u0430t'"):
            to_python(DEMO, name="lr_\u0430t")

    def test_plain_names_work(self):
        """A plain name becomes the function's name."""
        fn, _ = compile_fresh(to_python(DEMO, name="flake_rate"), name="flake_rate")
        assert fn.__name__ == "flake_rate"

    @pytest.mark.parametrize("name", ["t", "u", "r1", "u2", "k1", "starts1", "spans3", "xs1", "level12", "slope1",
                                      "__x", "__lr_at"])
    def test_the_generated_codes_own_names_are_refused(self, name):
        """The argument, the clock, the helpers and tables it writes, and mangled names are taken (issue 10)."""
        with pytest.raises(ScheduleError, match=r"to_python: name must be (a name the generated code does not use "
                                                r"itself|a plain Python identifier.*not starting with a digit or "
                                                r"with __)"):
            to_python(DEMO, name=name)

    @pytest.mark.parametrize("name", ["rate", "r", "start", "u_at", "lr1", "_private", "x_1"])
    def test_near_misses_are_allowed(self, name):
        """A stem without a number, or another name with one, is a plain name."""
        fn, _ = compile_fresh(to_python(DEMO, name=name), name=name)
        assert fn(5750) == DEMO(5750)

    def test_every_helper_the_writer_uses_is_refused(self):
        """Each name a large generated function assigns is refused as a function name."""
        import ast
        from schedwidget import drops, knots, restarts, triangle
        big = (restarts(drops(0.1, at=tuple(range(1, 40)), steps=50), cycles=3, growth=1.5)
               >> knots([(i, 0.01 + i * 1e-4) for i in range(0, 30)], interp="log")
               >> triangle(0.0, 0.1, 5, shrink=0.5, steps=40) >> DEMO.stretch(100))
        tree = ast.parse(to_python(big))
        names = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Store)}
        assert {"u", "t", "k1", "starts1", "spans1", "at1", "level1", "xs1", "ys1", "slope1"} <= names
        for name in names:
            with pytest.raises(ScheduleError, match=r"to_python: name must be a name the generated code does not"):
                to_python(DEMO, name=name)


class TestArguments:
    """Bad arguments to to_python raise ScheduleError naming them."""

    def test_not_a_schedule(self):
        """Only a Schedule can be exported."""
        with pytest.raises(ScheduleError, match=r"to_python: s must be a Schedule"):
            to_python(lambda t: 0.1)

    def test_bad_unit(self):
        """The unit is step or epoch."""
        with pytest.raises(ScheduleError, match=r"to_python: unit must be one of 'step', 'epoch', got 'batch'"):
            to_python(DEMO, unit="batch")

    def test_bad_steps_per_epoch(self):
        """steps_per_epoch is a whole number >= 1."""
        with pytest.raises(ScheduleError, match=r"to_python: steps_per_epoch must be a whole number >= 1"):
            to_python(DEMO, steps_per_epoch=0)


class TestReviewedRestartRounding:
    """Cycle lengths past the generated table round exactly like the core's (an ulp of pow decides ties)."""

    @pytest.mark.parametrize("growth", [2.1601835092503117, 1.800141828788954, 1.6647605495960218])
    def test_near_tie_growth(self, growth):
        from schedwidget import cosine, restarts, to_python
        s = restarts(cosine(1.0, steps=1), growth=growth)
        ns: dict = {}
        exec(to_python(s), ns)  # noqa: S102 - our own generated source
        t = np.arange(0, 5000)
        np.testing.assert_allclose([ns["lr_at"](int(k)) for k in t], s(t), rtol=1e-12, atol=1e-15)


class TestBoundedSource:
    """Generated source compiles for wide designs, and its tables have a stated limit (issue 10)."""

    @pytest.mark.parametrize("count", [9, 10, 17, 3000])
    def test_wide_stages_compile_and_agree(self, count):
        """Thousands of stages: a balanced tree of halves, not an elif chain too deep for Python's compiler."""
        from schedwidget import cosine, flat, stages
        s = stages(*[flat(0.1 + i * 1e-4, steps=1 + i % 3) for i in range(count)], cosine(0.1, steps=5))
        fn, _ = compile_fresh(to_python(s))
        t = np.arange(s.length + 3)
        assert [fn(int(k)) for k in t] == s(t).tolist()

    def test_a_table_past_the_limit_is_refused_with_it(self):
        """A knots table of 70,000 points would take seconds to compile: refused, naming the limit."""
        from schedwidget import knots
        with pytest.raises(ScheduleError, match=r"knots: points must be at most 65,536 entries to be written as source"):
            to_python(knots([(i, 0.1) for i in range(70_000)]))

    def test_an_open_ended_function_refuses_ticks_past_2_53(self):
        """Like the core: float(10**400) would raise OverflowError, and past 2**53 ticks are not exact."""
        from schedwidget import cosine, flat
        s = cosine(0.1, steps=10) >> flat(0.01)
        fn, _ = compile_fresh(to_python(s))
        assert fn(2**53) == s(2**53) == 0.01
        for t in (2**53 + 1, 10**400):
            with pytest.raises(ValueError, match=r"lr_at: t must be <= 2\*\*53"):
                fn(t)


class TestFrameworkExportsImportNothing:
    """to_python(array=True), to_jax and to_keras write text only: no framework is imported (issue 17)."""

    def test_no_framework_is_imported(self):
        code = ("import sys; from schedwidget import cosine, warmup; from schedwidget.export import to_python; "
                "from schedwidget.export_jax import to_jax; from schedwidget.export_keras import to_keras; "
                "d = warmup(cosine(0.1, steps=100), steps=10); "
                "texts = [to_python(d, array=True), to_jax(d), to_keras(d)]; "
                "print(sorted(m for m in sys.modules if m.split('.')[0] in "
                "('jax', 'jaxlib', 'keras', 'optax', 'tensorflow', 'torch')))")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
        assert out.returncode == 0, out.stderr
        assert out.stdout.strip() == "[]"
