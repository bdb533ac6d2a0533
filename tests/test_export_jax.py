"""to_jax: a jax.jit-traceable function of the step count, equal to the design in float64 (x64) and float32,
that drives a real optax optimizer with the design's rates."""

from __future__ import annotations

import random

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings

from schedwidget import ScheduleError, cosine, flat, restarts, triangle
from schedwidget.export_jax import to_jax
from schedwidget.schedule import KINDS, Schedule
from tests import strategies
from tests.conftest import optional_module
from tests.fuzz.designs import design
from tests.test_export import DEMO, EXAMPLES, INJECTIONS

F32 = float(np.finfo(np.float32).eps)  # 1.19e-07


@pytest.fixture(scope="module")
def jax():
    return optional_module("jax", "SCHEDWIDGET_REQUIRE_JAX")


@pytest.fixture(params=[True, False], ids=["x64", "float32"])
def x64(request, jax):
    """Each check once with x64 on (float64) and once off (float32); the setting is restored after."""
    before = jax.config.jax_enable_x64
    jax.config.update("jax_enable_x64", request.param)
    yield request.param
    jax.config.update("jax_enable_x64", before)


def jitted(jax, s: Schedule, name: str = "lr_at"):
    namespace: dict = {}
    exec(to_jax(s, name=name), namespace)
    assert set(namespace) == {"__builtins__", "jnp", name}
    return jax.jit(namespace[name])


def ticks_of(s: Schedule, margin: int = 50, window: int = 600) -> np.ndarray:
    n = s.length if s.length is not None else window
    if n <= 100_000:
        return np.arange(n + margin)
    t = np.unique(np.concatenate([np.arange(20_000), np.linspace(0, n, 20_000).astype(np.int64),
                                  n + np.arange(margin)]))
    return t[t <= 2 ** 53]


def assert_close(jax, s: Schedule, x64: bool) -> None:
    """x64: within 1e-12 relative (plus 1e-15 of the peak, as tests/test_export.py's check, for rates at 0: XLA
    fuses a*b+c, so a 0 of the core may come out an ulp away).  float32: within 2e-7 relative plus float32's
    rounding of the peak, growing with the tick for a clock read in float32 (see PRECISION in export_jax),
    ticks <= 2**24."""
    import jax.numpy as jnp

    t = ticks_of(s)
    if not x64:
        t = t[t <= 2 ** 24]
    core = s(t)
    got = np.asarray(jitted(jax, s)(jnp.asarray(t, dtype=jnp.int64 if x64 else jnp.int32)), dtype=np.float64)
    assert got.dtype == np.float64 and got.shape == t.shape
    peak = max(float(np.max(core)), 1e-300)
    if x64:
        tol = 1e-12 * np.abs(core) + 1e-15 * peak  # the absolute part only for rates at or next to 0
    else:  # the clock's rounding grows with the tick: a periodic shape far out reads its phase to ~eps32 * t
        tol = 2e-7 * np.abs(core) + 8 * F32 * peak * np.maximum(1.0, t / 8.0) + np.finfo(np.float32).tiny
    bad = ~(np.abs(got - core) <= tol)  # nan is bad too
    assert not bad.any(), (repr(s), t[bad][:5], got[bad][:5], core[bad][:5])
    assert (got >= 0).all()


