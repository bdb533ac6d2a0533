"""Range tests: reading a (rate, loss) log, the two readings of a peak, the starting design, and the torch-free run."""

from __future__ import annotations

import math

import numpy as np
import pytest

from schedwidget import ScheduleError
from schedwidget.range_input import MAX_POINTS, MIN_POINTS
from schedwidget.range_run import RangeRun, run_range_test, sweep_rates
from schedwidget.range_test import RangeReading, read_range_test, smooth

# A synthetic range test: a logistic fall of 1.5 in log10(rate), steepest at X0 (where a logistic's slope peaks,
# analytically), then a blow-up that starts at log10(rate) = 0 (rate 1), so it does not touch the fall.
X0, WIDTH, FALL = -2.0, 0.3, 1.5


def curve(x: np.ndarray) -> np.ndarray:
    return 2.0 - FALL / (1.0 + np.exp(-(x - X0) / WIDTH)) + 20.0 * np.maximum(x, 0.0) ** 2


def log_of(n: int = 301, lo: float = 1e-5, hi: float = 10.0) -> tuple[np.ndarray, np.ndarray]:
    r = np.geomspace(lo, hi, n)
    return r, curve(np.log10(r))


class TestSmooth:
    """The smoother is a centred straight-line fit: exact on straight lines, no lag."""

    def test_straight_line_is_kept(self):
        """A loss linear in log10(rate) comes back unchanged, with its slope, at every point (also the ends)."""
        x = np.linspace(-5, 1, 50)
        level, slope = smooth(x, 3.0 - 0.25 * x, 4)
        np.testing.assert_allclose(level, 3.0 - 0.25 * x, rtol=0, atol=1e-12)
        np.testing.assert_allclose(slope, -0.25, rtol=0, atol=1e-12)

    def test_no_lag(self):
        """A symmetric bump's smoothed peak stays at the bump (an exponential moving average would move it)."""
        x = np.linspace(-5, 1, 601)
        level, _ = smooth(x, np.exp(-((x + 2) / 0.2) ** 2), 10)
        assert x[np.argmax(level)] == pytest.approx(-2.0, abs=1e-9)


