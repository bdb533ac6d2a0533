"""torch routes: exported LambdaLR rates equal the design, survive checkpoints and resume exactly (torch 2.13)."""

from __future__ import annotations

import ast
import io
import json
import pickle
import random
import re
import subprocess
import sys

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, drops, exp_decay, ramp, restarts, stages, warmup
from schedwidget import export
from schedwidget.budget import Budget
from schedwidget.export import RateFactor, to_torch, torch_factor

BASE = 0.1
MULTIPLIERS = [1.0, 0.1]
#: 10 steps of warmup, 30 of cosine; runs go 6 updates past the end.
STEP_DESIGN = warmup(cosine(BASE, steps=30), steps=10)
STEP_TICKS = 46
#: Epoch unit: 2 epochs of ramp, then drops; 3 updates per epoch; runs go one epoch past the end.
EPOCH_DESIGN = stages(ramp(0.01, BASE, 2), drops(BASE, at=(3, 5), factor=0.3, steps=6))
EPOCH_TICKS = 9
BATCHES = 3
DEMO = warmup(cosine(0.1, steps=85 * 1150), steps=5 * 1150)   # invented demo scenario: 90 epochs x 1,150 steps


# ------------------------------------------------------------------ a tiny training run
@pytest.fixture(autouse=True)
def one_thread(request):
    """A model this small trains fastest on one thread (and the CI machine has two cores)."""
    if "torch" not in request.fixturenames:
        yield
        return
    torch = request.getfixturevalue("torch")
    before = torch.get_num_threads()
    torch.set_num_threads(1)
    yield
    torch.set_num_threads(before)


def make_model(torch):
    torch.manual_seed(0)
    return torch.nn.Sequential(torch.nn.Linear(6, 16), torch.nn.ReLU(), torch.nn.Linear(16, 8), torch.nn.ReLU(),
                               torch.nn.Linear(8, 3))


def invented_data(torch):
    """Invented demo data: seeded random 'flake features' and polymer labels (three classes)."""
    g = torch.Generator().manual_seed(1)
    return torch.randn(48, 6, generator=g), torch.randint(0, 3, (48,), generator=g)


def make_optimizer(torch, model):
    body = list(model[0].parameters()) + list(model[2].parameters())
    return torch.optim.SGD([{"params": body}, {"params": list(model[4].parameters())}], lr=BASE, momentum=0.9)


def snippet_route(design, unit):
    text = to_torch(design, BASE, unit=unit, groups=MULTIPLIERS)

    def build(optimizer, start_tick=0):
        namespace = {}
        exec(text, namespace)            # a fresh copy of the snippet, as in a new process
        return namespace["make_scheduler"](optimizer, start_tick)
    return build


def factor_route(design, unit):
    def build(optimizer, start_tick=0):
        import torch

        export._COMPILED.clear()         # as in a new process: nothing compiled yet
        for group in optimizer.param_groups:
            group.setdefault("initial_lr", BASE)
        return torch.optim.lr_scheduler.LambdaLR(optimizer, lr_lambda=torch_factor(design, BASE, groups=MULTIPLIERS),
                                                 last_epoch=start_tick - 1)
    return build


def run(torch, build, unit, ticks, save_at=None, path=None, resume=None):
    """Train for ``ticks`` ticks; return the rate each update used in each group, and the final weights.

    ``save_at`` writes a checkpoint after that many ticks; ``resume`` ("state" or "tick") starts from it.
    """
    x, y = invented_data(torch)
    model = make_model(torch)
    optimizer = make_optimizer(torch, model)
    start = 0
    if resume is None:
        scheduler = build(optimizer)
    else:
        ckpt = torch.load(path, weights_only=True)
        start = ckpt["tick"]
        model.load_state_dict(ckpt["model"])
        if resume == "state":
            scheduler = build(optimizer)             # before optimizer.load_state_dict, as the snippet says
            optimizer.load_state_dict(ckpt["optimizer"])
            scheduler.load_state_dict(ckpt["scheduler"])
        else:
            optimizer.load_state_dict(ckpt["optimizer"])
            scheduler = build(optimizer, start_tick=start)
    rates = []

    def update(i):
        rates.append([g["lr"] for g in optimizer.param_groups])
        rows = slice((i % 4) * 12, (i % 4) * 12 + 12)
        loss = torch.nn.functional.cross_entropy(model(x[rows]), y[rows])
        loss.backward()
        optimizer.step()
        optimizer.zero_grad()

    for tick in range(start, ticks):
        if unit == "step":
            update(tick)
        else:
            for b in range(BATCHES):
                update(tick * BATCHES + b)
        scheduler.step()
        if tick + 1 == save_at:
            torch.save({"tick": tick + 1, "model": model.state_dict(), "optimizer": optimizer.state_dict(),
                        "scheduler": scheduler.state_dict()}, path)
    return rates, [p.detach().clone() for p in model.parameters()]


