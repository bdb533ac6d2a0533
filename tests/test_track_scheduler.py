"""TrackClock through make_scheduler and the ready snippet: every group's lr and tracked keys at every tick, the
checks on the optimizer, and checkpoints resumed exactly, also in a fresh process."""

from __future__ import annotations

import json
import random
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, flat, make_scheduler, one_cycle, ramp, save, stages, to_torch
from schedwidget import warmup
from schedwidget.clock import TrackClock
from schedwidget.tracks import as_groups, inverse_momentum, load_tracks, per_group, tracks

ROOT = Path(__file__).resolve().parents[1]
TOTAL = 64  # ticks run: the designs' 60 and four held past the end
HEAD_RATE = one_cycle(0.05, steps=60)
DESIGN = per_group({
    # frozen for 10 ticks, then its own warmup into a cosine; momentum constant, weight decay rising
    "backbone": tracks(stages(flat(0.0, steps=10), warmup(cosine(0.01, 0.001, steps=40), steps=10)),
                       momentum=flat(0.9), weight_decay=ramp(0.0, 0.05, 60)),
    "head": tracks(HEAD_RATE, momentum=inverse_momentum(HEAD_RATE), weight_decay=flat(0.01)),
})


def build(torch, kind: str):
    """The small model (a body and a head, two param groups) and its optimizer, the same in every process."""
    torch.manual_seed(0)
    body, head = torch.nn.Linear(4, 8), torch.nn.Linear(8, 1)
    model = torch.nn.Sequential(body, torch.nn.Tanh(), head)
    groups = [{"params": body.parameters(), "name": "backbone"}, {"params": head.parameters(), "name": "head"}]
    if kind == "sgd":
        opt = torch.optim.SGD(groups, lr=0.1, momentum=0.5, weight_decay=0.0)
    else:
        opt = torch.optim.AdamW(groups, lr=0.1, betas=(0.5, 0.999), weight_decay=0.0)
    return model, opt


def read(opt) -> list[list[float]]:
    """Every group's lr, momentum (or both betas) and weight decay, as plain floats."""
    out = []
    for g in opt.param_groups:
        m = [g["momentum"]] if "momentum" in g else list(g["betas"])
        out.append([float(g["lr"]), *map(float, m), float(g["weight_decay"])])
    return out


def train(torch, model, opt, scheduler, start: int, stop: int) -> list:
    """Ticks start..stop-1 on seeded batches (batch k from seed k); the values each update used."""
    seen = []
    for k in range(start, stop):
        seen.append(read(opt))
        gen = torch.Generator().manual_seed(k)
        x = torch.randn(8, 4, generator=gen)
        loss = ((model(x) - x.sum(dim=1, keepdim=True)) ** 2).mean()
        loss.backward()
        opt.step()
        opt.zero_grad()
        scheduler.step()
    return seen


def resume_child(spec_path: str, ckpt_path: str, out_path: str, kind: str, how: str) -> None:
    """Run in a fresh process: rebuild model and optimizer, resume from the checkpoint, train to the end."""
    import torch

    ckpt = torch.load(ckpt_path)
    model, opt = build(torch, kind)
    model.load_state_dict(ckpt["model"])
    opt.load_state_dict(ckpt["optimizer"])
    if how == "state":
        scheduler = make_scheduler(opt, load_tracks(spec_path), state=ckpt["scheduler"])
    else:
        scheduler = make_scheduler(opt, load_tracks(spec_path))
        scheduler.load_state_dict(ckpt["scheduler"])
    tick = scheduler.tick
    seen = train(torch, model, opt, scheduler, tick, TOTAL)
    params = [p.detach().double().flatten().tolist() for p in model.parameters()]
    Path(out_path).write_text(json.dumps({"tick": tick, "seen": seen, "params": params}))


class TestRealModel:
    """Two param groups, three tracks, checkpointed at a seeded random tick and resumed in a fresh process."""

    @pytest.mark.parametrize("kind,how,seed", [("sgd", "state", 1), ("adamw", "load_state_dict", 2)])
    def test_resume_in_a_fresh_process(self, torch, tmp_path, kind, how, seed):
        spec = tmp_path / "design.json"
        save(DESIGN, spec)
        k = random.Random(seed).randrange(1, TOTAL - 1)
        model, opt = build(torch, kind)
        scheduler = make_scheduler(opt, DESIGN)
        assert isinstance(scheduler, TrackClock)
        seen = train(torch, model, opt, scheduler, 0, k)
        torch.save({"model": model.state_dict(), "optimizer": opt.state_dict(),
                    "scheduler": scheduler.state_dict()}, tmp_path / "ckpt.pt")
        seen += train(torch, model, opt, scheduler, k, TOTAL)
        # every value each update used is the design's, in every group and key
        g = as_groups("test", DESIGN)
        for t, groups in enumerate(seen):
            for values, tr in zip(groups, g.groups):
                momentum = [tr.momentum(t)] + ([] if kind == "sgd" else [0.999])
                assert values == [tr.rate(t), *momentum, tr.weight_decay(t)], (t, values)
        out = tmp_path / "out.json"
        code = ("import sys; from tests.test_track_scheduler import resume_child; "
                f"resume_child({str(spec)!r}, {str(tmp_path / 'ckpt.pt')!r}, {str(out)!r}, {kind!r}, {how!r})")
        subprocess.run([sys.executable, "-c", code], cwd=ROOT, check=True, timeout=300)
        child = json.loads(out.read_text())
        assert child["tick"] == k
        assert child["seen"] == seen[k:]
        assert child["params"] == [p.detach().double().flatten().tolist() for p in model.parameters()]


