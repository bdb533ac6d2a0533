"""Leaf shapes against published formulas and worked numbers, and against torch 2.13's schedulers."""

from __future__ import annotations

import math

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, exp_decay, flat, inv_sqrt, knots, one_cycle, poly, ramp, restarts
from schedwidget import triangle


def stepped(torch, make, n, lr=0.1):
    """Rates a torch scheduler gives at ticks 0..n-1 when stepped once per update."""
    p = torch.nn.Parameter(torch.zeros(1))
    opt = torch.optim.SGD([p], lr=lr)
    sched = make(opt)
    out = [opt.param_groups[0]["lr"]]
    for _ in range(n - 1):
        opt.step()
        sched.step()
        out.append(opt.param_groups[0]["lr"])
    return np.array(out)


def close(ours, ref, rel=1e-12):
    """Relative agreement, with an absolute floor for exact zeros."""
    np.testing.assert_allclose(ours, ref, rtol=rel, atol=rel * float(np.max(np.abs(ref))))


class TestCosine:
    """Cosine annealing, Loshchilov & Hutter 2017 (SGDR), eq. 5."""

    def test_eq5(self):
        # eta_t = eta_min + (eta_max - eta_min) * (1 + cos(pi * T_cur / T_i)) / 2  (SGDR, eq. 5)
        s = cosine(0.05, 0.0005, steps=200)
        t = np.arange(201)
        close(s(t), 0.0005 + (0.05 - 0.0005) * (1 + np.cos(np.pi * t / 200)) / 2)
        assert s(100) == pytest.approx((0.05 + 0.0005) / 2, rel=1e-15)
        assert s(200) == 0.0005 and s(10**9) == 0.0005  # holds its floor past the end (DESIGN.md section 2)

    def test_restarts_with_period_growth(self):
        # SGDR with T_0 = 10, T_mult = 2 restarts at 10, 30, 70, 150 (Loshchilov & Hutter 2017, sec. 3; from memory
        # of their figure 1 settings): the rate is back at eta_max exactly there and nowhere between.
        s = restarts(cosine(0.05, 0.0, steps=10), growth=2.0)
        t = np.arange(1, 310)
        peaks = t[s(t) == 0.05]
        assert list(peaks) == [10, 30, 70, 150]
        assert s(30 + 20) == pytest.approx(0.025, rel=1e-15)  # middle of the third cycle (T_i = 40)

    def test_torch_reference(self, torch):
        # torch 2.13 CosineAnnealingLR as reference library, 500 ticks
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.CosineAnnealingLR(o, T_max=500, eta_min=1e-3), 501)
        close(cosine(0.1, 1e-3, steps=500)(np.arange(501)), ref)

    def test_torch_warm_restarts(self, torch):
        # torch 2.13 CosineAnnealingWarmRestarts (T_0 = 10, T_mult = 2), 700 ticks
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.CosineAnnealingWarmRestarts(
            o, T_0=10, T_mult=2, eta_min=1e-3), 700)
        close(restarts(cosine(0.1, 1e-3, steps=10), growth=2.0)(np.arange(700)), ref)
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.CosineAnnealingWarmRestarts(o, T_0=37), 600)
        close(restarts(cosine(0.1, steps=37))(np.arange(600)), ref)


class TestInvSqrt:
    """Inverse square root after a linear warmup, Vaswani et al. 2017, eq. 3."""

    D, W = 512, 4000

    def eq3(self, step):
        return self.D ** -0.5 * min(step ** -0.5, step * self.W ** -1.5)

    def test_worked_numbers(self):
        s = inv_sqrt(self.D ** -0.5 * self.W ** -0.5, warmup=self.W)
        assert s(4000) == pytest.approx(6.98771e-4, rel=1e-5)  # 512**-0.5 * 4000**-0.5 (Vaswani et al. 2017)
        assert s(16000) == pytest.approx(s(4000) / 2, rel=1e-14)
        assert s(0) == 0.0

    def test_equals_eq3(self):
        s = inv_sqrt(self.D ** -0.5 * self.W ** -0.5, warmup=self.W)
        for step in (1, 17, 999, 3999, 4000, 4001, 10_000, 123_457, 10**7):
            assert s(step) == pytest.approx(self.eq3(step), rel=1e-12)


