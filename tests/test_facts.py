"""Readouts: numbers, the boundary table, the plain sentence and cautions."""

from __future__ import annotations

import math

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, exp_decay, facts, flat, restarts, warmup

SPE = 1150  # demo scenario (invented): 1,150 steps per epoch at batch 128


class TestFacts:
    """facts() over a budget."""

    def test_per_epoch_decay_sentence(self):
        # x0.95 per epoch over 200 epochs: half-life ln 0.5 / ln 0.95 = 13.51 epochs; 0.95**200 = 3.505e-5
        f = facts(exp_decay(0.1, 0.95), steps=200, unit="epoch")
        assert f.half_life == pytest.approx(math.log(0.5) / math.log(0.95))
        assert f.after == pytest.approx(0.1 * 0.95 ** 200, rel=1e-14)
        assert f.sentence.startswith("x0.95 per epoch: half-life 13.5 epochs; after 200 epochs the rate is 3.51e-05 of the peak")

    def test_numbers_match_brute_force(self):
        s = warmup(cosine(0.1, steps=85 * SPE), steps=5 * SPE)
        f = facts(s, steps_per_epoch=SPE)
        y = s(np.arange(90 * SPE))
        assert f.exact and f.steps == 90 * SPE
        assert f.peak == y.max() and f.peak_at == int(np.argmax(y)) == 5 * SPE
        assert f.area == pytest.approx(y.sum(), rel=1e-12) and f.mean == pytest.approx(y.mean(), rel=1e-12)
        assert f.minimum == y.min() and f.final == y[-1]
        assert f.under_10 == int(np.flatnonzero((y < 0.01) & (np.arange(y.size) > f.peak_at))[0])
        assert f.under_1 == int(np.flatnonzero((y < 0.001) & (np.arange(y.size) > f.peak_at))[0])

    def test_boundary_table(self):
        s = warmup(cosine(0.1, steps=100), steps=10)
        f = facts(s)
        assert f.boundary == (("first tick", 0, 0.0), ("join 1: last tick before", 9, s(9)), ("join 1: first tick after", 10, 0.1),
                              ("last tick", 109, s(109)), ("after the run (held)", 110, 0.0))
        assert "join 1: first tick after" in f.table() and "0.1" in f.table()

    def test_breaks(self):
        f = facts(drops(0.1, at=(32_000, 48_000), steps=64_000))
        assert f.breaks == (32_000, 48_000) and "2 jumps" in f.sentence
        assert facts(warmup(cosine(0.1, steps=100), steps=10)).breaks == ()  # a warmup join is continuous
        r = facts(restarts(cosine(1.0, steps=10), cycles=4))
        assert r.breaks == (10, 20, 30)

    def test_grid_mode_says_so_and_keeps_first_peak(self):
        s = restarts(warmup(cosine(1.0, steps=3700), steps=300), growth=2.0).clip(low=0.1)
        f = facts(s, steps=10**9, exact_up_to=2**16)
        assert not f.exact and "read from a grid" in f.sentence
        assert f.peak == 1.0 and f.peak_at == 300

    def test_open_ended_needs_steps(self):
        with pytest.raises(ScheduleError, match=r"facts: steps must be given for an open-ended schedule"):
            facts(flat(0.1))
        with pytest.raises(ScheduleError, match=r"facts: unit must be one of 'step', 'epoch', got 'batch'"):
            facts(flat(0.1), steps=3, unit="batch")


class TestCautions:
    """Risky settings are named, never blocked."""

    def test_high_peak(self):
        assert any("above 1.0" in c for c in facts(flat(3.0, steps=10)).cautions)

    def test_linear_scaling_reference(self):
        # linear scaling rule: 0.1 x batch / 256 for SGD (Goyal et al. 2017, sec. 2.1)
        c = facts(flat(0.4, steps=10), batch=256).cautions
        assert any("4.00x the linear scaling rule's 0.1" in x and "caution above 2x" in x for x in c)
        assert not any("linear scaling" in x for x in facts(flat(0.4, steps=10), batch=1024).cautions)  # 0.4 is the rule at 1024

    def test_no_warmup_at_large_batch(self):
        # gradual warmup was needed at large batch (Goyal et al. 2017, sec. 2.2); threshold 1,024 is common practice
        assert any("no warmup at batch 8,192" in x for x in facts(cosine(3.2, steps=100), batch=8192).cautions)
        assert not any("no warmup" in x for x in facts(warmup(cosine(3.2, steps=100), 10), batch=8192).cautions)

    def test_budget_mismatch(self):
        assert any("never run" in c for c in facts(cosine(0.1, steps=100), steps=50).cautions)
        assert any("held at 0" in c for c in facts(cosine(0.1, steps=100), steps=150).cautions)
