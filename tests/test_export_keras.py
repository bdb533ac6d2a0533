"""to_keras: a Keras 3 LearningRateSchedule class equal to the design (float32), saved and reloaded with a model."""

from __future__ import annotations

import os
import random

os.environ.setdefault("KERAS_BACKEND", "jax")  # TensorFlow is not installed here: Keras 3 runs on JAX

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, restarts, warmup
from schedwidget.export_keras import to_keras
from schedwidget.schedule import KINDS, Schedule
from tests.conftest import optional_module
from tests.fuzz.designs import design
from tests.test_export import DEMO, EXAMPLES, INJECTIONS

F32 = float(np.finfo(np.float32).eps)


@pytest.fixture(scope="module")
def keras():
    optional_module("jax", "SCHEDWIDGET_REQUIRE_JAX")
    return optional_module("keras", "SCHEDWIDGET_REQUIRE_JAX")


def schedule_class(s: Schedule, name: str = "ExportedSchedule"):
    namespace: dict = {}
    exec(to_keras(s, name=name), namespace)
    assert set(namespace) == {"__builtins__", "keras", "ops", name}
    return namespace[name]


def assert_close(s: Schedule) -> None:
    """float32: within 2e-7 relative plus float32 rounding of the clock and the peak (as the JAX export)."""
    n = s.length if s.length is not None else 600
    t = np.arange(min(n, 50_000) + 50)
    core = s(t)
    got = np.asarray(schedule_class(s)()(t), dtype=np.float64)
    peak = max(float(np.max(core)), 1e-300)
    tol = 2e-7 * np.abs(core) + 8 * F32 * peak * np.maximum(1.0, t / 8.0) + np.finfo(np.float32).tiny
    bad = ~(np.abs(got - core) <= tol)
    assert not bad.any(), (repr(s), t[bad][:5], got[bad][:5], core[bad][:5])


class TestEqualToTheDesign:
    """The schedule's __call__ equals the design at every tick of the budget and past it."""

    @pytest.mark.parametrize("s", [ds[0] for ds in EXAMPLES.values()], ids=repr)
    def test_one_example_of_every_kind(self, keras, s):
        assert_close(s)

    @pytest.mark.parametrize("kind", list(KINDS))
    def test_fuzz_design_of_every_registered_kind(self, keras, kind):
        assert_close(design(random.Random(f"keras-{kind}"), depth=2, kind=kind))

    def test_is_a_learning_rate_schedule_with_a_config(self, keras):
        cls = schedule_class(DEMO)
        sched = cls()
        assert isinstance(sched, keras.optimizers.schedules.LearningRateSchedule)
        assert sched.get_config() == {} and isinstance(cls.from_config(sched.get_config()), cls)
        assert abs(float(sched(5750)) - 0.1) <= 0.1 * F32


class TestSaveAndLoad:
    """A compiled model saves with its schedule and loads back with it; training goes on with the same rates."""

    # model.save() reads Keras' own variables through np.array(variable), which numpy 2 warns about (Keras' code,
    # not the generated class's)
    @pytest.mark.filterwarnings("ignore:__array__ implementation doesn't accept a copy keyword:DeprecationWarning")
    def test_model_save_and_load_model(self, keras, tmp_path):
        s = warmup(restarts(cosine(0.05, steps=20), cycles=3), steps=5)
        cls = schedule_class(s, name="FlakeRate")
        model = keras.Sequential([keras.Input((3,)), keras.layers.Dense(1)])
        model.compile(optimizer=keras.optimizers.SGD(learning_rate=cls()), loss="mse")
        x = np.random.default_rng(0).normal(size=(32, 3)).astype("float32")
        y = x @ np.array([[1.0], [-2.0], [0.5]], dtype="float32")
        model.fit(x, y, batch_size=8, epochs=3, verbose=0)  # 12 updates
        path = tmp_path / "model.keras"
        model.save(path)
        loaded = keras.models.load_model(path)
        lr = loaded.optimizer._learning_rate  # the schedule object (learning_rate reads its current value)
        assert type(lr).__name__ == "FlakeRate"
        assert int(loaded.optimizer.iterations) == 12
        t = np.arange(s.length + 10)
        np.testing.assert_allclose(np.asarray(lr(t), dtype=float), s(t), rtol=2e-7, atol=8 * F32 * 0.05 * 5)
        loaded.fit(x, y, batch_size=8, epochs=1, verbose=0)  # goes on training with it
        assert int(loaded.optimizer.iterations) == 16


class TestNames:
    @pytest.mark.parametrize("name", INJECTIONS + ["keras", "ops", "self", "step", "rate", "u", "r1"], ids=ascii)
    def test_injection_attempts_are_refused(self, name):
        with pytest.raises(ScheduleError, match=r"to_keras: name must be (a plain Python identifier|a name the "
                                                r"generated code does not use itself)"):
            to_keras(DEMO, name=name)

    def test_arguments(self):
        with pytest.raises(ScheduleError, match="to_keras: s must be"):
            to_keras(42)
