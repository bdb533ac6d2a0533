"""A learning-rate range test's log in: (rate, loss) pairs from lists, arrays, pandas objects or CSV, checked.

The log is read in the order it was written (the order of the updates).  A run of nan/inf losses (or losses
beyond +-1e100, on their way to inf) at its end is the divergence that ends a range test: it is cut off and
remembered (the first such rate); such a loss with finite losses after it is refused.  Rates must be finite and
> 0; a log whose rates do not increase is sorted by rate (and says so), but two equal rates are refused.
Limits: at most ``MAX_POINTS`` rows (checked before any value is converted), at least ``MIN_POINTS`` finite
losses, rates spanning at least ``MIN_SPAN`` (a factor of 2);
a CSV file or upload goes through the same reader and size limits as metric histories (``metrics.py``).
"""

from __future__ import annotations

import csv
import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from .metrics import INDEX_COLUMNS, MAX_METRIC_BYTES, _from_csv_text, _from_pandas, is_number, values_of
from .params import ScheduleError, complain
from .spec import read_file

OWNER = "read_range_test"

#: Most rows a range-test log may hold (a range test is hundreds to thousands of updates).
MAX_POINTS = 1_000_000
#: Fewest finite losses (before a divergence) a reading needs: a centred fit needs neighbours on both sides.
MIN_POINTS = 10
#: Largest |loss| read as a loss; beyond it (or nan/inf) a loss is the divergence (the sums of the fit stay finite).
MAX_LOSS = 1e100
#: Smallest ratio of the highest to the lowest rate (a range test sweeps decades; a factor 2 is the least).
MIN_SPAN = 2.0

#: Words that mark a column as the rate or the loss when no column is named (lower-case substrings).
RATE_WORDS = ("lr", "rate")
LOSS_WORDS = ("loss",)


@dataclass(frozen=True, eq=False)
class RangeLog:
    """A checked log: finite rates > 0 (increasing), their finite losses, and what was cut or reordered.

    ``ticks[i]`` is the row of the log as given (0 = the first update) that ``rates[i]`` came from.
    ``diverged_at`` is the rate of the first nan/inf loss at the end of the log (None when there was none),
    ``dropped`` how many such rows were cut.
    """

    rates: np.ndarray
    losses: np.ndarray
    ticks: np.ndarray
    diverged_at: float | None
    dropped: int
    reordered: bool


def _fail(exc: ScheduleError) -> ScheduleError:
    """The metrics reader's message under this reader's name (same check, same wording)."""
    text = str(exc)
    if text.startswith("read_metric:"):
        text = OWNER + ":" + text[len("read_metric:"):]
    return ScheduleError(text)


def _length(name: str, value: Any) -> None:
    try:
        n = len(value)
    except TypeError:
        return  # values_of refuses it with its own message
    if n > MAX_POINTS:
        raise complain(OWNER, name, f"{n:,} values", f"at most {MAX_POINTS:,} values",
                       "a range test logs one loss per update; read a slice or every k-th row")


def _pick(header: list[str], given: str | int | None, words: tuple[str, ...], other: int | None,
          name: str, where: str) -> str | int:
    """The column for ``name``: as given, else the one whose name holds one of ``words``, else (when exactly
    two columns are not index columns such as ``step``) the first of them for the rate, the other for the loss."""
    if given is not None:
        return given
    found = [k for k, h in enumerate(header) if k != other and any(w in h.strip().lower() for w in words)]
    if len(found) == 1:
        return found[0]
    values = [k for k, h in enumerate(header) if h.strip().lower() not in INDEX_COLUMNS]
    if not found and len(values) == 2:  # two value columns with other names: the rate first, then the loss
        return values[0] if other is None else [k for k in values if k != other][0]
    listed = ", ".join(repr(h) for h in header)
    raise complain(OWNER, name, None, f"the name or position of one of {listed} (the columns of {where})",
                   f"{'several' if found else 'no'} column names hold {' or '.join(repr(w) for w in words)}; "
                   f"pass {name}=... to pick one")


def _csv_header(text: str) -> list[str]:
    for line in text.splitlines():
        if line.strip() and not line.lstrip().startswith("#"):
            return [c.strip() for c in next(csv.reader([line]))]
    return []


def _columns(header: list[str], rate_column: Any, loss_column: Any, where: str) -> tuple[Any, Any]:
    numbered = header and all(is_number(h) for h in header)
    if numbered:  # no header: the first two columns, as the metrics reader numbers them
        return (0 if rate_column is None else rate_column), (1 if loss_column is None else loss_column)
    r = _pick(header, rate_column, RATE_WORDS, None, "rate_column", where)
    r_at = r if isinstance(r, int) else (header.index(r) if r in header else None)
    return r, _pick(header, loss_column, LOSS_WORDS, r_at, "loss_column", where)


def _from_text(text: str, where: str, rate_column: Any, loss_column: Any) -> tuple[np.ndarray, np.ndarray]:
    header = _csv_header(text)
    r, k = _columns(header, rate_column, loss_column, where)
    try:
        return _from_csv_text(text, r, where), _from_csv_text(text, k, where)
    except ScheduleError as exc:
        raise _fail(exc) from None


