"""Budget arithmetic: optimizer updates from samples, batch, processes and accumulation; batch-size rescaling."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, exp_decay, flat, warmup
from schedwidget.budget import Budget, check_length, scale_for_batch

# Invented demo scenario (DESIGN section 5): 90 epochs x 1,150 steps at batch 128, i.e. 147,200 samples per epoch.
SAMPLES = 147_200
DEMO = warmup(cosine(0.1, steps=85 * 1150), steps=5 * 1150)


class TestBudget:
    """Budget counts optimizer updates, with its rounding stated."""

    def test_demo_scenario(self):
        """147,200 samples at batch 128 make 1,150 updates per epoch, 103,500 in 90 epochs."""
        b = Budget(samples=SAMPLES, batch=128, epochs=90)
        assert (b.global_batch, b.steps_per_epoch, b.steps) == (128, 1150, 103_500)

    def test_rounding_of_the_last_batch(self):
        """At batch 1,024 (143.75 batches) drop_last floors to 143, otherwise the partial batch is one more update."""
        assert Budget(samples=SAMPLES, batch=1024, epochs=90).steps_per_epoch == 143
        assert Budget(samples=SAMPLES, batch=1024, epochs=90, drop_last=False).steps_per_epoch == 144
        assert Budget(samples=SAMPLES, batch=128, epochs=90, drop_last=False).steps_per_epoch == 1150

    def test_processes_and_accumulation_count_updates(self):
        """Two processes of batch 32 accumulating two micro-batches make one update per 128 samples."""
        b = Budget(samples=SAMPLES, batch=32, epochs=90, processes=2, accumulation=2)
        assert (b.global_batch, b.steps_per_epoch) == (128, 1150)
        assert Budget(samples=SAMPLES, batch=128, epochs=1, accumulation=4).steps_per_epoch == 287  # 1150 / 4

    def test_epochs_and_steps(self):
        """epochs_to_steps rounds to the nearest update; steps_to_epochs is exact division."""
        b = Budget(samples=SAMPLES, batch=128, epochs=90)
        assert b.epochs_to_steps(5) == 5750 and b.epochs_to_steps(0.5) == 575 and b.epochs_to_steps(0) == 0
        assert Budget(samples=SAMPLES, batch=1024, epochs=90).epochs_to_steps(5) == 715   # 5 x 143
        assert b.steps_to_epochs(5750) == 5.0 and b.steps_to_epochs(575) == 0.5
        assert b.length("step") == 103_500 and b.length("epoch") == 90

    def test_describe(self):
        """The budget in words names epochs, updates per epoch and the global batch."""
        b = Budget(samples=SAMPLES, batch=1024, epochs=90)
        assert b.describe() == "90 epochs x 143 steps = 12,870 steps (global batch 1,024)"
        assert b.describe("epoch") == "90 epochs"

    @pytest.mark.parametrize("kwargs,message", [
        (dict(samples=0, batch=128, epochs=90), r"Budget: samples must be a whole number >= 1, got 0"),
        (dict(samples=SAMPLES, batch=1.5, epochs=90), r"Budget: batch must be a whole number >= 1, got 1.5"),
        (dict(samples=SAMPLES, batch=128, epochs=True), r"Budget: epochs must be a whole number >= 1, got True"),
        (dict(samples=SAMPLES, batch=128, epochs=90, processes=0), r"Budget: processes must be"),
        (dict(samples=SAMPLES, batch=128, epochs=90, accumulation=-2), r"Budget: accumulation must be"),
        (dict(samples=SAMPLES, batch=128, epochs=90, drop_last="yes"), r"Budget: drop_last must be True or False"),
        (dict(samples=100, batch=128, epochs=90), r"Budget: samples must be >= the global batch 128 when "
                                                  r"drop_last=True, got 100 \(otherwise every batch is dropped"),
    ])
    def test_bad_values(self, kwargs, message):
        """Every bad field raises ScheduleError naming it, its value and the allowed range."""
        with pytest.raises(ScheduleError, match=message):
            Budget(**kwargs)

    def test_partial_epoch_without_drop_last(self):
        """Fewer samples than a global batch still make one update when the last batch is kept."""
        assert Budget(samples=100, batch=128, epochs=3, drop_last=False).steps == 3

    def test_bad_conversions(self):
        """Conversions refuse negative and non-finite amounts."""
        b = Budget(samples=SAMPLES, batch=128, epochs=90)
        with pytest.raises(ScheduleError, match=r"Budget.epochs_to_steps: epochs must be a finite number >= 0"):
            b.epochs_to_steps(float("inf"))
        with pytest.raises(ScheduleError, match=r"Budget.steps_to_epochs: steps must be a whole number >= 0"):
            b.steps_to_epochs(-1)
        with pytest.raises(ScheduleError, match=r"Budget.length: unit must be one of 'step', 'epoch'"):
            b.length("batch")


class TestCheckLength:
    """check_length refuses a design whose length does not match the budget."""

    def test_match(self):
        """A matching design passes and returns the budget."""
        assert check_length(DEMO, Budget(samples=SAMPLES, batch=128, epochs=90)) == 103_500
        assert check_length(DEMO, 103_500) == 103_500
        assert check_length(exp_decay(0.1, 0.9), 77) == 77          # open-ended fits any budget

    def test_too_long(self):
        """A design longer than the budget names both numbers and what would never run."""
        with pytest.raises(ScheduleError, match=r"check_length: steps must equal the design's length of 103,500 steps, "
                                                r"got 12,870 steps \(90 epochs x 143 steps = 12,870 steps .*\) "
                                                r"\(budget mismatch: its last 90,630 steps would never run; "
                                                r"fit the design with s.stretch\(12870\)"):
            check_length(DEMO, Budget(samples=SAMPLES, batch=1024, epochs=90))

    def test_too_short(self):
        """A design shorter than the budget says which rate would be held."""
        with pytest.raises(ScheduleError, match=r"its last rate 0.05 would be held for 10 more epochs"):
            check_length(flat(0.05, steps=80), 90, unit="epoch")

    def test_steps_and_epochs_mixed_up(self):
        """A step design checked against an epoch count hints at the mix-up."""
        with pytest.raises(ScheduleError, match=r"a ratio of 1,150 usually means steps and epochs are mixed up"):
            check_length(DEMO, Budget(samples=SAMPLES, batch=128, epochs=90), unit="epoch")

    def test_bad_arguments(self):
        """The budget is a whole number >= 1 or a Budget; unit is step or epoch."""
        with pytest.raises(ScheduleError, match=r"check_length: steps must be a whole number >= 1 or a Budget, got 0"):
            check_length(DEMO, 0)
        with pytest.raises(ScheduleError, match=r"check_length: unit must be one of"):
            check_length(DEMO, 5, unit="batches")
        with pytest.raises(ScheduleError, match=r"check_length: s must be a Schedule"):
            check_length("design", 5)


class TestScaleForBatch:
    """scale_for_batch moves a design to another batch size by a published rule."""

    def test_linear_rule(self):
        """Linear scaling rule: 0.1 at batch 256 is 0.4 at 1,024 and 3.2 at 8,192."""
        # Goyal et al. 2017, section 2.1 (linear scaling rule) with their reference 0.1 x kn / 256 (from memory)
        s = flat(0.1, steps=1000)
        assert scale_for_batch(s, 256, 1024, keep="steps")(0) == pytest.approx(0.4, rel=1e-15)
        assert scale_for_batch(s, 256, 8192, keep="steps")(0) == pytest.approx(3.2, rel=1e-15)

    def test_sqrt_rule(self):
        """Square-root rule (from memory: Krizhevsky 2014; Hoffer et al. 2017): 4x the batch, 2x the rate."""
        assert scale_for_batch(flat(0.1, steps=10), 256, 1024, rule="sqrt")(0) == pytest.approx(0.2, rel=1e-15)

    def test_warmup_stays_five_epochs(self):
        """A 5-epoch gradual warmup stays 5 epochs (in samples seen) after rescaling."""
        # Goyal et al. 2017, section 2.2: gradual warmup over the first 5 epochs (from memory)
        # ImageNet-1k has about 1.28M training images (Goyal et al. 2017 train on it); 1,280,000 keeps numbers whole.
        small = Budget(samples=1_280_000, batch=256, epochs=90)
        s = warmup(cosine(0.1, steps=85 * small.steps_per_epoch), steps=small.epochs_to_steps(5))
        big = Budget(samples=1_280_000, batch=1024, epochs=90)
        moved = scale_for_batch(s, 256, 1024)
        assert moved.length == big.steps
        end = big.epochs_to_steps(5)                                  # 6,250 updates at batch 1,024
        assert moved(end) == pytest.approx(0.4, rel=1e-12) and moved(end - 1) < 0.4 * (1 - 1e-6)
        huge = scale_for_batch(s, 256, 8192)                          # 156.25 updates per epoch
        peak_at = int(np.argmax(huge(np.arange(huge.length))))
        assert peak_at == 782 and abs(peak_at - 5 * 156.25) < 1      # first tick at or after epoch 5
        assert huge(peak_at) == pytest.approx(3.2, rel=1e-6)

    def test_keep_steps_keeps_ticks(self):
        """keep='steps' scales rates only: joins stay at the same tick."""
        moved = scale_for_batch(DEMO, 128, 1024, keep="steps")
        assert moved.length == DEMO.length and moved(5750) == pytest.approx(0.8, rel=1e-15)

    def test_explicit_new_budget(self):
        """steps= gives the new length exactly, e.g. the new Budget's updates."""
        big = Budget(samples=SAMPLES, batch=1024, epochs=90)
        moved = scale_for_batch(DEMO, 128, 1024, steps=big.steps)
        assert check_length(moved, big) == 12_870
        assert scale_for_batch(DEMO, 128, 1024).length == round(103_500 / 8)   # 12,937.5 -> 12,938 (to even)

    @pytest.mark.parametrize("kwargs,message", [
        (dict(rule="cube"), r"scale_for_batch: rule must be one of 'linear', 'sqrt', got 'cube'"),
        (dict(keep="time"), r"scale_for_batch: keep must be one of 'samples', 'steps', got 'time'"),
        (dict(from_batch=0), r"scale_for_batch: from_batch must be a whole number >= 1, got 0"),
        (dict(to_batch=2.5), r"scale_for_batch: to_batch must be a whole number >= 1, got 2.5"),
        (dict(keep="steps", steps=100), r"scale_for_batch: steps must be None with keep='steps'"),
        (dict(steps=0), r"scale_for_batch: steps must be a whole number >= 1, got 0"),
    ])
    def test_bad_arguments(self, kwargs, message):
        """Bad rules, keeps and batch sizes raise ScheduleError naming them."""
        args = dict(s=DEMO, from_batch=128, to_batch=1024) | kwargs
        with pytest.raises(ScheduleError, match=message):
            scale_for_batch(**args)

    def test_open_ended_needs_keep_steps(self):
        """An open-ended design cannot rescale its clock."""
        with pytest.raises(ScheduleError, match=r"an open-ended design has no budget to rescale; use keep='steps'"):
            scale_for_batch(exp_decay(0.1, 0.9), 128, 1024)
        assert scale_for_batch(exp_decay(0.1, 0.9), 128, 1024, keep="steps")(0) == pytest.approx(0.8)


