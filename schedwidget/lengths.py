"""Lengths and rates as people type them ("3 ep", "6 %", "1 %" of the peak), the words shown beside a length,
and the stage that absorbs the rest of the run (``absorb``).  Part of the budget arithmetic (``budget``)."""

from __future__ import annotations

import math
from decimal import Decimal
from fractions import Fraction
from numbers import Real
from typing import Any

from .schedule import MAX_TICKS, as_whole, complain

__all__ = ["parse_length", "parse_rate", "length_words", "absorb", "share_ticks", "ROUNDING", "ROUNDINGS",
           "LENGTH_FORMS", "RATE_FORMS"]


# ------------------------------------------------------------------ lengths and rates as people write them
#: The rounding rule for lengths that are not whole ticks (shown on screen beside the length boxes).
ROUNDING = ("a share of the run or a fraction of an epoch rounds up to a whole tick "
            "(common practice, no source: trainers round warmup shares up)")
#: How a share of the run that is not a whole tick becomes one (``share_ticks``, ``Budget.share``): "up" (the
#: default: common practice, no source; trainers that take a warmup as a ratio of the updates round it up), "down"
#: or "nearest" (halves up).  Our own names.
ROUNDINGS = ("up", "down", "nearest")
LENGTH_FORMS = "a whole number of ticks (3450), epochs ('3 ep'), steps ('3450 steps') or a share of the run ('6 %')"
RATE_FORMS = "a rate (3e-4, 0.001) or a share of the peak ('1 %')"
_TEXT_LIMIT = 64
_EPOCH_WORDS = ("ep", "eps", "epoch", "epochs")
_STEP_WORDS = ("st", "step", "steps", "it", "iter", "iters", "update", "updates")


def _exact(x: Real) -> Fraction:
    """``x`` as an exact fraction: a float is read as the shortest decimal that gives it back (what was typed), so
    ``0.07`` is 7/100, not the binary float just above it, and 0.07 of 100 ticks is 7, never 7.000000000000001."""
    if isinstance(x, int):
        return Fraction(x)
    if isinstance(x, Fraction):
        return x
    return Fraction(Decimal(repr(float(x))))


def _rounded(x: Fraction, rounding: str) -> int:
    if rounding == "up":
        return math.ceil(x)
    if rounding == "down":
        return math.floor(x)
    return math.floor(x + Fraction(1, 2))  # nearest, halves up


def _rounding(owner: str, rounding: Any) -> str:
    if not isinstance(rounding, str) or rounding not in ROUNDINGS:
        raise complain(owner, "rounding", rounding, "one of " + ", ".join(repr(r) for r in ROUNDINGS),
                       "'up' (the default) never gives a share less than asked, as trainers do with a warmup ratio")
    return rounding


def share_ticks(fraction: Any, total: Any, rounding: str = "up", owner: str = "share", name: str = "fraction") -> int:
    """``fraction`` of a run of ``total`` ticks, as whole ticks, rounded by ``rounding`` (``ROUNDINGS``).

    The product is exact: a float fraction is read as the decimal it was written as, so no float artefact moves
    the result by a tick.  "up" is the default (common practice, no source: trainers that take the warmup as a
    ratio of the updates round it up); "down" and "nearest" (halves up) are the other two.

    >>> share_ticks(0.06, 1404), share_ticks(0.06, 1404, "down"), share_ticks(0.06, 1404, "nearest")
    (85, 84, 84)
    >>> share_ticks(0.07, 100)          # 0.07 * 100 is 7.000000000000001 in floats
    7
    """
    rounding = _rounding(owner, rounding)
    ok = isinstance(fraction, Real) and not isinstance(fraction, bool)
    try:
        ok = ok and math.isfinite(fraction) and 0 <= fraction <= 1
    except (OverflowError, TypeError, ValueError):
        ok = False
    if not ok:
        raise complain(owner, name, fraction, "a share of the run between 0 and 1 (0.06 for 6 %)",
                       "a share in percent is written '6 %' in a length box")
    n = as_whole(total)
    if n is None or not 0 <= n <= MAX_TICKS:
        raise complain(owner, "total", total, "a whole number of ticks >= 0 and <= 2**53")
    return _rounded(_exact(fraction) * n, rounding)


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
        ticks = share_ticks(_exact(v) / 100, total, "up", owner, name)  # exact: 7 % of 100 is 7, not 8
    elif word in _EPOCH_WORDS or word in _STEP_WORDS:
        given = "epoch" if word in _EPOCH_WORDS else "step"
        if given == unit:
            ticks = math.ceil(_exact(v))
        elif not steps_per_epoch:
            raise complain(owner, name, text, f"a length in {unit}s",
                           "steps per epoch are unknown, so epochs and steps cannot be converted")
        elif given == "epoch":
            ticks = math.ceil(_exact(v) * steps_per_epoch)
        else:
            ticks = math.ceil(_exact(v) / steps_per_epoch)
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
        epochs = ticks / steps_per_epoch  # never an exponent: 1,000 epochs, not 1e+03
        words.append(f"{epochs:,.3g} epochs" if epochs < 1000 else f"{epochs:,.0f} epochs")
    elif steps_per_epoch:
        words.append(f"{ticks * steps_per_epoch:,} steps")
    if total:
        share = 100 * ticks / total  # two significant digits, whole from 100 on ('100 %', not '1e+02 %')
        words.append(f"{share:.2g} % of the run" if share < 100 else f"{share:.0f} % of the run")
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
