"""Random valid designs, derived from the registry of kinds and each parameter's declaration.

Nothing here names a kind: ``spec.KINDS`` says which kinds exist, ``Param``
says what each parameter is (rate, ratio, ticks, choice, ticklist, points,
schedule, schedules) and its hard and soft bounds.  A new kind added to the
registry joins the fuzz suite without a change here.  Cross-parameter rules
(``floor <= peak``, ``warmup <= steps`` ...) are not declared, so a draw that
its constructor refuses is drawn again.
"""

from __future__ import annotations

import math
import random
import signal
from typing import Any

from schedwidget.schedule import MAX_TICKS, Param, Schedule, ScheduleError
from schedwidget.spec import KINDS

def combinators() -> list[str]:
    """Registered kinds whose parameters hold other schedules (read at each call: kinds register on definition)."""
    return [k for k, c in KINDS.items() if any(p.kind in ("schedule", "schedules") for p in c.params().values())]


def leaves() -> list[str]:
    """Registered kinds that hold no other schedule."""
    return [k for k in KINDS if k not in combinators()]

#: Tick counts at the edge of what a float64 clock holds, and odd ones that make stretched clocks round.
EXTREME_TICKS = [MAX_TICKS, MAX_TICKS - 1, 2 ** 52 + 1, 10 ** 12, 100_000_001, 100_000_006, 99_999_989, 2 ** 31 - 1]
#: Rates at the edge of float64.
EXTREME_RATES = [1e308, 1.7976931348623157e308, 8.98846567431158e307, 1e300, 5e-324, 1e-300, 0.0]


def _loguniform(rng: random.Random, lo: float, hi: float) -> float:
    lo = max(lo, 1e-12)
    return math.exp(rng.uniform(math.log(lo), math.log(max(hi, lo))))


def draw_value(rng: random.Random, p: Param, extreme: float, child) -> Any:
    """A value for parameter ``p``: mostly in its soft range, with probability ``extreme`` at a hard edge."""
    if p.optional and rng.random() < 0.25:
        return None
    wild = rng.random() < extreme
    if p.kind in ("rate", "ratio"):
        lo = p.lo if p.lo is not None else 0.0
        hi = p.hi if p.hi is not None else 1e308
        if wild:
            pool = [v for v in EXTREME_RATES + [lo, hi, math.nextafter(lo, math.inf), math.nextafter(hi, -math.inf)]
                    if lo <= v <= hi and not (p.lo_open and v == lo) and not (p.hi_open and v == hi)]
            return rng.choice(pool)
        slo, shi = p.soft if p.soft else (lo, min(hi, 10.0))
        slo, shi = max(slo, lo), min(shi, hi)
        v = _loguniform(rng, slo, shi) if p.log and slo > 0 else rng.uniform(slo, shi)
        if p.lo_open and v <= lo:
            v = math.nextafter(lo, math.inf)
        if p.hi_open and v >= hi:
            v = math.nextafter(hi, -math.inf)
        return min(max(v, lo), hi)
    if p.kind in ("ticks", "count"):
        lo = int(p.lo if p.lo is not None else 0)
        hi = int(p.hi) if p.hi is not None else MAX_TICKS
        if wild:
            return rng.choice([v for v in EXTREME_TICKS + [lo, hi] if lo <= v <= hi])
        slo, shi = p.soft if p.soft else (lo, min(hi, 1000))
        return max(lo, min(hi, int(_loguniform(rng, max(slo, 1), max(shi, 1)))))
    if p.kind == "flag":
        return rng.random() < 0.5
    if p.kind == "choice":
        return rng.choice(p.choices)
    if p.kind == "ticklist":
        lo = int(p.lo or 0)
        top = rng.choice(EXTREME_TICKS) if wild else rng.randint(lo + 1, 2000)
        n = rng.randint(1, 5)
        return sorted(rng.sample(range(lo, max(lo + n, top)), n)) if top < 10 ** 7 else \
            sorted({rng.randint(lo, top) for _ in range(n)})
    if p.kind == "points":
        n = rng.randint(2, 6)
        top = rng.choice(EXTREME_TICKS) if wild else rng.randint(n, 3000)
        ticks = sorted({0, *(rng.randint(1, top) for _ in range(n - 1))})
        if len(ticks) < 2:
            ticks = [0, top]
        rate = (lambda: rng.choice(EXTREME_RATES[:4])) if wild and rng.random() < 0.5 else \
            (lambda: _loguniform(rng, 1e-6, 1.0))
        return [[t, rate()] for t in ticks]
    if p.kind == "schedule":
        return child()
    if p.kind == "schedules":
        return tuple(child() for _ in range(rng.randint(2, 4)))
    raise AssertionError(f"fuzz: teach designs.draw_value the parameter kind {p.kind!r}")


class _Slow(Exception):
    pass


def _alarm(signum, frame):
    raise _Slow


def design(rng: random.Random, depth: int = 2, extreme: float = 0.05, kind: str | None = None,
           finite: bool | None = None) -> Schedule:
    """A random valid schedule, ``depth`` combinator levels at most; ``kind`` forces the top node's kind.

    ``finite=True`` insists on a length (children of most combinators need one).
    Construction of each draw is bounded by a short alarm, so a constructor that
    hangs or crashes on an extreme draw cannot stop the generator (the draw is
    dropped; ``drawn_specs`` makes such draws into cases).
    """
    for _ in range(200):
        k = kind or (rng.choice(combinators()) if depth > 0 and rng.random() < 0.55 else rng.choice(leaves()))
        cls = KINDS[k]

        def child(depth=depth):
            return design(rng, depth - 1 if depth > 0 else 0, extreme, None,
                          finite=rng.random() < 0.85)

        kwargs = {name: draw_value(rng, p, extreme, child) for name, p in cls.params().items()}
        old = signal.signal(signal.SIGALRM, _alarm)
        signal.setitimer(signal.ITIMER_REAL, 0.2)
        try:
            s = cls(**kwargs)
        except (ScheduleError, _Slow):
            continue
        except Exception:  # noqa: BLE001 - a constructor that crashes: drawn_specs finds it in a case; draw again
            continue
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
        if finite and s.length is None:
            continue
        return s
    # every kind has a valid draw in its soft range; reaching this means the declarations changed
    raise AssertionError(f"fuzz: no valid {kind or 'design'} in 200 draws")
