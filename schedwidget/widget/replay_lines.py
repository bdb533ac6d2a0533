"""The replay panel's plain helpers: round epoch ticks, the rate per epoch as a step line, and a design read on
the epoch clock (what ``replay_plateau(base=...)`` takes).  Pure: numpy and the core only."""

from __future__ import annotations

import numpy as np

from ..schedule import Schedule, complain

__all__ = ["nice_ticks", "step_line", "epoch_base"]


def nice_ticks(n: int, most: int = 10) -> list[int]:
    """Whole-number ticks 0..n at a round spacing (1, 2 or 5 x 10^k), at most about ``most`` of them.

    >>> nice_ticks(90)
    [0, 10, 20, 30, 40, 50, 60, 70, 80, 90]
    """
    n = max(int(n), 1)
    k = 0
    while True:
        for m in (1, 2, 5):
            every = m * 10 ** k
            if n // every + 1 <= most:
                return list(range(0, n + 1, every))
        k += 1


def step_line(rates: np.ndarray, next_rate: float) -> tuple[np.ndarray, np.ndarray]:
    """x/y of a step line: the rate of epoch i spans [i, i + 1]; the next rate is a last, zero-width point.

    >>> x, y = step_line(np.array([0.1, 0.01]), 0.01)
    >>> x.tolist(), y.tolist()
    ([0.0, 1.0, 1.0, 2.0, 2.0], [0.1, 0.1, 0.01, 0.01, 0.01])
    """
    n = len(rates)
    x = np.repeat(np.arange(n + 1, dtype=float), 2)[1:]
    y = np.append(np.repeat(np.asarray(rates, dtype=float), 2), next_rate)
    return x, y


def epoch_base(s: Schedule, unit: str, steps_per_epoch: int | None) -> Schedule:
    """The design on the epoch clock, for ``replay_plateau(base=...)``.

    A design in epochs is used as it is; a design in steps is read at the first
    step of every epoch (``s.stretch(length // steps_per_epoch)``), which needs a
    length that is a whole number of epochs.
    """
    if unit == "epoch":
        return s
    if not steps_per_epoch:
        raise complain("replay", "steps_per_epoch", steps_per_epoch,
                       "a whole number >= 1 to follow a design in steps", "the replay runs once per epoch")
    n = s.length
    if n is None or n % steps_per_epoch:
        raise complain("replay", "design length", n, f"a whole number of epochs ({steps_per_epoch:,} steps each)",
                       "to follow a design in steps its length must be known and fill whole epochs")
    return s.stretch(n // steps_per_epoch)
