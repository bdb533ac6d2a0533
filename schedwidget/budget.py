"""Budget arithmetic shared by the export and the widget: optimizer updates from data, batch and epochs.

The clock of a design counts optimizer updates (unit "step") or epochs.  With
gradient accumulation or several processes, one update consumes
``batch * processes * accumulation`` samples, so the number of updates per
epoch is not the number of batches a process's data loader yields.

This module holds ``Budget`` and ``check_length``; the rest of the budget arithmetic has a module per purpose
and every name stays importable from here: ``lengths`` (lengths and rates as people type them, the stage that
absorbs the rest of the run), ``rebatch`` (a design moved to another batch size) and ``proportion`` (a
design's ticks multiplied in proportion, as the designer's budget edits do).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from numbers import Real
from typing import Any

from .schedule import MAX_TICKS, Schedule, ScheduleError, as_whole, complain, param

__all__ = ["Budget", "check_length", "scale_for_batch", "parse_length", "parse_rate", "length_words", "absorb",
           "ROUNDING", "ROUNDINGS", "share_ticks", "LENGTH_FORMS", "RATE_FORMS", "Rescaled", "rescale_for_batch", "scale_node", "absorb_rounding"]


@dataclass(frozen=True)
class Budget:
    """A training budget: how many optimizer updates a run makes.

    One optimizer update consumes one *global batch* of ``batch * processes *
    accumulation`` samples.  Updates per epoch are
    ``floor(samples / global_batch)`` with ``drop_last=True`` (the incomplete
    last global batch is dropped) and ``ceil(samples / global_batch)`` with
    ``drop_last=False`` (the last, partial global batch still makes one update).
    This assumes the loop calls ``optimizer.step()`` once per global batch,
    including the partial one when ``drop_last=False``.

    Parameters
    ----------
    samples : training samples per epoch (all processes together).
    batch : samples per micro-batch on one process.
    epochs : epochs in the run.
    processes : data-parallel processes (each takes its own micro-batches).
    accumulation : micro-batches whose gradients are summed into one update.
    drop_last : whether the incomplete last global batch is dropped.

    Examples
    --------
    >>> b = Budget(samples=147_200, batch=128, epochs=90)   # the demo scenario
    >>> b.steps_per_epoch, b.steps
    (1150, 103500)
    >>> Budget(samples=147_200, batch=1024, epochs=90, drop_last=False).steps_per_epoch
    144
    """

    samples: int = param(kind="count", lo=1, doc="training samples per epoch")
    batch: int = param(kind="count", lo=1, doc="samples per micro-batch on one process")
    epochs: int = param(kind="count", lo=1, doc="epochs in the run")
    processes: int = param(1, kind="count", lo=1, doc="data-parallel processes")
    accumulation: int = param(1, kind="count", lo=1, doc="micro-batches per optimizer update")
    drop_last: bool = param(True, kind="flag", doc="drop the incomplete last global batch")

    def __post_init__(self) -> None:
        for f in fields(self):
            p = f.metadata["param"]
            object.__setattr__(self, f.name, p.check("Budget", f.name, getattr(self, f.name)))
        if self.steps_per_epoch < 1:
            raise complain("Budget", "samples", self.samples, f">= the global batch {self.global_batch:,} "
                           "when drop_last=True", "otherwise every batch is dropped and no update runs")
        if self.steps > MAX_TICKS:
            raise complain("Budget", "epochs", self.epochs, f"at most {MAX_TICKS // self.steps_per_epoch:,} "
                           f"at {self.steps_per_epoch:,} updates per epoch",
                           "a run of more than 2**53 updates cannot be counted exactly on a float64 clock")

    @property
    def global_batch(self) -> int:
        """Samples per optimizer update: ``batch * processes * accumulation``."""
        return self.batch * self.processes * self.accumulation

    @property
    def steps_per_epoch(self) -> int:
        """Optimizer updates per epoch (floor with drop_last, else ceil, of samples / global batch)."""
        q, r = divmod(self.samples, self.global_batch)
        return q + (1 if r and not self.drop_last else 0)

    @property
    def steps(self) -> int:
        """Optimizer updates in the whole run."""
        return self.epochs * self.steps_per_epoch

    def length(self, unit: str = "step") -> int:
        """The budget in ticks of ``unit``: updates for "step", epochs for "epoch"."""
        if not isinstance(unit, str) or unit not in ("step", "epoch"):
            raise complain("Budget.length", "unit", unit, "one of 'step', 'epoch'")
        return self.steps if unit == "step" else self.epochs

    def epochs_to_steps(self, epochs: float) -> int:
        """Updates in ``epochs`` epochs, rounded to the nearest whole update (halves up).

        >>> Budget(samples=147_200, batch=128, epochs=90).epochs_to_steps(5)
        5750
        """
        try:
            ok = not isinstance(epochs, bool) and isinstance(epochs, Real) and math.isfinite(epochs) \
                and 0 <= epochs <= MAX_TICKS
        except OverflowError:  # an int too large for a float
            ok = False
        if not ok:
            raise complain("Budget.epochs_to_steps", "epochs", epochs, "a finite number >= 0 and <= 2**53")
        return math.floor(float(epochs) * self.steps_per_epoch + 0.5)

    def steps_to_epochs(self, steps: int) -> float:
        """Epochs (a float) covered by ``steps`` updates.

        >>> Budget(samples=147_200, batch=128, epochs=90).steps_to_epochs(5750)
        5.0
        """
        n = as_whole(steps)
        if n is None or n < 0 or n > MAX_TICKS:
            raise complain("Budget.steps_to_epochs", "steps", steps, "a whole number >= 0 and <= 2**53")
        return n / self.steps_per_epoch

    def share(self, fraction: float, unit: str = "step", rounding: str = "up") -> int:
        """``fraction`` (0 to 1) of the run as whole ticks of ``unit``, rounded by ``rounding``.

        ``rounding`` is "up" (the default: common practice, no source; trainers that take a warmup as a ratio
        of the updates round it up), "down" or "nearest" (halves up).  The product is exact: ``0.07`` of 100
        updates is 7 (0.07 * 100 is 7.000000000000001 in floats, which rounding up would make 8).

        >>> b = Budget(samples=14_976, batch=32, epochs=3)          # 468 updates per epoch, 1,404 in all
        >>> b.share(0.06), b.share(0.06, rounding="down"), b.share(0.1, unit="epoch")
        (85, 84, 1)
        """
        if not isinstance(unit, str) or unit not in ("step", "epoch"):
            raise complain("Budget.share", "unit", unit, "one of 'step', 'epoch'")
        return share_ticks(fraction, self.length(unit), rounding, "Budget.share", "fraction")

    def describe(self, unit: str = "step") -> str:
        """The budget in words, e.g. ``90 epochs x 1,150 steps = 103,500 steps``."""
        if not isinstance(unit, str) or unit not in ("step", "epoch"):
            raise complain("Budget.describe", "unit", unit, "one of 'step', 'epoch'")
        if unit == "epoch":
            return f"{self.epochs:,} epochs"
        return (f"{self.epochs:,} epochs x {self.steps_per_epoch:,} steps = {self.steps:,} steps "
                f"(global batch {self.global_batch:,})")


def check_length(s: Schedule, steps: int | Budget, unit: str = "step", owner: str = "check_length") -> int:
    """The budget in ticks, after checking that the design's length matches it.

    ``steps`` is a number of ticks of ``unit`` or a ``Budget``.  An open-ended
    design (length None) fits any budget.  A mismatch raises ScheduleError
    naming both numbers: exporting it would silently cut the design short or
    hold its last rate.

    >>> from schedwidget import cosine
    >>> check_length(cosine(0.1, steps=103_500), Budget(samples=147_200, batch=128, epochs=90))
    103500
    """
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule")
    if not isinstance(unit, str) or unit not in ("step", "epoch"):
        raise complain(owner, "unit", unit, "one of 'step', 'epoch'")
    if isinstance(steps, Budget):
        n, where = steps.length(unit), f" ({steps.describe(unit)})"
    else:
        n, where = as_whole(steps), ""
        if n is None or n < 1:
            raise complain(owner, "steps", steps, "a whole number >= 1 or a Budget")
    if n > MAX_TICKS:
        raise complain(owner, "steps", steps, "a budget of at most 2**53 ticks",
                       "above that, ticks are no longer exact on a float64 clock")
    L = s.length
    if L is None or L == n:
        return n
    if L > n:
        effect = f"its last {_count(L - n, unit)} would never run"
    else:
        effect = f"its last rate {s(L):.3g} would be held for {_count(n - L, unit, 'more ')}"
    knots_end = _open_knots(s)
    if knots_end is not None and L == n - 1:
        # a trace of n rates rebuilt as knots(list(enumerate(rates))) ends at its last knot, tick n - 1;
        # stretching it would move every knot by n / (n - 1)
        hint = (f"budget mismatch: {effect}; a knots design ends at its last knot's tick ({L:,}), so a trace of "
                f"{n:,} rates, one per tick, is knots(list(enumerate(rates)), interp='hold', steps={n}): give knots "
                f"its length with steps={n} (s.stretch would move every knot)")
    elif knots_end is not None and L < n:
        hint = (f"budget mismatch: {effect}; hold the last knot's rate to the end with knots(..., steps={n}), "
                f"or fit the design with s.stretch({n}) (every knot moves in proportion), or fix the budget")
    else:
        hint = f"budget mismatch: {effect}; fit the design with s.stretch({n}) or fix the budget"
    if max(L, n) >= 50 * min(L, n):
        hint += f"; a ratio of {max(L, n) / min(L, n):,.0f} usually means steps and epochs are mixed up"
    msg = f"{owner}: steps must equal the design's length of {L:,} {unit}s, got {n:,} {unit}s{where} ({hint})"
    raise ScheduleError(msg)


def _count(k: int, unit: str, more: str = "") -> str:
    return f"{k:,} {more}{unit}" + ("" if k == 1 else "s")


def _open_knots(s: Schedule):
    """The knots table that ends ``s`` at its last entry (through scales and clips), or None."""
    while s._pointwise_target() is not None:
        s = s._pointwise_target()
    return s if s._ends_at_last_entry() else None


# the rest of the budget arithmetic, one module per purpose (imported last: they import Budget from here)
from .lengths import (LENGTH_FORMS, RATE_FORMS, ROUNDING, ROUNDINGS, absorb, length_words,  # noqa: E402
                      parse_length, parse_rate, share_ticks)
from .proportion import absorb_rounding, scale_node  # noqa: E402
from .rebatch import Rescaled, rescale_for_batch, scale_for_batch  # noqa: E402
