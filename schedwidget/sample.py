"""The points to draw: a bounded number whatever the budget, jumps as exact vertical edges.

For a budget of ``n`` ticks, ``trace`` returns every tick when ``n`` is small.
Otherwise the budget is cut into a fixed number of segments, also cut at every
jump; a segment whose values stay between its two end values is drawn as a
line, and a segment that moves beyond them (a cycle shorter than a pixel) is
drawn as a vertical band from its lower to its upper bound.  The bounds come
from each node's interval arithmetic (``Schedule._range``), so the band holds
every true value, and nothing loops over ticks.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .schedule import EDGE_CAP, MAX_TICKS, Schedule, ScheduleError, as_whole, complain

__all__ = ["Trace", "trace", "breaks", "budget_of", "at_ticks"]

#: Segments a long budget is cut into (about one per pixel column of a wide plot).
SEGMENTS = 1000
#: Most points ``trace`` accepts to draw (a budget up to this long is drawn tick by tick).
MAX_POINTS = 2 ** 20


def budget_of(s: Schedule, steps: int | None, owner: str, name: str = "steps") -> int:
    """The budget to read ``s`` over: ``steps`` if given, else its length.

    ``steps`` is a whole number (int, numpy integer or integral float, not a bool) in ``[1, 2**53]``.
    """
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule (e.g. cosine(0.1, steps=1000))",
                       "a bare rate is flat(rate, steps=...)" if isinstance(s, (int, float, np.number)) else None)
    n = s.length if steps is None else steps
    if n is None:
        raise ScheduleError(f"{owner}: steps must be given for an open-ended schedule, got None "
                            "(pass steps=the number of ticks to read)")
    w = as_whole(n)
    if w is None or w < 1:
        raise complain(owner, name, n, "a whole number >= 1")
    if w > MAX_TICKS:
        raise complain(owner, name, n, "a whole number <= 2**53",
                       "above that, ticks are no longer exact on a float64 clock")
    return w


def at_ticks(s: Schedule, t: np.ndarray) -> np.ndarray:
    """``s`` at integer ticks in any order, evaluated once on their sorted unique values.

    Nodes evaluate a sorted clock fastest (``stages`` cuts it into one slice per stage), so
    scattered ticks (both sides of every join, say) cost one pass over the design, not one per tick.
    """
    if not isinstance(s, Schedule):
        raise complain("at_ticks", "s", s, "a Schedule")
    arr = np.asarray(t) if isinstance(t, np.ndarray) else None
    if arr is None or arr.dtype.kind not in "iu" or arr.ndim == 0:
        return s(t)  # the schedule's own checks and messages for anything but an integer array
    u, back = np.unique(arr.reshape(-1), return_inverse=True)
    return s(u)[back].reshape(arr.shape)


def breaks(s: Schedule, n: int) -> np.ndarray:
    """Ticks in ``[1, n)`` where the rate jumps: a candidate edge whose step stands out from its neighbours."""
    if n is None:
        raise complain("breaks", "n", n, "a whole number >= 1", "the number of ticks to look at")
    n = budget_of(s, n, "breaks", "n")
    cand = np.unique(np.ceil(s._edges(float(n - 1))))
    cand = cand[(cand >= 1) & (cand <= n - 1)].astype(np.int64)
    if cand.size == 0:
        return cand
    y = at_ticks(s, np.stack([np.maximum(cand - 2, 0), cand - 1, cand, np.minimum(cand + 1, n - 1)]))
    step = np.abs(y[2] - y[1])
    before = np.where(cand >= 2, np.abs(y[1] - y[0]), 0.0)
    after = np.where(cand + 1 <= n - 1, np.abs(y[3] - y[2]), 0.0)
    scale = max(float(np.max(np.abs(y))), 1e-300)
    return cand[(step > 1e-12 * scale) & (step > 2.0 * np.maximum(before, after))]


@dataclass(frozen=True, eq=False)
class Trace:
    """What the curve panel draws for one schedule over one budget.

    ``x``/``y`` is the polyline (ticks, rates), jumps appear as two points at
    the same x.  ``band_x0``/``band_x1``/``band_lo``/``band_hi`` describe the
    segments drawn as bands.  ``exact`` is True when every tick was evaluated.
    """

    steps: int
    x: np.ndarray
    y: np.ndarray
    breaks: np.ndarray
    joins: np.ndarray
    band_x0: np.ndarray
    band_x1: np.ndarray
    band_lo: np.ndarray
    band_hi: np.ndarray
    exact: bool


def _with_edges(x: np.ndarray, y: np.ndarray, brk: np.ndarray, before: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Insert ``(k, rate at k - 1)`` before each jump at ``k`` so the edge is vertical at ``k``."""
    pos = np.searchsorted(x, brk)
    return np.insert(x, pos, brk.astype(float)), np.insert(y, pos, before)


def trace(s: Schedule, steps: int | None = None, points: int = 2 * SEGMENTS) -> Trace:
    """The polyline and bands to draw ``s`` over ``steps`` ticks (default: its length).

    ``points`` (a whole number in ``[4, 2**20]``) bounds the drawing: budgets up to it are drawn tick
    by tick, longer ones from about ``points`` segment ends plus every jump.
    """
    n = budget_of(s, steps, "trace")
    p = as_whole(points)
    if p is None or not 4 <= p <= MAX_POINTS:
        raise complain("trace", "points", points, "a whole number >= 4 and <= 2**20",
                       "about one point per pixel column is enough")
    points = p
    joins = np.ceil(s._joins())
    joins = joins[(joins >= 1) & (joins <= n - 1)]
    brk = breaks(s, n)
    empty = np.empty(0)
    if n <= points:
        x = np.arange(n, dtype=float)
        y = s(np.arange(n))
        xe, ye = _with_edges(x, y, brk, y[brk - 1]) if brk.size else (x, y)
        return Trace(n, xe, ye, brk, joins, empty, empty, empty, empty, True)
    seg = max(2, points // 2)
    cuts = np.unique(np.floor(np.linspace(0, n, seg + 1)))
    dense = brk.size >= min(EDGE_CAP, seg)
    if not dense:
        cuts = np.unique(np.concatenate([cuts, brk.astype(float)]))
    a, b = cuts[:-1], cuts[1:] - 1.0          # segment j covers ticks a[j] .. b[j]
    ya, yb = s(a.astype(np.int64)), s(b.astype(np.int64))
    lo, hi = s._span(a, b)
    spread = max(float(np.max(hi)) - float(np.min(lo)), 1e-300)
    tol = 1e-3 * spread
    band = (hi > np.maximum(ya, yb) + tol) | (lo < np.minimum(ya, yb) - tol)
    # polyline: start and end of every segment; band segments add their bounds in the middle
    mid = (a + b) / 2.0
    xs = np.stack([a, mid, mid, b], axis=1)
    ys = np.stack([ya, hi, lo, yb], axis=1)
    keep = np.ones((len(a), 4), dtype=bool)
    keep[:, 1:3] = band[:, None]
    keep[:, 3] = b > a
    x, y = xs[keep], ys[keep]
    if not dense and brk.size:
        x, y = _with_edges(x, y, brk, at_ticks(s, brk - 1))
    return Trace(n, x, y, brk, joins, a[band], b[band], lo[band], hi[band], False)
