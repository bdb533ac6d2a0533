"""Rate traces in: what a training run logged, as (tick, rate) pairs, for ``check_run`` and ``recover``.

A trace is the learning rate a run actually used, at the ticks it was logged.  It comes as a 1-D sequence
(the rate at ticks 0, 1, 2, ... or every ``every`` ticks), as (tick, rate) pairs, as a numpy array, a pandas
Series or DataFrame (read through ``.to_numpy()`` and ``.columns``: pandas is never imported here), a CSV
file (any column names; a tick column is optional) or a TensorBoard event file or log folder (read with the
``tensorboard`` package's own event reader, the optional extra ``schedwidget[tensorboard]``).
``read_traces`` reads every rate column or tag at once (one per param group).

Limits: a CSV file follows ``read_metric``'s conventions (a regular file of at most 64 MiB; ``#`` lines and blank
lines skipped; a header unless every cell of the first line is a number); TensorBoard files add up to at most
``MAX_EVENT_BYTES``; a trace holds at most ``MAX_TRACE_POINTS`` points; ticks are whole numbers in
``[0, 2**53]`` that increase strictly; rates are finite and >= 0.
"""

from __future__ import annotations

import csv
import os
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

import numpy as np

from .metrics import MAX_METRIC_BYTES, _Label, is_number, values_of
from .schedule import MAX_TICKS, ScheduleError, complain
from .spec import read_file

__all__ = ["Trace", "read_trace", "read_traces", "as_trace", "MAX_TRACE_POINTS", "MAX_EVENT_BYTES"]

#: Most points one trace holds (a run of four million logged updates).
MAX_TRACE_POINTS = 4_000_000

#: Most bytes of TensorBoard event files read for one call (256 MiB).
MAX_EVENT_BYTES = 256 * 2 ** 20

#: Column names that count ticks (optimizer updates), in order of preference.
TICK_COLUMNS = ("tick", "step", "global_step", "update", "updates", "iteration", "iter", "it", "batch", "epoch")

#: Column names that are neither ticks nor rates (skipped when columns are picked by themselves).
OTHER_COLUMNS = ("wall_time", "walltime", "time", "timestamp", "")

#: Words that mark a column or tag as a rate, when a table holds other numbers too.
RATE_WORDS = ("lr", "learning_rate", "learning-rate", "rate")


@dataclass(frozen=True, eq=False)
class Trace:
    """The rate a run used at the ticks it logged: ``rates[i]`` is the rate of update ``ticks[i]``.

    Examples
    --------
    >>> t = read_trace([0.1, 0.1, 0.05], every=10)
    >>> t.ticks.tolist(), t.rates.tolist()
    ([0, 10, 20], [0.1, 0.1, 0.05])
    """

    ticks: np.ndarray
    rates: np.ndarray
    name: str = "lr"

    def __post_init__(self) -> None:
        ticks, rates = _checked(self.ticks, self.rates, "Trace")
        object.__setattr__(self, "ticks", ticks)
        object.__setattr__(self, "rates", rates)

    def __len__(self) -> int:
        return int(self.ticks.size)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Trace):
            return NotImplemented
        return (self.name == other.name and np.array_equal(self.ticks, other.ticks)
                and np.array_equal(self.rates, other.rates))

    def __hash__(self) -> int:
        return hash((self.name, self.ticks.tobytes(), self.rates.tobytes()))

    def __repr__(self) -> str:
        return (f"Trace(ticks={self.ticks.tolist()!r}, rates={self.rates.tolist()!r}, name={self.name!r})"
                if self.ticks.size <= 8 else
                f"<Trace {self.name!r}: {self.ticks.size:,} points, ticks {self.ticks[0]}..{self.ticks[-1]}>")

    @property
    def every(self) -> int | None:
        """The spacing of the logged ticks when it is constant (1: every tick), else None."""
        if self.ticks.size < 2:
            return 1
        d = np.diff(self.ticks)
        return int(d[0]) if np.all(d == d[0]) else None