class TestReadings:
    """A synthetic loss curve with a known steepest point and minimum gives them within the stated resolution."""

    def test_steepest_point_on_an_even_log(self):
        """The steepest point is the logistic's centre to one log spacing (the stated resolution)."""
        for n, lo, hi in ((301, 1e-5, 10.0), (257, 1.3e-5, 7.0), (101, 1.3e-5, 7.0), (1001, 2e-6, 3.0)):
            r, loss = log_of(n, lo, hi)
            reading = read_range_test(r, loss)
            spacing = math.log10(hi / lo) / (n - 1)
            assert abs(math.log10(reading.steepest) - X0) <= spacing, (n, reading.steepest)
            tick, rate = reading.evidence["steepest"]
            assert abs(math.log10(rate) - X0) <= spacing / 2 + 1e-12  # the logged rate nearest the centre
            assert rate == r[tick]

    def test_steepest_point_with_noise(self):
        """With seeded noise (sigma 0.02 on a fall of 1.5) and a 0.5-decade window, within half the window."""
        r, loss = log_of()
        for seed in range(10):
            noisy = loss + np.random.default_rng(seed).normal(0.0, 0.02, loss.size)
            reading = read_range_test(r, noisy, window=0.5)
            assert abs(math.log10(reading.steepest) - X0) <= reading.window / 2, seed

    def test_onset_of_the_fall(self):
        """'Starts to fall' is where the logistic has covered the onset share (10 %) of its fall: x0 + w ln(1/9)."""
        r, loss = log_of()
        reading = read_range_test(r, loss)
        expected = X0 + WIDTH * math.log(1.0 / 9.0)
        spacing = 6.0 / 300
        assert abs(math.log10(reading.start) - expected) <= reading.window / 2 + spacing
        assert reading.low == reading.start

    def test_minimum_and_common_practice(self):
        """The minimum is the curve's (at rate 1, to half the window plus a spacing); the common-practice peak is
        a tenth of the rate at the lowest smoothed loss (common practice, no source)."""
        for n in (301, 257):
            r, loss = log_of(n, 1.3e-5 if n == 257 else 1e-5, 7.0 if n == 257 else 10.0)
            reading = read_range_test(r, loss)
            m = int(np.argmin(reading.smoothed))
            assert reading.minimum == r[m] and reading.evidence["minimum"] == (m, r[m])
            assert reading.peak_common == r[m] / 10.0
            spacing = math.log10(r[1] / r[0])
            assert abs(math.log10(reading.minimum)) <= reading.window / 2 + spacing

    def test_published_reading_order(self):
        """Smith 2017, section 3.3: the lower bound (starts to fall) < steepest < upper bound (stops falling or
        turns ragged) <= the minimum; the suggested peak is the upper bound."""
        r, loss = log_of()
        reading = read_range_test(r, loss)
        assert reading.fell and reading.start < reading.steepest < reading.stop <= reading.minimum
        assert reading.peak == reading.stop and reading.stop_reason == "slows"
        # "slows": the logistic has covered all but the onset share (10 %) of its fall at x0 + w ln 9
        expected = X0 + WIDTH * math.log(9.0)
        assert abs(math.log10(reading.stop) - expected) <= reading.window / 2 + 6.0 / 300
        j, m = reading.evidence["stop"][0], int(np.argmin(reading.smoothed))
        fall = reading.smoothed[:m + 1].max() - reading.smoothed[m]
        assert reading.smoothed[j] <= reading.smoothed[m] + 0.1 * fall < reading.smoothed[j - 1]

    def test_ragged(self):
        """A loss still falling when its noise jumps (at log10(rate) = -1) turns ragged there (within the window)."""
        r = np.geomspace(1e-5, 10.0, 301)
        x = np.log10(r)
        rng = np.random.default_rng(4)
        loss = 2.0 - 0.4 * (x + 5) + rng.normal(0, 0.01, x.size) + np.where(x > -1, rng.normal(0, 0.5, x.size), 0)
        reading = read_range_test(r, loss)
        assert reading.stop_reason == "ragged"
        assert abs(math.log10(reading.stop) + 1.0) <= reading.window / 2
        assert "turns ragged" in str(reading)

    def test_still_falling_at_the_end(self):
        """A log that ends while the loss still falls says so."""
        r = np.geomspace(1e-5, 10.0, 200)
        reading = read_range_test(r, 2.0 - 0.3 * np.log10(r))
        assert reading.still_falling and reading.minimum == r[-1]
        assert "still falling" in str(reading)
        assert not read_range_test(*log_of()).still_falling

    def test_started_mid_fall(self):
        """A log that starts past the steepest point says the sweep should start lower."""
        r = np.geomspace(10 ** (X0 + 0.05), 10.0, 200)
        reading = read_range_test(r, curve(np.log10(r)))
        assert reading.evidence["steepest"] == (0, r[0])
        assert "falls fastest at the first logged rate; sweep from lower rates" in str(reading)
        assert "caution" not in str(read_range_test(*log_of()))

    def test_no_fall(self):
        """Pure seeded noise around a flat loss is not a fall: no peak, and no design."""
        r = np.geomspace(1e-5, 10.0, 301)
        reading = read_range_test(r, 2.0 + np.random.default_rng(0).normal(0, 0.05, r.size))
        assert not reading.fell and reading.peak is None and reading.peak_common is None and reading.low is None
        assert "no peak suggested" in str(reading)
        with pytest.raises(ScheduleError, match=r"RangeReading.design: reading must be a reading that found a peak"):
            reading.design(1000)

    def test_divergence_at_the_end(self):
        """nan/inf losses at the end are cut and reported; the readings are those of the finite part."""
        r, loss = log_of()
        cut = 280
        tail = loss.copy()
        tail[cut:] = np.nan
        tail[-1] = np.inf
        reading = read_range_test(r, tail)
        clean = read_range_test(r[:cut], loss[:cut])
        assert reading.diverged_at == r[cut] and reading.dropped == r.size - cut
        assert reading.rates.size == cut and reading.peak == clean.peak and reading.steepest == clean.steepest
        assert f"turned nan/inf at {r[cut]:.3g}" in str(reading)

    def test_sorted_when_not_increasing(self):
        """A log whose rates do not increase is read sorted by rate; evidence ticks are rows of the log as given."""
        r, loss = log_of()
        order = np.random.default_rng(1).permutation(r.size)
        reading = read_range_test(r[order], loss[order])
        plain = read_range_test(r, loss)
        assert reading.reordered and reading.peak == plain.peak and reading.steepest == plain.steepest
        tick, rate = reading.evidence["stop"]
        assert r[order][tick] == rate
        assert "read sorted by rate" in str(reading)

    def test_str_names_the_sources(self):
        """The plain text says which reading is published and which is common practice."""
        text = str(read_range_test(*log_of()))
        assert "published reading (Smith 2017, sec. 3.3)" in text
        assert "common practice, no source" in text and "straight-line fit over 13 points" in text


