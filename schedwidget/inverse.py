"""Inverse questions: the design with one parameter moved so that one number comes out as asked.

``solve(design, "target.factor", final=0.001)`` moves one declared numeric parameter within its declared
bounds by bracketing and bisection until the design hits the target.  A parameter is named by a path from the
design's top node: parameter names joined by dots, with ``[i]`` after a list of schedules (``"factor"``,
``"target.factor"``, ``"parts[1].steps"``, ``"parts[0].target.peak"``).
"""

from __future__ import annotations

import dataclasses
import math
import re
from typing import Any, Callable

import numpy as np

from .params import MAX_TICKS, Param, ScheduleError, as_whole, complain
from .sample import breaks
from .scan import _first_under, _grid, _refine_peak, _scan, work
from .schedule import MAX_RATE, Schedule

__all__ = ["solve", "paths"]

#: Points of the first look over the parameter's bounds (the ends included).
GRID = 48
#: Halvings at most in one bisection: a float64 has 2**63 non-negative values, a tick 2**53.
HALVINGS = 64
#: Longest budget whose area and first tick under a level are read tick by tick; longer ones from facts' grid.
EXACT = 2 ** 16
#: Interior peaks (or troughs) of the target between grid values searched before refusing a target out of reach.
EXTREMES = 3
#: Two values of a target closer than this (relative) count as equal: float rounding, not a jump.
TIE = 1e-12
NUMERIC = ("rate", "ratio", "ticks", "count")
_SEGMENT = re.compile(r"([A-Za-z_][A-Za-z0-9_]*)(?:\[([0-9]+)\])?")


def solve(design: Schedule, parameter: str, *, rate: tuple[int, float] | None = None,
          under: tuple[float, int] | None = None, area: float | None = None,
          final: float | None = None) -> Schedule:
    """The design with one parameter moved to hit exactly one target.

    Parameters
    ----------
    design : the schedule to change.
    parameter : path of a numeric parameter (a rate, ratio, length or count) from the design's top node:
        names joined by dots, ``[i]`` after a list of schedules: ``"factor"``, ``"target.factor"``,
        ``"parts[1].steps"``.
    rate : ``(tick, value)``: the rate at ``tick`` is ``value``.
    under : ``(share, tick)``: the rate first falls under ``share`` of the peak at ``tick`` (counted from the
        peak, as ``facts`` counts its 10 % and 1 % ticks; the peak is read over the design's length, or
        over ``tick + 1`` ticks for an open-ended design).
    area : the sum of the rates over the design's length (as ``facts(...).area``).
    final : the rate the design ends on: the value reached at ``t = length`` and held after it (a cosine's
        floor, a ramp's end; ``facts(...).after``), which for a staircase is the level after its last step.

    Returns
    -------
    The design with the parameter moved.  A real parameter is exact to the float: of the two neighbouring
    floats where the target is passed, the one whose value is nearer (of a run of values that all give the
    target, the smallest).  A whole-valued parameter (a length, a
    count) is the smallest whole value at which the target is reached or passed (in the direction the
    target moves as the parameter grows).  For ``under`` the first tick under the share must be ``tick``
    exactly; of the values that give it, the answer is the one at the edge where the tick would move past
    ``tick``: the rate at ``tick`` is then as near the share as the resolution allows.

    Raises
    ------
    ScheduleError
        naming the parameter, its bounds, the target and the values reachable within the bounds when no
        value hits it; when the target is not monotone in the parameter over its bounds (it could be hit
        more than once, so no single answer is right); when the target jumps over the asked value.

    Examples
    --------
    >>> from schedwidget import exp_decay
    >>> s = solve(exp_decay(0.1, 0.9, every=100, steps=20_000), "factor", final=0.001)
    >>> s.factor == 0.01 ** (1 / 200)
    True
    """
    owner = "solve"
    if not isinstance(design, Schedule):
        raise complain(owner, "design", design, "a Schedule (built with cosine(), warmup(), ...)")
    given = {k: v for k, v in (("rate", rate), ("under", under), ("area", area), ("final", final)) if v is not None}
    if len(given) != 1:
        raise complain(owner, "target", ", ".join(given) or "none",
                       "exactly one of rate=(tick, value), under=(share, tick), area=value, final=value")
    (what, raw), = given.items()
    path, p, _ = _find(design, parameter)
    metric, goal, words, whole_metric = _target(design, what, raw)
    lo, hi, whole = _bounds(p)

    def build(v):
        try:
            return _rebuild(design, path, int(v) if whole else float(v))
        except ScheduleError:
            return None

    return _Search(owner, parameter, lo, hi, whole, build, metric, goal, words, whole_metric).run()


