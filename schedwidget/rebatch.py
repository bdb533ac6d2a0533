"""A design moved from one global batch size to another: its rates by a scaling rule, its clock to the same
samples seen (``scale_for_batch``), and the designer's rescaling with its budget (``rescale_for_batch``).
Part of the budget arithmetic (``budget``)."""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

from .schedule import MAX_TICKS, Schedule, as_whole, complain

__all__ = ["scale_for_batch", "Rescaled", "rescale_for_batch"]


def _positive_whole(owner: str, name: str, value: Any) -> int:
    n = as_whole(value)
    if n is None or n < 1 or n > MAX_TICKS:
        raise complain(owner, name, value, "a whole number >= 1" if n is None or n < 1 else "a whole number <= 2**53")
    return n


def _constant_open(s: Schedule) -> bool:
    """Whether ``s`` is open-ended and the same rate at every tick (a flat rate, scaled or clipped)."""
    return s._constant_open()


def _rescale_open(s: Schedule, a: int, b: int) -> Schedule | None:
    """An open-ended design on the clock of batch ``b`` instead of ``a``, or None when that needs a length.

    A constant open part has nothing on its clock to move.  Before it, a warmup's length and the finite
    stages are moved to the same samples seen (the stages together, by one rounding, as ``stretch`` does);
    any other open-ended shape (a decay, restarts without an end) changes along an unbounded clock.
    """
    from .stages import Stages

    if _constant_open(s):
        return s
    if s._pointwise_target() is not None:
        inner = _rescale_open(s._pointwise_target(), a, b)
        return None if inner is None else replace(s, target=inner)
    if s._warmed() is not None:
        inner = _rescale_open(s._warmed(), a, b)
        return None if inner is None else replace(s, target=inner, steps=max(1, round(s.steps * a / b)))
    parts = s._stage_parts()
    if len(parts) > 1:
        last = _rescale_open(parts[-1], a, b)
        if last is None:
            return None
        head = parts[0] if len(parts) == 2 else Stages(parts=parts[:-1])
        return Stages(parts=(head.stretch(max(1, round(head.length * a / b))), last))
    return None


def scale_for_batch(s: Schedule, from_batch: int, to_batch: int, rule: str = "linear", keep: str = "samples",
                    steps: int | None = None) -> Schedule:
    """The design moved from one global batch size to another.

    Rates are multiplied by ``to_batch / from_batch`` (rule "linear": the linear
    scaling rule, Goyal et al. 2017) or by its square root (rule "sqrt": from
    memory, Krizhevsky 2014 and Hoffer et al. 2017).  With ``keep="samples"``
    the clock is rescaled to ``round(length * from_batch / to_batch)`` ticks
    (Python's round: halves go to the even tick), or to ``steps`` when given
    (e.g. ``Budget(...).steps``), so a warmup and every join stay at the same
    number of samples seen; with ``keep="steps"`` every tick stays where it was.

    An open-ended design rescales too when its open end is a constant rate
    (``flat(lr)``, scaled or clipped): that part has nothing on its clock to
    move, so only its rate changes, and a warmup or finite stages before it move
    to the same samples seen (the stages together: their joins move in
    proportion, ``round(their length * from_batch / to_batch)``).  An open-ended
    decay or endless restarts change along an unbounded clock and need
    ``keep="steps"`` or a length.  ``steps`` must be None for an open-ended design.

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> s = warmup(cosine(0.1, steps=97_750), steps=5_750)          # batch 128, 1,150 steps/epoch
    >>> big = scale_for_batch(s, 128, 1024)
    >>> big.length, round(big(719), 6)                                # peak at 5 epochs of 143.75 steps
    (12938, 0.8)
    """
    owner = "scale_for_batch"
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule")
    a = _positive_whole(owner, "from_batch", from_batch)
    b = _positive_whole(owner, "to_batch", to_batch)
    if not isinstance(rule, str) or rule not in ("linear", "sqrt"):
        raise complain(owner, "rule", rule, "one of 'linear', 'sqrt'")
    if not isinstance(keep, str) or keep not in ("samples", "steps"):
        raise complain(owner, "keep", keep, "one of 'samples', 'steps'",
                       "'samples' keeps joins at the same samples seen; 'steps' keeps them at the same tick")
    factor = b / a if rule == "linear" else math.sqrt(b / a)
    if keep == "steps":
        if steps is not None:
            raise complain(owner, "steps", steps, "None with keep='steps'", "keep='steps' never changes the length")
        return s if factor == 1.0 else s * factor
    if s.length is None:
        if steps is not None:
            raise complain(owner, "steps", steps, "None for an open-ended design",
                           "an open-ended design has no length to set; its warmup and joins move to the same samples")
        moved = _rescale_open(s, a, b)
        if moved is None:
            raise complain(owner, "s", s, "a schedule with a length, or an open-ended one that ends in a constant "
                           "rate, when keep='samples'",
                           "an open-ended design has no budget to rescale; use keep='steps' to scale its rates only, "
                           "or give it a length: its rate changes along an unbounded clock")
        return moved if factor == 1.0 else moved * factor
    n = max(1, round(s.length * a / b)) if steps is None else _positive_whole(owner, "steps", steps)
    out = s.stretch(n)
    return out if factor == 1.0 else out * factor