class TestTypedLengthsAndRates:
    """Lengths and rates as a person types them (issue 13): documented results, or a message naming the box."""

    def test_epochs_steps_and_shares(self):
        from schedwidget.budget import parse_length
        assert parse_length("3 ep", "step", 1150) == 3450
        assert parse_length("3 epochs", "step", 1150, 103_500) == 3450
        assert parse_length("6 %", "step", 1150, 103_500) == 6210
        assert parse_length("6%", "epoch", None, 90) == 6            # 5.4 epochs round up
        assert parse_length("0.5 ep", "step", 1151) == 576            # 575.5 rounds up
        assert parse_length("3,450", "step") == 3450 and parse_length(3450, "step") == 3450
        assert parse_length("1725 steps", "epoch", 1150) == 2         # 1.5 epochs round up
        assert parse_length("3 ep", "epoch") == 3

    @pytest.mark.parametrize("text", ["3 epochs", "garbage", "0.06", "-3", "3 parsecs", "", "1e400", "x" * 500])
    def test_refusals_name_the_box_and_the_forms(self, text):
        from schedwidget.budget import parse_length
        with pytest.raises(ScheduleError) as err:
            parse_length(text, "step", None, None, owner="warmup", name="steps")
        msg = str(err.value)
        assert msg.startswith("warmup: steps must be")
        assert "epochs" in msg or "share" in msg or "steps" in msg

    def test_epochs_without_steps_per_epoch_are_refused_not_coerced(self):
        from schedwidget.budget import parse_length
        with pytest.raises(ScheduleError, match="steps per epoch are unknown"):
            parse_length("3 epochs", "step", None)
        with pytest.raises(ScheduleError, match="share needs"):
            parse_length("6 %", "step", 1150, None)
        with pytest.raises(ScheduleError, match="between 0 % and 100 %"):
            parse_length("150 %", "step", 1150, 1000)

    def test_rates_as_share_of_peak(self):
        from schedwidget.budget import parse_rate
        assert parse_rate("1 %", 3e-4) == pytest.approx(3e-6, rel=1e-12)
        assert parse_rate("1 % of peak", 3e-4) == pytest.approx(3e-6, rel=1e-12)
        assert parse_rate("3e-4") == 3e-4 and parse_rate(0.1) == 0.1
        for bad in ("fast", "1 %%", "e"):
            with pytest.raises(ScheduleError, match="share of the peak"):
                parse_rate(bad, 0.1, owner="cosine", name="floor")

    def test_absorb_keeps_the_total(self):
        from schedwidget.budget import absorb
        assert absorb([1000, 500, 98_000], 103_500, 2) == [1000, 500, 102_000]
        with pytest.raises(ScheduleError, match="fills the rest"):
            absorb([103_500, 10], 103_500, 1)
        with pytest.raises(ScheduleError, match=r"^warmup: steps must be at most 103,499 ticks in a run of 103,500, "
                                                r"got 200000"):
            absorb([200_000, 97_750], 103_500, 1, "warmup", "steps", 200_000)

    def test_length_words(self):
        from schedwidget.budget import length_words
        assert length_words(3450, "step", 1150, 103_500) == "= 3 epochs · 3.3 % of the run"
        assert length_words(3, "epoch", 1150, 90) == "= 3,450 steps · 3.3 % of the run"
        assert length_words(7, "step") == ""


