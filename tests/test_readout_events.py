"""Readouts of events (issue 14): drop and restart rows in the boundary table, half-life in epochs, one number
format in the sentence."""

from __future__ import annotations

import math

import numpy as np
import pytest

from schedwidget import cosine, drops, exp_decay, facts, flat, knots, restarts, stages, warmup

SPE = 1150  # demo scenario (invented): 1,150 steps per epoch at batch 128


def rows(f, word):
    return [r for r in f.boundary if r[0].startswith(word + " ")]


class TestDropRows:
    """Every drop gets two rows: the last tick before it and the first tick after, with the rates on both sides."""

    def test_step_decay_rows_are_exact(self):
        s = drops(0.1, at=(30, 60), factor=0.1, steps=90)
        f = facts(s, unit="epoch")
        y = s(np.array([29, 30, 59, 60]))  # the design's own rates at those ticks
        assert rows(f, "drop") == [("drop 1: last tick before", 29, y[0]), ("drop 1: first tick after", 30, y[1]),
                                   ("drop 2: last tick before", 59, y[2]), ("drop 2: first tick after", 60, y[3])]
        assert y.tolist() == pytest.approx([0.1, 0.01, 0.01, 0.001], rel=1e-15)
        assert rows(f, "join") == [] and rows(f, "restart") == []

    def test_rows_in_tick_order_with_joins(self):
        s = stages(flat(0.1, steps=10), drops(0.05, at=(5, 15), steps=20), cosine(0.01, steps=10))
        f = facts(s)
        labels = [r[0] for r in f.boundary]
        assert labels == ["first tick", "join 1: last tick before", "join 1: first tick after",
                          "drop 1: last tick before", "drop 1: first tick after",
                          "drop 2: last tick before", "drop 2: first tick after",
                          "join 2: last tick before", "join 2: first tick after", "last tick", "after the run (held)"]
        ticks = [r[1] for r in f.boundary]
        assert ticks == [0, 9, 10, 14, 15, 24, 25, 29, 30, 39, 40]
        assert all(r == s(t) for _, t, r in f.boundary)

    def test_a_jump_at_a_join_is_the_joins_row(self):
        """A join whose rate jumps is listed once, as the join (6,000 such stages: no extra rows)."""
        s = stages(flat(0.1, steps=10), flat(0.01, steps=10))
        f = facts(s)
        assert f.breaks == (10,) and rows(f, "drop") == [] and len(rows(f, "join")) == 2

    def test_staircase_decay_every_period(self):
        s = exp_decay(0.1, 0.5, every=10, steps=40)
        f = facts(s)
        assert [r[1] for r in rows(f, "drop")] == [9, 10, 19, 20, 29, 30]
        assert rows(f, "drop")[1][2] == s(10) == 0.05

    def test_a_warmup_over_the_drops_keeps_them_where_they_are(self):
        s = warmup(drops(0.4, at=(30, 60), steps=90), 5, place="over")
        f = facts(s, unit="epoch")
        assert [r[1] for r in rows(f, "drop")] == [29, 30, 59, 60]
        assert [r[1] for r in rows(f, "join")] == [4, 5]


class TestRestartRows:
    """Warm restarts (Loshchilov & Hutter 2017): the rate jumps back up at every cycle boundary."""

    def test_cosine_restarts(self):
        c = cosine(1.0, steps=10)
        s = restarts(c, cycles=4)
        f = facts(s)
        assert rows(f, "restart") == [(f"restart {k}: {w}", t, r) for k in (1, 2, 3)
                                      for w, t, r in (("last tick before", 10 * k - 1, c(9)),
                                                      ("first tick after", 10 * k, 1.0))]
        assert rows(f, "drop") == []

    def test_decaying_growing_restarts_behind_a_warmup(self):
        s = warmup(restarts(cosine(0.1, steps=100), cycles=3, growth=2.0, peak_decay=0.5), 20)
        f = facts(s)
        # cycles of 100, 200, 400 ticks after a 20-tick warmup: restarts at 120 and 320, peaks 0.05 and 0.025
        assert [(r[1], r[2]) for r in rows(f, "restart") if "after" in r[0]] == [(120, 0.05), (320, 0.025)]
        assert [r[1] for r in rows(f, "join")] == [19, 20]

    def test_a_rise_without_restarts_is_a_rise(self):
        s = knots([(0, 0.01), (10, 0.1), (20, 0.1)], interp="hold")
        f = facts(s)
        assert rows(f, "rise") == [("rise 1: last tick before", 9, 0.01), ("rise 1: first tick after", 10, 0.1)]

    def test_table_shows_the_rows(self):
        text = facts(restarts(cosine(1.0, steps=10), cycles=2)).table()
        assert "restart 1: last tick before" in text and "restart 1: first tick after" in text