# ------------------------------------------------------------------ a design at another batch size
class Rescaled:
    """One rescaling: the new design, its budget and clock, and how each design's ticks map to samples/steps."""

    def __init__(self, old: Schedule, new: Schedule, old_steps: int, new_steps: int, unit: str,
                 old_batch: int, new_batch: int, old_spe: int | None, new_spe: int | None,
                 budget: Any = None) -> None:
        self.old, self.new = old, new
        self.budget = budget  # the new Budget when the clock was rescaled in whole epochs, else None
        self.old_steps, self.new_steps = old_steps, new_steps
        self.unit, self.old_batch, self.new_batch = unit, old_batch, new_batch
        self.old_spe, self.new_spe = old_spe, new_spe

    def x_factor(self, which: str, axis: str) -> float | None:
        """x = tick * factor for the old or new design on a "samples" or "steps" axis (None: not known)."""
        batch, spe = (self.old_batch, self.old_spe) if which == "old" else (self.new_batch, self.new_spe)
        if self.unit == "step":
            return float(batch) if axis == "samples" else 1.0
        if not self.old_spe:
            return None
        if axis == "samples":
            return float(self.old_spe * self.old_batch)  # an epoch is the same data at either batch size
        return float(spe)


def rescale_for_batch(s: Schedule, steps: int, unit: str, steps_per_epoch: int | None, from_batch: int, batch: int,
                      processes: int, rule: str, keep: str) -> Rescaled:
    """``s`` (a design of ``steps`` ticks of ``unit``) moved from global batch ``from_batch`` to ``batch * processes``.

    Rates follow ``rule`` (``scale_for_batch``).  With ``keep="samples"`` a design in steps gets a
    rescaled clock; when steps per epoch are known and the budget is a whole number of epochs, the
    new budget is a whole number of epochs too (``Budget(..., drop_last=True)``: the incomplete last
    global batch of an epoch is dropped).  A design in epochs already counts samples, so only its
    rates change.  Bad input is a ScheduleError.

    >>> from schedwidget import cosine, warmup
    >>> r = rescale_for_batch(warmup(cosine(0.1, steps=97_750), 5_750), 103_500, "step", 1150, 128, 1024, 1, "linear", "samples")
    >>> r.new_steps, r.new_spe, round(r.new(715), 6)
    (12870, 143, 0.8)
    """
    from .budget import Budget  # budget imports this module

    for name, v in (("current batch", from_batch), ("new batch", batch), ("processes", processes)):
        if isinstance(v, bool) or not isinstance(v, int) or v < 1:
            raise complain("rescale", name, v, "a whole number >= 1")
    to_batch = batch * processes
    if unit == "epoch":  # the epoch clock counts samples already: keep the ticks, scale the rates
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep="steps")
        new_spe = None
        if steps_per_epoch:
            new_spe = Budget(samples=steps_per_epoch * from_batch, batch=batch, processes=processes, epochs=1,
                             drop_last=True).steps_per_epoch
        return Rescaled(s, new, steps, steps, unit, from_batch, to_batch, steps_per_epoch, new_spe)
    if keep == "samples" and s.length is None:
        raise complain("rescale", "design length", None, "a length to rescale the clock in samples",
                       "an open-ended design keeps its ticks; choose keep 'steps'")
    if keep == "steps":
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep)
        return Rescaled(s, new, steps, steps, unit, from_batch, to_batch, steps_per_epoch, steps_per_epoch)
    budget = None
    if steps_per_epoch and steps % steps_per_epoch == 0:
        # whole epochs stay whole epochs: the incomplete last global batch of an epoch is dropped
        budget = Budget(samples=steps_per_epoch * from_batch, batch=batch, epochs=steps // steps_per_epoch,
                        processes=processes, drop_last=True)
        new_steps, new_spe = budget.steps, budget.steps_per_epoch
        n = new_steps if s.length == steps else max(1, round(s.length * new_steps / steps))
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep, steps=n)
    else:
        new = scale_for_batch(s, from_batch, to_batch, rule=rule, keep=keep)
        new_steps = new.length if s.length == steps else max(1, round(steps * from_batch / to_batch))
        new_spe = None
    return Rescaled(s, new, steps, new_steps, unit, from_batch, to_batch, steps_per_epoch, new_spe, budget)