class TestTriangle:
    """Triangular cyclical rates and the halving variant, Smith 2017 (CLR), section 3.1."""

    def smith(self, it, base, top, step, halving):
        # cycle = floor(1 + it / (2 stepsize)); x = |it / stepsize - 2 cycle + 1|;
        # lr = base + (max - base) * max(0, 1 - x) [* 1 / 2**(cycle - 1) for triangular2]  (Smith 2017)
        cycle = math.floor(1 + it / (2 * step))
        x = abs(it / step - 2 * cycle + 1)
        return base + (top - base) * max(0.0, 1 - x) * (0.5 ** (cycle - 1) if halving else 1.0)

    @pytest.mark.parametrize("halving", [False, True])
    def test_formula(self, halving):
        # base 0.001, max 0.006, stepsize 2000: the paper's CIFAR-10 example (from memory)
        s = triangle(0.001, 0.006, half_period=2000, shrink=0.5 if halving else 1.0)
        for it in range(0, 20_001, 250):
            assert s(it) == pytest.approx(self.smith(it, 0.001, 0.006, 2000, halving), rel=1e-12)
        assert s(2000) == pytest.approx(0.006) and s(4000) == pytest.approx(0.001)
        assert s(6000) == pytest.approx(0.0035 if halving else 0.006)

    @pytest.mark.parametrize("mode,shrink", [("triangular", 1.0), ("triangular2", 0.5)])
    def test_torch_reference(self, torch, mode, shrink):
        # torch 2.13 CyclicLR (no momentum cycling), 700 ticks
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.CyclicLR(
            o, base_lr=0.001, max_lr=0.006, step_size_up=50, mode=mode, cycle_momentum=False), 700)
        close(triangle(0.001, 0.006, half_period=50, shrink=shrink)(np.arange(700)), ref)


class TestPoly:
    """Polynomial ("poly") decay with power 0.9, Chen et al. 2017 (DeepLab), section 4.1."""

    def test_formula(self):
        # lr = base * (1 - iter / max_iter) ** power, power = 0.9  (Chen et al. 2017)
        s = poly(0.01, steps=30_000, power=0.9)
        for it in (0, 1, 7_500, 15_000, 29_999, 30_000):
            assert s(it) == pytest.approx(0.01 * (1 - it / 30_000) ** 0.9, rel=1e-12, abs=1e-18)
        assert s(15_000) == pytest.approx(0.0053589, rel=1e-4)  # 0.01 * 0.5 ** 0.9, closed form

    def test_torch_reference(self, torch):
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.PolynomialLR(o, total_iters=500, power=0.9), 600)
        close(poly(0.1, steps=500, power=0.9)(np.arange(600)), ref)


class TestDrops:
    """Step drops at listed ticks; the factor applies from the listed tick itself."""

    def test_he_2016_cifar10(self):
        # 0.1, divided by 10 at 32k and 48k iterations, terminated at 64k (He et al. 2016, ResNet, sec. 4.2)
        s = drops(0.1, at=(32_000, 48_000), factor=0.1, steps=64_000)
        assert s(0) == 0.1 and s(31_999) == 0.1
        assert s(32_000) == pytest.approx(0.01, rel=1e-15) and s(47_999) == pytest.approx(0.01, rel=1e-15)
        assert s(48_000) == pytest.approx(0.001, rel=1e-15) and s(63_999) == pytest.approx(0.001, rel=1e-15)

    def test_torch_reference(self, torch):
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.MultiStepLR(o, milestones=[100, 250, 400], gamma=0.1), 600)
        close(drops(0.1, at=(100, 250, 400))(np.arange(600)), ref)


class TestExpDecay:
    """Exponential decay: closed form, no drift."""

    def test_per_epoch_095_over_200(self):
        # 0.1 * 0.95 ** 200 = 3.5053e-6 (closed form; common practice, no source)
        assert exp_decay(0.1, 0.95)(200) == pytest.approx(3.5053e-6, rel=1e-4)
        assert exp_decay(0.1, 0.95)(200) == pytest.approx(0.1 * 0.95 ** 200, rel=1e-14)

    def test_no_drift_at_ten_million(self):
        mpmath = pytest.importorskip("mpmath")
        mpmath.mp.dps = 40
        exact = float(mpmath.mpf("0.1") * mpmath.power(mpmath.mpf(0.999999), 10**7))
        assert exp_decay(0.1, 0.999999)(10**7) == pytest.approx(exact, rel=1e-12)

    def test_torch_exponential(self, torch):
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.ExponentialLR(o, gamma=0.99), 600)
        close(exp_decay(0.1, 0.99)(np.arange(600)), ref)

    def test_torch_step(self, torch):
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.StepLR(o, step_size=30, gamma=0.5), 600)
        close(exp_decay(0.1, 0.5, every=30)(np.arange(600)), ref)

    def test_smooth(self):
        assert exp_decay(1.0, 0.5, every=10, staircase=False)(5) == pytest.approx(0.5 ** 0.5, rel=1e-15)
        assert exp_decay(1.0, 0.5, every=10)(19) == 0.5