class TestHalfLifeInEpochs:
    """A decay stepped per epoch reads its half-life in epochs too when steps per epoch are known."""

    def test_per_epoch_staircase_on_the_step_clock(self):
        # x0.95 once per epoch of 1,150 steps: half-life ln 0.5 / ln 0.95 = 13.51 epochs = 15,540 steps
        s = exp_decay(0.1, 0.95, every=SPE, steps=200 * SPE)
        f = facts(s, steps_per_epoch=SPE)
        assert f.half_life == pytest.approx(SPE * math.log(0.5) / math.log(0.95))
        assert f.half_life_epochs == pytest.approx(math.log(0.5) / math.log(0.95))
        assert f.sentence.startswith("x0.95 per 1,150 steps: half-life 15,540 steps (13.5 epochs); ")

    def test_epoch_clock_and_unknown_epochs(self):
        f = facts(exp_decay(0.1, 0.95), steps=200, unit="epoch")
        assert f.half_life_epochs == f.half_life
        g = facts(exp_decay(0.1, 0.95, every=SPE, steps=200 * SPE))
        assert g.half_life_epochs is None and "epochs)" not in g.sentence
        assert facts(cosine(0.1, steps=100), steps_per_epoch=10).half_life_epochs is None


class TestSentenceFormat:
    """One number format in the sentence: a space before %, a rate near 0 as ~0 with its exact value."""

    def test_percent_with_a_space(self):
        f = facts(drops(0.05, at=(30, 60), factor=0.1, steps=90), unit="epoch")
        assert "under 10 % of the peak from epoch 30" in f.sentence and "10%" not in f.sentence

    def test_near_zero_end_of_a_cosine(self):
        s = warmup(cosine(0.1, steps=85 * SPE), steps=5 * SPE)
        f = facts(s, steps_per_epoch=SPE)
        # the cosine one tick before its end: 0.1 * (1 + cos(pi * (L - 1) / L)) / 2, about 2.58e-11
        assert f.final == s(90 * SPE - 1) and 2e-11 < f.final < 3e-11
        assert f"ends at ~0 ({f.final:.3g}) at step 103,499" in f.sentence

    def test_zero_and_ordinary_rates_stay_plain(self):
        f = facts(cosine(0.1, steps=100), steps=101)
        assert "~0" not in f.sentence
        g = facts(cosine(0.1, floor=1e-4, steps=100))
        assert "ends at 0.0001" in g.sentence

    def test_every_value_in_the_table_is_the_design_at_its_tick(self):
        s = warmup(restarts(drops(0.1, at=(3, 6), steps=9), cycles=3), 4, place="over")
        f = facts(s)
        ticks = [t for _, t, _ in f.boundary]
        assert [r for _, _, r in f.boundary] == s(np.array(ticks)).tolist()
        assert np.all(np.diff([t for _, t, _ in f.boundary]) >= 0)


class TestWarmupCautions:
    """A warmup placed before drops moves them later on the run's clock: the readout says so, and how to keep them."""

    def test_before_moves_the_drops(self):
        s = warmup(drops(3.2, at=(30, 60, 80), steps=90), 5, start=0.1)
        (c,) = [c for c in facts(s, unit="epoch").cautions if "comes before the schedule" in c]
        assert "its own epochs 30, 60, 80 happen at epochs 35, 65, 85 of the run" in c and "place='over'" in c
        over = warmup(drops(3.2, at=(30, 60, 80), steps=90), 5, start=0.1, place="over")
        assert not [c for c in facts(over, unit="epoch").cautions if "comes before" in c]
        assert not [c for c in facts(warmup(cosine(0.1, steps=90), 5)).cautions if "comes before" in c]

    def test_a_large_peak_explained_by_the_batch(self):
        """3.2 is the linear scaling rule's rate at batch 8,192 (Goyal et al. 2017): no 'above 1.0' caution then."""
        s = warmup(drops(3.2, at=(30, 60, 80), steps=90), 5, start=0.1, place="over")
        assert not [c for c in facts(s, unit="epoch", batch=8192).cautions if "above 1.0" in c]
        assert [c for c in facts(s, unit="epoch").cautions if "above 1.0" in c]  # without a batch: still said
        assert [c for c in facts(s * 2.0, unit="epoch", batch=8192).cautions if "above 1.0" in c]
