"""Metric histories in: sequences, arrays, CSV files or text, pandas objects; and the invented demo histories.

A metric history is one number per evaluation (usually one per epoch), read
into a float64 array.  Reading checks the *shape* of the input (numbers, a
named column, a non-empty file); whether every value is finite is checked by
the replay, which can name the evaluation that is not.

Limits: a CSV file is a regular file of at most ``MAX_METRIC_BYTES`` (64 MiB;
a pipe or a device is refused before it is opened); a CSV field holds at most
``csv.field_size_limit()`` characters (131,072 by default); every value must fit
a float (``|x| <= 1.8e308``); a masked array may have no masked entry (a masked
entry is a missing evaluation: it is refused with its index).
"""

from __future__ import annotations

import csv
import os
from numbers import Real
from pathlib import Path
from typing import Any

import numpy as np

from .schedule import ScheduleError, complain
from .spec import read_file

__all__ = ["read_metric", "make_demo_histories", "demo_csv", "demo_path", "DEMO_NAMES", "DEMO_SEED"]

#: Largest CSV file ``read_metric`` reads, in bytes (64 MiB: millions of rows).
MAX_METRIC_BYTES = 64 * 2 ** 20

#: Column names that number the evaluations rather than measure anything.
INDEX_COLUMNS = ("epoch", "step", "evaluation", "")

#: The seed the shipped demo files were generated with.
DEMO_SEED = 90128

#: Shipped demo histories: name -> (file name, what the invented run looked like).
DEMO_NAMES = {
    "a": ("flakes_val_acc_a.csv", "rate divided by 10 at epochs 30 and 60: two clear jumps, then plateaus"),
    "b": ("flakes_val_acc_b.csv", "smooth rise that flattens near epoch 40 and then creeps up"),
    "c": ("flakes_val_acc_c.csv", "noisy rise that peaks near epoch 55 and then slowly overfits"),
}

_DEMO_DIR = Path(__file__).with_name("demo")


# ------------------------------------------------------------------ reading
def read_metric(source: Any, column: str | int | None = None) -> np.ndarray:
    """A metric history as a float64 array, one value per evaluation.

    Parameters
    ----------
    source
        A list or tuple of numbers, a one-dimensional numpy array, a path to a
        CSV file (``str`` or ``os.PathLike``), the bytes of a CSV file (what a
        notebook upload holds), or a pandas Series / DataFrame.  CSV lines that
        start with ``#`` and blank lines are skipped; the first other line is the
        header (unless every cell of it is a number, then columns are numbered).
    column
        The CSV / DataFrame column to read, by name or position.  ``None``
        picks the only column that is not an index column (``epoch``, ``step``).

    Returns
    -------
    numpy.ndarray
        float64 values; ``nan`` cells are kept (the replay reports where they are).

    Examples
    --------
    >>> read_metric([0.5, 0.61, 0.64]).tolist()
    [0.5, 0.61, 0.64]
    >>> read_metric(b"epoch,val_acc\\n0,0.5\\n1,0.6\\n").tolist()
    [0.5, 0.6]
    """
    if isinstance(source, (bytes, bytearray, memoryview)):
        text = bytes(source).decode("utf-8-sig", errors="replace")
        return _from_csv_text(text, column, "the uploaded file")
    if isinstance(source, (str, os.PathLike)):
        return _from_csv_text(_read_file(source), column, repr(os.fspath(source)))
    if type(source).__module__.split(".")[0] == "pandas":
        return _from_pandas(source, column)
    if column is not None:
        raise complain("read_metric", "column", column, "None for a list or an array",
                       "a column only makes sense for a CSV file or a DataFrame")
    return values_of("read_metric", "source", source)


