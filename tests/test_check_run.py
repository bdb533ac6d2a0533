"""check_run: real torch training loops with each classic scheduler mistake, diagnosed from the rate they logged."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import schedwidget as sw
from schedwidget.run_check import FAULTS, Verdict, check_run
from schedwidget.schedule import ScheduleError
from schedwidget.trace import Trace, read_trace

STEPS_PER_EPOCH = 20
EPOCHS = 12
UPDATES = STEPS_PER_EPOCH * EPOCHS  # 240 optimizer updates
#: The design every loop means to run: 40 updates of warmup, then a cosine over the remaining 200.
DESIGN = sw.warmup(sw.cosine(0.1, 0.001, steps=UPDATES - 40), 40)


class _Run:
    """A tiny regression model trained with SGD on CPU; ``update()`` does one optimizer update and logs its lr."""

    def __init__(self, torch, lr: float = 0.1, micro: int = 1):
        torch.manual_seed(0)
        self.torch = torch
        self.model = torch.nn.Linear(8, 1)
        self.opt = torch.optim.SGD(self.model.parameters(), lr=lr, momentum=0.9)
        gen = torch.Generator().manual_seed(1)
        self.x, self.y = torch.randn(64, 8, generator=gen), torch.randn(64, 1, generator=gen)
        self.micro, self.batch, self.logged = micro, 0, []

    def backward(self) -> None:
        """One micro-batch: forward, loss, backward (gradients add up until the update)."""
        i = (self.batch * 8) % 64
        self.batch += 1
        loss = ((self.model(self.x[i:i + 8]) - self.y[i:i + 8]) ** 2).mean() / self.micro
        loss.backward()

    def step(self) -> None:
        """The optimizer update, logging the rate it uses (what a training loop writes to its logger)."""
        self.logged.append(self.opt.param_groups[0]["lr"])
        self.opt.step()
        self.opt.zero_grad()

    def trace(self) -> np.ndarray:
        assert len(self.logged) == UPDATES
        return np.array(self.logged)


class TestCorrectLoop:
    def test_make_scheduler_stepped_after_each_update_matches(self, torch):
        """The documented loop: scheduler.step() after optimizer.step(), once per update."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(UPDATES):
            run.backward()
            run.step()
            sched.step()
        v = check_run(DESIGN, run.trace())
        assert v.matches and v.fault is None and v.first_tick is None and v.share == 0.0
        assert str(v) == f"The run matches the design at all {UPDATES} logged ticks, to a relative tolerance of " \
                         f"1e-05 (absolute {v.atol:.3g})."