class TestInputs:
    """Every accepted form of the log gives the same reading."""

    def test_forms_agree(self, tmp_path):
        """Two lists, pairs, an (n, 2) array, CSV bytes, a CSV file with or without a header."""
        r, loss = log_of(60)
        want = read_range_test(r, loss)
        csv_text = "# invented range test\nstep,lr,train_loss\n" + "".join(
            f"{i},{float(a)!r},{float(b)!r}\n" for i, (a, b) in enumerate(zip(r, loss)))
        path = tmp_path / "range.csv"
        path.write_text(csv_text, encoding="utf-8")
        bare = tmp_path / "bare.csv"
        bare.write_text("".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(r, loss)), encoding="utf-8")
        for got in (read_range_test(r.tolist(), loss.tolist()), read_range_test(list(zip(r, loss))),
                    read_range_test(np.column_stack([r, loss])), read_range_test(csv_text.encode()),
                    read_range_test(path), read_range_test(str(bare)),
                    read_range_test(path, rate_column="lr", loss_column=2)):
            assert got.peak == want.peak and np.array_equal(got.smoothed, want.smoothed)

    def test_columns_by_position(self):
        """Without 'lr'/'rate'/'loss' in the names, two value columns beside an index column are rate, loss."""
        r, loss = log_of(40)
        text = "step,x,y\n" + "".join(f"{i},{float(a)!r},{float(b)!r}\n" for i, (a, b) in enumerate(zip(r, loss)))
        got = read_range_test(text.encode())
        assert np.array_equal(got.rates, r) and np.array_equal(got.losses, loss)

    def test_huge_losses_are_the_divergence(self):
        """Losses beyond 1e100 at the end are read as the divergence (on their way to inf), like nan and inf."""
        r, loss = log_of()
        tail = loss.copy()
        tail[290:] = 1e200
        reading = read_range_test(r, tail)
        assert reading.diverged_at == r[290] and reading.dropped == 11

    def test_pandas(self):
        """A DataFrame (columns found by name) and two Series are read when pandas is installed (never needed)."""
        pd = pytest.importorskip("pandas")
        r, loss = log_of(60)
        want = read_range_test(r, loss)
        df = pd.DataFrame({"epoch": np.zeros(60), "learning_rate": r, "loss": loss})
        assert read_range_test(df).peak == want.peak
        assert read_range_test(pd.Series(r), pd.Series(loss)).peak == want.peak