class TestEqualToTheDesign:
    """Under jax.jit, x64 on and off, at every tick of the budget and past it."""

    @pytest.mark.parametrize("s", [d for ds in EXAMPLES.values() for d in ds], ids=repr)
    def test_every_example_of_every_kind(self, jax, x64, s):
        assert_close(jax, s, x64)

    @pytest.mark.parametrize("kind", list(KINDS))
    def test_fuzz_design_of_every_registered_kind(self, jax, x64, kind):
        """Two random designs whose top node is each registered kind (the fuzz suite's generator)."""
        rng = random.Random(f"jax-{kind}")
        for _ in range(2):
            assert_close(jax, design(rng, depth=2, kind=kind), x64)

    @settings(max_examples=25, deadline=None, database=None, derandomize=True,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
    @given(strategies.combine(strategies.combine(strategies.leaves())))
    def test_property_strategy_designs(self, jax, x64, s):
        """A bounded sample (each design costs one jit compile)."""
        assert_close(jax, s, x64)

    def test_float64_far_ticks(self, jax):
        import jax.numpy as jnp

        before = jax.config.jax_enable_x64
        jax.config.update("jax_enable_x64", True)
        try:
            for s in (restarts(cosine(0.1, steps=40), growth=1.5), restarts(cosine(0.1, steps=40), growth=0.7), DEMO):
                t = np.array([0, 999, 10 ** 7 + 11, 2 ** 40 + 1, 2 ** 52])
                got = np.asarray(jitted(jax, s)(jnp.asarray(t)))
                np.testing.assert_allclose(got, s(t), rtol=1e-12, atol=1e-15 * 0.1, err_msg=repr(s))
        finally:
            jax.config.update("jax_enable_x64", before)

    def test_float32_above_2_24_reads_a_rounded_tick(self, jax):
        """float32 (x64 off): a step count above 2**24 is rounded to a float32 first, as the docstring says."""
        import jax.numpy as jnp

        s = triangle(0.0, 1.0, half_period=1)  # 0, 1, 0, 1, ...: an odd tick reads 1.0, an even one 0.0
        fn = jitted(jax, s)
        assert float(fn(jnp.int32(2 ** 24 - 1))) == 1.0  # exact below 2**24
        assert float(fn(jnp.int32(2 ** 24 + 1))) == 0.0  # 2**24 + 1 is no float32: read as 2**24, an even tick
        assert s(2 ** 24 + 1) == 1.0


class TestOptax:
    """The function is an optax schedule: a real optimizer's rates over hundreds of updates are the design's."""

    def test_sgd_with_injected_rate(self, jax):
        optax = optional_module("optax", "SCHEDWIDGET_REQUIRE_JAX")
        import jax.numpy as jnp

        s = DEMO.stretch(300)  # warmup then cosine over 300 updates (the invented demo, shortened)
        namespace: dict = {}
        exec(to_jax(s), namespace)
        opt = optax.inject_hyperparams(optax.sgd)(learning_rate=namespace["lr_at"])
        params = {"w": jnp.array([3.0, -2.0])}
        target = jnp.array([1.0, 0.5])
        state = opt.init(params)

        @jax.jit
        def update(params, state):
            grads = jax.grad(lambda p: jnp.sum((p["w"] - target) ** 2))(params)
            updates, state = opt.update(grads, state, params)
            used = state.hyperparams["learning_rate"]  # what this update used: schedule(count before it)
            return optax.apply_updates(params, updates), state, used

        rates = []
        for _ in range(320):
            params, state, used = update(params, state)
            rates.append(float(used))
        np.testing.assert_allclose(rates, s(np.arange(320)), rtol=2e-7, atol=4 * F32 * 0.1)
        assert float(jnp.sum((params["w"] - target) ** 2)) < 1e-3  # it trained

    def test_plain_schedule_argument(self, jax):
        """Passed straight as learning_rate, optax calls it with its update count; the steps taken match."""
        optax = optional_module("optax", "SCHEDWIDGET_REQUIRE_JAX")
        import jax.numpy as jnp

        s = restarts(cosine(0.05, steps=50), cycles=4, growth=1.0)
        namespace: dict = {}
        exec(to_jax(s), namespace)
        opt = optax.sgd(learning_rate=namespace["lr_at"])
        params = jnp.zeros(())
        state = opt.init(params)
        step = jax.jit(lambda p, st: opt.update(jnp.ones(()), st, p))
        moves = []
        for _ in range(220):
            updates, state = step(params, state)
            moves.append(-float(updates))  # gradient 1: the update is -rate
        np.testing.assert_allclose(moves, s(np.arange(220)), rtol=2e-7, atol=4 * F32 * 0.05)


class TestNames:
    """Names are checked as for to_python; nothing from a spec reaches the source as code."""

    @pytest.mark.parametrize("name", INJECTIONS + ["jnp", "jax", "step", "rate", "u", "r1"], ids=ascii)
    def test_injection_attempts_are_refused(self, name):
        with pytest.raises(ScheduleError, match=r"to_jax: name must be (a plain Python identifier|a name the "
                                                r"generated code does not use itself)"):
            to_jax(DEMO, name=name)

    def test_arguments(self):
        with pytest.raises(ScheduleError, match="to_jax: s must be"):
            to_jax("cosine")
        with pytest.raises(ScheduleError, match="to_jax: unit must be one of"):
            to_jax(DEMO, unit="batch")

    def test_source_imports_only_jax_numpy(self):
        text = to_jax(flat(0.1, steps=9) >> DEMO)
        assert [x for x in text.splitlines() if x.startswith(("import", "from"))] == ["import jax.numpy as jnp"]
        assert " if " not in text.split('"""')[-1] and "while" not in text