def values_of(owner: str, name: str, value: Any) -> np.ndarray:
    """``value`` (a 1-D sequence or array of real numbers, at least one) as float64; nan kept."""
    if type(value).__module__.split(".")[0] == "pandas" and hasattr(value, "to_numpy"):
        value = _from_pandas(value, None)
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__"):
        raise complain(owner, name, _short(value), "a list, tuple or 1-D array of numbers")
    if isinstance(value, np.ndarray):
        if value.ndim != 1:
            raise complain(owner, name, f"an array of shape {value.shape}", "a 1-D array of numbers",
                           "one value per evaluation; pick one column or row")
        if isinstance(value, np.ma.MaskedArray):
            masked = np.flatnonzero(np.ma.getmaskarray(value))
            if masked.size:
                count = f"{masked.size:,} masked entr{'y' if masked.size == 1 else 'ies'}"
                raise complain(owner, f"{name}[{int(masked[0])}]", "a masked entry", "a number",
                               f"{count}; a masked entry is a missing evaluation: fill it (np.ma.filled(x, "
                               "np.nan) keeps it as nan for the replay to report) or drop it")
            value = np.ma.getdata(value)
        if value.dtype.kind in "fiu":
            with np.errstate(over="ignore", invalid="ignore"):
                out = np.asarray(value, dtype=np.float64)
            if out.size == 0:
                raise _empty(owner, name)
            bad = np.flatnonzero(np.isinf(out) & ~np.isinf(value))
            if bad.size:  # a wider float (longdouble) beyond float64's range
                i = int(bad[0])
                raise complain(owner, f"{name}[{i}]", value[i].item() if value.dtype.kind != "f" else str(value[i]),
                               "a number within the float range (|x| <= 1.8e308)")
            return out.copy() if out is value else out
        value = value.tolist()
    out = np.empty(len(value), dtype=np.float64)
    for i, v in enumerate(value):
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, (Real, np.number)):
            raise complain(owner, f"{name}[{i}]", v, "a number", "one number per evaluation")
        try:
            out[i] = float(v)
        except (OverflowError, ValueError, TypeError):  # an int beyond the float range, an odd Real
            raise complain(owner, f"{name}[{i}]", v, "a number within the float range (|x| <= 1.8e308)",
                           "one number per evaluation") from None
    if out.size == 0:
        raise _empty(owner, name)
    return out


def _empty(owner: str, name: str) -> ScheduleError:
    return complain(owner, name, [], "a non-empty history (at least one value)",
                    "one value per evaluation, usually one per epoch")


def _short(v: Any) -> Any:
    try:
        text = repr(v)
    except ValueError:  # an int over Python's 4,300-digit limit: complain() describes it by its size
        return v
    return v if len(text) <= 60 else text[:57] + "..."


def _read_file(path: str | os.PathLike) -> str:
    data = read_file(path, "read_metric", "source", cap=MAX_METRIC_BYTES, what="be an existing CSV file")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise complain("read_metric", "source", os.fspath(path), "a readable UTF-8 CSV file", str(exc)) from None


class _Label(str):
    """Where a CSV came from, shown as written in messages (a path is already quoted)."""

    def __repr__(self) -> str:
        return str(self)


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def _from_csv_text(text: str, column: str | int | None, where: str) -> np.ndarray:
    where = _Label(where)
    kept = [(n, line) for n, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    if not kept:
        raise complain("read_metric", "source", where, "a CSV file with a header and at least one row",
                       "the file is empty or holds only comments")
    rows = []
    lines = [n for n, _ in kept]
    reader = csv.reader(line for _, line in kept)
    try:
        for row in reader:
            rows.append(row)
    except csv.Error as exc:
        n = lines[min(len(rows), len(lines) - 1)]
        raise complain("read_metric", "source", where, "a CSV file of numbers",
                       f"line {n} cannot be read as CSV: {exc}; a field holds at most "
                       f"{csv.field_size_limit():,} characters") from None
    first = [c.strip() for c in rows[0]]
    if all(_is_number(c) for c in first):
        header = [str(k) for k in range(len(first))]
    else:
        header, rows, lines = first, rows[1:], lines[1:]
    if not rows:
        raise complain("read_metric", "source", where, "a CSV file with a header and at least one row",
                       f"only the header {', '.join(header)} was found")
    k = _pick_column(header, column, where)
    out = np.empty(len(rows), dtype=np.float64)
    for i, (row, n) in enumerate(zip(rows, lines)):
        cell = row[k].strip() if k < len(row) else ""
        try:
            out[i] = float(cell)
        except ValueError:
            raise complain("read_metric", f"{header[k]!r} at line {n} of {where}", cell, "a number",
                           f"data row {i + 1}; write nan for a missing value") from None
    return out


def _pick_column(header: list[str], column: str | int | None, where: str) -> int:
    listed = ", ".join(repr(h) for h in header)
    if column is None:
        useful = [k for k, h in enumerate(header) if h.strip().lower() not in INDEX_COLUMNS]
        if len(useful) == 1:
            return useful[0]
        if len(header) == 1:
            return 0
        raise complain("read_metric", "column", None, f"one of {listed} (the columns of {where})",
                       "the file has several value columns; pass column=... to pick one")
    if isinstance(column, int) and not isinstance(column, bool):
        if 0 <= column < len(header):
            return column
        raise complain("read_metric", "column", column, f"a position in [0, {len(header) - 1}] or one of {listed}")
    if isinstance(column, str) and column in header:
        return header.index(column)
    hint = f"the columns of {where}"
    close = [h for h in header if isinstance(column, str) and h.strip().lower() == column.strip().lower()]
    if close:
        hint += f"; did you mean {close[0]!r}?"
    raise complain("read_metric", "column", column, f"one of {listed}", hint)


def _from_pandas(obj: Any, column: str | int | None) -> np.ndarray:
    if hasattr(obj, "columns"):  # a DataFrame
        header = [str(c) for c in obj.columns]
        k = _pick_column(header, column, "the DataFrame")
        obj = obj.iloc[:, k]
    elif column is not None:
        raise complain("read_metric", "column", column, "None for a Series", "a Series is one column already")
    try:
        arr = obj.to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError, OverflowError):
        raise complain("read_metric", "source", f"a Series of dtype {obj.dtype}", "a Series of numbers") from None
    return values_of("read_metric", "source", arr)


