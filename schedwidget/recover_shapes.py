"""The shape families ``recover`` fits at a stage start, one function each.

Each family reads the points ahead of a stage start (through the walk's ``ahead``, ``reach`` and ``close``) and
proposes a few shapes of its kind, each with its own length when the data fixes it (a cosine's half period, a
polynomial decay's end), else None.  The walk keeps the one that explains the most points.
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

from .schedule import Schedule, ScheduleError
from .shapes import cosine, drops, exp_decay, flat, inv_sqrt, poly, ramp, triangle

__all__ = ["FAMILIES"]

#: A family: (walk, stage start tick, index of its first point) -> [(shape, its own length or None), ...]
Family = Callable[[Any, int, int], list[tuple[Schedule, "int | None"]]]


def _try(make: Callable[[], Schedule]) -> list[Schedule]:
    try:
        return [make()]
    except (ScheduleError, ValueError, OverflowError, ZeroDivisionError):
        return []


def _free_length(w: Any, origin: int, i0: int) -> int:
    """A stage length for shapes whose length the data does not fix: up to the trace's end."""
    return max(w.end - origin, 1)


def _flat(w: Any, origin: int, i0: int):
    return [(s, None) for s in _try(lambda: flat(float(w.r[i0]), steps=_free_length(w, origin, i0)))]


def _linear(w: Any, origin: int, i0: int):
    u, y = w.ahead(origin, i0, 2)
    if u.size < 2:
        return []
    out = []
    d = (y[1] - y[0]) / (u[1] - u[0])
    s0 = y[0] - d * u[0]
    for _ in range(3):  # refit on the ends of what the line explains, then again
        L = _free_length(w, origin, i0)
        if d < 0 and s0 + d * L < 0:  # the line reaches 0 before the trace ends: stop it there
            L = max(int(math.floor(s0 / -d * (1 + 1e-12))), 1)  # the tick where it reaches 0, if whole
        got = _try(lambda: ramp(max(s0, 0.0), max(s0 + d * L, 0.0), L))
        if not got:
            return out
        out = [(got[0], None)]
        n = w.reach(got[0], origin, i0)
        if n < 3:
            break
        u, y = w.t[[i0, i0 + n - 1]] - origin, w.r[[i0, i0 + n - 1]]
        d = (y[1] - y[0]) / (u[1] - u[0])
        s0 = y[0] - d * u[0]
    return out


def _geometric(w: Any, origin: int, i0: int):
    u, y = w.ahead(origin, i0, 2)
    with np.errstate(over="ignore", under="ignore"):
        q = y[1] / y[0] if u.size >= 2 and y.min() > 0 else 0.0
    if not 0.0 < q < math.inf or q == 1.0:
        return []
    g = math.log(q) / (u[1] - u[0])
    ls = math.log(y[0]) - g * u[0]
    out = []
    for _ in range(3):
        L = _free_length(w, origin, i0)
        got = _try(lambda: ramp(math.exp(ls), math.exp(ls + g * L), L, curve="geometric"))
        if not got:
            return out
        out = [(got[0], None)]
        n = w.reach(got[0], origin, i0)
        if n < 3:
            break
        idx = [i0, i0 + n - 1]
        u, y = w.t[idx] - origin, w.r[idx]
        with np.errstate(over="ignore", under="ignore"):
            q = y[1] / y[0]
        if not 0.0 < q < math.inf:
            break
        g = math.log(q) / (u[1] - u[0])
        ls = math.log(y[0]) - g * u[0]
    return out


def _wave_length(u: np.ndarray, y: np.ndarray) -> float | None:
    """Half-period L of ``m + h cos(pi u / L)`` from four equally spaced points (a three-term recurrence)."""
    if u.size < 4:
        return None
    du = u[1] - u[0]
    if not np.allclose(np.diff(u[:4]), du):
        return None
    y0, y1, y2, y3 = np.asarray(y[:4], dtype=np.float64)
    if y1 == y2:
        return None
    with np.errstate(over="ignore", invalid="ignore"):
        c = ((y2 + y0) - (y3 + y1)) / (2.0 * (y1 - y2))
    if not -1.0 < c < 1.0:
        return None
    return math.pi / (math.acos(c) / du)


