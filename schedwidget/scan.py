"""How ``facts`` reads a long budget in bounded work: tick by tick in chunks, or an even grid plus every
jump, refined where interval bounds show a higher peak or an earlier tick under a share of the peak.

Work is bounded whatever the design: memory by ``CHUNK`` ticks at a time, the grid by ``GRID_WORK`` node
visits, and the refinement by a fixed number of gaps per round; gaps are searched coarse to fine
(``_earliest``), so a design's interval bounds are asked about a few hundred intervals, not every gap.
"""

from __future__ import annotations

import math

import numpy as np

from .schedule import Schedule

CHUNK = 2 ** 18
#: Node visits a grid reading may spend on its even grid (ticks times ``work``): 2**20 ticks at 8 visits each.
GRID_WORK = 2 ** 23
#: Fewest ticks of an even grid, however costly the design.
MIN_GRID = 2 ** 14
#: Gaps per block in the coarse-to-fine search for gaps whose bounds pass a test (``_earliest``).
BLOCK = 64
#: A rate counts as down to a share of the peak when ``rate <= share * peak * (1 + LEVEL_TOLERANCE)``:
#: products such as 0.05 * 0.1 = 0.005000000000000001 sit a few ulps (~1e-16 relative) above the
#: hand value, and 1e-12 relative is thousands of ulps yet far below any difference a reader can see.
LEVEL_TOLERANCE = 1e-12
#: Refinement of a grid reading: gaps looked into per round, pieces per split, ticks read tick by tick.
REFINE_TRIES, REFINE_SPLIT, REFINE_DENSE = 4, 64, 4096


def _sorted_unique(x: np.ndarray) -> np.ndarray:
    x = np.sort(x)
    return x[np.concatenate([[True], x[1:] != x[:-1]])] if x.size else x


def work(s: Schedule) -> int:
    """Node visits one tick costs to evaluate ``s`` (each node's ``_work`` of its children's), without recursion."""
    done: dict[int, int] = {}
    stack: list[tuple[Schedule, bool]] = [(s, False)]
    while stack:
        node, ready = stack.pop()
        if id(node) in done:
            continue
        if ready:
            done[id(node)] = node._work([done[id(c)] for c in node.children()])
        else:
            stack.append((node, True))
            stack.extend((c, False) for c in node.children())
    return done[id(s)]