# ------------------------------------------------------------------ the parameter
def paths(design: Schedule) -> list[tuple[str, Param, Any]]:
    """Every parameter ``solve`` can move in ``design``: (path, declaration, current value), depth first.

    >>> from schedwidget import cosine, warmup
    >>> [p for p, _, _ in paths(warmup(cosine(0.1, steps=100), 10))]
    ['target.peak', 'target.floor', 'target.steps', 'steps', 'start']
    """
    if not isinstance(design, Schedule):
        raise complain("paths", "design", design, "a Schedule (built with cosine(), warmup(), ...)")
    out: list[tuple[str, Param, Any]] = []

    def walk(node: Schedule, prefix: str) -> None:
        for name, p in type(node).params().items():
            v = getattr(node, name)
            if p.kind in NUMERIC:
                out.append((prefix + name, p, v))
            elif p.kind == "schedule":
                walk(v, f"{prefix}{name}.")
            elif p.kind == "schedules":
                for i, c in enumerate(v):
                    walk(c, f"{prefix}{name}[{i}].")

    walk(design, "")
    return out


def _find(design: Schedule, parameter: Any) -> tuple[list[tuple[str, int | None]], Param, Any]:
    """The path's segments, the parameter's declaration and its current value."""
    owner = "solve"
    allowed = "a path of parameter names joined by dots, [i] after a list of schedules (e.g. 'target.factor')"
    if not isinstance(parameter, str) or not parameter:
        raise complain(owner, "parameter", parameter, allowed)
    parts = parameter.split(".")
    path: list[tuple[str, int | None]] = []
    node: Any = design
    for k, part in enumerate(parts):
        m = _SEGMENT.fullmatch(part)
        if m is None:
            raise complain(owner, "parameter", parameter, allowed, f"{part!r} is not a name or name[i]")
        name, index = m.group(1), (int(m.group(2)) if m.group(2) is not None else None)
        declared = type(node).params()
        where = ".".join(parts[:k]) or "the design"
        if name not in declared:
            raise complain(owner, "parameter", parameter, f"a parameter of {node.kind} ({', '.join(declared)})",
                           f"{where} is a {node.kind}")
        p = declared[name]
        last = k == len(parts) - 1
        if index is not None and p.kind != "schedules":
            raise complain(owner, "parameter", parameter, allowed, f"{node.kind}.{name} is not a list of schedules")
        if p.kind == "schedules" and index is None:
            raise complain(owner, "parameter", parameter, allowed,
                           f"{node.kind}.{name} is a list of schedules: name one, e.g. {name}[0]")
        path.append((name, index))
        value = getattr(node, name)
        if index is not None:
            if index >= len(value):
                raise complain(owner, "parameter", parameter, f"an index < {len(value)} in {name}[...]")
            value = value[index]
        if last:
            if p.kind not in NUMERIC:
                raise complain(owner, "parameter", parameter, "a rate, ratio, length or count",
                               f"{node.kind}.{name} is a {p.kind}; solve moves one number")
            return path, p, value
        if not isinstance(value, Schedule):
            raise complain(owner, "parameter", parameter, allowed, f"{node.kind}.{name} holds no schedule")
        node = value
    raise AssertionError("unreachable")  # pragma: no cover


def _rebuild(node: Schedule, path: list[tuple[str, int | None]], value: Any) -> Schedule:
    name, index = path[0]
    if len(path) == 1:
        return dataclasses.replace(node, **{name: value})
    held = getattr(node, name)
    if index is None:
        return dataclasses.replace(node, **{name: _rebuild(held, path[1:], value)})
    items = list(held)
    items[index] = _rebuild(items[index], path[1:], value)
    return dataclasses.replace(node, **{name: tuple(items)})


def _bounds(p: Param) -> tuple[float, float, bool]:
    """The declared hard bounds as a closed interval (open ends moved one float or one tick in)."""
    whole = p.kind in ("ticks", "count")
    if whole:
        lo = int(p.lo if p.lo is not None else 0) + (1 if p.lo_open else 0)
        hi = int(p.hi) if p.hi is not None else MAX_TICKS
        return lo, hi - (1 if p.hi_open and p.hi is not None else 0), True
    lo = float(p.lo) if p.lo is not None else 0.0
    hi = float(p.hi) if p.hi is not None else MAX_RATE
    if p.lo_open:
        lo = math.nextafter(lo, math.inf)
    if p.hi_open:
        hi = math.nextafter(hi, -math.inf)
    return lo, hi, False