def _checked(ticks: Any, rates: Any, owner: str) -> tuple[np.ndarray, np.ndarray]:
    """Ticks (whole, in [0, 2**53], strictly increasing) and rates (finite, >= 0) of one length, checked."""
    r = values_of(owner, "rates", rates)
    t = values_of(owner, "ticks", ticks)
    if t.size != r.size:
        raise complain(owner, "ticks", f"{t.size:,} ticks", f"one tick per rate ({r.size:,} rates)")
    if r.size > MAX_TRACE_POINTS:
        raise complain(owner, "rates", f"{r.size:,} points", f"at most {MAX_TRACE_POINTS:,} points",
                       "log every k ticks, or cut the trace")
    bad = np.flatnonzero(~np.isfinite(r) | (r < 0))
    if bad.size:
        i = int(bad[0])
        raise complain(owner, f"rates[{i}]", float(r[i]), "a finite rate >= 0",
                       f"at tick {int(t[i]) if np.isfinite(t[i]) else t[i]}; drop the points the run did not log")
    bad = np.flatnonzero(~np.isfinite(t) | (t < 0) | (t > MAX_TICKS) | (t != np.floor(t)))
    if bad.size:
        i = int(bad[0])
        raise complain(owner, f"ticks[{i}]", float(t[i]), "a whole number of ticks in [0, 2**53]")
    ti = t.astype(np.int64)
    back = np.flatnonzero(np.diff(ti) <= 0)
    if back.size:
        i = int(back[0]) + 1
        raise complain(owner, f"ticks[{i}]", int(ti[i]), f"a tick > ticks[{i - 1}] = {int(ti[i - 1])}",
                       "ticks increase strictly; a resumed run may log some ticks twice: keep the last of each")
    return ti, r


def _every(owner: str, every: Any) -> int:
    if isinstance(every, bool) or not isinstance(every, (int, np.integer)) or not 1 <= every <= MAX_TICKS:
        raise complain(owner, "every", every, "a whole number of ticks in [1, 2**53]",
                       "the spacing of the logged ticks: 1 when every update was logged")
    return int(every)


# ------------------------------------------------------------------ public readers
def read_trace(source: Any, column: str | int | None = None, *, tick_column: str | int | None = None,
               every: int = 1, name: str | None = None) -> Trace:
    """One rate trace from a sequence, pairs, an array, pandas, a CSV file or a TensorBoard log.

    Parameters
    ----------
    source
        A 1-D sequence or array of rates (at ticks 0, every, 2 * every, ...); a sequence of (tick, rate)
        pairs or an ``(n, 2)`` array; a pandas Series (its index gives the ticks when it is made of whole
        numbers) or DataFrame; a CSV path (``str`` / ``os.PathLike``) or its bytes; a TensorBoard event file
        (a name with ``tfevents`` in it) or a folder of them; or a ``Trace`` (returned as it is).
    column
        The rate column (CSV, DataFrame) or scalar tag (TensorBoard), by name or position.  ``None`` picks the
        only one, or the only one whose name says it is a rate (``lr``, ``learning_rate``).
    tick_column
        The column of ticks; ``None`` looks for one by name (``tick``, ``step``, ``global_step``, ...) and,
        when there is none, numbers the rows 0, every, 2 * every, ...
    every
        Ticks between two rows when no tick column gives them.
    name
        A name for the trace (default: the column's).

    Examples
    --------
    >>> read_trace([(0, 0.0), (5, 0.05), (10, 0.1)]).ticks.tolist()
    [0, 5, 10]
    >>> read_trace(b"step,lr\\n0,0.1\\n100,0.05\\n").rates.tolist()
    [0.1, 0.05]
    """
    traces = _read(source, column, tick_column, every, "read_trace", one=True)
    (trace,) = traces
    return trace if name is None else Trace(trace.ticks, trace.rates, name)


def read_traces(source: Any, *, tick_column: str | int | None = None, every: int = 1) -> dict[str, Trace]:
    """Every rate trace of a table or log at once (one per param group), by column or tag name.

    The columns (tags) are those whose name says they are a rate (``lr``, ``learning_rate``, ``rate``), or
    every value column when none does.  A single sequence or array gives one trace named ``"lr"``; a 2-D
    array of shape ``(n, groups)`` gives one trace per column (``"group0"``, ``"group1"``, ...).

    >>> sorted(read_traces(b"step,lr_body,lr_head\\n0,0.1,1.0\\n1,0.05,0.5\\n"))
    ['lr_body', 'lr_head']
    """
    if isinstance(source, np.ndarray) and source.ndim == 2 and source.shape[1] != 2:
        every = _every("read_traces", every)
        ticks = np.arange(source.shape[0], dtype=np.int64) * every
        return {f"group{k}": Trace(ticks, source[:, k], f"group{k}") for k in range(source.shape[1])}
    return {t.name: t for t in _read(source, None, tick_column, every, "read_traces", one=False)}


