"""Case 1: evaluation throughput of ``s(np.arange(n))`` against stepping LambdaLR, the numpy floor and np.cos.

For each budget n the reference design is sized to n ticks.  Timed interleaved
over the same array: ours, the hand-written floor (b), a second hand-written
floor (searchsorted cycle index) and a bare ``np.cos`` pass; the floors are
checked equal to ours to 1e-12 before any timing.  The usual way (a) - stepping
torch's LambdaLR once per tick with the equivalent plain-Python function and
reading the rate - runs in the same rounds over the whole reference design sized
to ``LAMBDA_TICKS`` ticks (checked equal to ours tick by tick) and is reported
per tick: its cost per tick does not grow with the budget.
"""

from __future__ import annotations

import numpy as np

from .design import floor_numpy, floor_searchsorted, plain_python, reference
from .harness import Result, Target, race, unavailable

CASE = "1 eval"
SIZES = (10**3, 10**5, 10**6, 10**7)
QUICK_SIZES = (10**3,)
LAMBDA_TICKS = 20_000
QUICK_LAMBDA_TICKS = 500
TARGET_AT = 10**6                  # the issue sets both targets at 1e6 ticks
FASTER_THAN_STEPPING = Target(">=", 200.0)
OVER_FLOOR = Target("<=", 1.5)
EQUAL_TO = 1e-12


def _rounds(n: int, quick: bool) -> tuple[int, int]:
    """(repeat, number) so that each size takes a second or two."""
    if quick:
        return 2, 1
    return {10**3: (21, 200), 10**5: (21, 5), 10**6: (21, 1), 10**7: (7, 1)}.get(n, (5, 1))


def stepper(torch, ticks: int):
    """A callable that steps a fresh LambdaLR over the reference design sized to ``ticks`` and returns the rates."""
    fn = plain_python(ticks)

    def go() -> list[float]:
        p = torch.nn.Parameter(torch.zeros(1))
        opt = torch.optim.SGD([p], lr=0.1)
        sched = torch.optim.lr_scheduler.LambdaLR(opt, lambda t: fn(t) / 0.1)
        opt.step()  # no gradient, nothing moves; torch sees the documented call order
        out = []
        for _ in range(ticks):
            out.append(sched.get_last_lr()[0])
            sched.step()
        return out

    return go


def _usual_way(quick: bool):
    """The stepping contender, checked equal to ours, or a Result saying why it cannot run."""
    try:
        import torch
    except ImportError:
        return unavailable(CASE, "(a) LambdaLR stepped per tick", "torch is not installed")
    ticks = QUICK_LAMBDA_TICKS if quick else LAMBDA_TICKS
    go = stepper(torch, ticks)
    err = float(np.max(np.abs(np.asarray(go()) - reference(ticks)(np.arange(ticks)))))
    if err > EQUAL_TO:
        raise AssertionError(f"LambdaLR with the plain-Python design differs from ours by {err:g}")
    return go, ticks


def run(quick: bool = False) -> list[Result]:
    """Every row of case 1 (``quick``: the smallest size, two rounds)."""
    rows: list[Result] = []
    usual = _usual_way(quick)
    if isinstance(usual, Result):
        rows.append(usual)
    for n in QUICK_SIZES if quick else SIZES:
        s, t = reference(n), np.arange(n)
        ours = s(t)
        floor, floor_ss = floor_numpy(n), floor_searchsorted(n)
        for label, f in (("floor (b)", floor), ("floor, searchsorted", floor_ss)):
            err = float(np.max(np.abs(f(t) - ours)))
            if err > EQUAL_TO:
                raise AssertionError(f"{label} differs from ours by {err:g} at n={n}")
        tf = t.astype(np.float64)
        repeat, number = _rounds(n, quick)
        fns = {"ours": lambda: s(t), "floor": lambda: floor(t), "floor_ss": lambda: floor_ss(t),
               "cos": lambda: np.cos(tf)}
        if not isinstance(usual, Result):
            fns["usual"] = (usual[0], 1)
        timed = race(fns, repeat, number)
        per = {k: n if k != "usual" else usual[1] for k in fns}  # type: ignore[index]
        ns = {k: v["min"] / per[k] * 1e9 for k, v in timed.items()}
        med = {k: v["median"] / per[k] * 1e9 for k, v in timed.items()}
        at = n == TARGET_AT
        rows += [
            Result.measured(CASE, "ours s(arange(n))", n, ns["ours"], "ns/tick", median=med["ours"]),
            Result.measured(CASE, "floor (b) by hand", n, ns["floor"], "ns/tick", median=med["floor"]),
            Result.measured(CASE, "floor, searchsorted variant", n, ns["floor_ss"], "ns/tick",
                            median=med["floor_ss"]),
            Result.measured(CASE, "bare np.cos pass", n, ns["cos"], "ns/tick", median=med["cos"]),
            Result.measured(CASE, "ours / floor (b)", n, ns["ours"] / ns["floor"], "x", "ratio",
                            OVER_FLOOR if at else None, median=med["ours"] / med["floor"]),
            Result.measured(CASE, "ours / np.cos", n, ns["ours"] / ns["cos"], "x", "ratio",
                            median=med["ours"] / med["cos"]),
        ]
        if "usual" in ns:
            ticks = usual[1]  # type: ignore[index]
            rows += [
                Result.measured(CASE, "(a) LambdaLR stepped per tick", n, ns["usual"], "ns/tick",
                                median=med["usual"],
                                note=f"(a) steps the reference design sized to {ticks:,} ticks over its whole "
                                     "length, in the same rounds as every size; its cost per tick does not "
                                     "depend on the budget"),
                Result.measured(CASE, "(a) / ours (speed-up)", n, ns["usual"] / ns["ours"], "x", "ratio",
                                FASTER_THAN_STEPPING if at else None, median=med["usual"] / med["ours"]),
                Result.measured(CASE, "(a) / floor (b) (speed-up)", n, ns["usual"] / ns["floor"], "x", "ratio",
                                median=med["usual"] / med["floor"]),
            ]
    return rows
