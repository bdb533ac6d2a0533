"""The plateau rule is described once (plateau_rule.IMPROVES / APPLIES): the replay and the generated class
read the same tests (DESIGN.md section 2b)."""

from __future__ import annotations

import itertools

import pytest

from schedwidget.plateau import plateau_source, replay_plateau
from schedwidget.plateau_rule import APPLIES, IMPROVES, PlateauRule, _applies, _in_class


@pytest.mark.parametrize("goal,relative", list(itertools.product(["max", "min"], [True, False])))
def test_generated_class_writes_the_replays_improvement_test(goal, relative):
    src = plateau_source(0.1, goal=goal, relative=relative)
    assert f"if self.best is None or {_in_class(IMPROVES[goal, relative])}:" in src
    rule = PlateauRule(goal=goal, relative=relative, tolerance=0.01)
    for a, best in [(1.0, 1.0), (1.02, 1.0), (0.98, 1.0), (1.005, 1.0), (0.995, 1.0), (2.0, float("-inf"))]:
        expected = {("max", True): a > best * 1.01, ("max", False): a > best + 0.01,
                    ("min", True): a < best * 0.99, ("min", False): a < best - 0.01}[goal, relative]
        assert rule.improves(a, best) == expected


@pytest.mark.parametrize("min_drop", [0.0, 1e-8])
def test_generated_class_writes_the_replays_drop_test(min_drop):
    src = plateau_source(0.1, min_drop=min_drop)
    assert f"if {_in_class(APPLIES[min_drop > 0.0])}:" in src
    assert _applies(1e-8, 1e-9, 0.0, min_drop) == (min_drop == 0.0)  # torch skips a drop of 9e-9 <= 1e-8
    assert _applies(1e-5 * (1 + 1e-12), 1e-5, 1e-5, 0.0) is False  # at the floor up to rounding


def test_replay_and_generated_class_agree_on_a_history():
    history = [0.5, 0.6, 0.6, 0.6, 0.6, 0.7, 0.7, 0.7, 0.69, 0.71, 0.71, 0.71, 0.71]
    for kwargs in [dict(patience=1), dict(patience=0, goal="min", relative=False, tolerance=0.0),
                   dict(patience=2, wait_after_drop=1, floor=0.002), dict(patience=0, min_drop=1e-8)]:
        ns: dict = {}
        exec(plateau_source(0.1, **kwargs), ns)
        rule = ns["PlateauRate"]()
        rates = [rule.rate] + [rule.update(a) for a in history]
        r = replay_plateau(history, 0.1, **kwargs)
        assert rates[:-1] == r.rates.tolist() and rates[-1] == r.next_rate


def test_demo_data_is_its_own_module():
    """Demo data generation is separate from the metric readers; the old names still reach it."""
    from schedwidget import demo_data, metrics

    assert metrics.demo_path is demo_data.demo_path and metrics.make_demo_histories is demo_data.make_demo_histories
    from pathlib import Path

    assert "def make_demo_histories" not in Path(metrics.__file__).read_text()
    text = demo_data.demo_csv("a", demo_data.make_demo_histories()["a"])
    assert text == demo_data.demo_path("a").read_text()