class TestErrors:
    """Bad input gets a ScheduleError naming the parameter, the value and what is allowed."""

    @pytest.mark.parametrize("call, match", [
        (lambda r, l: read_range_test(np.where(np.arange(r.size) == 3, -0.1, r), l),
         r"read_range_test: rates\[3\] must be a finite rate > 0, got -0.1"),
        (lambda r, l: read_range_test(np.where(np.arange(r.size) == 5, np.nan, r), l),
         r"rates\[5\] must be a finite rate > 0, got nan"),
        (lambda r, l: read_range_test(r, np.where(np.arange(r.size) == 7, np.nan, l)),
         r"losses\[7\] must be a finite number within \+-1e100 \(a nan, inf or larger loss is read as the "
         r"divergence only at the end of the log\), got nan \(losses\[8\] after it is finite again"),
        (lambda r, l: read_range_test(r, l[:-1]),
         r"losses must be 30 values, one per rate, got '29 values'"),
        (lambda r, l: read_range_test(np.geomspace(1e-6, 1.0, MIN_POINTS - 1), l[:MIN_POINTS - 1]),
         rf"losses must be at least {MIN_POINTS} finite losses, got '{MIN_POINTS - 1} finite values"),
        (lambda r, l: read_range_test(r, np.where(np.arange(r.size) >= 4, np.inf, l)),
         r"losses must be at least 10 finite losses, got '4 finite values before the first nan/inf' \(the loss "
         r"diverged almost at once: start the sweep at a lower rate\)"),
        (lambda r, l: read_range_test(np.linspace(1.0, 1.5, r.size), l),
         r"rates must be a span of at least a factor 2 between the lowest and the highest rate"),
        (lambda r, l: read_range_test(np.concatenate([r[:10], r[9:29]]), l),
         r"rates\[10\] must be a rate other than rates\[9\]"),
        (lambda r, l: read_range_test(r, l, window=0.0), r"window must be a width in decades in \(0, 6\]"),
        (lambda r, l: read_range_test(r, l, window=7.0),
         r"window must be a width in decades in \(0, 6\] \(the log's span\), got 7.0"),
        (lambda r, l: read_range_test(r, l, onset=0.5), r"onset must be a share in \(0, 0.5\), got 0.5"),
        (lambda r, l: read_range_test(r, l, ragged=1.0), r"ragged must be a factor in \(1, 1e6\), got 1.0"),
        (lambda r, l: read_range_test(np.ones((30, 3))), r"source must be \(rate, loss\) pairs.*shape \(30, 3\)"),
        (lambda r, l: read_range_test(r, l, rate_column="lr"), r"rate_column must be None for lists or arrays"),
        (lambda r, l: read_range_test(b"lr,loss\n1,2\n", l), r"losses must be None when the first argument is a "
                                                            r"file or a DataFrame"),
        (lambda r, l: read_range_test(b"a,b,c\n1,2,3\n"), r"rate_column must be the name or position of one of "
                                                         r"'a', 'b', 'c'"),
        (lambda r, l: read_range_test(b"lr,loss,val_loss\n1,2,3\n"), r"loss_column must be .*several column"),
        (lambda r, l: read_range_test(np.zeros(MAX_POINTS + 1), np.zeros(MAX_POINTS + 1)),
         r"rates must be at most 1,000,000 values, got '1,000,001 values'"),
    ])
    def test_bad_logs(self, call, match):
        """Each bad log is refused with its own message."""
        r = np.geomspace(1e-6, 1.0, 30)
        with pytest.raises(ScheduleError, match=match):
            call(r, 2.0 - 0.1 * np.log10(r))

    def test_bad_design_arguments(self):
        """design() checks its reading, shape and warmup share."""
        reading = read_range_test(*log_of())
        with pytest.raises(ScheduleError, match=r"reading must be 'published' or 'common', got 'best'"):
            reading.design(100, reading="best")
        with pytest.raises(ScheduleError, match=r"shape must be 'one_cycle' or 'cosine', got 'step'"):
            reading.design(100, shape="step")
        with pytest.raises(ScheduleError, match=r"warmup_share must be a share in \(0, 1\), got 1.5"):
            reading.design(100, shape="cosine", warmup_share=1.5)

    def test_bad_run_arguments(self):
        """The run checks its sweep, its stop rule and the objects it was given before touching anything."""
        with pytest.raises(ScheduleError, match=r"run_range_test: updates must be a whole number in \[10, "
                                                r"1,000,000\], got 5"):
            sweep_rates(1e-7, 10.0, 5)
        with pytest.raises(ScheduleError, match=r"highest must be >= 2 \* lowest = 0.2, got 0.15"):
            sweep_rates(0.1, 0.15, 100)
        with pytest.raises(ScheduleError, match=r"lowest must be a rate in \(0, 1e\+100\], got 0.0"):
            sweep_rates(0.0, 1.0, 100)
        with pytest.raises(ScheduleError, match=r"stop_above must be None or a factor in \(1, 1e6\], got 1.0"):
            run_range_test(object(), [], None, object(), stop_above=1.0)
        with pytest.raises(ScheduleError, match=r"model must be a model with state_dict.*it has no state_dict"):
            run_range_test(object(), [], None, object())