def as_trace(source: Any, owner: str = "trace") -> Trace:
    """``source`` as a Trace (a Trace itself, or anything ``read_trace`` reads)."""
    if isinstance(source, Trace):
        return source
    try:
        return read_trace(source)
    except ScheduleError as exc:
        raise ScheduleError(f"{owner}: {exc}") from None


# ------------------------------------------------------------------ dispatch
def _read(source: Any, column: Any, tick_column: Any, every: Any, owner: str, one: bool) -> list[Trace]:
    every = _every(owner, every)
    if isinstance(source, Trace):
        return [source]
    if isinstance(source, (bytes, bytearray, memoryview)):
        return _from_table(_csv_table(bytes(source).decode("utf-8-sig", errors="replace"), "the uploaded file",
                                      owner), column, tick_column, every, owner, one, "the uploaded file")
    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        if os.path.isdir(path) or "tfevents" in os.path.basename(path):
            return _from_tensorboard(path, column, owner, one)
        where = repr(path)
        data = read_file(path, owner, "source", cap=MAX_METRIC_BYTES, what="be an existing CSV file")
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise complain(owner, "source", path, "a readable UTF-8 CSV file", str(exc)) from None
        return _from_table(_csv_table(text, where, owner), column, tick_column, every, owner, one, where)
    if hasattr(source, "to_numpy") and hasattr(source, "columns"):  # a DataFrame, duck-typed
        header = [str(c) for c in source.columns]
        cols = [_column_values(source.iloc[:, k], owner, header[k]) for k in range(len(header))]
        return _from_table((header, cols, {}), column, tick_column, every, owner, one, "the DataFrame")
    if hasattr(source, "to_numpy") and hasattr(source, "index"):  # a Series
        if column is not None or tick_column is not None:
            raise complain(owner, "column" if column is not None else "tick_column",
                           column if column is not None else tick_column, "None for a Series",
                           "a Series is one column already; its index gives the ticks")
        rates = _column_values(source, owner, "source")
        ticks = _index_ticks(source.index, rates.size, every)
        nm = source.name if isinstance(getattr(source, "name", None), str) else "lr"
        return [Trace(ticks, rates, nm)]
    if column is not None or tick_column is not None:
        raise complain(owner, "column" if column is not None else "tick_column",
                       column if column is not None else tick_column, "None for a list or an array",
                       "a column only makes sense for a CSV file, a DataFrame or a TensorBoard log")
    if isinstance(source, Mapping) or _empty(source):
        raise complain(owner, "source", source if not isinstance(source, Mapping) else f"a {type(source).__name__}",
                       "a non-empty list or array of rates, (tick, rate) pairs, a pandas Series or DataFrame, or "
                       "the path of a CSV file or TensorBoard log", "one rate per logged update")
    pairs = _pairs(source, owner)
    if pairs is not None:
        return [Trace(pairs[0], pairs[1])]
    rates = values_of(owner, "source", source)
    return [Trace(np.arange(rates.size, dtype=np.int64) * every, rates)]


def _empty(source: Any) -> bool:
    try:
        return len(source) == 0
    except TypeError:  # no length (a number, a 0-d array): values_of names it
        return False


def _column_values(col: Any, owner: str, label: str) -> np.ndarray:
    try:
        arr = col.to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError, OverflowError):
        raise complain(owner, f"column {label!r}", f"a column of dtype {getattr(col, 'dtype', '?')}",
                       "a column of numbers") from None
    return values_of(owner, label, arr)


def _index_ticks(index: Any, n: int, every: int) -> np.ndarray:
    try:
        idx = np.asarray(index.to_numpy(), dtype=np.float64)
    except (TypeError, ValueError, AttributeError):
        return np.arange(n, dtype=np.int64) * every
    whole = idx.size == n and np.all(np.isfinite(idx)) and np.array_equal(idx, np.floor(idx))
    if not whole or (every != 1 and np.array_equal(idx, np.arange(n))):  # a default index: rows, not ticks
        return np.arange(n, dtype=np.int64) * every
    return idx


