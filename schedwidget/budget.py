"""Budget arithmetic shared by the export and the widget: optimizer updates from data, batch and epochs.

The clock of a design counts optimizer updates (unit "step") or epochs.  With
gradient accumulation or several processes, one update consumes
``batch * processes * accumulation`` samples, so the number of updates per
epoch is not the number of batches a process's data loader yields.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from numbers import Real
from typing import Any

from .schedule import MAX_TICKS, Schedule, ScheduleError, as_whole, complain, param

__all__ = ["Budget", "check_length", "scale_for_batch", "parse_length", "parse_rate", "length_words", "absorb",
           "ROUNDING", "LENGTH_FORMS", "RATE_FORMS", "Rescaled", "rescale_for_batch"]


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
    """The knots node that ends ``s`` without a ``steps`` of its own (through scales and clips), or None."""
    from .combine import Clip, Scaled
    from .shapes import Knots

    while isinstance(s, (Scaled, Clip)):
        s = s.target
    return s if isinstance(s, Knots) and getattr(s, "steps", None) is None else None


def _positive_whole(owner: str, name: str, value: Any) -> int:
    n = as_whole(value)
    if n is None or n < 1 or n > MAX_TICKS:
        raise complain(owner, name, value, "a whole number >= 1" if n is None or n < 1 else "a whole number <= 2**53")
    return n


def _constant_open(s: Schedule) -> bool:
    """Whether ``s`` is open-ended and the same rate at every tick (a flat rate, scaled or clipped)."""
    from .combine import Clip, Scaled
    from .shapes import Flat

    while isinstance(s, (Scaled, Clip)):
        s = s.target
    return isinstance(s, Flat) and s.length is None


def _rescale_open(s: Schedule, a: int, b: int) -> Schedule | None:
    """An open-ended design on the clock of batch ``b`` instead of ``a``, or None when that needs a length.

    A constant open part has nothing on its clock to move.  Before it, a warmup's length and the finite
    stages are moved to the same samples seen (the stages together, by one rounding, as ``stretch`` does);
    any other open-ended shape (a decay, restarts without an end) changes along an unbounded clock.
    """
    from .combine import Clip, Scaled, Stages

    if _constant_open(s):
        return s
    if isinstance(s, (Scaled, Clip)):
        inner = _rescale_open(s.target, a, b)
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


# ------------------------------------------------------------------ lengths and rates as people write them
#: The rounding rule for lengths that are not whole ticks (shown on screen beside the length boxes).
ROUNDING = ("a share of the run or a fraction of an epoch rounds up to a whole tick "
            "(common practice, no source: trainers round warmup shares up)")
LENGTH_FORMS = "a whole number of ticks (3450), epochs ('3 ep'), steps ('3450 steps') or a share of the run ('6 %')"
RATE_FORMS = "a rate (3e-4, 0.001) or a share of the peak ('1 %')"
_TEXT_LIMIT = 64
_EPOCH_WORDS = ("ep", "eps", "epoch", "epochs")
_STEP_WORDS = ("st", "step", "steps", "it", "iter", "iters", "update", "updates")


def _number(text: str) -> float | None:
    """A decimal number written with optional thousands separators (, _ thin space), or None."""
    t = text.replace(",", "").replace("_", "").replace("\u2009", "").replace("\u202f", "").replace(" ", "")
    if not t or len(t) > 40:
        return None
    try:
        v = float(t)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


def _split(text: str) -> tuple[str, str]:
    """``"3 ep"`` -> ``("3", "ep")``; ``"6%"`` -> ``("6", "%")``; ``"3450"`` -> ``("3450", "")``."""
    t = text.strip().lower()
    if t.endswith("%"):
        return t[:-1].strip(), "%"
    i = len(t)
    while i > 0 and t[i - 1].isalpha():
        i -= 1
    return t[:i].strip(), t[i:]


def parse_length(text: Any, unit: str = "step", steps_per_epoch: int | None = None, total: int | None = None,
                 owner: str = "length", name: str = "steps", lo: int = 0) -> int:
    """A length typed by a person, as whole ticks of the design's clock (``unit``).

    Accepted: a whole number of ticks (``"3450"``, ``"3,450"``), epochs (``"3 ep"``, ``"3 epochs"``),
    steps (``"3450 steps"``) or a share of the run ``total`` (``"6 %"``).  Converting epochs to steps
    needs ``steps_per_epoch``; a share or a fraction of an epoch that is not a whole tick rounds up
    (``ROUNDING``).  A bare number must be whole: ``"0.06"`` is refused with the forms above,
    never read as 0.  Anything else is a ScheduleError naming ``owner.name`` and the forms.

    >>> parse_length("3 ep", "step", 1150), parse_length("6 %", "step", 1150, 103_500)
    (3450, 6210)
    >>> parse_length("3,450", "step"), parse_length("1725 steps", "epoch", 1150)
    (3450, 2)
    """
    if isinstance(text, bool):
        raise complain(owner, name, text, LENGTH_FORMS)
    if isinstance(text, Real):
        text = repr(text)
    if not isinstance(text, str) or len(text) > _TEXT_LIMIT:
        raise complain(owner, name, text if not isinstance(text, str) else text[:_TEXT_LIMIT] + "...", LENGTH_FORMS)
    if not isinstance(unit, str) or unit not in ("step", "epoch"):
        raise complain(owner, "unit", unit, "one of 'step', 'epoch'")
    digits, word = _split(text)
    v = _number(digits)
    if v is None or v < 0:
        raise complain(owner, name, text, LENGTH_FORMS)
    if word == "%":
        if total is None:
            raise complain(owner, name, text, "a length in ticks or epochs", "a share needs the run's total length")
        if v > 100:
            raise complain(owner, name, text, "a share of the run between 0 % and 100 %")
        ticks = math.ceil(total * v / 100 - 1e-9)
    elif word in _EPOCH_WORDS or word in _STEP_WORDS:
        given = "epoch" if word in _EPOCH_WORDS else "step"
        if given == unit:
            ticks = math.ceil(v - 1e-9)
        elif not steps_per_epoch:
            raise complain(owner, name, text, f"a length in {unit}s",
                           "steps per epoch are unknown, so epochs and steps cannot be converted")
        elif given == "epoch":
            ticks = math.ceil(v * steps_per_epoch - 1e-9)
        else:
            ticks = math.ceil(v / steps_per_epoch - 1e-9)
    elif word:
        raise complain(owner, name, text, LENGTH_FORMS)
    else:
        w = as_whole(v)
        if w is None:
            raise complain(owner, name, text, LENGTH_FORMS, f"a bare number counts whole {unit}s")
        ticks = w
    if ticks < lo or ticks > MAX_TICKS:
        raise complain(owner, name, text, f"a length of {lo:,} to 2**53 {unit}s", f"it comes to {ticks:,} {unit}s")
    return int(ticks)


def parse_rate(text: Any, peak: float | None = None, owner: str = "rate", name: str = "rate") -> float:
    """A rate typed by a person: a number (``"3e-4"``), or a share of ``peak`` (``"1 %"``, ``"1 % of peak"``).

    The core's own checks on the value follow (this only reads the text).

    >>> parse_rate("3e-4"), parse_rate("1 %", 3e-4), parse_rate("10 % of peak", 0.1)
    (0.0003, 3e-06, 0.01)
    """
    if isinstance(text, Real) and not isinstance(text, bool):
        return float(text)
    if not isinstance(text, str) or len(text) > _TEXT_LIMIT:
        raise complain(owner, name, text if not isinstance(text, str) else text[:_TEXT_LIMIT] + "...", RATE_FORMS)
    t = text.strip().lower()
    for tail in ("of the peak", "of peak"):
        if t.endswith(tail):
            t = t[: -len(tail)].strip()
    if t.endswith("%"):
        v = _number(t[:-1])
        if v is None:
            raise complain(owner, name, text, RATE_FORMS)
        if peak is None or not math.isfinite(peak):
            raise complain(owner, name, text, "a rate", "a share needs a peak to take it of")
        return float(f"{peak * v / 100:.15g}")
    v = _number(t) if "e" not in t else (float(t) if _is_float(t) else None)
    if v is None:
        raise complain(owner, name, text, RATE_FORMS)
    return float(v)


def _is_float(t: str) -> bool:
    try:
        return math.isfinite(float(t))
    except ValueError:
        return False


def length_words(ticks: int, unit: str = "step", steps_per_epoch: int | None = None, total: int | None = None) -> str:
    """A length in the other units people use: ``"= 3 epochs · 3.3 % of the run"`` (empty when nothing to add).

    >>> length_words(3450, "step", 1150, 103_500)
    '= 3 epochs · 3.3 % of the run'
    """
    words = []
    if steps_per_epoch and unit == "step":
        words.append(f"{ticks / steps_per_epoch:,.3g} epochs")
    elif steps_per_epoch:
        words.append(f"{ticks * steps_per_epoch:,} steps")
    if total:
        words.append(f"{100 * ticks / total:.2g} % of the run")
    return ("= " + " · ".join(words)) if words else ""


def absorb(lengths: list[int], total: int, index: int, owner: str = "designer", name: str = "length",
           value: int | None = None, unit: str = "tick") -> list[int]:
    """``lengths`` with entry ``index`` changed so that they sum to ``total`` (the stage that fills the rest).

    Raises ScheduleError when the other entries leave it less than one tick; ``owner``, ``name`` and
    ``value`` name the box that was just changed (the message then says how long it can be).

    >>> absorb([3450, 97750], 103_500, 1)
    [3450, 100050]
    """
    rest = total - (sum(lengths) - lengths[index])
    if rest < 1:
        others = sum(lengths) - lengths[index]
        shown, most = (others, total - 1) if value is None else (value, value + rest - 1)
        raise complain(owner, name, shown, f"at most {most:,} {unit}s in a run of {total:,}",
                       f"the stage that fills the rest of the run would have {rest:,} {unit}s; "
                       "lengthen the run in the budget row, or shorten another stage")
    out = list(lengths)
    out[index] = rest
    return out


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
