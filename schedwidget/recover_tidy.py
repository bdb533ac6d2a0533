"""The last pass of ``recover``: repeated stages folded into restarts, a first ramp into a warmup, numbers short.

Every change is kept only if the whole design still meets the tolerance (``fits``), and the number of
whole-design evaluations is bounded (``_MAX_FOLD_TRIES``, ``_MAX_SNAP_TRIES``).
"""

from __future__ import annotations

import math
from dataclasses import fields, replace
from typing import Callable

import numpy as np

from .combine import restarts, stages, warmup
from .recover_shapes import _try
from .schedule import Schedule, ScheduleError
from .shapes import exp_decay, ramp

__all__ = ["node_count"]

#: Most designs evaluated while folding repeated stages into restarts (each try evaluates the whole design once).
_MAX_FOLD_TRIES = 48

#: Most whole-design tries spent writing fitted numbers short.
_MAX_SNAP_TRIES = 96


def node_count(s: Schedule) -> int:
    """The number of nodes in a design (a leaf is 1; a combinator adds its children's)."""
    return 1 + sum(node_count(c) for c in s.children())


def _tidy(design: Schedule, t: np.ndarray, r: np.ndarray, rtol: float, atol: float) -> Schedule:
    """Fold repeated stages into restarts and a first ramp into a warmup, when the result still fits."""
    def fits(s: Schedule) -> bool:
        e = s(t)
        return bool(np.all(np.abs(e - r) <= rtol * np.abs(r) + atol))

    parts = [_canonical(p) for p in design._stage_parts()]
    budget = [_MAX_FOLD_TRIES]
    if len(parts) > 1 and parts[-1].kind == "flat" and parts[-2].length is not None:
        # a last flat stage at the rate the stage before holds past its end: that stage holds it by itself
        held = parts[:-1]
        trial = stages(*held) if len(held) > 1 else held[0]
        if fits(trial):
            parts = held
    parts = _fold_restarts(parts, fits, budget)
    if len(parts) == 2 and parts[0].kind == "ramp" and parts[0].curve in ("linear", "cosine"):
        try:
            w = warmup(parts[1], parts[0].steps, start=parts[0].start, curve=parts[0].curve)
        except ScheduleError:
            w = None
        if w is not None and fits(w):
            return _snap(w, fits)
    s = stages(*parts) if len(parts) > 1 else parts[0]
    s = s if fits(s) or not fits(design) else design
    return _snap(s, fits) if fits(s) else s


def _snap(design: Schedule, fits: Callable[[Schedule], bool]) -> Schedule:
    """Each fitted number written with the fewest significant digits (3, 6, 9 or 12) that still fit the trace:
    ``floor=0.001``, not ``0.0010000000000000148``.  Bounded: at most ``_MAX_SNAP_TRIES`` whole-design tries."""
    tries = [_MAX_SNAP_TRIES]

    def walk(node: Schedule, rebuild: Callable[[Schedule], Schedule]) -> Schedule:
        for f in fields(node):
            if not f.init or tries[0] <= 0:
                continue
            v = getattr(node, f.name)
            if isinstance(v, Schedule):
                child = walk(v, lambda x, n=node, name=f.name: rebuild(replace(n, **{name: x})))
                if child is not v:
                    node = replace(node, **{f.name: child})
                continue
            if isinstance(v, tuple) and v and all(isinstance(x, Schedule) for x in v):
                for i in range(len(v)):
                    cur = getattr(node, f.name)

                    def put(x: Schedule, n: Schedule = node, name: str = f.name, i: int = i) -> Schedule:
                        parts = getattr(n, name)
                        return replace(n, **{name: (*parts[:i], x, *parts[i + 1:])})

                    child = walk(cur[i], lambda x, put=put: rebuild(put(x)))
                    if child is not cur[i]:
                        node = put(child)
                continue
            if not isinstance(v, float) or v == 0 or not math.isfinite(v):
                continue
            for sig in ((0, 3, 6, 9, 12) if abs(v) < 1e-12 else (3, 6, 9, 12)):
                short = float(f"{v:.{sig}g}") if sig else 0.0  # a residue of the fit (2.8e-17) may be 0
                if short == v or tries[0] <= 0:
                    break
                tries[0] -= 1
                try:
                    trial = replace(node, **{f.name: short})
                    whole = rebuild(trial)
                except (ScheduleError, ValueError):
                    continue
                if fits(whole):
                    node = trial
                    break
        return node

    return walk(design, lambda x: x)