def _half_cosines(w: Any, origin: int, i0: int):
    """Cosine annealing (falling) and half-cosine ramps (rising): ``m + h cos(pi u / L)`` with their own L.

    L comes from four equally spaced points (a three-term recurrence), read at several spacings so that
    float32 logging still gives a usable estimate, and from the lengths the trace suggests (its breaks, its end).
    """
    n_avail = w.t.size - i0
    span = float(w.t[-1] - origin) + 1.0
    centres: set[int] = set()
    j = 1
    while 3 * j < n_avail and j <= 65536:
        idx = i0 + j * np.arange(4)
        est = _wave_length((w.t[idx] - origin).astype(float), w.r[idx])
        if est is not None and math.isfinite(est) and est <= 64 * span and est <= 2 ** 53:
            centres.add(int(round(est)))
        j *= 4
    lengths: set[int] = set()
    for c in centres:
        spread = min(max(2, int(c * 1e-3)), 16)
        lengths.update(range(max(1, c - spread), c + spread + 1))
    if centres:
        lengths.update(_lengths_ahead(w, origin, i0))
    out = []
    for L in sorted(lengths):
        stop = int(np.searchsorted(w.t, origin + L, side="left"))  # the point at L is the next stage's first
        if stop - i0 < 2:
            continue
        pick = np.unique(np.linspace(i0, stop - 1, min(stop - i0, 1024)).round().astype(np.int64))
        uu, yy = (w.t[pick] - origin).astype(float), w.r[pick]
        keep = np.ones(uu.size, dtype=bool)
        c = np.cos(np.pi * uu / L)
        # relative errors: a float32 log is precise near 0 too (rates under 1e-12 of the top weigh as that)
        wt = 1.0 / np.maximum(yy, max(float(yy.max()) * 1e-12, 1e-150)) ** 2
        if uu[0] == 0:  # the stage's first rate is logged: it is m + h exactly; fit m alone
            y0 = float(yy[0])
            den = float(np.dot(wt * (1.0 - c), 1.0 - c))
            if den == 0 or not math.isfinite(den):
                continue
            m = float(np.dot(wt * (1.0 - c), yy - y0 * c) / den)
            h = y0 - m
        else:
            A = np.stack([np.ones_like(c), c], axis=1)
            (m, h), *_ = np.linalg.lstsq(A, yy[keep], rcond=None)
        hi, lo = m + h, m - h
        if h >= 0:
            got = _try(lambda: cosine(max(hi, 0.0), min(max(lo, 0.0), max(hi, 0.0)), steps=L))
        else:
            got = _try(lambda: ramp(max(hi, 0.0), max(lo, 0.0), L, curve="cosine"))
        for g in got:  # ranked by how many points they explain, then by their worst miss along the half period
            miss = float(np.max(np.abs(g(uu.astype(np.int64)) - yy) / np.maximum(np.abs(yy), 1e-300)))
            out.append((-w.reach(g, origin, i0, stop), miss, L, g))
    out.sort(key=lambda c: c[:3])
    return [(g, L) for _, _, L, g in out[:3]]


def _best_few(w: Any, origin: int, i0: int, cands: list, keep: int = 3):
    if len(cands) <= keep:
        return cands
    scored = sorted(cands, key=lambda c: -w.reach(c[0], origin, i0, min(w.t.size, i0 + 64)))
    return scored[:keep]


def _poly(w: Any, origin: int, i0: int):
    """Polynomial decay with its own length L, tried at the lengths the trace suggests (its next breaks, its end)."""
    out = []
    y0 = float(w.r[i0])
    if w.t[i0] != origin:
        return []
    for L in _lengths_ahead(w, origin, i0):
        stop = int(np.searchsorted(w.t, origin + L, side="left"))
        if stop - i0 < 4:
            continue
        u = (w.t[i0:stop] - origin).astype(float)
        y = w.r[i0:stop]
        ia, ib = len(u) // 3, (2 * len(u)) // 3
        ga, gb = 1 - u[ia] / L, 1 - u[ib] / L
        da, db = y0 - y[ia], y0 - y[ib]
        if not (0 < da < db) or not (0 < gb < ga < 1):
            continue
        target = da / db

        def ratio(q: float) -> float:
            return (1 - ga ** q) / (1 - gb ** q)

        lo, hi = math.log(1e-3), math.log(100.0)
        for _ in range(200):  # bisection on log q
            mid = (lo + hi) / 2
            if ratio(math.exp(mid)) < target:  # the ratio grows with q (from log ga / log gb towards 1)
                lo = mid
            else:
                hi = mid
        q = math.exp((lo + hi) / 2)
        for qq in {q, round(q, 6), float(round(q))}:
            if qq <= 0:
                continue
            A = db / (1 - gb ** qq)
            out += [(g, L) for g in _try(lambda: poly(y0, max(y0 - A, 0.0), steps=L, power=qq))]
    return out


def _lengths_ahead(w: Any, origin: int, i0: int, most: int = 6) -> list[int]:
    """Stage lengths worth trying for shapes with their own length: the next breaks of the trace and its end."""
    j = min(w.t.size, i0 + 4096)
    y = w.r[i0:j]
    out: list[int] = []
    if y.size >= 4:
        d = np.diff(y)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            rho = d[1:] / d[:-1]
            jump = np.flatnonzero(~np.isfinite(rho) | (np.abs(rho - np.roll(rho, 1)) > 0.05 * (1 + np.abs(rho))))
        for k in jump[:most]:
            for i in (k + 1, k + 2):
                if i0 + i < w.t.size:
                    out.append(int(w.t[i0 + i] - origin))
    every = int(w.t[i0 + 1] - w.t[i0]) if i0 + 1 < w.t.size else 1
    out += [w.end - origin + k for k in range(min(every, 64))]  # logged every k: the run ends within k ticks
    return sorted({L for L in out if L >= 4})[: 2 * most + 1 + min(every, 64)]