class TestMakeScheduler:
    """make_scheduler routes tracks and per-group designs to TrackClock and checks the optimizer."""

    def sgd(self, torch, n=2, **kw):
        layers = [torch.nn.Linear(2, 2) for _ in range(n)]
        return torch.optim.SGD([{"params": x.parameters()} for x in layers], lr=0.1, momentum=0.9, **kw)

    def test_single_design_keeps_lambda_lr(self, torch):
        s = make_scheduler(self.sgd(torch), cosine(0.1, steps=10))
        assert type(s).__name__ == "LambdaLR"

    def test_multipliers_scale_only_the_rate(self, torch):
        opt = self.sgd(torch, weight_decay=0.1)
        tr = tracks(HEAD_RATE, momentum=inverse_momentum(HEAD_RATE), weight_decay=flat(0.02))
        c = make_scheduler(opt, tr, groups=[1.0, 0.1])
        for t in range(0, 65, 7):
            c.tick = t - 1
            c.step()
            a, b = opt.param_groups
            assert (a["lr"], b["lr"]) == (HEAD_RATE(t), HEAD_RATE(t) * 0.1)
            assert a["momentum"] == b["momentum"] == tr.momentum(t) and a["weight_decay"] == 0.02

    def test_a_loaded_design(self, torch, tmp_path):
        from schedwidget import load_design

        save(DESIGN, tmp_path / "d.json")
        d = load_design(tmp_path / "d.json")
        assert d.tracks == DESIGN and d.schedule == as_groups("test", DESIGN).groups[0].rate
        c = make_scheduler(self.sgd(torch), d)
        assert isinstance(c, TrackClock) and c.design == DESIGN

    def test_start_tick(self, torch):
        opt = self.sgd(torch)
        c = make_scheduler(opt, DESIGN, start_tick=30)
        g = as_groups("test", DESIGN)
        assert [x["lr"] for x in opt.param_groups] == [g.groups[0].rate(30), g.groups[1].rate(30)]
        assert c.state_dict()["tick"] == 30

    def test_adam_betas(self, torch):
        p = torch.nn.Parameter(torch.zeros(1))
        opt = torch.optim.Adam([p], lr=0.1)
        make_scheduler(opt, tracks(HEAD_RATE, momentum=inverse_momentum(HEAD_RATE), beta2=flat(0.99)))
        assert opt.param_groups[0]["betas"] == (0.95, 0.99)

    def test_tensor_lr_keeps_its_identity(self, torch):
        p = torch.nn.Parameter(torch.zeros(1))
        opt = torch.optim.Adam([p], lr=torch.tensor(0.1))
        lr = opt.param_groups[0]["lr"]
        c = make_scheduler(opt, tracks(HEAD_RATE))
        c.step()
        assert opt.param_groups[0]["lr"] is lr and float(lr) == pytest.approx(HEAD_RATE(1), rel=1e-6)

    def test_missing_keys_are_named(self, torch):
        p = torch.nn.Parameter(torch.zeros(1))
        with pytest.raises(ScheduleError, match=r"param_groups\[0\] must be a group with a 'momentum' \(SGD, "
                                                r"RMSprop\) or 'betas' \(Adam, AdamW, ...\) entry for the momentum track"):
            make_scheduler(torch.optim.Adagrad([p], lr=0.1), tracks(HEAD_RATE, momentum=flat(0.9)))
        with pytest.raises(ScheduleError, match=r"param_groups\[0\] must be a group with a 'betas' .* for the beta2"):
            make_scheduler(torch.optim.RMSprop([p], lr=0.1), tracks(HEAD_RATE, beta2=flat(0.99)))
        opt = self.sgd(torch)
        del opt.param_groups[1]["weight_decay"]
        with pytest.raises(ScheduleError, match=r"param_groups\[1\] must be a group with a 'weight_decay' entry"):
            make_scheduler(opt, tracks(HEAD_RATE, weight_decay=flat(0.01)), groups=[1, 1])

    def test_group_count_and_names(self, torch):
        with pytest.raises(ScheduleError, match=r"design must be one design per param group: the optimizer has 3, "
                                                r"got designs for 2"):
            make_scheduler(self.sgd(torch, 3), DESIGN)
        with pytest.raises(ScheduleError, match=r"groups must be None when a design is given per group"):
            make_scheduler(self.sgd(torch), DESIGN, groups=[1, 1])
        model, opt = build(torch, "sgd")
        with pytest.raises(ScheduleError, match=r"param_groups\[0\]\['name'\] must be 'head', the name of design 0"):
            make_scheduler(opt, per_group({"head": HEAD_RATE, "backbone": HEAD_RATE}))

    def test_base_lr_and_mixed_starts(self, torch):
        with pytest.raises(ScheduleError, match=r"base_lr must be None with tracks or per-group designs"):
            make_scheduler(self.sgd(torch), DESIGN, base_lr=0.1)
        a, b = torch.nn.Linear(2, 2), torch.nn.Linear(2, 2)
        opt = torch.optim.SGD([{"params": a.parameters()}, {"params": b.parameters(), "lr": 1.0}], lr=0.1)
        with pytest.raises(ScheduleError, match=r"groups must be given when the param groups start at different "
                                                r"lrs \(0.1, 1.0\)"):
            make_scheduler(opt, tracks(HEAD_RATE))

    def test_another_design_in_a_checkpoint(self, torch):
        opt = self.sgd(torch)
        state = make_scheduler(opt, DESIGN, start_tick=12).state_dict()
        other = per_group([HEAD_RATE, HEAD_RATE * 0.5])
        with pytest.raises(ScheduleError, match=r"state\['design'\] must be this clock's design, got another design"):
            make_scheduler(opt, other, state=state)
        kept = make_scheduler(opt, other, state=state, resume_with="new")
        assert kept.tick == 12 and opt.param_groups[1]["lr"] == HEAD_RATE(12) * 0.5
        saved = make_scheduler(opt, other, state=state, resume_with="saved")
        assert saved.design == DESIGN and opt.param_groups[1]["lr"] == HEAD_RATE(12)
        with pytest.raises(ScheduleError, match=r"state\['tick'\] must be a whole number >= 0"):
            saved.load_state_dict({**state, "tick": -1})