class TestFaults:
    def test_per_epoch(self, torch):
        """The scheduler stepped once per epoch while the design counts updates."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(EPOCHS):
            for _ in range(STEPS_PER_EPOCH):
                run.backward()
                run.step()
            sched.step()  # the mistake: once per epoch
        for spe in (None, STEPS_PER_EPOCH):  # found from the trace, or told
            v = check_run(DESIGN, run.trace(), steps_per_epoch=spe)
            assert not v.matches and v.fault == "per_epoch"
            assert v.evidence == {"steps_per_epoch": STEPS_PER_EPOCH, "form": "epoch count"}
            assert v.first_tick == 1  # update 1 still runs at the design's tick 0
            assert "once per epoch of 20 updates" in str(v)

    def test_per_micro_batch(self, torch):
        """Stepped after every micro-batch under gradient accumulation of 4."""
        run = _Run(torch, micro=4)
        sched = sw.make_scheduler(run.opt, DESIGN)
        with pytest.warns(UserWarning, match="before `optimizer.step\\(\\)`"):  # torch sees the first one
            for i in range(UPDATES * 4):
                run.backward()
                if (i + 1) % 4 == 0:
                    run.step()
                sched.step()  # the mistake: once per micro-batch
        v = check_run(DESIGN, run.trace())
        assert v.fault == "per_micro_batch"
        assert v.evidence == {"accumulation": 4, "offset": 3}
        assert v.first_tick == 0 and v.share > 0.9
        assert "stepped 4 times per optimizer update" in str(v)

    def test_restarted_warmup(self, torch):
        """A run resumed at update 100 from a checkpoint, with a new scheduler that starts from tick 0 again."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(100):
            run.backward()
            run.step()
            sched.step()
        checkpoint = {"model": run.model.state_dict(), "opt": run.opt.state_dict()}
        # resume: load the states, but build the scheduler afresh (the mistake: its state was not saved)
        run.model.load_state_dict(checkpoint["model"])
        run.opt.load_state_dict(checkpoint["opt"])
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(UPDATES - 100):
            run.backward()
            run.step()
            sched.step()
        v = check_run(DESIGN, run.trace())
        assert v.fault == "restarted_warmup"
        assert v.evidence["resumes"] == (100,) and v.segment == (0, 100)
        assert v.first_tick == 100 and v.expected == pytest.approx(DESIGN(100)) and v.logged == 0.0
        assert 0.5 < v.share <= (UPDATES - 100) / UPDATES
        assert "resume tick 100" in str(v)

    def test_off_by_one(self, torch):
        """scheduler.step() before optimizer.step(): torch warns, and every update runs one tick ahead."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        with pytest.warns(UserWarning, match="before `optimizer.step\\(\\)`"):  # torch's own warning
            for _ in range(UPDATES):
                run.backward()
                sched.step()  # the mistake: before the update
                run.step()
        v = check_run(DESIGN, run.trace())
        assert v.fault == "off_by_one" and v.shift == 1 and v.first_tick == 0
        assert "one tick ahead" in str(v)

    def test_scaled(self, torch):
        """Our factor built for base_lr=0.01 on an optimizer whose lr is 0.1: every rate 10x the design."""
        run = _Run(torch, lr=0.1)
        sched = torch.optim.lr_scheduler.LambdaLR(run.opt, sw.torch_factor(DESIGN, base_lr=0.01))
        for _ in range(UPDATES):
            run.backward()
            run.step()
            sched.step()
        v = check_run(DESIGN, run.trace())
        assert v.fault == "scaled" and v.factor == pytest.approx(10.0, rel=1e-9)
        assert v.first_tick == 1  # tick 0 is 0 in both
        assert "times 10" in str(v)

    def test_budget_last_stage(self, torch):
        """The design built for 15 epochs instead of 12: the warmup as meant, the cosine ends at another budget."""
        wrong = sw.warmup(sw.cosine(0.1, 0.001, steps=15 * STEPS_PER_EPOCH - 40), 40)
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, wrong)
        for _ in range(UPDATES):
            run.backward()
            run.step()
            sched.step()
        v = check_run(DESIGN, run.trace())
        assert v.fault == "budget"
        assert v.evidence == {"length": 300, "design_length": UPDATES, "form": "last stage"}
        assert v.first_tick == 41 and "budget of 300 ticks instead of 240" in str(v)

    def test_budget_stretched_with_torchs_own_scheduler(self, torch):
        """torch's cosine annealing with T_max=300 where the design's cosine spans the run's 240 updates."""
        design = sw.cosine(0.1, 0.001, steps=UPDATES)
        run = _Run(torch)
        sched = torch.optim.lr_scheduler.CosineAnnealingLR(run.opt, T_max=300, eta_min=0.001)
        for _ in range(UPDATES):
            run.backward()
            run.step()
            sched.step()
        v = check_run(design, run.trace())
        assert v.fault == "budget" and v.evidence["length"] == 300 and v.evidence["form"] == "stretched"

    def test_other(self, torch):
        """A loop that overrides the rate by hand from update 150 on: no known fault, the first departure named."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for i in range(UPDATES):
            run.backward()
            if i >= 150:
                for g in run.opt.param_groups:
                    g["lr"] = 0.02
            run.step()
            sched.step()
        v = check_run(DESIGN, run.trace())
        assert v.fault == "other" and v.first_tick == 150 and v.logged == 0.02
        assert v.share == pytest.approx(90 / UPDATES)
        assert "None of the known faults" in str(v) and "tick 150" in str(v)


class TestTraceSources:
    def test_a_csv_logged_every_5_updates(self, torch, tmp_path):
        """A per-epoch mistake logged every 5 updates to a CSV file with its own column names."""
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(EPOCHS):
            for _ in range(STEPS_PER_EPOCH):
                run.backward()
                run.step()
            sched.step()
        r = run.trace()
        path = tmp_path / "log.csv"
        path.write_text("global_step,train/lr,loss\n" + "".join(f"{t},{float(r[t])!r},0.5\n" for t in range(0, UPDATES, 5)))
        v = check_run(DESIGN, str(path), steps_per_epoch=STEPS_PER_EPOCH)
        assert v.fault == "per_epoch" and v.points == UPDATES // 5

    def test_a_tensorboard_log_in_float32(self, torch, tmp_path):
        """The same mistake written by torch's SummaryWriter (float32), read back through tensorboard's reader."""
        pytest.importorskip("tensorboard")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)  # tensorboard's own imports, not ours
            from torch.utils.tensorboard import SummaryWriter
        run = _Run(torch)
        sched = sw.make_scheduler(run.opt, DESIGN)
        for _ in range(UPDATES):
            run.backward()
            run.step()
            sched.step()
            sched.step()  # stepped twice per update (say, once per process on two processes)
        writer = SummaryWriter(str(tmp_path))
        for t, lr in enumerate(run.trace()):
            writer.add_scalar("lr", lr, t)
        writer.close()
        v = check_run(DESIGN, read_trace(str(tmp_path)))
        assert v.fault == "per_micro_batch" and v.evidence["accumulation"] == 2


class TestVerdict:
    def test_faults_are_documented_codes(self):
        """The fault codes are the issue's list, in order."""
        assert FAULTS == ("per_epoch", "per_micro_batch", "restarted_warmup", "off_by_one", "scaled", "budget",
                          "other")

    def test_verdict_is_a_frozen_value(self):
        """Equal checks give equal verdicts; fields cannot be reassigned."""
        r = DESIGN(np.arange(UPDATES)) * 2
        a, b = check_run(DESIGN, r), check_run(DESIGN, Trace(np.arange(UPDATES), r))
        assert a == b and isinstance(a, Verdict)
        with pytest.raises(AttributeError):
            a.fault = None  # type: ignore[misc]

    def test_tolerance_is_used_and_stated(self):
        """A 1e-4 relative wobble fails the default tolerance and passes a stated 1e-3."""
        r = DESIGN(np.arange(UPDATES)) * (1 + 1e-4 * np.cos(np.arange(UPDATES)))
        assert not check_run(DESIGN, r).matches
        v = check_run(DESIGN, r, rtol=1e-3)
        assert v.matches and v.rtol == 1e-3 and "relative tolerance of 0.001" in str(v)


class TestBadInput:
    def test_design_must_be_a_schedule(self):
        with pytest.raises(ScheduleError, match=r"check_run: design must be a schedule"):
            check_run("cosine", [0.1])

    def test_tolerances_and_epoch_length_are_bounded(self):
        with pytest.raises(ScheduleError, match=r"check_run: rtol must be a number in \[0, 0.5\], got 1"):
            check_run(DESIGN, [0.1], rtol=1)
        with pytest.raises(ScheduleError, match=r"check_run: atol must be a number in \[0, inf\], got -1"):
            check_run(DESIGN, [0.1], atol=-1)
        with pytest.raises(ScheduleError, match=r"check_run: steps_per_epoch must be a whole number in \[1, 2\*\*53\]"):
            check_run(DESIGN, [0.1], steps_per_epoch=0)

    def test_a_bad_trace_names_the_call(self):
        with pytest.raises(ScheduleError, match=r"check_run: Trace: rates\[0\] must be a finite rate >= 0, got nan"):
            check_run(DESIGN, [float("nan")])
