"""Case 3: per-step cost in a training loop.

Three figures over every tick of the reference design sized to ``TICKS`` ticks
(so each branch - warmup, every cycle - is visited as often as in training):

* the generated stdlib function (``to_python``), per call;
* ``LambdaLR.step()`` with our factor object (``torch_factor``), per step;
* ``LambdaLR.step()`` with a trivial constant lambda: the framework's own cost.

The factor's added cost is the difference of the last two, measured in the same
rounds.  The plain-Python function written by hand (case 1's contender) is shown
beside the generated one.
"""

from __future__ import annotations

import numpy as np

from .design import plain_python, reference
from .harness import Result, Target, race, unavailable

CASE = "3 per step"
TICKS = 20_000
QUICK_TICKS = 500
CALL = Target("<=", 1.0)        # microseconds per call of the generated function
ADDED = Target("<=", 0.5)       # microseconds the factor adds to LambdaLR.step()


def _generated(s):
    from schedwidget.export import to_python

    namespace: dict = {}
    exec(compile(to_python(s), "<bench lr_at>", "exec"), namespace)
    return namespace["lr_at"]


def _stepper(torch, factor, ticks: int):
    def go() -> None:
        p = torch.nn.Parameter(torch.zeros(1))
        opt = torch.optim.SGD([p], lr=0.1)
        sched = torch.optim.lr_scheduler.LambdaLR(opt, factor)
        opt.step()  # no gradient, nothing moves; torch sees the documented call order
        for _ in range(ticks):
            sched.step()
    return go


def run(quick: bool = False) -> list[Result]:
    """Every row of case 3 (``quick``: a short run, two rounds)."""
    ticks = QUICK_TICKS if quick else TICKS
    repeat = 2 if quick else 15
    s = reference(ticks)
    rows: list[Result] = []
    try:
        fn = _generated(s)
        from schedwidget.export import torch_factor
    except ImportError as exc:
        return [unavailable(CASE, "generated function per call", f"the exporter is not available yet ({exc})")]
    ts = list(range(ticks))
    want = s(np.arange(ticks))
    err = float(np.max(np.abs(np.array([fn(t) for t in ts]) - want)))
    if err > 1e-12:
        raise AssertionError(f"the generated function differs from the design by {err:g}")
    plain = plain_python(ticks)
    timed = race({"generated": lambda: [fn(t) for t in ts], "plain": lambda: [plain(t) for t in ts],
                  "loop": lambda: [t for t in ts]}, repeat)
    us = {k: v["min"] / ticks * 1e6 for k, v in timed.items()}
    rows += [
        Result.measured(CASE, "generated lr_at(t) per call", ticks, us["generated"], "us", target=CALL,
                        median=timed["generated"]["median"] / ticks * 1e6,
                        note="includes the list-comprehension loop around the call (loop alone: "
                             f"{us['loop'] * 1e3:.0f} ns per tick)"),
        Result.measured(CASE, "hand-written plain function per call", ticks, us["plain"], "us"),
    ]
    try:
        import torch
    except ImportError:
        return rows + [unavailable(CASE, "LambdaLR.step() with our factor", "torch is not installed")]
    factor = torch_factor(s, base_lr=0.1)
    err = max(abs(factor(t) * 0.1 - float(want[t])) for t in range(0, ticks, max(1, ticks // 997)))
    if err > 1e-12:
        raise AssertionError(f"the factor differs from the design by {err:g}")
    timed = race({"ours": (_stepper(torch, factor, ticks), 1), "const": (_stepper(torch, lambda t: 1.0, ticks), 1),
                  "bare": (_stepper(torch, lambda t: 1.0, 0), 1)}, repeat)
    setup = timed["bare"]["min"]
    step = {k: (timed[k]["min"] - setup) / ticks * 1e6 for k in ("ours", "const")}
    med = {k: (timed[k]["median"] - timed["bare"]["median"]) / ticks * 1e6 for k in ("ours", "const")}
    rows += [
        Result.measured(CASE, "LambdaLR.step() with our factor", ticks, step["ours"], "us", median=med["ours"],
                        note="per step, after subtracting building the optimizer and scheduler"),
        Result.measured(CASE, "LambdaLR.step() with a constant lambda", ticks, step["const"], "us",
                        median=med["const"]),
        Result.measured(CASE, "factor adds to LambdaLR.step()", ticks, step["ours"] - step["const"], "us",
                        target=ADDED, median=med["ours"] - med["const"]),
        Result.measured(CASE, "LambdaLR.step() ours / constant", ticks, step["ours"] / step["const"], "x", "ratio"),
    ]
    return rows