# ------------------------------------------------------------------ the target
def _target(design: Schedule, what: str, raw: Any) -> tuple[Callable[[Schedule], float], float, str, bool]:
    """The number a design gives (``metric``), the value asked, words for messages, and whether it is whole."""
    owner = "solve"
    if what in ("area", "final"):
        if isinstance(raw, bool) or not isinstance(raw, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(raw)) or raw < 0:
            raise complain(owner, what, raw, "a finite rate >= 0" if what == "final" else "a finite area >= 0")
        if what == "final":
            return _final, float(raw), "final rate", False
        return _area, float(raw), "area", False
    pair = _pair(owner, what, raw)
    if what == "rate":
        tick, value = pair
        t = as_whole(tick)
        if t is None or not 0 <= t <= MAX_TICKS:
            raise complain(owner, "rate", raw, "(tick, value) with a whole tick >= 0 and <= 2**53")
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(value)) or value < 0:
            raise complain(owner, "rate", raw, "(tick, value) with a finite rate value >= 0")
        return (lambda s: s(t)), float(value), f"rate at tick {t}", False
    share, tick = pair
    t = as_whole(tick)
    if isinstance(share, bool) or not isinstance(share, (int, float, np.integer, np.floating)) \
            or not 0 < float(share) <= 1:
        raise complain(owner, "under", raw, "(share, tick) with a share of the peak in (0, 1]")
    if t is None or not 0 <= t < MAX_TICKS:
        raise complain(owner, "under", raw, "(share, tick) with a whole tick >= 0 and < 2**53")
    level = float(share)
    # searched as a crossing of t + 0.5: the answer is the value next to where the first tick under the level
    # moves past t, on the side where it is t (so the rate at t is as near the level as the resolution allows)
    return (lambda s: _first_under_share(s, level, t)), t + 0.5, \
        f"first tick under {level:g} of the peak", True


def _pair(owner: str, what: str, raw: Any) -> tuple[Any, Any]:
    allowed = "(tick, value)" if what == "rate" else "(share, tick)"
    try:
        a, b = raw
    except (TypeError, ValueError):
        raise complain(owner, what, raw, f"a pair {allowed}") from None
    return a, b


def _length(s: Schedule, what: str) -> int:
    if s.length is None:
        raise complain("solve", what, "an open-ended design", "a design with a length",
                       "give the design a length (steps=...) to ask for its area or final rate")
    return int(s.length)


def _final(s: Schedule) -> float:
    return s(_length(s, "final"))


def _read(s: Schedule, n: int):
    """Peak, where, the reading's grid (None: every tick) and the sum of the rates over ``[0, n)``, read as
    ``facts`` reads them (every tick up to EXACT ticks, else its grid)."""
    extra = np.concatenate([breaks(s, n), [n - 1]]).astype(np.int64)
    extra = np.concatenate([extra, extra - 1])
    extra = extra[(extra >= 0) & (extra < n)]
    grid, exact = _grid(n, EXACT, extra, work(s))
    peak, peak_at, _, _, total = _scan(s, grid, n)
    if not exact:
        peak, peak_at = _refine_peak(s, grid, peak, peak_at)
    size = n if grid is None else grid.size
    return peak, peak_at, grid, (total if exact else total * n / size)


def _area(s: Schedule) -> float:
    return float(_read(s, _length(s, "area"))[3])


def _first_under_share(s: Schedule, share: float, tick: int) -> float:
    """The first tick from the peak where the rate is at or under ``share`` of it (inf when never)."""
    n = int(s.length) if s.length is not None else tick + 1
    peak, peak_at, grid, _ = _read(s, n)
    if not peak > 0:
        return math.inf
    got = _first_under(s, grid, n, peak_at, (share * peak,))[0]
    return math.inf if got is None else float(got)


# ------------------------------------------------------------------ the search
def _shown(y: float) -> str:
    return "never (within the budget)" if y == math.inf else repr(y)


def _key(v: float) -> int:
    """A non-negative float's place in the order of floats (bisection on it ends at neighbouring floats)."""
    return int(np.float64(v).view(np.int64))


def _unkey(k: int) -> float:
    return float(np.int64(k).view(np.float64))


