"""Recover a compact design from a logged rate trace: find the joins, fit each stage with one of our shapes.

``recover(trace)`` walks the trace from its first tick.  At each stage start it fits every shape family to the
points ahead (flat, linear / geometric / half-cosine ramps, cosine annealing, polynomial decay, staircase
exponential decay, drops, triangles, inverse square root), keeps the one that explains the most points to the
tolerance, and starts the next stage where it stops.  Stages of one shape that repeat with growing lengths and
decaying peaks become one ``restarts``; a first linear or half-cosine ramp into the next stage's starting rate
becomes a ``warmup``.  Where no shape explains more than a couple of points, the points go into a ``knots``
stage (the fallback), and the result says which ticks it covers.

Every fit is checked by evaluating the design it builds (our own classes) at the logged ticks, so the tolerance
the result states is the one the returned design meets.  The work is bounded: at most ``MAX_STAGES`` stages are
fitted (the rest of a longer trace goes into one knots stage), each candidate is checked in growing chunks that
stop at its first miss, and a trace holds at most ``trace.MAX_TRACE_POINTS`` points.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from typing import Any, Callable

import numpy as np

from .combine import restarts, stages, warmup
from .schedule import Schedule, ScheduleError, complain
from .shapes import cosine, drops, exp_decay, flat, inv_sqrt, knots, poly, ramp, triangle
from .trace import Trace, as_trace

__all__ = ["recover", "Recovery", "node_count", "MAX_STAGES"]

#: Most stages fitted one by one; the rest of the trace becomes one knots stage.
MAX_STAGES = 200

#: A stage whose best shape explains at most this many points is left to the knots fallback.
_WEAK = 2

#: Points a richer shape must explain beyond a simpler one to be preferred.
_MARGIN = 2

#: Most designs evaluated while folding repeated stages into restarts (each try evaluates the whole design once).
_MAX_FOLD_TRIES = 48

#: Most whole-design tries spent writing fitted numbers short.
_MAX_SNAP_TRIES = 96

#: Most clock origins tried for a stage when the trace is logged every k > 1 ticks.
_MAX_ORIGINS = 16


@dataclass(frozen=True)
class Recovery:
    """The design ``recover`` found, how well it reproduces the trace and what went into the fallback.

    ``design`` reproduces every logged rate to ``rtol`` (relative) plus ``atol``; its ``knots`` stages, if any,
    cover the tick ranges listed in ``fallback``.  ``compact`` is the same design with each fallback range
    replaced by a straight ramp, and ``residual`` is ``compact``'s largest relative error over the trace (0 when
    nothing needed the fallback, then ``compact`` is ``design``).
    """

    design: Schedule
    compact: Schedule
    residual: float
    rtol: float
    atol: float
    fallback: tuple[tuple[int, int], ...]
    points: int

    @property
    def exact(self) -> bool:
        """Whether the compact design alone (no knots fallback) reproduces the trace to the tolerance."""
        return not self.fallback

    def __str__(self) -> str:
        tol = f"a relative tolerance of {self.rtol:g}"
        if not self.fallback:
            return (f"Recovered a design of {node_count(self.design)} node(s) that reproduces all {self.points:,} "
                    f"logged rates to {tol}: {self.design!r}")
        spans = ", ".join(f"{a:,}..{b:,}" for a, b in self.fallback[:4]) + (" ..." if len(self.fallback) > 4 else "")
        return (f"No shape fits ticks {spans}; those are kept as knots, so the design reproduces all "
                f"{self.points:,} logged rates to {tol}. Without them the best compact design is off by "
                f"{self.residual:.3g} (relative) at worst.")


def node_count(s: Schedule) -> int:
    """The number of nodes in a design (a leaf is 1; a combinator adds its children's)."""
    return 1 + sum(node_count(c) for c in s.children())


# ------------------------------------------------------------------ the walk
@dataclass
class _Stage:
    origin: int         # the stage's first tick on the run's clock
    end: int            # the next stage's first tick (for the last stage: the trace's last tick + 1)
    i0: int             # index of its first logged point
    i1: int             # one past its last logged point
    shape: Schedule | None   # None: left to the knots fallback
    fixed: bool = False      # its length is its shape's own (a cosine, a polynomial decay)


def recover(trace: Any, *, rtol: float | None = None, atol: float | None = None) -> Recovery:
    """A compact design that reproduces a logged rate trace.

    Parameters
    ----------
    trace
        A ``Trace`` or anything ``read_trace`` reads: rates at ticks 0, 1, 2, ... or (tick, rate) pairs,
        possibly logged every k ticks.
    rtol, atol
        The tolerance the design must meet at every logged tick: ``|design(t) - r| <= rtol * r + atol``.
        ``rtol`` defaults to 1e-9, or 1e-6 when every rate is a float32 value (a run that logged float32);
        ``atol`` to 1e-12 times the largest rate.

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> d = warmup(cosine(0.1, 0.001, steps=900), 100)
    >>> recover(d(np.arange(1000))).design
    warmup(target=cosine(peak=0.1, floor=0.001, steps=900), steps=100, start=0.0, curve='linear')
    """
    tr = as_trace(trace, "recover")
    t, r = tr.ticks, tr.rates
    if rtol is None:
        rtol = 1e-6 if _float32_logged(r) else 1e-9
    rtol = _number("rtol", rtol, 0.0, 0.5)
    top = float(np.max(r))
    atol = 1e-12 * top if atol is None else _number("atol", atol, 0.0, math.inf)
    walk = _Walk(t, r, rtol, atol)
    parts = walk.run()
    parts = _merge_weak(parts)
    design = _assemble(parts, t, r, fallback=True)
    compact = _assemble(parts, t, r, fallback=False)
    design, compact = _tidy(design, t, r, rtol, atol), _tidy(compact, t, r, rtol, atol)
    spans = tuple((int(p.origin), int(p.end - 1)) for p in parts if p.shape is None)
    if not np.all(np.abs(design(t) - r) <= rtol * np.abs(r) + atol):
        # never state a tolerance the design does not meet: the whole trace as knots meets any
        pts = [(int(a), float(b)) for a, b in zip(t, r)]
        if pts[0][0] != 0:
            pts.insert(0, (0, pts[0][1]))
        design, spans = knots(pts, interp="linear", steps=int(t[-1]) + 1), ((0, int(t[-1])),)
    err = _relative_error(compact, t, r, atol)
    return Recovery(design, compact, 0.0 if not spans else err, rtol, atol, spans, int(t.size))


def _float32_logged(r: np.ndarray) -> bool:
    """Whether every rate is a float32 value and some are long decimals (0.10000000149011612, not 0.5 or 2**-14)."""
    if not np.array_equal(r.astype(np.float32).astype(np.float64), r):
        return False
    sample = r[:: max(1, r.size // 1000)]
    return any(len(repr(float(x)).replace("-", "").replace(".", "").lstrip("0").split("e")[0]) > 12 for x in sample)


def _number(name: str, value: Any, lo: float, hi: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not lo <= float(value) <= hi:
        raise complain("recover", name, value, f"a number in [{lo:g}, {hi:g}]")
    return float(value)


def _relative_error(s: Schedule, t: np.ndarray, r: np.ndarray, atol: float) -> float:
    e = s(t)
    return float(np.max(np.maximum(np.abs(e - r) - atol, 0.0) / np.maximum(np.abs(r), 1e-300)))


class _Walk:
    """The greedy walk over the trace: one stage at a time, the shape that explains the most points."""

    def __init__(self, t: np.ndarray, r: np.ndarray, rtol: float, atol: float) -> None:
        self.t, self.r, self.rtol, self.atol = t, r, rtol, atol
        self.end = int(t[-1]) + 1
        self.memo: dict[tuple[int, int], Any] = {}
        self.stages: list[int] = []

    def close(self, e: np.ndarray, y: np.ndarray) -> np.ndarray:
        with np.errstate(invalid="ignore", over="ignore"):
            return np.abs(e - y) <= self.rtol * np.abs(y) + self.atol

    def reach(self, s: Schedule, origin: int, i0: int, stop: int | None = None) -> int:
        """How many points from ``i0`` on ``s`` explains in a row (on its clock from ``origin``)."""
        n = self.t.size if stop is None else stop
        i, chunk = i0, 16
        try:
            while i < n:
                j = min(n, i + chunk)
                ok = self.close(s(self.t[i:j] - origin), self.r[i:j])
                if not ok.all():
                    return i - i0 + int(np.argmin(ok))
                i, chunk = j, chunk * 4
        except ScheduleError:
            return 0
        return n - i0

    def run(self) -> list[_Stage]:
        t = self.t
        parts: list[_Stage] = []
        self.stages = []
        origin, i0 = int(t[0]), 0
        if origin > 0:  # the run logged from a later tick: the ticks before it hold the first rate
            parts.append(_Stage(0, origin, 0, 0, flat(float(self.r[0]), steps=origin)))
        while i0 < t.size:
            if len(parts) >= MAX_STAGES:
                parts.append(_Stage(origin, self.end, i0, t.size, None))
                break
            self.stages.append(i0)
            best = self.best(origin, i0)
            if best is None:   # nothing explains even one point at this origin: knots until the next
                parts.append(_Stage(origin, int(t[i0]) + 1, i0, i0 + 1, None))
                origin, i0 = int(t[i0]) + 1, i0 + 1
                continue
            shape, count, length = best
            i1 = i0 + count
            if i1 >= t.size:
                end = origin + length if length is not None else self.end
                parts.append(_Stage(origin, end, i0, i1, shape, length is not None))
                break
            if length is not None:
                parts.append(_Stage(origin, origin + length, i0, i1, shape, True))
                origin, i0 = origin + length, i1
            else:
                nxt, j0 = self.next_origin(i1)
                parts.append(_Stage(origin, nxt, i0, max(i1 if j0 == i1 else j0, i0 + 1), shape))
                origin, i0 = nxt, j0
        return parts

    def next_origin(self, i1: int) -> tuple[int, int]:
        """Where the next stage starts, and its first point: just after the last point explained, or on it
        (a join's point often lies on both stages), or between two logged ticks, whichever lets the next
        stage explain the most of what follows."""
        lo, hi = int(self.t[i1 - 1]) + 1, int(self.t[i1])
        cands = [(a, i1) for a in np.unique(np.linspace(lo, hi, min(_MAX_ORIGINS, hi - lo + 1)).round()
                                            .astype(np.int64)).tolist()]
        if i1 - 1 > 0 and (not self.stages or self.stages[-1] < i1 - 1):
            cands.append((lo - 1, i1 - 1))
        scored = []
        for a, j in cands:
            b = self.best(int(a), j)
            if b is not None:
                scored.append((j + b[1], j < i1, int(a), j))  # on a tie, the join on the shared point
        if not scored:
            return lo, i1
        _, _, a, j = max(scored)
        return a, j

    def best(self, origin: int, i0: int) -> tuple[Schedule, int, int | None] | None:
        """The shape that explains the most points from ``i0`` on, with the count and its own length (or None)."""
        key = (origin, i0)
        if key not in self.memo:
            self.memo[key] = self._best(origin, i0)
        return self.memo[key]

    def _best(self, origin: int, i0: int) -> tuple[Schedule, int, int | None] | None:
        best: tuple[Schedule, int, int | None] | None = None
        best_make = None
        for make in _FAMILIES:
            for shape, length in make(self, origin, i0):
                stop = None
                if length is not None:
                    stop = int(np.searchsorted(self.t, origin + length, side="left"))
                    if stop <= i0:
                        continue
                count = self.reach(shape, origin, i0, stop)
                if length is not None and count < stop - i0:
                    continue  # a shape with its own length must explain every point up to its end
                if length is not None and stop >= self.t.size:
                    count = self.reach(shape, origin, i0)  # the last stage holds its end value past its length
                # a later (richer) family must explain clearly more than a simpler one: a point or two more is
                # usually the next stage's first points, taken by a shape that merely bends there
                margin = (_MARGIN if best is not None and make is not best_make and best[1] >= 8
                          and i0 + count < self.t.size else 0)  # a shape that explains all the rest wins outright
                if count and (best is None or count > best[1] + margin):
                    best, best_make = (shape, count, length), make
        return best

    # helpers for the families
    def ahead(self, origin: int, i0: int, k: int) -> tuple[np.ndarray, np.ndarray]:
        j = min(self.t.size, i0 + k)
        return (self.t[i0:j] - origin).astype(np.float64), self.r[i0:j]


# ------------------------------------------------------------------ shape families
Family = Callable[[_Walk, int, int], list[tuple[Schedule, int | None]]]


def _try(make: Callable[[], Schedule]) -> list[Schedule]:
    try:
        return [make()]
    except (ScheduleError, ValueError, OverflowError, ZeroDivisionError):
        return []


def _free_length(w: _Walk, origin: int, i0: int) -> int:
    """A stage length for shapes whose length the data does not fix: up to the trace's end."""
    return max(w.end - origin, 1)


def _flat(w: _Walk, origin: int, i0: int):
    return [(s, None) for s in _try(lambda: flat(float(w.r[i0]), steps=_free_length(w, origin, i0)))]


def _linear(w: _Walk, origin: int, i0: int):
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


def _geometric(w: _Walk, origin: int, i0: int):
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


def _half_cosines(w: _Walk, origin: int, i0: int):
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


def _best_few(w: _Walk, origin: int, i0: int, cands: list, keep: int = 3):
    if len(cands) <= keep:
        return cands
    scored = sorted(cands, key=lambda c: -w.reach(c[0], origin, i0, min(w.t.size, i0 + 64)))
    return scored[:keep]


def _poly(w: _Walk, origin: int, i0: int):
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


def _lengths_ahead(w: _Walk, origin: int, i0: int, most: int = 6) -> list[int]:
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


def _steps_down(w: _Walk, origin: int, i0: int):
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


def _smooth_decay(w: _Walk, origin: int, i0: int):
    """Smooth exponential decay ``peak * factor ** u`` (open on its clock, so it can end a run as a last stage)."""
    u, y = w.ahead(origin, i0, 2)
    if u.size < 2 or y.min() <= 0 or not y[1] < y[0] or u[0] != 0:
        return []
    f = (y[1] / y[0]) ** (1.0 / u[1])
    return [(s, None) for s in _try(lambda: exp_decay(float(y[0]), float(f), staircase=False,
                                                      steps=_free_length(w, origin, i0)))]


def _triangle(w: _Walk, origin: int, i0: int):
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


def _inv_sqrt(w: _Walk, origin: int, i0: int):
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


_FAMILIES: tuple[Family, ...] = (_flat, _linear, _geometric, _smooth_decay, _half_cosines, _steps_down, _poly,
                                 _triangle, _inv_sqrt)


# ------------------------------------------------------------------ assembling the design
def _merge_weak(parts: list[_Stage]) -> list[_Stage]:
    """Runs of two or more stages that explain at most ``_WEAK`` points each become one fallback stage."""
    def weak(p: _Stage) -> bool:
        return p.shape is None or p.i1 - p.i0 <= _WEAK

    out: list[_Stage] = []
    k = 0
    while k < len(parts):
        j = k
        while j < len(parts) and weak(parts[j]):
            j += 1
        if j - k >= 2 or (j - k == 1 and parts[k].shape is None):
            out.append(_Stage(parts[k].origin, parts[j - 1].end, parts[k].i0, parts[j - 1].i1, None))
            k = j
        else:
            out.append(parts[k])
            k += 1
    return out


def _sized(shape: Schedule, length: int) -> Schedule:
    """``shape`` made to last ``length`` ticks (its ``steps``), if its length is not its own."""
    if shape.length == length:
        return shape
    if shape.kind == "ramp":  # the same line (or curve) cut at the new length: its end is its value there
        if length > shape.steps:  # it held its end for the last points: not a ramp of this length
            raise ScheduleError(f"recover: a ramp of {shape.steps} ticks cannot fill a stage of {length}")
        return replace(shape, end=float(shape(length)), steps=length)
    if shape.kind == "drops":  # drops at or past the cut belong to the next stage
        at = tuple(a for a in shape.at if a < length)
        return replace(shape, at=at, steps=length) if at else flat(shape.peak, steps=length)
    return replace(shape, steps=length)


def _assemble(parts: list[_Stage], t: np.ndarray, r: np.ndarray, fallback: bool) -> Schedule:
    built: list[Schedule] = []
    for k, p in enumerate(parts):
        L = max(p.end - p.origin, 1)
        if p.shape is not None:
            last = k == len(parts) - 1
            try:  # the last stage may end before the trace does: past its length it holds its end value
                keep = p.fixed or (last and p.shape.length is not None and p.shape.length < L)
                built.append(p.shape if keep else _sized(p.shape, L))
                continue
            except ScheduleError:  # the shape cannot be cut to its stage: keep its points as knots
                pass
        u, y = t[p.i0:p.i1] - p.origin, r[p.i0:p.i1]
        if y.size == 0:
            built.append(flat(float(r[min(p.i0, r.size - 1)]), steps=L))
        elif fallback:
            pts = [(int(a), float(b)) for a, b in zip(u, y)]
            if pts[0][0] != 0:
                pts.insert(0, (0, pts[0][1]))
            built.append(knots(pts, interp="linear", steps=max(L, pts[-1][0])))
        else:
            built.append(ramp(float(y[0]), float(y[-1]), L))
    return stages(*built) if len(built) > 1 else built[0]


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
        while j < len(out) and out[j].kind == first.kind:
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