class TestRamp:
    """Ramps reach their end exactly at tick steps (the next stage's first tick)."""

    def test_linear_and_torch(self, torch):
        s = ramp(0.001, 0.1, 500)
        assert s(0) == 0.001 and s(500) == 0.1 and s(250) == pytest.approx(0.0505, rel=1e-15)
        ref = stepped(torch, lambda o: torch.optim.lr_scheduler.LinearLR(
            o, start_factor=0.01, end_factor=1.0, total_iters=500), 600)
        close(s(np.arange(600)), ref)

    def test_geometric_and_cosine(self):
        g = ramp(1e-4, 1e-2, 10, curve="geometric")
        assert g(5) == pytest.approx(1e-3, rel=1e-12)
        c = ramp(0.0, 1.0, 10, curve="cosine")
        assert c(5) == pytest.approx(0.5, rel=1e-15) and c(10) == 1.0


class TestOneCycle:
    """One-cycle policy (Smith 2018): equal rise and fall, then a tail to final."""

    def test_phases(self):
        s = one_cycle(1.0, steps=1000, low=0.1, final=1e-4, tail=0.1)
        assert s(0) == 0.1 and s(450) == 1.0 and s(900) == pytest.approx(0.1) and s(1000) == pytest.approx(1e-4)
        assert s(225) == pytest.approx(0.55, rel=1e-12)  # linear halfway up
        assert int(np.argmax(s(np.arange(1000)))) == 450


class TestKnotsAndFlat:
    """Knots interpolate; flat is constant."""

    def test_interp(self):
        pts = [(0, 0.1), (10, 0.2), (20, 0.05)]
        assert knots(pts)(5) == pytest.approx(0.15)
        assert knots(pts, interp="log")(5) == pytest.approx(math.sqrt(0.1 * 0.2))
        assert knots(pts, interp="hold")(19) == 0.2 and knots(pts, interp="hold")(20) == 0.05
        assert knots(pts).length == 20

    def test_flat(self):
        assert flat(0.3)(10**12) == 0.3 and flat(0.3).length is None

    def test_a_trace_of_n_rates_is_a_design_of_length_n(self):
        """issue 10: a design rebuilt from a logged trace was one tick short of the trace (length = last tick)."""
        trace = [0.0, 0.05, 0.1, 0.1, 0.01, 0.01]
        s = knots(list(enumerate(trace)), interp="hold", steps=len(trace))
        assert s.length == len(trace)
        assert s(np.arange(len(trace))).tolist() == trace
        assert s(len(trace)) == s(10**9) == 0.01  # past the end: held
        assert knots(list(enumerate(trace)), interp="hold").length == len(trace) - 1  # the default is unchanged

    @pytest.mark.parametrize("interp", ["linear", "log", "hold"])
    def test_the_last_rate_is_held_up_to_steps(self, interp):
        s = knots([(0, 0.1), (10, 0.02)], interp=interp, steps=30)
        assert s.length == 30 and s(10) == s(20) == s(30) == s(31) == pytest.approx(0.02, rel=1e-15)
        assert s(5) == knots([(0, 0.1), (10, 0.02)], interp=interp)(5)

    def test_steps_before_the_last_knot_is_refused(self):
        with pytest.raises(ScheduleError, match=r"knots: steps must be a whole number >= 10 \(the last knot's tick\) "
                                                r"or None, got 9"):
            knots([(0, 0.1), (10, 0.0)], steps=9)

    def test_repr_rebuilds_and_leaves_out_the_default(self):
        a, b = knots([(0, 0.1), (10, 0.0)]), knots([(0, 0.1), (10, 0.0)], steps=12)
        assert repr(a) == "knots(points=((0, 0.1), (10, 0.0)), interp='linear')"
        assert eval(repr(b), {"knots": knots}) == b != a  # noqa: S307 - repr is valid Python by design


class TestEvaluationProtocol:
    """Scalars give floats, arrays give float64 arrays of the same shape."""

    def test_shapes(self):
        s = cosine(0.1, steps=100)
        assert isinstance(s(7), float)
        out = s(np.arange(12).reshape(3, 4))
        assert out.dtype == np.float64 and out.shape == (3, 4)
        assert s(np.int32(3)) == s(3) and s(3.0) == s(3)


def test_drops_scalar_and_array_agree_exactly():
    """A step schedule has no formula to round differently: a tick read alone and inside an array give the same float
    (numpy's power answered 0.0010000000000000002 for the 0-d tick and 0.001 for the array after two x0.1 drops)."""
    s = drops(0.1, at=(30, 60, 80), factor=0.1, steps=90)
    ticks = np.arange(0, 95)
    together = s(ticks)
    assert [s(int(t)) for t in ticks] == together.tolist()
    # the level after k drops is peak * factor ** k with Python's (the C library's) pow
    assert s(60) == 0.1 * 0.1 ** 2 and s(80) == 0.1 * 0.1 ** 3