def test_unit_rule_and_keep_that_are_not_strings_are_refused():
    """A numpy array as unit, rule or keep is a ScheduleError naming it (its truth value raised ValueError)."""
    bad = np.array([0.1, 0.2])
    with pytest.raises(ScheduleError, match="unit must be one of 'step', 'epoch'"):
        check_length(flat(0.1, steps=4), 4, unit=bad)
    with pytest.raises(ScheduleError, match="rule must be one of 'linear', 'sqrt'"):
        scale_for_batch(flat(0.1), 147_200, 96, rule=bad)
    with pytest.raises(ScheduleError, match="keep must be one of 'samples', 'steps'"):
        scale_for_batch(flat(0.1, steps=10), 128, 256, keep=bad)


class TestBudgetModules:
    """The budget arithmetic, one module per purpose (issue 11), with every name still importable from budget."""

    def test_every_public_name_from_budget_and_the_package(self):
        import schedwidget
        from schedwidget import budget, lengths, proportion, rebatch

        for name in budget.__all__:
            assert getattr(budget, name) is not None
        assert budget.parse_length is lengths.parse_length and budget.absorb is lengths.absorb
        assert budget.scale_for_batch is rebatch.scale_for_batch is schedwidget.scale_for_batch
        assert budget.rescale_for_batch is rebatch.rescale_for_batch and budget.Rescaled is rebatch.Rescaled
        assert budget.scale_node is proportion.scale_node and schedwidget.Budget is budget.Budget

    def test_rebatch_imported_first_still_finds_budget(self):
        import subprocess
        import sys

        code = ("import schedwidget.rebatch as r; "
                "print(r.rescale_for_batch(__import__('schedwidget').cosine(0.1, steps=100), 100, 'step', 10, "
                "128, 256, 1, 'linear', 'samples').new_steps)")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
        assert out.strip() == "50"  # 10 epochs of 10 steps at batch 128 = 10 epochs of 5 steps at batch 256

    def test_scale_node_scales_every_tick_and_keeps_the_rest(self):
        from schedwidget import cosine, drops, restarts, warmup
        from schedwidget.proportion import scale_node

        assert scale_node(drops(0.1, at=(30, 60), factor=0.1, steps=90), 1 / 3) == \
            drops(0.1, at=(10, 20), factor=0.1, steps=30)
        s = warmup(restarts(cosine(0.1, steps=10), cycles=3), 5)
        assert scale_node(s, 2) == warmup(restarts(cosine(0.1, steps=20), cycles=3), 10)  # cycles is a count
        assert scale_node(cosine(0.1, steps=3), 0.5).steps == 2  # 1.5 rounds half up
        for bad in (0, -1.0, float("nan"), float("inf"), True, "2"):
            with pytest.raises(ScheduleError, match="designer: scale must be a finite number > 0"):
                scale_node(cosine(0.1, steps=3), bad)
        with pytest.raises(ScheduleError, match="drops"):
            scale_node(drops(0.1, at=(1, 2), factor=0.5, steps=10), 0.1)  # both drops land on tick 0

    def test_absorb_rounding_takes_the_last_stage_with_its_own_length(self):
        from schedwidget import cosine, flat, restarts
        from schedwidget.proportion import absorb_rounding

        parts = (flat(0.1, steps=3), cosine(0.1, steps=7), restarts(cosine(0.1, steps=5), cycles=2), flat(0.0))
        out = absorb_rounding(parts, -2)
        assert out == (parts[0], cosine(0.1, steps=5), parts[2], parts[3])
        assert absorb_rounding((restarts(cosine(0.1, steps=5), cycles=2), flat(0.0)), 1) is None


def test_length_words_never_write_an_exponent():
    """'100 % of the run' and '1,000 epochs', not '1e+02 %' and '1e+03 epochs' (seen beside a stage filling the run)."""
    from schedwidget.lengths import length_words

    assert length_words(103_500, "step", 1150, 103_500) == "= 90 epochs · 100 % of the run"
    assert length_words(1_150_000, "step", 1150, 1_150_000) == "= 1,000 epochs · 100 % of the run"
    assert length_words(3450, "step", 1150, 103_500) == "= 3 epochs · 3.3 % of the run"