class TestSnippet:
    """The ready snippet runs the same values with only the standard library."""

    @pytest.mark.parametrize("kind", ["sgd", "adamw"])
    def test_same_values_as_the_clock(self, torch, kind):
        text = to_torch(DESIGN, steps=60)
        assert "import torch" not in text and "class TrackClock:" in text
        ns: dict = {}
        exec(text, ns)
        _, opt = build(torch, kind)
        _, ref = build(torch, kind)
        ours, theirs = ns["make_scheduler"](opt), make_scheduler(ref, DESIGN)
        for _ in range(TOTAL):
            assert read(opt) == read(ref)
            ours.step()
            theirs.step()
        state = ours.state_dict()
        again = ns["make_scheduler"](build(torch, kind)[1], start_tick=0)
        again.load_state_dict(state)
        assert again.tick == TOTAL

    def test_refusals(self, torch):
        ns: dict = {}
        exec(to_torch(tracks(HEAD_RATE, beta2=flat(0.99))), ns)
        p = torch.nn.Parameter(torch.zeros(1))
        with pytest.raises(ValueError, match=r"param_groups\[0\] has no 'betas' entry for the beta2 track"):
            ns["make_scheduler"](torch.optim.SGD([p], lr=0.1))
        with pytest.raises(ValueError, match=r"exported for 1 param group\(s\), the optimizer has 2"):
            ns["make_scheduler"](TestMakeScheduler().sgd(torch))
        with pytest.raises(ScheduleError, match=r"to_torch: base_lr must be None with tracks"):
            to_torch(DESIGN, 0.1)
        with pytest.raises(ScheduleError, match=r"budget|steps"):
            to_torch(DESIGN, steps=50)


def test_values_match_the_designs_at_every_tick():
    """TrackClock on a plain object with param_groups (no torch): the core's values at every tick."""

    class Plain:
        param_groups = [{"lr": 0.0, "momentum": 0.0, "weight_decay": 0.0},
                        {"lr": 0.0, "betas": (0.0, 0.999), "weight_decay": 0.0}]

    opt = Plain()
    c = TrackClock(opt, DESIGN)
    g = as_groups("test", DESIGN)
    t = np.arange(TOTAL)
    rows = []
    for _ in t:
        rows.append((opt.param_groups[0]["lr"], opt.param_groups[0]["momentum"], opt.param_groups[1]["betas"][0],
                     opt.param_groups[1]["weight_decay"]))
        c.step()
    a = np.array(rows)
    assert a[:, 0].tolist() == g.groups[0].rate(t).tolist()
    assert a[:, 1].tolist() == g.groups[0].momentum(t).tolist()
    assert a[:, 2].tolist() == g.groups[1].momentum(t).tolist()
    assert a[:, 3].tolist() == g.groups[1].weight_decay(t).tolist()