def _steps_down(w: Any, origin: int, i0: int):
    """Staircase exponential decay and drops: runs of one rate, each the one before times the same factor."""
    j = min(w.t.size, i0 + 100_000)
    y, tt = w.r[i0:j], w.t[i0:j]
    change = np.flatnonzero(~w.close(y[1:], y[:-1])) + 1
    if change.size == 0:
        return []
    levels = y[np.concatenate([[0], change])]
    starts = tt[change] - origin
    if not 0 < levels[1] < levels[0]:
        return []
    f = levels[1] / levels[0]
    k = 1
    while k + 1 < levels.size and k < 64:
        f_try = (levels[k + 1] / levels[0]) ** (1.0 / (k + 1))
        if not w.close(np.array([levels[0] * f_try ** (k + 1)]), np.array([levels[k + 1]]))[0] or \
                not w.close(np.array([levels[0] * f_try ** k]), np.array([levels[k]]))[0]:
            break
        f, k = f_try, k + 1
    inner = np.diff(change[:k])  # logged points on each level between the first drop and the last
    if inner.size >= 3 and np.all(inner < 2):
        return []  # a new level every tick is a smooth decay, which the ramps and exp_decay read better
    at = tuple(int(a) for a in starts[:k])
    out = []
    L = _free_length(w, origin, i0)
    prev = tt[change[:k] - 1] - origin  # the last logged tick of each level before it drops
    lo_e = max(((p + 0.0) / (n + 1) for n, p in enumerate(prev)), default=0.0)
    hi_e = min(((a + 0.0) / (n + 1) for n, a in enumerate(at)), default=0.0)
    e = math.floor(lo_e) + 1
    if e <= hi_e:
        out += [(s, None) for s in _try(lambda: exp_decay(float(levels[0]), float(f), every=e, steps=L))]
    out += [(s, None) for s in _try(lambda: drops(float(levels[0]), at=at, factor=float(f),
                                                  steps=max(L, at[-1] + 1)))]
    return out


def _smooth_decay(w: Any, origin: int, i0: int):
    """Smooth exponential decay ``peak * factor ** u`` (open on its clock, so it can end a run as a last stage)."""
    u, y = w.ahead(origin, i0, 2)
    if u.size < 2 or y.min() <= 0 or not y[1] < y[0] or u[0] != 0:
        return []
    f = (y[1] / y[0]) ** (1.0 / u[1])
    return [(s, None) for s in _try(lambda: exp_decay(float(y[0]), float(f), staircase=False,
                                                      steps=_free_length(w, origin, i0)))]


def _triangle(w: Any, origin: int, i0: int):
    j = min(w.t.size, i0 + 200_000)
    u, y = (w.t[i0:j] - origin).astype(float), w.r[i0:j]
    if u.size < 4 or u[0] != 0 or not y[1] > y[0]:
        return []
    fall = np.flatnonzero(y[1:] < y[:-1])
    if fall.size == 0:
        return []
    p = int(fall[0])
    slope = (y[1] - y[0]) / u[1]
    low = float(y[0])
    out = []
    step = int(u[1])
    for h in range(max(1, int(u[p]) - step + 1), int(u[p]) + step + 1):
        high = low + slope * h
        shrinks = {1.0}
        second = np.flatnonzero((u >= 2 * h) & (u < 4 * h))  # the second cycle: its amplitude is times shrink
        if second.size and high > low:
            x = np.maximum(0.0, 1.0 - np.abs(u[second] / h - 3.0))
            # its first rising point (surely the triangle's) and its apex (the most precise, if still its)
            for k in {int(np.argmax(x > 0)), int(np.argmax(x))}:
                if x[k] > 0:
                    shrinks.add(min(max((float(y[second[k]]) - low) / ((high - low) * x[k]), 1e-9), 1.0))
        for shrink in shrinks:
            out += [(s, None) for s in _try(lambda: triangle(low, high, half_period=h, shrink=shrink,
                                                             steps=_free_length(w, origin, i0)))]
    return _best_few(w, origin, i0, out)


def _inv_sqrt(w: Any, origin: int, i0: int):
    u, y = w.ahead(origin, i0, 3)
    if u.size < 3 or u[0] != 0 or y[0] != 0 or not y[1] > 0:
        return []
    d = y[1] / u[1]
    line = ramp(0.0, float(d), 1)
    n = w.reach(line, origin, i0)  # points on the warmup line (it holds past 1: compare the line itself)
    jj = min(w.t.size, i0 + 100_000)
    uu = (w.t[i0:jj] - origin).astype(float)
    on = np.flatnonzero(~w.close(d * uu, w.r[i0:jj]))
    if on.size == 0:
        return []
    last = int(uu[on[0] - 1]) if on[0] > 0 else 1
    out = []
    for wu in range(max(1, last - 1), last + int(u[1]) + 2):
        out += [(s, None) for s in _try(lambda: inv_sqrt(float(d * wu), warmup=wu,
                                                         steps=_free_length(w, origin, i0)))]
    del n
    return _best_few(w, origin, i0, out)


FAMILIES: tuple[Family, ...] = (_flat, _linear, _geometric, _smooth_decay, _half_cosines, _steps_down, _poly,
                                 _triangle, _inv_sqrt)