def _pairs(source: Any, owner: str) -> tuple[np.ndarray, np.ndarray] | None:
    """(ticks, rates) when ``source`` is (tick, rate) pairs, else None."""
    if isinstance(source, np.ndarray):
        if source.ndim == 2 and source.shape[1] == 2:
            return source[:, 0], source[:, 1]
        if source.ndim == 2:
            raise complain(owner, "source", f"an array of shape {source.shape}",
                           "a 1-D array of rates or an (n, 2) array of (tick, rate) rows",
                           "several param groups: read_traces(array) reads one trace per column")
        return None
    if isinstance(source, (list, tuple)) and source and isinstance(source[0], (list, tuple, np.ndarray)):
        if len(source) > MAX_TRACE_POINTS:
            raise complain(owner, "source", f"{len(source):,} pairs", f"at most {MAX_TRACE_POINTS:,} points")
        ticks, rates = [], []
        for i, p in enumerate(source):
            if not isinstance(p, (list, tuple, np.ndarray)) or len(p) != 2:
                raise complain(owner, f"source[{i}]", p, "a (tick, rate) pair",
                               "every item is a pair when the first one is")
            ticks.append(p[0])
            rates.append(p[1])
        return values_of(owner, "ticks", ticks), values_of(owner, "rates", rates)
    return None


