"""make_scheduler and the factor's state: no silent wrong rate in a real torch training loop (torch 2.13).

Each silent-wrong case of the factor route is trained for real: a head group already at 10x with a 10x
multiplier, a checkpoint of another design loaded into an extended run, and crafted or corrupted factor states.
Each is refused with a message that names what was found; each documented choice gives the exact rates.
"""

from __future__ import annotations

import ast
import copy
import json
import math
import pathlib
import pickle
import re
import subprocess
import sys

import numpy as np
import pytest

import schedwidget
from schedwidget import ScheduleError, cosine, make_scheduler, to_torch, torch_factor, warmup
from schedwidget import export

BASE = 0.01
#: The planned run: 10 ticks of warmup, 30 of cosine; checkpointed at its end (tick 40), where its rate is 0.
OLD = warmup(cosine(BASE, steps=30), steps=10)
#: The same design stretched to 610 ticks after the checkpoint was taken (at tick 40 its rate is still 0.00998).
NEW = warmup(cosine(BASE, steps=600), steps=10)
SAVED_AT, END = 40, 70


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


def model_and_optimizer(torch, head_lr=None, lr=BASE):
    """A body and a head (two param groups); the head at ``head_lr`` when given (the usual 10x set-up)."""
    torch.manual_seed(0)
    body, head = torch.nn.Linear(6, 8), torch.nn.Linear(8, 3)
    model = torch.nn.Sequential(body, torch.nn.ReLU(), head)
    second = {"params": list(head.parameters())}
    if head_lr is not None:
        second["lr"] = head_lr
    return model, torch.optim.SGD([{"params": list(body.parameters())}, second], lr=lr, momentum=0.9)


def train(torch, model, optimizer, scheduler, start, end):
    """Invented demo data (seeded random features, three classes); the rate of every update in every group."""
    g = torch.Generator().manual_seed(1)
    x, y = torch.randn(24, 6, generator=g), torch.randint(0, 3, (24,), generator=g)
    rates = []
    for t in range(start, end):
        rates.append([group["lr"] for group in optimizer.param_groups])
        rows = slice((t % 2) * 12, (t % 2) * 12 + 12)
        torch.nn.functional.cross_entropy(model(x[rows]), y[rows]).backward()
        optimizer.step()
        optimizer.zero_grad()
        scheduler.step()
    return rates


def checkpoint(torch, tmp_path, design, groups=(1.0, 0.5)):
    """Train ``design`` to SAVED_AT and reload the checkpoint as a new process would (weights_only, nothing cached)."""
    model, optimizer = model_and_optimizer(torch)
    scheduler = make_scheduler(optimizer, design, groups=list(groups))
    rates = train(torch, model, optimizer, scheduler, 0, SAVED_AT)
    path = tmp_path / "ckpt.pt"
    torch.save({"model": model.state_dict(), "optimizer": optimizer.state_dict(),
                "scheduler": scheduler.state_dict()}, path)
    export._COMPILED.clear()
    return rates, torch.load(path, weights_only=True)


def uninterrupted(torch, design, groups=(1.0, 0.5)):
    model, optimizer = model_and_optimizer(torch)
    return train(torch, model, optimizer, make_scheduler(optimizer, design, groups=list(groups)), 0, END)