# --------------------------------------------------------------- demo data
def make_demo_histories(seed: int = DEMO_SEED, epochs: int = 90) -> dict[str, np.ndarray]:
    """Invented demo data: validation accuracy of the plastic-flake polymer classifier, per epoch.

    Three seeded formulas (a saturating rise, plus jumps or a slow decline) with
    Gaussian noise, rounded to 4 decimals.  The shipped CSV files in
    ``schedwidget/demo/`` are ``demo_csv(name, make_demo_histories()[name])``.

    Examples
    --------
    >>> h = make_demo_histories()
    >>> sorted(h), h["a"].shape
    (['a', 'b', 'c'], (90,))
    """
    e = np.arange(epochs, dtype=np.float64)
    out = {}
    for k, name in enumerate(DEMO_NAMES):
        rng = np.random.default_rng([seed, k])
        if name == "a":  # a step-decay run: rise, then a jump after each tenfold drop
            acc = 0.86 - 0.42 * np.exp(-e / 6.0)
            acc += 0.045 * (1 - np.exp(-np.maximum(e - 29, 0) / 1.5)) * (e >= 30)
            acc += 0.012 * (1 - np.exp(-np.maximum(e - 59, 0) / 1.5)) * (e >= 60)
            noise = 0.004
        elif name == "b":  # smooth: most of the gain by epoch 40, a slow creep after
            acc = 0.88 - 0.50 * np.exp(-e / 10.0) + 0.0002 * e
            noise = 0.005
        else:  # noisy, peaks near epoch 55, then slowly loses accuracy
            acc = 0.90 - 0.52 * np.exp(-e / 8.0) - 0.0008 * np.maximum(e - 55, 0)
            noise = 0.009
        out[name] = np.round(np.clip(acc + rng.normal(0.0, noise, epochs), 0.0, 1.0), 4)
    return out


def demo_csv(name: str, values: np.ndarray, seed: int = DEMO_SEED) -> str:
    """The text of one demo file: a comment line saying it is invented, a header, one row per epoch."""
    if name not in DEMO_NAMES:
        raise complain("demo_csv", "name", name, "one of " + ", ".join(repr(n) for n in DEMO_NAMES))
    what = DEMO_NAMES[name][1]
    lines = [f"# invented demo data: validation accuracy of a plastic-flake polymer classifier, "
             f"90 epochs x 1,150 steps at batch 128; {what}; "
             f"generated by schedwidget.metrics.make_demo_histories(seed={seed})",
             "epoch,val_acc"]
    lines += [f"{i},{v:.4f}" for i, v in enumerate(values)]
    return "\n".join(lines) + "\n"


def demo_path(name: str) -> Path:
    """Path of a shipped demo history (``"a"``, ``"b"`` or ``"c"``).

    >>> demo_path("a").name
    'flakes_val_acc_a.csv'
    """
    if name not in DEMO_NAMES:
        raise complain("demo_path", "name", name, "one of " + ", ".join(repr(n) for n in DEMO_NAMES))
    return _DEMO_DIR / DEMO_NAMES[name][0]