CASES = [(route, unit) for route in ("snippet", "factor") for unit in ("step", "epoch")]


class TestResume:
    """Save at a random tick, rebuild everything fresh, load, continue: the rates are identical."""

    @pytest.mark.parametrize("route,unit", CASES)
    def test_rates_follow_the_design(self, torch, route, unit):
        """Each update's rate in group i is s(t) * multiplier i (t = update for "step", epoch for "epoch")."""
        design, ticks = (STEP_DESIGN, STEP_TICKS) if unit == "step" else (EPOCH_DESIGN, EPOCH_TICKS)
        build = (snippet_route if route == "snippet" else factor_route)(design, unit)
        rates, _ = run(torch, build, unit, ticks)
        clock = np.arange(len(rates)) if unit == "step" else np.arange(len(rates)) // BATCHES
        want = design(clock)[:, None] * np.array(MULTIPLIERS)[None, :]
        np.testing.assert_allclose(np.array(rates), want, rtol=1e-12, atol=1e-18)

    @pytest.mark.parametrize("resume", ["state", "tick"])
    @pytest.mark.parametrize("route,unit", CASES)
    def test_resumed_run_is_identical(self, torch, tmp_path, route, unit, resume):
        """Uninterrupted and resumed runs use the same rates and end with the same weights."""
        design, ticks = (STEP_DESIGN, STEP_TICKS) if unit == "step" else (EPOCH_DESIGN, EPOCH_TICKS)
        make = snippet_route if route == "snippet" else factor_route
        ks = {random.Random(f"{route}-{unit}-{resume}").randint(1, ticks - 1), design.length // 4}
        whole, weights = run(torch, make(design, unit), unit, ticks)
        for k in sorted(ks):
            path = tmp_path / f"ckpt{k}.pt"
            first, _ = run(torch, make(design, unit), unit, ticks, save_at=k, path=path)
            rest, resumed = run(torch, make(design, unit), unit, ticks, path=path, resume=resume)
            per_tick = 1 if unit == "step" else BATCHES
            assert first[:k * per_tick] + rest == whole, (route, unit, resume, k)
            assert all(torch.equal(a, b) for a, b in zip(weights, resumed))


class TestFactor:
    """torch_factor returns plain, picklable objects whose state is the design."""

    def test_values(self):
        """factor(t) is s(t) * multiplier / base_lr, for each group."""
        factors = torch_factor(DEMO, BASE, groups=[1.0, 0.25])
        t = np.arange(0, 103_600, 7)
        for f, m in zip(factors, [1.0, 0.25]):
            got = np.array([f(int(i)) for i in t])
            np.testing.assert_allclose(got, DEMO(t) * m / BASE, rtol=1e-12, atol=1e-15)
        assert isinstance(torch_factor(DEMO, BASE), RateFactor)

    def test_state_is_plain(self):
        """No slots, no callables: the instance __dict__ is JSON data (spec text, base_lr, multiplier)."""
        f = torch_factor(DEMO, BASE)
        assert not hasattr(type(f), "__slots__")
        assert json.loads(json.dumps(f.__dict__)) == f.__dict__
        assert set(f.__dict__) == {"design", "base_lr", "multiplier"}
        assert json.loads(f.design)["schedule"] == DEMO.to_spec()["schedule"]

    def test_pickle_round_trip(self):
        """A pickled factor comes back equal and, with nothing compiled, gives the same rates."""
        f = torch_factor(restarts(cosine(0.1, steps=50), cycles=3, growth=1.5) >> exp_decay(0.01, 0.9), BASE, groups=[0.5])[0]
        g = pickle.loads(pickle.dumps(f))
        export._COMPILED.clear()
        assert g == f and g is not f
        assert [g(t) for t in range(0, 2000, 13)] == [f(t) for t in range(0, 2000, 13)]

    def test_torch_save_of_a_scheduler(self, torch):
        """torch.save keeps a whole scheduler, and its state_dict loads with weights_only=True."""
        model = make_model(torch)
        optimizer = make_optimizer(torch, model)
        factors = torch_factor(STEP_DESIGN, BASE, groups=MULTIPLIERS)
        scheduler = torch.optim.lr_scheduler.LambdaLR(optimizer, lr_lambda=factors)
        buf = io.BytesIO()
        torch.save(scheduler, buf)
        buf.seek(0)
        back = torch.load(buf, weights_only=False)
        assert back.lr_lambdas == factors and back.lr_lambdas[1](10) == factors[1](10)
        buf = io.BytesIO()
        torch.save(scheduler.state_dict(), buf)
        buf.seek(0)
        state = torch.load(buf, weights_only=True)
        assert state["lr_lambdas"] == [f.__dict__ for f in factors]

    def test_checkpoint_text_never_runs(self):
        """A tampered design in restored state is refused by the validating loader, not executed."""
        f = torch_factor(DEMO, BASE)
        f.__dict__.update(design="__import__('os').system('echo hacked')")
        with pytest.raises(ScheduleError, match=r"RateFactor: design must be the JSON text of a spec"):
            f(3)
        f.__dict__.update(design=json.dumps({"version": 1, "schedule": {"kind": "eval", "code": "1"}}))
        with pytest.raises(ScheduleError, match=r"spec: "):
            f(3)

    @pytest.mark.parametrize("base_lr", [0, -0.1, float("nan"), float("inf"), True, "0.1"])
    def test_bad_base_lr(self, base_lr):
        """base_lr is a finite number > 0."""
        with pytest.raises(ScheduleError, match=r"torch_factor: base_lr must be a finite number > 0"):
            torch_factor(DEMO, base_lr)

    @pytest.mark.parametrize("groups,where", [([], "groups"), ("ab", "groups"), ([1.0, float("nan")], r"groups\[1\]"),
                                              ([-1.0], r"groups\[0\]"), (3, "groups")])
    def test_bad_groups(self, groups, where):
        """groups is a non-empty list of finite multipliers >= 0."""
        with pytest.raises(ScheduleError, match=rf"torch_factor: {where} must be"):
            torch_factor(DEMO, BASE, groups=groups)


def _snippet_namespace(torch, text):
    namespace = {}
    exec(text, namespace)
    return namespace


class TestSnippet:
    """to_torch writes a snippet that needs only torch and says where scheduler.step() goes."""

    def test_imports_only_torch_and_stdlib(self):
        """The snippet imports math (and bisect) and torch, never schedwidget or numpy."""
        tree = ast.parse(to_torch(DEMO, BASE, groups=MULTIPLIERS))
        names = {a.name for n in ast.walk(tree) if isinstance(n, (ast.Import, ast.ImportFrom))
                 for a in n.names}
        assert names == {"math", "torch"}

    def test_step_comments(self):
        """Unit "step": step after optimizer.step() in the batch loop; accumulation, AMP and resuming explained."""
        text = to_torch(DEMO, BASE, steps=Budget(samples=147_200, batch=128, epochs=90), steps_per_epoch=1150)
        assert "#             optimizer.step()\n#             optimizer.zero_grad()\n" \
               "#             scheduler.step()  # once per optimizer update, right after optimizer.step()" in text
        for words in ("Budget: 103,500 steps (90 epochs of 1,150 steps)", "not micro-batches", "GradScaler",
                      "still advances t", "scheduler.state_dict()", "BEFORE optimizer.load_state_dict",
                      "LambdaLR(..., last_epoch=k - 1) needs \"initial_lr\"", "start_tick=k"):
            assert words in text, words

    def test_epoch_comments(self):
        """Unit "epoch": step once after each epoch, outside the batch loop."""
        text = to_torch(EPOCH_DESIGN, BASE, unit="epoch")
        assert "#             optimizer.zero_grad()\n#         scheduler.step()  # once per epoch" in text
        assert "every update in epoch e uses the rate for t = e" in text

    def test_no_foreign_names(self):
        """Only torch's own API names appear; no other scheduler vocabulary."""
        text = to_torch(DEMO, BASE, groups=MULTIPLIERS)
        for word in ("T_max", "T_0", "T_mult", "eta_min", "gamma", "milestones", "pct_start", "div_factor",
                     "anneal_strategy", "min_lr", "cooldown", "threshold_mode", "get_cosine_schedule_with_warmup"):
            assert word not in text, word
        assert set(re.findall(r"\b[A-Z][A-Za-z]*LR\b", text)) == {"LambdaLR"}

    def test_group_count_is_checked(self, torch):
        """An optimizer with another number of param groups is refused when the scheduler is built."""
        ns = _snippet_namespace(torch, to_torch(STEP_DESIGN, BASE, groups=MULTIPLIERS))
        model = make_model(torch)
        one = torch.optim.SGD(model.parameters(), lr=BASE)
        with pytest.raises(ValueError, match=r"exported for 2 param group\(s\), the optimizer has 1"):
            ns["make_scheduler"](one)

    def test_group_rate_is_checked(self, torch):
        """A group that does not start at BASE_LR is refused (its multiplier would apply twice)."""
        ns = _snippet_namespace(torch, to_torch(STEP_DESIGN, BASE, groups=MULTIPLIERS))
        model = make_model(torch)
        opt = torch.optim.SGD([{"params": list(model[0].parameters())},
                               {"params": list(model[4].parameters()), "lr": 0.01}], lr=BASE)
        with pytest.raises(ValueError, match=r"param_groups\[1\] starts at lr=0.01, not BASE_LR=0.1"):
            ns["make_scheduler"](opt)

    def test_one_rate_for_every_group(self, torch):
        """Without groups every param group follows the design itself."""
        ns = _snippet_namespace(torch, to_torch(STEP_DESIGN, BASE))
        opt = make_optimizer(torch, make_model(torch))
        scheduler = ns["make_scheduler"](opt, start_tick=12)
        assert [g["lr"] for g in opt.param_groups] == pytest.approx([STEP_DESIGN(12)] * 2, rel=1e-12)
        assert scheduler.last_epoch == 12

    def test_budget_mismatch(self):
        """A design exported for a budget of another length is a ScheduleError naming both."""
        with pytest.raises(ScheduleError, match=r"to_torch: steps must equal the design's length of 103,500 steps, "
                                                r"got 12,870 steps \(90 epochs x 143 steps"):
            to_torch(DEMO, BASE, steps=Budget(samples=147_200, batch=1024, epochs=90))
        with pytest.raises(ScheduleError, match=r"got 90 steps .*steps and epochs are mixed up"):
            to_torch(DEMO, BASE, steps=90)

    @pytest.mark.parametrize("name", ["make_scheduler", "torch", "BASE_LR", "ExportedFactor", "GROUP_MULTIPLIERS",
                                      "lr_at()", "lr_\u0430t", "__import__", "def"])
    def test_names_are_checked(self, name):
        """The function name cannot inject code or clash with the snippet's own names."""
        with pytest.raises(ScheduleError, match=r"to_torch: name must be"):
            to_torch(DEMO, BASE, name=name)

    @pytest.mark.parametrize("name,error", [("self", RecursionError), ("t", TypeError), ("__x", NameError)])
    def test_names_that_fail_at_run_time(self, torch, name, error):
        """self and t are the factor class's own names and __x is renamed inside it: each is refused."""
        with pytest.raises(ScheduleError, match=rf"to_torch: name must be .*got '{name}'"):
            to_torch(STEP_DESIGN, BASE, name=name)
        text = to_torch(STEP_DESIGN, BASE).replace("lr_at", name)   # what the snippet would have been
        with pytest.raises(error):
            _snippet_namespace(torch, text)["make_scheduler"](make_optimizer(torch, make_model(torch)))

    @pytest.mark.parametrize("name", ["_x", "_lr_at"])
    def test_private_names(self, name):
        """A leading underscore marks a private (or, doubled, a mangled) name: refused."""
        with pytest.raises(ScheduleError, match=r"to_torch: name must be a public identifier, not starting with _"):
            to_torch(STEP_DESIGN, BASE, name=name)

    @pytest.mark.parametrize("name", ["rate", "multiplier", "groups", "group", "factors", "start_tick", "lr", "i", "x"])
    def test_accepted_names_run(self, torch, name):
        """Names the snippet's make_scheduler uses as its own locals stay usable: the rates follow the design."""
        ns = _snippet_namespace(torch, to_torch(STEP_DESIGN, BASE, groups=MULTIPLIERS, name=name))
        opt = make_optimizer(torch, make_model(torch))
        scheduler = ns["make_scheduler"](opt, start_tick=12)
        assert [g["lr"] for g in opt.param_groups] == pytest.approx([STEP_DESIGN(12) * m for m in MULTIPLIERS],
                                                                     rel=1e-12)
        assert ns[name](12) == scheduler.lr_lambdas[0](12) * BASE

    def test_core_does_not_import_torch(self):
        """Writing torch code does not import torch."""
        code = ("import sys; from schedwidget.export import to_torch; from schedwidget import cosine; "
                "to_torch(cosine(0.1, steps=10), 0.1); assert 'torch' not in sys.modules")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
        assert out.returncode == 0, out.stderr