# ------------------------------------------------------------------ param groups
class TestGroups:
    """Every param group's starting lr is checked against base_lr and its multiplier."""

    def test_head_at_10x_with_a_10x_multiplier_is_refused(self, torch):
        """The usual set-up (head built at 10x) plus groups=[1, 10] would run the head at 100x: refused."""
        _, optimizer = model_and_optimizer(torch, head_lr=10 * BASE)
        with pytest.raises(ScheduleError, match=re.escape(
                "make_scheduler: param_groups[1]['lr'] must be base_lr=0.01 when groups[1]=10 sets its share "
                "(it starts at 10x base_lr, and the multiplier would apply on top: a 100x rate), got 0.1 "
                "(set that group's lr to base_lr, or pass groups=[1, 1] to keep the 10x its lr already gives)")):
            make_scheduler(optimizer, OLD, base_lr=BASE, groups=[1, 10])
        assert [g["lr"] for g in optimizer.param_groups] == [BASE, 10 * BASE]   # nothing was touched

    def test_the_factor_alone_gives_100x(self, torch):
        """Why the check exists: LambdaLR with torch_factor on that set-up runs the head at 100x, silently."""
        _, optimizer = model_and_optimizer(torch, head_lr=10 * BASE)
        scheduler = torch.optim.lr_scheduler.LambdaLR(optimizer, torch_factor(OLD, BASE, groups=[1, 10]))
        for _ in range(10):
            optimizer.step()
            scheduler.step()
        assert optimizer.param_groups[1]["lr"] == pytest.approx(100 * OLD(10), rel=1e-12)

    def test_fix_head_at_base_lr(self, torch):
        """Documented fix 1: the head built at base_lr, groups=[1, 10]: the same bits as the exported snippet."""
        model, optimizer = model_and_optimizer(torch)
        ours = train(torch, model, optimizer, make_scheduler(optimizer, OLD, groups=[1, 10]), 0, END)
        namespace = {}
        exec(to_torch(OLD, BASE, groups=[1, 10]), namespace)
        model, optimizer = model_and_optimizer(torch)
        snippet = train(torch, model, optimizer, namespace["make_scheduler"](optimizer), 0, END)
        assert ours == snippet
        np.testing.assert_allclose(ours, OLD(np.arange(END))[:, None] * [1, 10], rtol=1e-12, atol=1e-18)

    def test_fix_keep_the_head_lr(self, torch):
        """Documented fix 2: the head keeps its 10x lr, groups=[1, 1]: the head runs at exactly 10x the design."""
        model, optimizer = model_and_optimizer(torch, head_lr=10 * BASE)
        rates = train(torch, model, optimizer, make_scheduler(optimizer, OLD, base_lr=BASE, groups=[1, 1]), 0, END)
        t = np.arange(END)
        np.testing.assert_allclose(rates, OLD(t)[:, None] * [1, 10], rtol=1e-12, atol=1e-18)
        f = torch_factor(OLD, BASE)              # LambdaLR's own formula: starting lr x factor
        assert rates == [[BASE * f(t), 10 * BASE * f(t)] for t in range(END)]

    def test_base_lr_none_takes_the_common_lr(self, torch):
        """base_lr=None: every group starts at the same lr, and that is the base."""
        model, optimizer = model_and_optimizer(torch)
        scheduler = make_scheduler(optimizer, OLD, groups=[1, 0.5])
        assert [f.base_lr for f in scheduler.lr_lambdas] == [BASE, BASE]
        assert [f.multiplier for f in scheduler.lr_lambdas] == [1.0, 0.5]

    def test_base_lr_none_with_different_lrs_is_refused(self, torch):
        """base_lr=None with groups at different lrs: which one the design means is ambiguous."""
        _, optimizer = model_and_optimizer(torch, head_lr=10 * BASE)
        with pytest.raises(ScheduleError, match=re.escape(
                "make_scheduler: base_lr must be given when the param groups start at different lrs "
                "(found 0.01, 0.1), got None (pass the lr the design's rates are meant for, e.g. base_lr=0.01")):
            make_scheduler(optimizer, OLD)

    def test_base_lr_no_group_starts_at(self, torch):
        """A base_lr that no group starts at would scale every rate: refused."""
        _, optimizer = model_and_optimizer(torch, lr=0.001)
        with pytest.raises(ScheduleError, match=re.escape(
                "make_scheduler: base_lr must be the starting lr of a param group (found 0.001), got 0.01 "
                "(build the optimizer with lr=base_lr, or pass base_lr=0.001; otherwise every rate would be 0.1x")):
            make_scheduler(optimizer, OLD, base_lr=BASE)

    def test_group_count(self, torch):
        """One multiplier per param group."""
        _, optimizer = model_and_optimizer(torch)
        with pytest.raises(ScheduleError, match=r"make_scheduler: groups must be one multiplier per param group: "
                                                r"the optimizer has 2, got \[1\.0, 0\.1, 0\.5\]"):
            make_scheduler(optimizer, OLD, groups=[1.0, 0.1, 0.5])

    @pytest.mark.parametrize("bad,where", [(-1, "start_tick"), (1.5, "start_tick"), (True, "start_tick")])
    def test_bad_start_tick(self, torch, bad, where):
        """start_tick is a whole number >= 0, as in the snippet."""
        _, optimizer = model_and_optimizer(torch)
        with pytest.raises(ScheduleError, match=rf"make_scheduler: {where} must be a whole number >= 0"):
            make_scheduler(optimizer, OLD, start_tick=bad)

    def test_not_an_optimizer(self, torch):
        """Anything but a torch optimizer is refused by name."""
        with pytest.raises(ScheduleError, match=r"make_scheduler: optimizer must be a torch optimizer .*got a list"):
            make_scheduler([], OLD)
        _, optimizer = model_and_optimizer(torch)
        with pytest.raises(ScheduleError, match=r"make_scheduler: design must be a Schedule .*got 'cosine'"):
            make_scheduler(optimizer, "cosine")

    def test_start_tick_as_the_snippet(self, torch, tmp_path):
        """Resume by tick: make_scheduler(optimizer, design, start_tick=k) continues with the uninterrupted rates."""
        whole = uninterrupted(torch, OLD)
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        k = 17
        model, optimizer = model_and_optimizer(torch)       # a fresh optimizer: no initial_lr yet
        scheduler = make_scheduler(optimizer, OLD, groups=[1, 0.5], start_tick=k)
        assert all(g["initial_lr"] == BASE for g in optimizer.param_groups)
        assert train(torch, model, optimizer, scheduler, k, END) == whole[k:]
        model, optimizer = model_and_optimizer(torch)       # the saved optimizer: initial_lr from the checkpoint
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler = make_scheduler(optimizer, OLD, groups=[1, 0.5], start_tick=SAVED_AT)
        assert train(torch, model, optimizer, scheduler, SAVED_AT, END) == whole[SAVED_AT:]

    def test_core_never_imports_torch(self):
        """export.py, factor.py and scheduler.py have no torch import statement, and make_scheduler without
        torch loaded imports none."""
        for module in ("export", "factor", "scheduler"):
            tree = ast.parse((pathlib.Path(export.__file__).parent / f"{module}.py").read_text("utf-8"))
            names = {a.name.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
            names |= {(n.module or "").split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
            assert "torch" not in names
        code = ("import sys, schedwidget as s\n"
                "try:\n    s.make_scheduler(object(), s.cosine(0.1, steps=10))\n"
                "except s.ScheduleError as e:\n    print(e)\n"
                "assert 'torch' not in sys.modules")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
        assert out.returncode == 0, out.stderr
        assert out.stdout.startswith("make_scheduler: optimizer must be a torch optimizer")

    def test_a_design_from_a_spec_file(self, torch, tmp_path):
        """A Design (schedule and unit, from load_design) runs like its schedule."""
        schedwidget.save(OLD, tmp_path / "run.json", unit="step")
        _, optimizer = model_and_optimizer(torch)
        scheduler = make_scheduler(optimizer, schedwidget.load_design(tmp_path / "run.json"))
        assert scheduler.lr_lambdas[0] == torch_factor(OLD, BASE)

    def test_public(self):
        """make_scheduler is a public name of the package."""
        assert "make_scheduler" in schedwidget.__all__ and schedwidget.make_scheduler is make_scheduler


# ------------------------------------------------------------------ a checkpoint of another design
class TestResumeOtherDesign:
    """The run is extended after its checkpoint: the old state never silently replaces the new design."""

    def test_plain_load_is_refused(self, torch, tmp_path):
        """scheduler.load_state_dict(old) into a scheduler of the new design: refused at the next step."""
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        model, optimizer = model_and_optimizer(torch)
        scheduler = make_scheduler(optimizer, NEW, groups=[1, 0.5])
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler.load_state_dict(ckpt["scheduler"])
        with pytest.raises(ScheduleError, match=
                r"RateFactor: a loaded state's design must be the new design this factor was built with, "
                r"1 x warmup\(target=cosine\(peak=0\.01, floor=0\.0, steps=600\).*got the checkpoint's "
                r"1 x warmup\(target=cosine\(peak=0\.01, floor=0\.0, steps=30\).*resume_with='saved'\) continues on "
                r"the checkpoint's design, resume_with='new' continues on the new design from the saved tick"):
            train(torch, model, optimizer, scheduler, SAVED_AT, END)

    def test_issue_repro_with_the_factor_alone(self, torch, tmp_path):
        """The reported case: LambdaLR(opt, torch_factor(new)) + the old state kept the old design's 0.0 rate."""
        _, ckpt = checkpoint(torch, tmp_path, OLD, groups=(1.0, 1.0))
        model, optimizer = model_and_optimizer(torch)
        scheduler = torch.optim.lr_scheduler.LambdaLR(optimizer, torch_factor(NEW, BASE))
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler.load_state_dict(ckpt["scheduler"])
        assert OLD(SAVED_AT + 1) == 0.0 and NEW(SAVED_AT + 1) > 0.0099
        optimizer.step()
        with pytest.raises(ScheduleError, match=r"RateFactor: a loaded state's design must be the new design"):
            scheduler.step()
        assert [g["lr"] for g in optimizer.param_groups] == [0.0, 0.0]   # the saved tick's rate, nothing else set
        with pytest.raises(ScheduleError):                               # and it keeps refusing
            scheduler.step()

    def test_make_scheduler_refuses_without_a_choice(self, torch, tmp_path):
        """make_scheduler(state=old) with the new design: refused when built, naming both designs and the tick."""
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        _, optimizer = model_and_optimizer(torch)
        optimizer.load_state_dict(ckpt["optimizer"])
        with pytest.raises(ScheduleError, match=
                r"make_scheduler: state's design for param_groups\[0\] must be the new design "
                r"1 x warmup\(target=cosine\(peak=0\.01, floor=0\.0, steps=600\).* unless resume_with says which "
                r"to keep, got the checkpoint's 1 x warmup\(target=cosine\(peak=0\.01, floor=0\.0, steps=30\).*"
                r"\(pass resume_with='saved' to continue on the checkpoint's design, or resume_with='new' to "
                r"continue on the new design from the saved tick 40\)"):
            make_scheduler(optimizer, NEW, groups=[1, 0.5], state=ckpt["scheduler"])

    def test_resume_with_saved(self, torch, tmp_path):
        """resume_with='saved': exactly the rates the old run would have used from the saved tick on."""
        first, ckpt = checkpoint(torch, tmp_path, OLD)
        model, optimizer = model_and_optimizer(torch)
        model.load_state_dict(ckpt["model"])
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler = make_scheduler(optimizer, NEW, groups=[1, 0.5], state=ckpt["scheduler"], resume_with="saved")
        rest = train(torch, model, optimizer, scheduler, SAVED_AT, END)
        assert first + rest == uninterrupted(torch, OLD)
        assert rest[0] == [0.0, 0.0]

    def test_resume_with_new(self, torch, tmp_path):
        """resume_with='new': from the saved tick on, exactly the rates of an uninterrupted run of the new design."""
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        model, optimizer = model_and_optimizer(torch)
        model.load_state_dict(ckpt["model"])
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler = make_scheduler(optimizer, NEW, groups=[1, 0.5], state=ckpt["scheduler"], resume_with="new")
        rest = train(torch, model, optimizer, scheduler, SAVED_AT, END)
        assert rest == uninterrupted(torch, NEW)[SAVED_AT:]
        assert rest[0][0] == pytest.approx(NEW(SAVED_AT), rel=1e-12) and rest[0][0] > 0.0099
        # the next checkpoint carries the new design, and loads back without a choice
        state = scheduler.state_dict()
        assert json.loads(state["lr_lambdas"][0]["design"])["schedule"] == NEW.to_spec()["schedule"]
        _, again = model_and_optimizer(torch)
        again.load_state_dict(optimizer.state_dict())
        make_scheduler(again, NEW, groups=[1, 0.5], state=state)
        assert [g["lr"] for g in again.param_groups] == [g["lr"] for g in optimizer.param_groups]

    def test_same_design_needs_no_choice(self, torch, tmp_path):
        """The same design through make_scheduler(state=...): the uninterrupted rates, no keyword needed."""
        first, ckpt = checkpoint(torch, tmp_path, OLD)
        model, optimizer = model_and_optimizer(torch)
        optimizer.load_state_dict(ckpt["optimizer"])
        scheduler = make_scheduler(optimizer, OLD, groups=[1, 0.5], state=ckpt["scheduler"])
        assert first + train(torch, model, optimizer, scheduler, SAVED_AT, END) == uninterrupted(torch, OLD)

    def test_other_multiplier_is_another_design(self, torch, tmp_path):
        """A changed multiplier changes the rates: it needs a choice too."""
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        _, optimizer = model_and_optimizer(torch)
        optimizer.load_state_dict(ckpt["optimizer"])
        with pytest.raises(ScheduleError, match=r"param_groups\[1\] must be the new design 0\.25 x .*"
                                                r"got the checkpoint's 0\.5 x "):
            make_scheduler(optimizer, OLD, groups=[1, 0.25], state=ckpt["scheduler"])

    def test_long_designs_are_shown_where_they_differ(self):
        """Two long designs are cut to the part where they first differ, so the message stays short."""
        from schedwidget import flat, stages

        head = [flat(BASE, steps=10)] * 20
        f = torch_factor(stages(*head, cosine(BASE, steps=200)), BASE)
        f.__dict__.update(torch_factor(stages(*head, cosine(BASE, steps=100)), BASE).__dict__)
        with pytest.raises(ScheduleError) as info:
            f(1)
        text = str(info.value)
        assert re.search(r"built with, \.\.\..*steps=200\)\) \(base_lr 0\.01\), got the checkpoint's \.\.\..*"
                         r"steps=100\)\) \(base_lr 0\.01\)", text), text
        assert len(text) < 700

    def test_optimizer_state_first(self, torch, tmp_path):
        """make_scheduler(state=...) on an optimizer whose state was not loaded: refused (its lrs would be lost)."""
        _, ckpt = checkpoint(torch, tmp_path, OLD)
        _, optimizer = model_and_optimizer(torch)
        with pytest.raises(ScheduleError, match=r"make_scheduler: param_groups\[0\] must be the optimizer's state "
                                                r"from the checkpoint .*call optimizer.load_state_dict"):
            make_scheduler(optimizer, OLD, groups=[1, 0.5], state=ckpt["scheduler"])

    @pytest.mark.parametrize("kwargs,match", [
        (dict(resume_with="old"), r"resume_with must be None, 'saved' or 'new', got 'old'"),
        (dict(resume_with="saved", state=None), r"resume_with must be None when no state is given"),
        (dict(start_tick=3, state={}), r"start_tick must be 0 when state is given"),
    ])
    def test_bad_keywords(self, torch, kwargs, match):
        """resume_with is one of two words and needs a state; a state carries its own tick."""
        _, optimizer = model_and_optimizer(torch)
        with pytest.raises(ScheduleError, match=match):
            make_scheduler(optimizer, OLD, **kwargs)


# ------------------------------------------------------------------ crafted and corrupted states
GOOD = torch_factor(OLD, BASE).__dict__
BAD_FIELDS = [
    (dict(base_lr=0), r"base_lr must be a finite number > 0, got 0\b"),
    (dict(base_lr=0.0), r"base_lr must be a finite number > 0, got 0\.0"),
    (dict(base_lr=-1), r"base_lr must be a finite number > 0, got -1"),
    (dict(base_lr=math.nan), r"base_lr must be a finite number > 0, got nan"),
    (dict(base_lr=math.inf), r"base_lr must be a finite number > 0, got inf"),
    (dict(base_lr=10 ** 400), r"base_lr must be a finite number > 0, got 1000"),
    (dict(base_lr="0.01"), r"base_lr must be a finite number > 0, got '0\.01'"),
    (dict(base_lr=None), r"base_lr must be a finite number > 0, got None"),
    (dict(multiplier=-1), r"multiplier must be a finite number >= 0, got -1"),
    (dict(multiplier=math.nan), r"multiplier must be a finite number >= 0, got nan"),
    (dict(multiplier=math.inf), r"multiplier must be a finite number >= 0, got inf"),
    (dict(multiplier=-math.inf), r"multiplier must be a finite number >= 0, got -inf"),
    (dict(multiplier=[1.0]), r"multiplier must be a finite number >= 0, got \[1\.0\]"),
    (dict(multiplier=1e300, base_lr=1e-300), r"multiplier / base_lr must be a finite number, got inf"),
    (dict(design={"version": 1}), r"design must be the JSON text of a spec \(a str, as RateFactor saves it\), "
                                  r"got \{'version': 1\}"),
    (dict(design=[1, 2]), r"design must be the JSON text of a spec .*got \[1, 2\]"),
    (dict(design=None), r"design must be the JSON text of a spec .*got None"),
    (dict(design="{not json"), r"design must be the JSON text of a spec .*got '\{not json'"),
    (dict(design="[" * 100_000 + "]" * 100_000), r"design must be the JSON text of a spec .*got '\[\[\[\["),
    (dict(design='{"version": 1, "schedule": {"kind": "flat", "lr": -1}}'), r"design must be a valid spec: spec: "),
    (dict(design='{"version": 1, "schedule": {"kind": "eval", "code": "1"}}'), r"design must be a valid spec: spec: "),
    (dict(extra=1), r"state must be a dict with exactly the keys 'base_lr', 'design', 'multiplier' "
                    r"\(what RateFactor saves\), got \{'base_lr', 'design', 'extra', 'multiplier'\} "
                    r"\(unexpected 'extra'\)"),
]


def crafted(fields):
    return {**GOOD, **fields}


class TestCorruptedStates:
    """Every field of a loaded factor state is checked like a fresh one: no negative, NaN or infinite rate."""

    @pytest.mark.parametrize("fields,match", BAD_FIELDS)
    def test_loaded_through_lambda_lr(self, torch, fields, match):
        """A crafted state loaded with scheduler.load_state_dict: the next step refuses it, naming the field."""
        _, optimizer = model_and_optimizer(torch)
        scheduler = make_scheduler(optimizer, OLD)
        state = scheduler.state_dict()
        state["lr_lambdas"] = [crafted(fields), crafted(fields)]
        scheduler.load_state_dict(state)
        before = [g["lr"] for g in optimizer.param_groups]
        optimizer.step()
        with pytest.raises(ScheduleError, match=r"^RateFactor: " + match):
            scheduler.step()
        assert [g["lr"] for g in optimizer.param_groups] == before

    @pytest.mark.parametrize("fields,match", BAD_FIELDS)
    def test_given_to_make_scheduler(self, torch, fields, match):
        """The same states given to make_scheduler(state=...): refused before any rate is set."""
        _, optimizer = model_and_optimizer(torch)
        state = make_scheduler(optimizer, OLD).state_dict()
        state["lr_lambdas"] = [crafted(fields), crafted(fields)]
        for group in optimizer.param_groups:
            group["lr"] = 0.005                         # the saved tick's rate, as a loaded optimizer has it
        before = [dict(g, params=None) for g in optimizer.param_groups]
        for resume_with in (None, "saved", "new"):
            with pytest.raises(ScheduleError, match=r"^make_scheduler: state\['lr_lambdas'\]\[0\]: " + match):
                make_scheduler(optimizer, OLD, state=state, resume_with=resume_with)
        assert [dict(g, params=None) for g in optimizer.param_groups] == before   # nothing was touched

    @pytest.mark.parametrize("missing", ["design", "base_lr", "multiplier"])
    def test_missing_key(self, missing):
        """A state without one of its keys names the missing key."""
        f = torch_factor(OLD, BASE)
        del f.__dict__[missing]
        with pytest.raises(ScheduleError, match=rf"RateFactor: state must be a dict with exactly the keys .*"
                                                rf"\(missing '{missing}'\)"):
            f(3)

    @pytest.mark.parametrize("state,match", [
        ([], r"state must be a dict saved by scheduler.state_dict\(\), got \[\]"),
        ({"last_epoch": -2}, r"state\['last_epoch'\] must be a whole number >= 0"),
        ({"last_epoch": 3, "lr_lambdas": [None]}, r"state\['lr_lambdas'\] must be a list with one entry per "
                                                  r"param group \(2\)"),
        ({"last_epoch": 3, "lr_lambdas": [None, None], "base_lrs": [0.5, 0.5]},
         r"state\['base_lrs'\] must be each param group's starting lr in the loaded optimizer, \[0\.01, 0\.01\]"),
        ({"last_epoch": 3, "lr_lambdas": [None, None], "base_lrs": [BASE, BASE]},
         r"state\['lr_lambdas'\]\[0\] must be a saved RateFactor state, got None"),
    ])
    def test_bad_scheduler_state(self, torch, state, match):
        """A scheduler state that is not what LambdaLR.state_dict() saves is refused by field."""
        _, optimizer = model_and_optimizer(torch)
        make_scheduler(optimizer, OLD)                      # sets initial_lr, as a loaded optimizer has it
        with pytest.raises(ScheduleError, match=r"^make_scheduler: " + match):
            make_scheduler(optimizer, OLD, state=state)

    def test_a_good_state_with_other_spacing_loads(self, torch):
        """A valid design text in another layout (key order, spaces) is the same design."""
        f = torch_factor(OLD, BASE)
        g = torch_factor(OLD, BASE)
        g.__dict__.update(design=json.dumps(json.loads(f.design), indent=2))
        assert [g(t) for t in range(50)] == [f(t) for t in range(50)]

    def test_pickle_and_copy_are_checked(self):
        """pickle and copy rebuild a factor through the same checks."""
        f = torch_factor(OLD, BASE, groups=[0.5])[0]
        assert copy.deepcopy(f) == f and copy.copy(f)(12) == f(12)
        blob = pickle.dumps(f).replace(b"multiplier", b"multiplieX")
        with pytest.raises(ScheduleError, match=r"RateFactor: state must be a dict with exactly the keys"):
            pickle.loads(blob)

    def test_state_stays_plain(self):
        """Nothing of the checks lives in the instance __dict__ (a checkpoint carries only the three fields)."""
        f = torch_factor(OLD, BASE)
        f(3)
        f.__dict__.update(dict(f.__dict__))
        f(4)
        assert set(f.__dict__) == {"design", "base_lr", "multiplier"} and not hasattr(type(f), "__slots__")

    def test_records_go_with_the_factor(self):
        """What a factor was built with is kept outside it and dropped with it (no growth over many factors)."""
        import gc

        before = len(export._BUILT)
        for _ in range(200):
            torch_factor(OLD, BASE)(3)
        gc.collect()
        assert len(export._BUILT) == len(export._CHECKED) <= before + 1

    @pytest.mark.parametrize("t", [-1, 1.5, "3", None])
    def test_bad_tick(self, t):
        """A tick that is not a whole number >= 0 is a ScheduleError naming t."""
        with pytest.raises(ScheduleError, match=r"RateFactor: t must be a whole number of ticks >= 0"):
            torch_factor(OLD, BASE)(t)

    @pytest.mark.parametrize("value", [math.nan, -1e-3, math.inf, complex(0.1, 0.0)])
    def test_no_unusable_factor_is_returned(self, value):
        """Whatever the function behind a factor gives, a NaN, negative, infinite or complex value is refused."""
        f = torch_factor(OLD, BASE)
        seen, _, m, b = export._CHECKED[id(f)]
        export._CHECKED[id(f)] = (seen, lambda t: value, m, b)   # stands in for a numerics bug in a design
        with pytest.raises(ScheduleError, match=r"RateFactor: the factor at t=7 must be a finite number >= 0"):
            f(7)