class _Search:
    """Bracketing over a grid of the bounds, then bisection to the parameter's resolution."""

    def __init__(self, owner, name, lo, hi, whole, build, metric, goal, words, whole_metric):
        self.owner, self.name, self.lo, self.hi, self.whole = owner, name, lo, hi, whole
        self.build, self.metric, self.goal, self.words, self.whole_metric = build, metric, goal, words, whole_metric
        self.seen: dict[float, tuple[Schedule | None, float | None]] = {}

    # one value of the parameter: the design it makes (None when refused) and its number
    def at(self, v):
        v = int(v) if self.whole else float(v)
        if v not in self.seen:
            s = self.build(v)
            y = None if s is None else float(self.metric(s))
            if self.whole_metric and y is not None and not math.isfinite(y):
                s = y = None  # never under the level within the budget: no tick to compare, like a refused value
            self.seen[v] = (s, y)
        return self.seen[v]

    def key(self, v):
        return int(v) if self.whole else _key(v)

    def unkey(self, k):
        return int(k) if self.whole else _unkey(k)

    def grid(self) -> list:
        lo, hi = self.lo, self.hi
        if self.whole:
            pts = np.unique(np.round(np.geomspace(max(lo, 1), hi, GRID)).astype(np.int64)).tolist()
            return sorted({int(lo), *[int(x) for x in pts if lo <= x <= hi], int(hi)})
        if lo > 0:
            pts = np.geomspace(lo, hi, GRID).tolist()
        else:  # 0, then decades from the smallest normal-looking rate up
            small = min(1e-12, hi)
            pts = [0.0] + np.geomspace(small, hi, GRID - 1).tolist()
        pts = [min(max(x, lo), hi) for x in pts]
        return sorted({lo, *pts, hi})

    def edge(self, good, bad):
        """The feasible value nearest ``bad`` between a feasible ``good`` and a refused ``bad``."""
        a, b = self.key(good), self.key(bad)
        for _ in range(HALVINGS + 2):
            if abs(b - a) <= 1:
                break
            m = (a + b) // 2
            if self.at(self.unkey(m))[0] is None:
                b = m
            else:
                a = m
        return self.unkey(a)

    def words_bounds(self) -> str:
        return f"[{self.lo!r}, {self.hi!r}]"

    def refuse(self, why: str, hint: str | None = None) -> ScheduleError:
        goal = int(self.goal - 0.5) if self.whole_metric else self.goal
        return ScheduleError(f"{self.owner}: no value of {self.name} in {self.words_bounds()} gives {self.words} = "
                             f"{goal!r}: {why}" + (f" ({hint})" if hint else ""))

    def run(self) -> Schedule:
        pts = self.grid()
        ok = [v for v in pts if self.at(v)[0] is not None]
        if not ok:
            raise self.refuse("the design refuses every value tried between the bounds")
        # the ends of the values the design accepts, found to the resolution when they fall between grid points
        first, last = pts.index(ok[0]), pts.index(ok[-1])
        if first > 0:
            ok.insert(0, self.edge(ok[0], pts[first - 1]))
        if last < len(pts) - 1:
            ok.append(self.edge(ok[-1], pts[last + 1]))
        ok = sorted(set(ok))
        ys = [self.at(v)[1] for v in ok]
        signs = [self.side(y) for y in ys]
        # the places where the target is hit: a run of grid values on it, or a crossing between two neighbours
        hits = [j for j in range(len(ok)) if (signs[j] == 0 and (j == 0 or signs[j - 1] != 0))
                or (j > 0 and signs[j] * signs[j - 1] < 0)]
        if not hits and self.whole_metric:  # past one end the rate never falls under the level: that end is it
            for j in (-1, 0):
                if ys[j] == self.goal - 0.5:
                    return self.at(ok[j])[0]
        if not hits:
            self.extremes(ok, ys)  # a rise and fall between grid values may reach the goal: refused, not monotone
            finite = [y for y in ys if math.isfinite(y)] or ys
            raise self.refuse(f"reachable: {min(finite)!r} to {max(finite)!r} (over {self.name} = {ok[0]!r} to "
                              f"{ok[-1]!r})", "move another parameter, or change the design")
        if len(hits) > 1:  # each place counted once: a run on the goal between its two sides is one crossing
            j, k = hits[0], hits[1]
            raise self.not_monotone([(ok[j], ys[j]), (ok[k], ys[k])])
        i = hits[0]
        if signs[i] == 0 and (i == 0 or signs[i - 1] == 0):
            return self.at(ok[i])[0]
        start = signs[i - 1]  # the side of the goal the values before the hit are on
        a, b = self.key(ok[i - 1]), self.key(ok[i])
        for _ in range(HALVINGS + 2):
            if b - a <= 1:
                break
            m = (a + b) // 2
            sm, y = self.at(self.unkey(m))
            if sm is None:
                raise self.refuse(f"the design refuses {self.name} = {self.unkey(m)!r} between two values it "
                                  "accepts", "the values it accepts are not one interval")
            ya, yb = self.at(self.unkey(a))[1], self.at(self.unkey(b))[1]
            if not (min(ya, yb) - self.slack(ya, yb) <= y <= max(ya, yb) + self.slack(ya, yb)):
                raise self.not_monotone([(self.unkey(a), ya), (self.unkey(m), y), (self.unkey(b), yb)])
            if self.side(y, strict=not self.whole) == start:  # a real parameter: to the exact crossing
                a = m
            else:
                b = m
        return self.finish(self.unkey(a), self.unkey(b))

    def finish(self, before, v) -> Schedule:
        """``v`` is the first value (to the resolution) past the goal or on it; ``before`` the one before."""
        s, y = self.at(v)
        y0 = self.at(before)[1]
        if self.whole_metric:
            want = self.goal - 0.5
            if y0 == want:
                return self.at(before)[0]
            if y == want:
                return s
            raise self.refuse(f"it jumps from {_shown(y0)} at {self.name} = {before!r} to {_shown(y)} at {v!r}")
        if self.whole:
            return s
        if self.side(y) != 0 and not self.close(y, y0, jump=True):
            raise self.refuse(f"it jumps from {y0!r} at {self.name} = {before!r} to {y!r} at {v!r}")
        return self.at(before)[0] if abs(y0 - self.goal) < abs(y - self.goal) else s

    def extremes(self, ok, ys) -> None:
        """Around the interior highest (or lowest) grid values nearest the goal, at most EXTREMES of them, the true
        extreme (ternary search over the values between the neighbours); a ScheduleError when one reaches the goal
        (the target is then hit on both sides of it, or only between grid values: not one answer either way)."""
        sign = 1 if all(self.side(y) < 0 for y in ys) else -1  # the goal is above every value: look at the highs
        tops = [j for j in range(1, len(ys) - 1)
                if sign * ys[j] > sign * ys[j - 1] and sign * ys[j] >= sign * ys[j + 1]]
        for j in sorted(tops, key=lambda j: abs(ys[j] - self.goal))[:EXTREMES]:
            a, b = self.key(ok[j - 1]), self.key(ok[j + 1])
            best, c = ys[j], self.key(ok[j])  # the best value seen and where: the interval always keeps it
            for _ in range(2 * HALVINGS):
                if b - a <= 2:
                    break
                m1, m2 = a + (b - a) // 3, b - (b - a) // 3
                y1, y2 = self.at(self.unkey(m1))[1], self.at(self.unkey(m2))[1]
                if y1 is None or y2 is None:
                    break
                for m, y in ((m1, y1), (m2, y2)):
                    if sign * y > sign * best:
                        best, c = y, m
                if c <= m1:  # a single peak is then in [a, m2] (f(m2) <= f(c)); likewise on the right
                    b = m2
                elif c >= m2:
                    a = m1
                else:
                    a, b = m1, m2
            for k in range(a, min(b, a + 2) + 1):
                y = self.at(self.unkey(k))[1]
                if y is not None:
                    best = max(best, y) if sign > 0 else min(best, y)
            if self.side(best) != self.side(ys[j]):
                raise self.not_monotone([(ok[j - 1], ys[j - 1]), (ok[j], ys[j]), (ok[j + 1], ys[j + 1])])
            ys[j] = best

    # ----------------------------------------------------------------- helpers
    def side(self, y: float, strict: bool = False) -> int:
        """-1, 0 or +1: under the goal, on it (within float rounding unless ``strict``), over it."""
        if self.whole_metric or strict:
            return (y > self.goal) - (y < self.goal)
        if self.close(y, self.goal):
            return 0
        return 1 if y > self.goal else -1

    @staticmethod
    def slack(a, b) -> float:
        return TIE * max(abs(a) if math.isfinite(a) else 0.0, abs(b) if math.isfinite(b) else 0.0)

    def close(self, a, b, jump=False) -> bool:
        if a == b:
            return True
        if not (math.isfinite(a) and math.isfinite(b)):
            return False
        scale = max(abs(a), abs(b), abs(self.goal))
        return abs(a - b) <= (1e-9 if jump else TIE) * scale

    def not_monotone(self, pairs) -> ScheduleError:
        seen = ", ".join(f"{y!r} at {v!r}" for v, y in dict(pairs).items())
        goal = int(self.goal - 0.5) if self.whole_metric else self.goal
        return ScheduleError(
            f"{self.owner}: {self.words} is not monotone in {self.name} over {self.words_bounds()}: the target "
            f"{goal!r} is hit in more than one place ({seen}), so no single answer is right "
            "(narrow the question, or move a parameter that moves the target one way only)")
