"""Open-ended designs rescale, a trace-built design gets the right hint, bounded numbers everywhere (issue 10)."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, exp_decay, flat, knots, ramp, restarts, stages, warmup
from schedwidget.budget import Budget, check_length, scale_for_batch

SAMPLES = 147_200  # invented demo scenario: 1,150 steps per epoch at batch 128


class TestOpenEndedRescale:
    """keep='samples' on an open-ended design: the rates scale, a warmup and finite stages move, the open end stays."""

    @pytest.mark.parametrize("rule, factor", [("linear", 4.0), ("sqrt", 2.0)])
    def test_flat_rate(self, rule, factor):
        """flat(0.1) from batch 256 to 1,024: nothing on its clock to move, so only the rate changes."""
        # Goyal et al. 2017, section 2.1 (linear scaling rule); square-root rule from memory (Krizhevsky 2014)
        moved = scale_for_batch(flat(0.1), 256, 1024, rule=rule)
        t = np.array([0, 1, 10 ** 6, 2 ** 53])
        assert moved.length is None
        assert np.array_equal(moved(t), np.full(4, 0.1 * factor))
        assert moved == scale_for_batch(flat(0.1), 256, 1024, rule=rule, keep="steps")

    def test_same_batch_is_the_same_design(self):
        assert scale_for_batch(flat(0.1), 512, 512) == flat(0.1)

    def test_warmup_into_a_flat_rate(self):
        """A 5-epoch warmup stays 5 epochs in samples seen: 5,750 updates at 128 become 719 at 1,024."""
        # Goyal et al. 2017, section 2.2: gradual warmup over 5 epochs (from memory); 5,750 / 8 = 718.75 -> 719
        s = warmup(flat(0.1), 5 * 1150)
        moved = scale_for_batch(s, 128, 1024)
        assert moved.length is None
        assert moved(719) == pytest.approx(0.8, rel=1e-15) and moved(718) < 0.8 * (1 - 1e-6)
        assert moved(10 ** 9) == pytest.approx(0.8, rel=1e-15)
        # the peak lands on the same tick as when the finite design is moved (stretched: 718.75 -> first tick 719)
        finite = scale_for_batch(warmup(flat(0.1, steps=85 * 1150), 5 * 1150), 128, 1024)
        t = np.arange(2000)
        assert int(np.argmax(finite(t))) == int(np.argmax(moved(t))) == 719

    def test_inner_stages_move_to_the_same_samples(self):
        """Joins at 1,000 and 4,000 updates of 128 samples are at 125 and 500 updates of 1,024."""
        s = stages(flat(0.2, steps=1000), cosine(0.05, floor=0.02, steps=3000), flat(0.01))
        moved = scale_for_batch(s, 128, 1024)
        assert moved.length is None
        assert moved._joins().tolist() == [125.0, 500.0]
        assert moved(124) == pytest.approx(1.6) and moved(500) == pytest.approx(0.08) and moved(10 ** 7) == pytest.approx(0.08)
        assert moved(125) == pytest.approx(0.4, rel=1e-15)  # the cosine stage starts at its own peak, times 8

    def test_clipped_and_scaled_open_ends(self):
        s = stages(ramp(0.0, 0.1, steps=800), flat(0.1).clip(high=0.05) * 2.0)
        moved = scale_for_batch(s, 256, 512)
        assert moved._joins().tolist() == [400.0] and moved(400) == pytest.approx(0.2) and moved(10 ** 8) == pytest.approx(0.2)

    @pytest.mark.parametrize("design", [
        exp_decay(0.1, 0.9),
        restarts(cosine(0.1, steps=100)),
        stages(ramp(0.0, 0.1, steps=10), exp_decay(0.1, 0.99)),
        warmup(exp_decay(0.1, 0.99), 10),
    ], ids=["exp_decay", "endless-restarts", "stages-into-decay", "warmup-into-decay"])
    def test_open_clock_shapes_are_refused(self, design):
        """A rate that changes along an unbounded clock needs keep='steps' or a length."""
        with pytest.raises(ScheduleError, match=r"^scale_for_batch: s must be a schedule with a length, or an "
                                                r"open-ended one that ends in a constant rate.*use keep='steps'"):
            scale_for_batch(design, 128, 1024)

    def test_steps_with_an_open_design(self):
        with pytest.raises(ScheduleError, match=r"^scale_for_batch: steps must be None for an open-ended design, "
                                                r"got 100"):
            scale_for_batch(flat(0.1), 128, 1024, steps=100)


class TestTraceBuiltKnots:
    """A design rebuilt from a logged trace of n rates is one tick short; the hint says how to give it its length."""

    RATES = [0.1] * 30 + [0.01] * 30 + [0.001] * 30   # a logged trace of 90 epochs, one rate per epoch

    def test_one_tick_short_hint(self):
        s = knots(list(enumerate(self.RATES)), interp="hold")
        with pytest.raises(ScheduleError) as info:
            check_length(s, len(self.RATES), unit="epoch")
        msg = str(info.value)
        assert "length of 89 epochs, got 90 epochs" in msg and "held for 1 more epoch;" in msg
        assert "knots(list(enumerate(rates)), interp='hold', steps=90)" in msg and "stretch(90)" not in msg
        # the fix the hint gives (knots' own steps) is exact: every logged rate at its own tick
        fixed = knots(list(enumerate(self.RATES)), interp="hold", steps=len(self.RATES))
        assert check_length(fixed, len(self.RATES), unit="epoch") == 90
        assert fixed(np.arange(90)).tolist() == self.RATES
        # what the old hint suggested moves every drop: stretch(90) of 89 ticks puts the epoch-30 drop at 30.34 -> 31
        assert s.stretch(90)(30) == 0.1

    def test_scaled_trace(self):
        s = knots(list(enumerate(self.RATES)), interp="hold") * 0.5
        with pytest.raises(ScheduleError, match=r"steps=90\): give knots its length"):
            check_length(s, 90)

    def test_longer_gap_offers_both(self):
        s = knots([(0, 0.1), (50, 0.01)], interp="hold")
        with pytest.raises(ScheduleError, match=r"held for 50 more steps; hold the last knot's rate to the end with "
                                                r"knots\(\.\.\., steps=100\), or fit the design with s.stretch\(100\)"):
            check_length(s, 100)

    def test_other_designs_keep_the_stretch_hint(self):
        with pytest.raises(ScheduleError, match=r"held for 1 more step; fit the design with s.stretch\(101\)"):
            check_length(cosine(0.1, steps=100), 101)


class TestBoundedNumbers:
    """Huge numbers, bools and numpy scalars in budget arithmetic: a value or a ScheduleError, never OverflowError."""

    B = Budget(samples=SAMPLES, batch=128, epochs=90)

    @pytest.mark.parametrize("call, pattern", [
        (lambda: check_length(flat(0.1, steps=10), 10 ** 400), r"^check_length: steps must be a budget of at most 2\*\*53"),
        (lambda: check_length(flat(0.1, steps=10), True), r"^check_length: steps must be a whole number >= 1 or a Budget"),
        (lambda: TestBoundedNumbers.B.epochs_to_steps(10 ** 400), r"^Budget.epochs_to_steps: epochs must be a finite "
                                                                  r"number >= 0 and <= 2\*\*53"),
        (lambda: TestBoundedNumbers.B.epochs_to_steps(True), r"^Budget.epochs_to_steps: epochs must be"),
        (lambda: TestBoundedNumbers.B.steps_to_epochs(10 ** 400), r"^Budget.steps_to_epochs: steps must be a whole "
                                                                  r"number >= 0 and <= 2\*\*53"),
        (lambda: Budget(samples=2 ** 50, batch=1, epochs=2 ** 10), r"^Budget: epochs must be at most 8 at "
                                                                   r"1,125,899,906,842,624 updates per epoch"),
        (lambda: scale_for_batch(flat(0.1, steps=10), 10 ** 400, 128), r"^scale_for_batch: from_batch must be a "
                                                                       r"whole number <= 2\*\*53"),
        (lambda: scale_for_batch(flat(0.1, steps=10), 128, True), r"^scale_for_batch: to_batch must be a whole "
                                                                   r"number >= 1, got True"),
        (lambda: scale_for_batch(flat(0.1, steps=10), 128, 256, steps=10 ** 400), r"^scale_for_batch: steps must be "
                                                                                  r"a whole number <= 2\*\*53"),
        (lambda: scale_for_batch(0.1, 128, 256), r"^scale_for_batch: s must be a Schedule"),
        (lambda: check_length(0.1, 10), r"^check_length: s must be a Schedule"),
        (lambda: TestBoundedNumbers.B.describe("epochs"), r"^Budget.describe: unit must be one of 'step', 'epoch'"),
    ])
    def test_messages(self, call, pattern):
        with pytest.raises(ScheduleError, match=pattern):
            call()

    def test_numpy_scalars(self):
        """numpy integers and floats are numbers like Python's."""
        assert self.B.epochs_to_steps(np.int64(5)) == 5750 and self.B.epochs_to_steps(np.float32(0.5)) == 575
        assert self.B.steps_to_epochs(np.int64(5750)) == 5.0
        assert check_length(flat(0.1, steps=10), np.int64(10)) == 10
        assert scale_for_batch(flat(0.1, steps=80), np.int64(128), np.int32(1024)).length == 10