def _fold_restarts(parts: list[Schedule], fits: Callable[[Schedule], bool], budget: list[int]) -> list[Schedule]:
    """Runs of stages of one kind that a ``restarts`` of the first one reproduces become that restarts.

    Each try evaluates the whole design once, so the tries are counted (``budget``): a run of m stages tries all
    m cycles, then m - 1 (a last cycle cut short by the end of the trace), and shorter runs only when it is short.
    """
    i = 0
    out = list(parts)
    while i < len(out) - 1:
        first = out[i]
        j = i + 1
        while j < len(out) and _alike(out[j], first):
            j += 1
        run = j - i
        done = False
        for m in (range(run, 1, -1) if run <= 6 else (run, run - 1)):
            cyc = out[i:i + m]
            lengths = [c.length for c in cyc]
            if None in lengths or first.length is None:
                continue
            growths = {1.0} | _growths(lengths[:-1] if m > 2 else lengths)
            # the peak decay: the second cycle's first rate over the first's (or, for a cycle starting at 0,
            # the rates at the first's highest tick and the matching tick of the second)
            u = np.arange(min(first.length, 4096))
            k = 0 if first(0) > 0 else int(np.argmax(first(u)))
            p0, p1 = float(first(k)), float(cyc[1](int(round(k * cyc[1].length / first.length))))
            decays = {1.0} if p0 == 0 else {min(max(p1 / p0, 1e-12), 1.0), 1.0}
            for g in sorted(growths):
                for dcy in decays:
                    for target in _equivalents(first):
                        try:
                            rs = restarts(target, cycles=m, growth=g, peak_decay=dcy)
                        except ScheduleError:
                            continue
                        if node_count(rs) >= sum(node_count(c) for c in cyc) or budget[0] <= 0:
                            continue  # no shorter than the stages it would replace, or out of tries
                        budget[0] -= 1
                        trial = out[:i] + [rs] + out[i + m:]
                        s = stages(*trial) if len(trial) > 1 else trial[0]
                        if fits(s):
                            out, done = trial, True
                            break
                    if done:
                        break
                if done:
                    break
            if done:
                break
        i += 1
    return out


def _alike(a: Schedule, b: Schedule) -> bool:
    """Whether ``a`` may be another cycle of ``b``: the same kind, or rates in one ratio at their first ticks (a
    cycle fitted as an exponential decay and the next, half as high, as the geometric ramp through the same rates)."""
    if a.kind == b.kind:
        return True
    if a.length is None or a.length != b.length:
        return False
    u = np.arange(min(a.length, 4096))
    ya, yb = a(u), b(u)
    if not yb[0] > 0:
        return False
    c = ya[0] / yb[0]
    return bool(np.all(np.abs(ya - c * yb) <= 1e-9 * np.maximum(np.abs(ya), np.abs(c * yb))))


def _growths(lengths: list[int]) -> set[float]:
    """Growth factors g with ``round(L0 * g**k)`` (half up) equal to every cycle length: the simplest decimals
    in the interval the lengths allow."""
    L0 = lengths[0]
    if len(lengths) < 2 or L0 <= 0:
        return set()
    lo, hi = 0.0, math.inf
    for k, Lk in enumerate(lengths[1:], start=1):
        lo = max(lo, ((Lk - 0.5) / L0) ** (1.0 / k))
        hi = min(hi, ((Lk + 0.5) / L0) ** (1.0 / k))
    if not lo < hi:
        return set()
    mid = (lo + hi) / 2
    for digits in range(0, 10):
        v = round(mid, digits)
        if lo <= v < hi:
            return {v, round(lengths[1] / L0, 6)}
    return {mid}


def _equivalents(s: Schedule) -> list[Schedule]:
    """``s`` and shapes equal to it at every whole tick that stretch differently (for a restarts' first cycle)."""
    out = [s]
    if s.kind == "exp_decay" and not s.staircase:
        out.append(replace(s, staircase=True, every=1))
    if s.kind == "ramp" and s.curve == "geometric" and s.end < s.start:
        out += _try(lambda: exp_decay(s.start, (s.end / s.start) ** (1.0 / s.steps), staircase=True, steps=s.steps))
    return out


def _canonical(s: Schedule) -> Schedule:
    """The plainest of equal shapes: a polynomial decay of power 1 is a linear ramp."""
    if s.kind == "poly" and abs(s.power - 1.0) <= 1e-9:
        return ramp(s.peak, s.floor, s.steps)
    return s