class TestDesign:
    """A starting design around the suggested peak, from our own factories."""

    def test_one_cycle_with_the_published_bounds(self):
        """one_cycle peaks at the published peak and starts at the published lower bound (Smith 2017, 3.3)."""
        reading = read_range_test(*log_of())
        d = reading.design(1000)
        assert d.peak == reading.peak and d.low == reading.low and d.length == 1000
        assert max(d(np.arange(1000))) == pytest.approx(reading.peak, rel=1e-12)

    def test_warmup_cosine_with_the_common_peak(self):
        """A 5 % warmup into a cosine to 0 at a tenth of the minimum's rate (common practice, no source)."""
        reading = read_range_test(*log_of())
        d = reading.design(1000, reading="common", shape="cosine")
        assert d.length == 1000 and d(0) == 0.0 and d(50) == reading.peak_common


# --------------------------------------------------------------------------------------------- the torch run
def _problem(torch, seed: int = 0):
    """A seeded toy regression (invented data) and a small model with a batch norm (buffers must come back)."""
    g = torch.Generator().manual_seed(seed)
    x = torch.randn(512, 8, generator=g)
    y = x @ torch.randn(8, 1, generator=g) + 0.1 * torch.randn(512, 1, generator=g)
    batches = [(x[i:i + 32], y[i:i + 32]) for i in range(0, 512, 32)]
    torch.manual_seed(seed)
    model = torch.nn.Sequential(torch.nn.Linear(8, 16), torch.nn.BatchNorm1d(16), torch.nn.Tanh(),
                                torch.nn.Linear(16, 1))
    return model, batches


def _snapshot(torch, model, optimizer):
    import copy

    return (copy.deepcopy(model.state_dict()), copy.deepcopy(optimizer.state_dict()),
            [None if p.grad is None else p.grad.clone() for p in model.parameters()], model.training)


