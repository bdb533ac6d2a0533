"""The reference design sized to a budget, and the same design written by hand (numpy floor, plain Python).

Reference design (issue 7): a linear warmup, then a cosine with 4 warm restarts
(5 cycles) whose cycles double in length, a floor clip, unit "step":

    warmup(restarts(cosine(0.1, 0.0, steps=L0), cycles=5, growth=2.0), steps=W).clip(low=1e-4)

sized to a budget ``n``: ``L0 = (95 * n // 100) // 31`` and ``W = n - 31 * L0``
(the five cycles take ``L0 * (1 + 2 + 4 + 8 + 16) = 31 * L0`` ticks), so the
design's length is exactly ``n`` and the warmup takes about 5 % of it.
"""

from __future__ import annotations

import math

import numpy as np

from schedwidget import Schedule, cosine, drops, exp_decay, flat, knots, one_cycle, poly, ramp, restarts, stages
from schedwidget import triangle, warmup

__all__ = ["PEAK", "LOW", "Sizing", "sizing", "reference", "floor_numpy", "floor_searchsorted",
           "plain_python", "twenty_stages"]

PEAK = 0.1   # the cosine's peak rate
LOW = 1e-4   # the floor clip
CYCLES = 5   # 4 warm restarts
GROWTH = 2.0


class Sizing:
    """Warmup length ``W`` and first-cycle length ``L0`` of the reference design for budget ``n``."""

    def __init__(self, n: int) -> None:
        if n < 100:
            raise ValueError(f"sizing: n must be >= 100, got {n}")
        self.n = n
        self.L0 = (95 * n // 100) // 31
        self.W = n - 31 * self.L0

    def __repr__(self) -> str:
        return f"Sizing(n={self.n}, W={self.W}, L0={self.L0})"


def sizing(n: int) -> Sizing:
    """The reference design's sizing for a budget of ``n`` ticks."""
    return Sizing(n)


def reference(n: int, peak: float = PEAK) -> Schedule:
    """The reference design over exactly ``n`` ticks (our composition machinery)."""
    z = Sizing(n)
    return warmup(restarts(cosine(peak, 0.0, steps=z.L0), cycles=CYCLES, growth=GROWTH), steps=z.W).clip(low=LOW)


def floor_numpy(n: int):
    """The tightest hand-written numpy for the reference design: valid for ticks ``0 <= t < n``.

    The cycle index is closed form: after the warmup, ``(t - W) / L0 + 1 = 2**k * (1 + x)``
    with ``k`` the cycle and ``x`` in ``[0, 1)`` the position inside it, so ``frexp``
    returns the mantissa ``(1 + x) / 2`` and ``cos(pi * x) = -cos(2 * pi * mantissa)``.
    One division (exact at cycle starts, where a reciprocal multiply is not), one
    frexp, one cos, one where, one clip; buffers are reused in place.
    """
    z = Sizing(n)
    W, L0, half, slope = float(z.W), float(z.L0), PEAK / 2.0, PEAK / z.W

    def f(t: np.ndarray) -> np.ndarray:
        u = t.astype(np.float64)
        m = u - W
        m /= L0
        m += 1.0
        np.frexp(m, out=(m, np.empty(m.shape, np.int32)))
        m *= 2.0 * math.pi
        np.cos(m, out=m)
        m *= -half
        m += half
        y = np.where(u < W, u * slope, m)
        return np.maximum(y, LOW, out=y)

    return f


def floor_searchsorted(n: int):
    """The same design by hand with a searchsorted cycle index (a second, more usual floor)."""
    z = Sizing(n)
    W, half, slope = float(z.W), PEAK / 2.0, PEAK / z.W
    lengths = z.L0 * GROWTH ** np.arange(CYCLES)
    starts = np.concatenate([[0.0], np.cumsum(lengths)[:-1]])

    def f(t: np.ndarray) -> np.ndarray:
        u = t.astype(np.float64)
        v = u - W
        k = np.searchsorted(starts, v, side="right") - 1
        x = (v - starts[k]) / lengths[k]
        x *= math.pi
        np.cos(x, out=x)
        x += 1.0
        x *= half
        y = np.where(v < 0, u * slope, x)
        return np.maximum(y, LOW, out=y)

    return f


def plain_python(n: int):
    """The reference design as a plain-Python function of one tick (what one writes for ``LambdaLR``)."""
    z = Sizing(n)
    W, L0 = z.W, z.L0

    def lr(t: int) -> float:
        if t < W:
            rate = PEAK * t / W
        else:
            v, start, length = t - W, 0, L0
            for _ in range(CYCLES - 1):
                if v < start + length:
                    break
                start, length = start + length, length * 2
            x = min((v - start) / length, 1.0)
            rate = PEAK / 2.0 * (1.0 + math.cos(math.pi * x))
        return max(rate, LOW)

    return lr


def twenty_stages(steps_per_epoch: int = 1150) -> Schedule:
    """A 20-stage design over every leaf kind (invented, for the spec and export benchmark)."""
    e = steps_per_epoch
    parts = [
        ramp(0.0, 0.1, 2 * e),
        cosine(0.1, 0.05, steps=5 * e),
        flat(0.05, steps=e),
        exp_decay(0.05, 0.97, every=100, steps=4 * e),
        drops(0.03, at=(e, 2 * e, 3 * e), factor=0.5, steps=4 * e),
        poly(0.02, 0.005, steps=3 * e, power=2.0),
        triangle(0.001, 0.01, half_period=e // 2, shrink=0.5, steps=4 * e),
        knots([(0, 0.01), (e, 0.02), (2 * e, 0.005)], interp="log"),
        restarts(cosine(0.02, 0.001, steps=e), cycles=3, growth=2.0),
        one_cycle(0.02, steps=5 * e),
        ramp(0.002, 0.02, e, curve="cosine"),
        cosine(0.02, 0.0, steps=6 * e) * 0.5,
        flat(0.01, steps=2 * e),
        exp_decay(0.01, 0.5, every=e, steps=4 * e),
        drops(0.008, at=(2 * e,), factor=0.1, steps=4 * e),
        poly(0.008, 0.0, steps=4 * e),
        knots([(0, 0.004), (e, 0.002), (3 * e, 0.001)], interp="hold"),
        triangle(0.0005, 0.004, half_period=e, steps=6 * e),
        ramp(0.004, 0.0005, 3 * e, curve="geometric"),
        cosine(0.0005, 0.0, steps=10 * e).clip(low=1e-5),
    ]
    return stages(*parts)