# ------------------------------------------------------------------ tables
def _csv_table(text: str, where: str, owner: str) -> tuple[list[str], list[np.ndarray], dict[int, tuple[str, str]]]:
    """Header and float columns of a CSV text (``read_metric``'s conventions)."""
    label = _Label(where)
    kept = [(n, line) for n, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    if not kept:
        raise complain(owner, "source", label, "a CSV file with at least one row",
                       "the file is empty or holds only comments")
    if len(kept) > MAX_TRACE_POINTS + 1:
        raise complain(owner, "source", label, f"at most {MAX_TRACE_POINTS:,} rows", f"it has {len(kept):,}")
    rows: list[list[str]] = []
    try:
        for row in csv.reader(line for _, line in kept):
            rows.append(row)
    except csv.Error as exc:
        n = kept[min(len(rows), len(kept) - 1)][0]
        raise complain(owner, "source", label, "a CSV file of numbers",
                       f"line {n} cannot be read as CSV: {exc}; a field holds at most "
                       f"{csv.field_size_limit():,} characters") from None
    lines = [n for n, _ in kept]
    first = [c.strip() for c in rows[0]]
    if all(is_number(c) for c in first):
        header = [str(k) for k in range(len(first))]
    else:
        header, rows, lines = first, rows[1:], lines[1:]
    if not rows:
        raise complain(owner, "source", label, "a CSV file with a header and at least one row",
                       f"only the header {', '.join(header)} was found")
    cols = [np.empty(len(rows)) for _ in header]
    bad: dict[int, tuple[str, str]] = {}
    for i, (row, n) in enumerate(zip(rows, lines)):
        for k, col in enumerate(cols):
            cell = row[k].strip() if k < len(row) else ""
            try:
                col[i] = float(cell)
            except ValueError:
                col[i] = np.nan  # refused only if this column is read
                bad.setdefault(k, (f"{header[k]!r} at line {n} of {where}", cell))
    return header, cols, bad


def _from_table(table: tuple[list[str], list[np.ndarray], dict[int, tuple[str, str]]], column: Any, tick_column: Any, every: int,
                owner: str, one: bool, where: str) -> list[Trace]:
    header, cols, bad = table
    listed = ", ".join(repr(h) for h in header)
    low = [h.strip().lower() for h in header]
    k_tick = None
    if tick_column is not None:
        k_tick = _position(owner, "tick_column", tick_column, header, where)
    elif header == ["0", "1"] and column is None:  # two numbered columns with no header: (tick, rate) rows
        k_tick = 0
    else:
        for name in TICK_COLUMNS:
            if name in low:
                k_tick = low.index(name)
                break
    others = [k for k in range(len(header)) if k != k_tick and low[k] not in OTHER_COLUMNS + TICK_COLUMNS]
    if column is not None:
        picked = [_position(owner, "column", column, header, where)]
    else:
        rated = [k for k in others if any(w in low[k] for w in RATE_WORDS)]
        picked = rated or others
        if not picked:
            raise complain(owner, "column", None, f"one of {listed} (the columns of {where})",
                           "no column holds rates; pass column=...")
        if one and len(picked) > 1:
            raise complain(owner, "column", None, f"one of {', '.join(repr(header[k]) for k in picked)}",
                           f"{where} has several rate columns; pass column=..., or read them all with read_traces")
    if k_tick is None:
        n = len(cols[picked[0]])
        ticks: Any = np.arange(n, dtype=np.int64) * every
    else:
        ticks = _column(cols, bad, k_tick, owner)
    return [Trace(ticks, _column(cols, bad, k, owner), header[k]) for k in picked]


def _column(cols: list[np.ndarray], bad: dict[int, tuple[str, str]], k: int, owner: str) -> np.ndarray:
    if k in bad:
        where, cell = bad[k]
        raise complain(owner, where, cell, "a number", "every logged row needs its tick and rate")
    return cols[k]


def _position(owner: str, name: str, value: Any, header: list[str], where: str) -> int:
    listed = ", ".join(repr(h) for h in header)
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        if 0 <= value < len(header):
            return int(value)
        raise complain(owner, name, value, f"a position in [0, {len(header) - 1}] or one of {listed}")
    if isinstance(value, str) and value in header:
        return header.index(value)
    close = [h for h in header if isinstance(value, str) and h.strip().lower() == value.strip().lower()]
    hint = f"the columns of {where}" + (f"; did you mean {close[0]!r}?" if close else "")
    raise complain(owner, name, value, f"one of {listed}", hint)


# ------------------------------------------------------------------ TensorBoard
#: Most entries looked at when a folder is searched for event files (a run's log folder holds a handful; a path such
#: as "/" must be refused in bounded time, not walked).
MAX_FOLDER_ENTRIES = 10_000


def _event_files(path: str, owner: str = "read_trace") -> Iterable[str]:
    if not os.path.isdir(path):
        yield path
        return
    seen = 0
    for root, dirs, files in os.walk(path):
        seen += len(dirs) + len(files)
        if seen > MAX_FOLDER_ENTRIES:
            raise complain(owner, "source", path, f"an event file or a run's log folder of at most "
                           f"{MAX_FOLDER_ENTRIES:,} files and folders", "name the run's own log folder")
        for f in files:
            if "tfevents" in f:
                yield os.path.join(root, f)


def _from_tensorboard(path: str, tag: Any, owner: str, one: bool) -> list[Trace]:
    """Scalars of a TensorBoard log, read by the ``tensorboard`` package's own event reader."""
    try:
        from tensorboard.backend.event_processing.event_accumulator import EventAccumulator
    except ImportError:
        raise complain(owner, "source", path, "a CSV file, or a TensorBoard log with the tensorboard package "
                       "installed", "pip install 'schedwidget[tensorboard]' to read event files") from None
    files = list(_event_files(path, owner))
    if not files:
        raise complain(owner, "source", path, "a TensorBoard event file or a folder holding some",
                       "no file with 'tfevents' in its name was found")
    total = 0
    for f in files:
        try:
            total += os.stat(f).st_size
        except OSError as exc:
            raise complain(owner, "source", f, "a readable TensorBoard event file", str(exc)) from None
    if total > MAX_EVENT_BYTES:
        raise complain(owner, "source", path, f"event files of at most {MAX_EVENT_BYTES:,} bytes in all",
                       f"they hold {total:,} bytes; point at one run's folder or file")
    if not os.path.isdir(path):
        read_file(path, owner, "source", cap=MAX_EVENT_BYTES, what="be an existing TensorBoard event file")
    acc = EventAccumulator(path, size_guidance={"scalars": 0})
    try:
        acc.Reload()
    except Exception as exc:  # noqa: BLE001 - the reader's own errors (corrupt records, ...) become ours
        raise complain(owner, "source", path, "a readable TensorBoard event file", str(exc)) from None
    tags = list(acc.Tags().get("scalars", []))
    if tag is not None:
        if isinstance(tag, (int, np.integer)) and not isinstance(tag, bool) and 0 <= tag < len(tags):
            tag = tags[int(tag)]
        if tag not in tags:
            raise complain(owner, "column", tag, f"one of the scalar tags {tags!r}" if tags else "a scalar tag",
                           f"the scalar tags of {path!r}")
        picked = [tag]
    else:
        rated = [t for t in tags if any(w in t.lower() for w in RATE_WORDS)]
        picked = rated or tags
        if not picked:
            raise complain(owner, "source", path, "a TensorBoard log with scalars", "it holds no scalar tag")
        if one and len(picked) > 1:
            raise complain(owner, "column", None, f"one of the scalar tags {picked!r}",
                           "the log has several rate tags; pass column=..., or read them all with read_traces")
    out = []
    for t in picked:
        events = acc.Scalars(t)
        if len(events) > MAX_TRACE_POINTS:
            raise complain(owner, "source", path, f"at most {MAX_TRACE_POINTS:,} points per tag",
                           f"tag {t!r} holds {len(events):,}")
        out.append(Trace(np.array([e.step for e in events], dtype=np.float64),
                         np.array([e.value for e in events], dtype=np.float64), t))
    return out