def _arrays(source: Any, losses: Any, rate_column: Any, loss_column: Any) -> tuple[np.ndarray, np.ndarray]:
    """Two float64 arrays (rates, losses) from any of the accepted forms."""
    is_file = isinstance(source, (str, os.PathLike, bytes, bytearray, memoryview))
    if is_file or (type(source).__module__.split(".")[0] == "pandas" and hasattr(source, "columns")):
        if losses is not None:
            raise complain(OWNER, "losses", _kind(losses), "None when the first argument is a file or a DataFrame",
                           "the losses are one of its columns: pass loss_column=... to pick it")
        if isinstance(source, (bytes, bytearray, memoryview)):
            if len(source) > MAX_METRIC_BYTES:
                raise complain(OWNER, "source", f"{len(source):,} bytes", f"at most {MAX_METRIC_BYTES:,} bytes")
            return _from_text(bytes(source).decode("utf-8-sig", errors="replace"), "the uploaded file",
                              rate_column, loss_column)
        if is_file:
            data = read_file(source, OWNER, "source", cap=MAX_METRIC_BYTES, what="be an existing CSV file")
            try:
                text = data.decode("utf-8-sig")
            except UnicodeDecodeError as exc:
                raise complain(OWNER, "source", os.fspath(source), "a readable UTF-8 CSV file", str(exc)) from None
            return _from_text(text, repr(os.fspath(source)), rate_column, loss_column)
        _length("source", source)
        header = [str(c) for c in source.columns]
        r, k = _columns(header, rate_column, loss_column, "the DataFrame")
        try:
            return _from_pandas(source, r), _from_pandas(source, k)
        except ScheduleError as exc:
            raise _fail(exc) from None
    for name, given in (("rate_column", rate_column), ("loss_column", loss_column)):
        if given is not None:
            raise complain(OWNER, name, given, "None for lists or arrays",
                           "a column only makes sense for a CSV file or a DataFrame")
    if losses is None:  # pairs: an (n, 2) array or a sequence of (rate, loss)
        _length("source", source)
        try:
            pairs = np.asarray(source, dtype=np.float64)
        except (TypeError, ValueError, OverflowError):
            raise complain(OWNER, "source", _kind(source),
                           "(rate, loss) pairs: an (n, 2) array or a sequence of pairs of numbers",
                           "or pass the rates and the losses as two sequences") from None
        if pairs.ndim != 2 or pairs.shape[1] != 2:
            raise complain(OWNER, "source", f"an array of shape {pairs.shape}",
                           "(rate, loss) pairs: an (n, 2) array or a sequence of pairs",
                           "or pass the rates and the losses as two sequences")
        return pairs[:, 0].copy(), pairs[:, 1].copy()
    _length("rates", source)
    _length("losses", losses)
    return values_of(OWNER, "rates", source), values_of(OWNER, "losses", losses)


def _kind(value: Any) -> str:
    return f"a {type(value).__name__}"


def check_log(source: Any, losses: Any = None, rate_column: Any = None, loss_column: Any = None) -> RangeLog:
    """The log checked and ready to read (see the module docstring for the forms and the rules)."""
    rates, loss = _arrays(source, losses, rate_column, loss_column)
    if rates.size > MAX_POINTS:
        raise complain(OWNER, "source", f"{rates.size:,} rows", f"at most {MAX_POINTS:,} rows",
                       "a range test logs one loss per update; read a slice or every k-th row")
    if rates.size != loss.size:
        raise complain(OWNER, "losses", f"{loss.size:,} values", f"{rates.size:,} values, one per rate")
    bad = np.flatnonzero(~(np.isfinite(rates) & (rates > 0)))
    if bad.size:
        i = int(bad[0])
        raise complain(OWNER, f"rates[{i}]", float(rates[i]), "a finite rate > 0",
                       "every row of a range test is an update at a positive rate")
    if rates.max() > 1e100:
        i = int(np.argmax(rates))
        raise complain(OWNER, f"rates[{i}]", float(rates[i]), "a rate <= 1e+100")
    odd = np.flatnonzero(~(np.abs(loss) <= MAX_LOSS))  # nan, inf and losses beyond 1e100 (on the way to inf)
    total = cut = rates.size
    diverged = None
    if odd.size:
        first = int(odd[0])
        later = np.flatnonzero(np.abs(loss[first:]) <= MAX_LOSS)
        if later.size:
            raise complain(OWNER, f"losses[{first}]", float(loss[first]),
                           "a finite number within +-1e100 (a nan, inf or larger loss is read as the divergence "
                           "only at the end of the log)",
                           f"losses[{first + int(later[0])}] after it is finite again; drop the rows of skipped "
                           "updates before reading")
        cut, diverged = first, float(rates[first])
    if cut < MIN_POINTS:
        raise complain(OWNER, "losses", f"{cut} finite value{'' if cut == 1 else 's'} before the first nan/inf",
                       f"at least {MIN_POINTS} finite losses",
                       "the loss diverged almost at once: start the sweep at a lower rate" if odd.size else
                       "log more updates")
    rates, loss = rates[:cut], loss[:cut]
    ticks = np.arange(cut)
    reordered = bool(np.any(np.diff(rates) <= 0))
    if reordered:
        order = np.argsort(rates, kind="stable")
        rates, loss, ticks = rates[order], loss[order], ticks[order]
        same = np.flatnonzero(np.diff(rates) == 0)
        if same.size:
            a, b = sorted((int(ticks[same[0]]), int(ticks[same[0] + 1])))
            raise complain(OWNER, f"rates[{b}]", float(rates[same[0]]), f"a rate other than rates[{a}]",
                           "a range test changes the rate at every update; merge or drop repeated rates")
    if rates[-1] / rates[0] < MIN_SPAN:
        raise complain(OWNER, "rates", f"a span from {rates[0]:.6g} to {rates[-1]:.6g}",
                       f"a span of at least a factor {MIN_SPAN:g} between the lowest and the highest rate",
                       "a range test sweeps the rate over several decades")
    for a in (rates, loss, ticks):
        a.setflags(write=False)
    return RangeLog(rates=rates, losses=loss, ticks=ticks, diverged_at=diverged, dropped=total - cut,
                    reordered=reordered)