def _same(torch, a, b) -> bool:
    """Exactly equal nested state (torch.equal on every tensor)."""
    if isinstance(a, dict):
        return a.keys() == b.keys() and all(_same(torch, a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same(torch, x, y) for x, y in zip(a, b))
    if hasattr(a, "dtype") and hasattr(a, "shape"):
        return hasattr(b, "dtype") and a.dtype == b.dtype and torch.equal(a, b)
    return a == b


def _warm(torch, model, optimizer, batches, n=3):
    """A few real updates first, so the optimizer has state and the parameters have gradients to restore."""
    for inputs, targets in batches[:n]:
        optimizer.zero_grad()
        torch.nn.functional.mse_loss(model(inputs), targets).backward()
        optimizer.step()


class TestRun:
    """run_range_test on a small real torch model: exponential rates, exact restore, a plausible suggestion."""

    @pytest.mark.parametrize("kind", ["sgd", "adam"])
    def test_restores_state_exactly_and_logs_the_sweep(self, torch, kind):
        """Weights, buffers, optimizer state, gradients and the training flag are identical afterwards."""
        model, batches = _problem(torch)
        opt = (torch.optim.SGD(model.parameters(), lr=0.01, momentum=0.9) if kind == "sgd"
               else torch.optim.Adam(model.parameters(), lr=1e-3))
        _warm(torch, model, opt, batches)
        model.eval()
        before = _snapshot(torch, model, opt)
        run = run_range_test(model, batches, torch.nn.MSELoss(), opt, updates=300, lowest=1e-5, highest=10.0)
        assert isinstance(run, RangeRun) and _same(torch, before, _snapshot(torch, model, opt))
        k = np.arange(300)
        planned = 1e-5 * (10.0 / 1e-5) ** (k / 299)
        np.testing.assert_allclose(run.planned, planned, rtol=1e-12, atol=0)
        assert run.planned[0] == 1e-5 and run.planned[-1] == 10.0
        assert np.array_equal(run.rates, run.planned[:run.rates.size])
        assert run.stopped in ("blew up", "not finite") and 50 < run.rates.size < 300

    def test_plausible_suggestion(self, torch):
        """The suggested peaks lie below where the run blew up, and training at them lowers the loss."""
        model, batches = _problem(torch)
        opt = torch.optim.SGD(model.parameters(), lr=0.01, momentum=0.9)
        run = run_range_test(model, batches, torch.nn.MSELoss(), opt, updates=300, lowest=1e-5, highest=10.0)
        reading = run.read()
        assert reading.fell and reading.low < reading.peak < run.rates[-1] and reading.peak_common < run.rates[-1]

        def train(rate):
            """First and last epoch's mean loss after 5 epochs at ``rate`` from the same seeded start."""
            fresh, _ = _problem(torch)
            o = torch.optim.SGD(fresh.parameters(), lr=rate, momentum=0.9)
            losses = []
            for _ in range(5):
                for inputs, targets in batches:
                    o.zero_grad()
                    loss = torch.nn.functional.mse_loss(fresh(inputs), targets)
                    loss.backward()
                    o.step()
                    losses.append(loss.item())
            assert all(map(math.isfinite, losses)), rate
            return np.mean(losses[:16]), np.mean(losses[-16:])

        for peak in (reading.peak, reading.peak_common):
            first, last = train(peak)
            slow = train(peak / 100.0)[1]
            # the suggestion trains: the loss falls to under a fifth, and far lower than a hundredth of the rate
            assert last < 0.2 * first and last < 0.5 * slow, (peak, first, last, slow)

    def test_classification(self, torch):
        """A seeded two-class toy problem with cross-entropy and Adam: a suggestion below the blow-up, state back."""
        g = torch.Generator().manual_seed(3)
        x = torch.randn(640, 2, generator=g)
        y = (x[:, 0] * x[:, 1] > 0).long()
        batches = [(x[i:i + 64], y[i:i + 64]) for i in range(0, 640, 64)]
        torch.manual_seed(3)
        model = torch.nn.Sequential(torch.nn.Linear(2, 32), torch.nn.ReLU(), torch.nn.Linear(32, 2))
        opt = torch.optim.Adam(model.parameters(), lr=1e-3)
        before = _snapshot(torch, model, opt)
        run = run_range_test(model, batches, torch.nn.CrossEntropyLoss(), opt, updates=200, lowest=1e-5, highest=100.0)
        assert _same(torch, before, _snapshot(torch, model, opt))
        reading = run.read()
        assert reading.fell and reading.low < reading.peak < run.rates[-1], str(reading)

    def test_exception_mid_run_restores(self, torch):
        """A loss function that raises at update 40 propagates, and the state is restored first."""
        model, batches = _problem(torch)
        opt = torch.optim.Adam(model.parameters(), lr=1e-3)
        _warm(torch, model, opt, batches)
        before = _snapshot(torch, model, opt)
        calls = []

        def loss_fn(out, target):
            calls.append(1)
            if len(calls) == 40:
                raise RuntimeError("out of memory, invented")
            return torch.nn.functional.mse_loss(out, target)

        with pytest.raises(RuntimeError, match="invented"):
            run_range_test(model, batches, loss_fn, opt, updates=100, lowest=1e-6, highest=1.0)
        assert _same(torch, before, _snapshot(torch, model, opt))

    def test_not_finite_and_one_shot_loader(self, torch):
        """A nan loss ends the run (that update is not taken); a one-shot iterator ends it when it runs out."""
        model, batches = _problem(torch)
        opt = torch.optim.SGD(model.parameters(), lr=0.01)
        seen = []

        def loss_of(m, batch):
            seen.append(1)
            loss = torch.nn.functional.mse_loss(m(batch[0]), batch[1])
            return loss * float("nan") if len(seen) == 30 else loss

        run = run_range_test(model, batches, None, opt, updates=100, loss_of=loss_of, stop_above=None)
        assert run.stopped == "not finite" and run.rates.size == 30 and math.isnan(run.losses[-1])
        assert run.read().diverged_at == run.rates[-1]
        run = run_range_test(model, iter(batches), torch.nn.MSELoss(), opt, updates=100, lowest=1e-6, highest=1e-3)
        assert run.stopped == "loader ended" and run.rates.size == len(batches)
        assert "16 of 100 updates" in str(run)

    def test_bad_batch(self, torch):
        """A batch that is not an (inputs, targets) pair is refused by name, and the state still comes back."""
        model, batches = _problem(torch)
        opt = torch.optim.SGD(model.parameters(), lr=0.01)
        before = _snapshot(torch, model, opt)
        with pytest.raises(ScheduleError, match=r"run_range_test: batch 0 must be a pair \(inputs, targets\), got "
                                                r"'a Tensor'"):
            run_range_test(model, [b[0] for b in batches], torch.nn.MSELoss(), opt)
        assert _same(torch, before, _snapshot(torch, model, opt))


def test_random_logs_end_in_a_reading_or_a_schedule_error():
    """Seeded random logs (any scale, unsorted, nan tails, odd windows) give a reading or a ScheduleError, fast."""
    rng = np.random.default_rng(16)
    readings = errors = 0
    for _ in range(400):
        n = int(rng.integers(1, 300))
        lo, span = 10 ** rng.uniform(-300, 50), 10 ** rng.uniform(-1, 10)
        r = np.geomspace(lo, lo * span, n) if rng.random() < 0.8 else rng.uniform(0, 1, n) * lo
        if rng.random() < 0.2:
            r = rng.permutation(r)
        y = 10 ** rng.uniform(-300, 120) * (rng.normal(0, 1, n) + rng.uniform(-5, 5) * np.tanh(np.linspace(-3, 3, n)))
        if rng.random() < 0.3:
            y[int(rng.integers(0, n)):] = rng.choice([np.nan, np.inf, -np.inf])
        window = None if rng.random() < 0.7 else float(10 ** rng.uniform(-3, 1))
        try:
            reading = read_range_test(r, y, window=window)
        except ScheduleError:
            errors += 1
            continue
        readings += 1
        assert np.isfinite(reading.smoothed).all() and np.isfinite(reading.slope).all() and str(reading)
        if reading.fell:
            assert reading.low <= reading.peak <= reading.rates[-1]
            assert reading.design(100).length == 100
    assert readings > 100 and errors > 50  # both outcomes were drawn


def test_core_modules_import_no_torch():
    """The range-test modules import numpy and the standard library only (checked in a fresh interpreter)."""
    from tests.test_import import _loaded_after

    assert _loaded_after("import schedwidget.range_run, schedwidget.range_test, schedwidget.range_input") == []


def test_reading_is_a_value():
    """The reading's arrays are read-only (a value, not a machine)."""
    reading = read_range_test(*log_of())
    assert isinstance(reading, RangeReading)
    with pytest.raises(ValueError):
        reading.smoothed[0] = 1.0
    with pytest.raises(TypeError):
        reading.evidence["stop"] = (0, 1.0)  # type: ignore[index]