def _grid(n: int, limit: int, extra: np.ndarray, cost: int = 1) -> tuple[np.ndarray | None, bool]:
    """The ticks to read: None for every tick of ``[0, n)`` (read in chunks), else an even grid plus ``extra``.

    The even grid has ``limit // 2`` ticks, fewer for a design that costs more than ``GRID_WORK`` node visits
    over them (``cost`` per tick; every design of at most 8 visits per tick keeps the full grid), and at least
    ``MIN_GRID``: a design 48 levels deep is read from a coarser grid in bounded time instead of for seconds.
    """
    if n <= limit:
        return None, True
    size = max(min(limit // 2, GRID_WORK // max(cost, 1)), min(limit // 2, MIN_GRID), 2)
    even = np.linspace(0, n - 1, size).astype(np.int64)
    return _sorted_unique(np.concatenate([even, extra])), False


def _earliest(s: Schedule, a: np.ndarray, b: np.ndarray, keep, tries: int) -> np.ndarray:
    """Indices of the first ``tries`` gaps ``[a[j], b[j]]`` whose bounds pass ``keep(lo, hi, a)``, in order.

    Coarse to fine: blocks of ``BLOCK`` gaps are bounded first (recursively, so 2**18 gaps cost a few
    hundred intervals, not 2**18), and gaps are bounded only inside blocks that pass, earliest first, in
    batches that grow fourfold.  A block's bounds hold for every gap in it, so a gap whose rates pass the
    test always sits in a block that passes; only gaps whose own bounds are loose can be skipped.
    """
    if a.size <= BLOCK:
        lo, hi = s._span(a.astype(float), b.astype(float))
        return np.flatnonzero(keep(lo, hi, a))[:tries]
    first = np.arange(0, a.size, BLOCK)
    last = np.minimum(first + BLOCK, a.size) - 1
    blocks = _earliest(s, a[first], b[last], keep, first.size)
    found: list[np.ndarray] = []
    got, i, batch = 0, 0, 1
    while i < blocks.size and got < tries:
        idx = np.concatenate([np.arange(first[j], last[j] + 1) for j in blocks[i:i + batch].tolist()])
        lo, hi = s._span(a[idx].astype(float), b[idx].astype(float))
        hit = idx[keep(lo, hi, a[idx])][:tries - got]
        found.append(hit)
        got += hit.size
        i, batch = i + batch, batch * 4
    return np.concatenate(found).astype(np.int64) if found else np.empty(0, np.int64)


def _chunks(grid: np.ndarray | None, n: int, start: int = 0):
    """Sorted tick arrays of at most CHUNK ticks covering the grid (every tick of ``[0, n)`` when None) from ``start``."""
    if grid is None:
        for i in range(start, n, CHUNK):
            yield np.arange(i, min(i + CHUNK, n), dtype=np.int64)
        return
    for i in range(int(np.searchsorted(grid, start)), grid.size, CHUNK):
        yield grid[i:i + CHUNK]


def _scan(s: Schedule, grid: np.ndarray | None, n: int):
    """Peak/min/area over the grid (chunked)."""
    peak, peak_at, low, low_at, total = -math.inf, 0, math.inf, 0, 0.0
    for t in _chunks(grid, n):
        y = s(t)
        j, k = int(np.argmax(y)), int(np.argmin(y))
        if y[j] > peak:
            peak, peak_at = float(y[j]), int(t[j])
        if y[k] < low:
            low, low_at = float(y[k]), int(t[k])
        total += float(np.sum(y))
    return peak, peak_at, low, low_at, total


def _refine_peak(s: Schedule, grid: np.ndarray, peak: float, peak_at: int) -> tuple[float, int]:
    """On a grid, look inside gaps whose bounds pass the peak (or reach it before it) for a higher or earlier one.

    Bounded work: at most ``REFINE_TRIES`` gaps per round, earliest first, are split into ``REFINE_SPLIT``
    pieces (or read tick by tick once ``REFINE_DENSE`` ticks or shorter); each round shrinks them 64-fold,
    so 2**53 ticks take at most 9 rounds.
    """
    a, b = grid[:-1], grid[1:]
    _, top = s._span(np.array([0.0]), np.array([float(grid[-1])]))
    if top[0] <= peak:  # nothing higher anywhere: only an equal peak before the grid's can be found
        before = int(np.searchsorted(a, peak_at))
        a, b = a[:before], b[:before]
    while a.size:
        wide = b - a > 1
        a, b = a[wide], b[wide]
        best, best_at = peak, peak_at
        picked = _earliest(s, a, b, lambda lo, hi, x: (hi > best) | ((hi >= best) & (x < best_at)), REFINE_TRIES)
        a, b = a[picked], b[picked]
        dense = b - a <= REFINE_DENSE
        ticks = [np.arange(x, y + 1) for x, y in zip(a[dense], b[dense])]
        pieces = [np.unique(np.linspace(x, y, REFINE_SPLIT + 1).astype(np.int64)) for x, y in zip(a[~dense], b[~dense])]
        for t in ticks + pieces:
            y = s(t)
            j = int(np.argmax(y))
            if y[j] > peak or (y[j] == peak and t[j] < peak_at):
                peak, peak_at = float(y[j]), int(t[j])
        if not pieces:
            break
        a = np.concatenate([c[:-1] for c in pieces])
        b = np.concatenate([c[1:] for c in pieces])
    return peak, peak_at


def _first_under(s: Schedule, grid: np.ndarray | None, n: int, start: int,
                 levels: tuple[float, ...]) -> list[int | None]:
    """For each level, the first tick from ``start`` where the rate is at or under it (None if never).

    "At or under" is within LEVEL_TOLERANCE relative.  One pass serves every level; a level below the
    design's lower bound over ``[start, n)`` is never reached and costs nothing.  Every tick is read when
    ``grid`` is None.  On a grid, the gaps before the first grid tick that is under and whose interval
    lower bound reaches the level are searched first (at most ``REFINE_TRIES`` of them, earliest first),
    then the gap that ends at that grid tick (``_refine_under``).
    """
    bounds = [level * (1.0 + LEVEL_TOLERANCE) for level in levels]
    out: list[int | None] = [None] * len(levels)
    floor_, _ = s._span(np.array([float(start)]), np.array([float(n - 1)]))
    todo = [i for i, b in enumerate(bounds) if floor_[0] <= b]
    if not todo:
        return out
    if grid is None:
        for t in _chunks(None, n, start):
            y = s(t)
            for i in list(todo):
                hit = np.flatnonzero(y <= bounds[i])
                if hit.size:
                    out[i] = int(t[hit[0]])
                    todo.remove(i)
            if not todo:
                break
        return out
    g = grid[int(np.searchsorted(grid, start)):]
    if not g.size or g[0] != start:
        g = np.concatenate([[start], g]).astype(np.int64)
    for c in range(0, g.size - 1, CHUNK):
        a, b = g[c:c + CHUNK], g[c + 1:c + CHUNK + 1]
        a = a[:b.size]
        yb = s(b)
        firsts = {i: np.flatnonzero(yb <= bounds[i]) for i in todo}
        for i in list(todo):
            under = firsts[i]
            k = int(under[0]) if under.size else b.size
            got = None
            wide = np.flatnonzero(b[:k] - a[:k] > 1)  # bounds only up to the grid hit, earliest first
            level = bounds[i]
            gaps = _earliest(s, a[wide], b[wide], lambda lo, hi, x: lo <= level, REFINE_TRIES)
            for j in wide[gaps].tolist():
                got = _refine_under(s, int(a[j]), int(b[j]), bounds[i])
                if got is not None:
                    break
            if got is None and under.size:
                got = _refine_under(s, int(a[k]), int(b[k]), bounds[i])
                got = int(b[k]) if got is None else got
            if got is not None:
                out[i] = got
                todo.remove(i)
        if not todo:
            break
    return out


def _refine_under(s: Schedule, lo: int, hi: int, bound: float, budget: int = 48) -> int | None:
    """The earliest tick in ``(lo, hi]`` at or under ``bound`` that a bounded search finds, or None.

    Depth first over pieces, earliest first: a piece longer than ``REFINE_DENSE`` ticks is split into
    ``REFINE_SPLIT`` pieces whose ends are read; the pieces up to the first end that is under, whose
    interval lower bound reaches the level, are searched in order.  At most ``budget`` pieces are
    opened; exact for shapes with tight bounds (every monotone stretch), otherwise the earliest tick found.
    """
    stack = [(lo, hi)]
    found: int | None = None
    while stack and budget > 0:
        lo, hi = stack.pop()
        budget -= 1
        if hi - lo <= REFINE_DENSE:
            t = np.arange(lo + 1, hi + 1)
            h = np.flatnonzero(s(t) <= bound)
            if h.size:
                return int(t[h[0]])
            continue
        c = np.unique(np.linspace(lo, hi, REFINE_SPLIT + 1).astype(np.int64))
        under = np.flatnonzero(s(c[1:]) <= bound)  # piece i is (c[i], c[i + 1]]
        k = int(under[0]) if under.size else c.size - 1
        if under.size:
            found = int(c[k + 1]) if found is None else min(found, int(c[k + 1]))
        low, _ = s._span(c[:k].astype(float), c[1:k + 1].astype(float))
        later = [(int(c[k]), int(c[k + 1]))] if under.size else []
        stack += later + [(int(c[j]), int(c[j + 1])) for j in np.flatnonzero(low <= bound)[::-1].tolist()]
    return found
