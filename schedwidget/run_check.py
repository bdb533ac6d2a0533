"""Check a run against its design: does the logged rate follow the design, and if not, which mistake explains it.

``check_run(design, trace)`` compares the rate a run logged with the design at every logged tick.  When they
differ it tests each classic fault *exactly* against the design, one hypothesis at a time, and keeps the one that
explains the whole trace to the tolerance:

=====================  ====================================================================================
code                   the logged rate at update ``t`` equals ...
=====================  ====================================================================================
``per_epoch``          ``design(t // spe)`` (a scheduler stepped once per epoch of ``spe`` updates while the
                       design counts updates) or ``design(spe * (t // spe))`` (the rate set once per epoch)
``per_micro_batch``    ``design(k * t + j)`` for ``k >= 2`` (stepped once per micro-batch under gradient
                       accumulation, or once per process); ``j`` is 0 or ``k - 1`` (where the step sits)
``restarted_warmup``   ``design(t)`` until a resume tick ``R``, then ``design(t - R)`` (the scheduler rebuilt
                       from tick 0 after a resume: its warmup runs again); several resumes are followed
``off_by_one``         ``design(t + 1)`` or ``design(t - 1)`` (the scheduler stepped before the optimizer)
``scaled``             ``c * design(t)`` for a constant ``c != 1`` (a base rate applied twice, a group's share)
``budget``             the design built for another budget: stretched to ``M`` ticks, or its last stage made
                       to end at ``M``
``other``              none of the above; the verdict names the first departure
=====================  ====================================================================================

Every check runs on a sample of the ticks first, then on all of them, so the work is bounded by a fixed number
of evaluations of the design over the trace.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Callable, Iterator

import numpy as np

from .schedule import Schedule, ScheduleError, complain
from .trace import Trace, as_trace

__all__ = ["check_run", "Verdict", "FAULTS"]

#: The fault codes a verdict may carry, in the order they are tried.
FAULTS = ("per_epoch", "per_micro_batch", "restarted_warmup", "off_by_one", "scaled", "budget", "other")

#: Largest accumulation (micro-batches per update, or processes) tried for ``per_micro_batch``.
MAX_ACCUMULATION = 64

#: Most resumes followed for ``restarted_warmup``.
MAX_RESUMES = 32

#: Most candidate epoch lengths tried for ``per_epoch`` when ``steps_per_epoch`` is not given.
MAX_EPOCH_GUESSES = 12

_SAMPLE = 48


@dataclass(frozen=True)
class Verdict:
    """What ``check_run`` found: a match, or the first departure and the fault that explains it.

    ``evidence`` holds the numbers behind the diagnosis: ``factor`` (scaled), ``shift`` (off_by_one),
    ``accumulation`` and ``offset`` (per_micro_batch), ``steps_per_epoch`` and ``form`` (per_epoch),
    ``resumes`` and ``segment`` (restarted_warmup: the run repeats the design's ticks ``segment[0]`` to
    ``segment[1]``), ``length`` and ``form`` (budget).  ``share`` is the share of logged updates whose rate
    departs from the design; ``also`` lists other faults that explain the trace equally well.
    """

    matches: bool
    fault: str | None
    first_tick: int | None
    share: float
    rtol: float
    atol: float
    points: int
    expected: float | None = None
    logged: float | None = None
    evidence: dict[str, Any] = field(default_factory=dict, hash=False)
    also: tuple[str, ...] = ()

    @property
    def factor(self) -> float | None:
        """The constant factor between the run and the design (fault ``scaled``), else None."""
        return self.evidence.get("factor")

    @property
    def shift(self) -> int | None:
        """The run's clock minus the design's (fault ``off_by_one``), else None."""
        return self.evidence.get("shift")

    @property
    def segment(self) -> tuple[int, int] | None:
        """The design's ticks the run repeats (fault ``restarted_warmup``), else None."""
        return self.evidence.get("segment")

    def __str__(self) -> str:
        tol = f"a relative tolerance of {self.rtol:g}" + (f" (absolute {self.atol:.3g})" if self.atol else "")
        if self.matches:
            return f"The run matches the design at all {self.points:,} logged ticks, to {tol}."
        head = (f"The run departs from the design at tick {self.first_tick:,}: it logged {self.logged:.6g} where "
                f"the design has {self.expected:.6g}.")
        e = self.evidence
        why = {
            "per_epoch": lambda: (
                f"The scheduler was stepped once per epoch of {e.get('steps_per_epoch'):,} updates while the design "
                "counts updates: the logged rate is the design at the epoch count, t // "
                f"{e.get('steps_per_epoch')}." if e.get("form") == "epoch count" else
                f"The rate was set once per epoch of {e.get('steps_per_epoch'):,} updates: each epoch runs at the "
                "design's rate of its first update."),
            "per_micro_batch": lambda: (
                f"The scheduler was stepped {e.get('accumulation')} times per optimizer update (once per "
                "micro-batch under gradient accumulation, or once per process): the logged rate is the design "
                f"at {e.get('accumulation')} * t" + (f" + {e.get('offset')}" if e.get("offset") else "") + "."),
            "restarted_warmup": lambda: (
                "The schedule started again from its tick 0 at the resume tick"
                + ("s " + ", ".join(f"{r:,}" for r in e.get("resumes", ())) if len(e.get("resumes", ())) > 1
                   else f" {e.get('resumes', (0,))[0]:,}")
                + f": its warmup ran again, repeating the design's ticks {e.get('segment')[0]:,} to "
                f"{e.get('segment')[1]:,} (rebuild the scheduler from the checkpoint's state, or pass the "
                "resume tick)."),
            "off_by_one": lambda: (
                f"The run is one tick {'ahead of' if e.get('shift') == 1 else 'behind'} the design: the logged "
                f"rate is the design at t {'+' if e.get('shift') == 1 else '-'} 1 (the scheduler stepped "
                f"{'before' if e.get('shift') == 1 else 'after'} the optimizer, or the rate logged after the step)."),
            "scaled": lambda: (
                f"Every logged rate is the design's times {e.get('factor'):.6g}: a base rate applied twice, or a "
                "param group's share applied on top of its own rate."),
            "budget": lambda: (
                f"The run follows the design built for a budget of {e.get('length'):,} ticks instead of "
                f"{e.get('design_length'):,}" + (" (the whole curve stretched)." if e.get("form") == "stretched"
                                                 else " (its last stage ends at the other budget).")),
            "other": lambda: "None of the known faults explains the whole trace.",
        }[self.fault or "other"]()
        also = f" The trace is explained as well by: {', '.join(self.also)}." if self.also else ""
        return (f"{head} {why} {100 * self.share:.1f} % of the {self.points:,} logged updates are affected "
                f"(compared to {tol}).{also}")


# ------------------------------------------------------------------ the check
def check_run(design: Schedule, trace: Any, *, rtol: float = 1e-5, atol: float | None = None,
              steps_per_epoch: int | None = None) -> Verdict:
    """Compare the rate a run logged with its design; diagnose the fault when they differ.

    Parameters
    ----------
    design
        The schedule the run was meant to follow, on a step clock (one tick per optimizer update).
    trace
        What the run logged: a ``Trace`` or anything ``read_trace`` reads (a list of rates, (tick, rate)
        pairs, a CSV file, a DataFrame, a TensorBoard log).
    rtol, atol
        A logged rate ``r`` agrees with the design's ``e`` when ``|r - e| <= rtol * |e| + atol``.  The default
        ``rtol`` (1e-5) accepts rates logged as float32 and torch's own recursive updates; ``atol`` defaults to
        1e-9 times the design's largest rate over the trace.
    steps_per_epoch
        Updates per epoch, if known; otherwise ``per_epoch`` tries the lengths of the trace's constant runs.

    Examples
    --------
    >>> from schedwidget import cosine
    >>> d = cosine(0.1, steps=100)
    >>> check_run(d, d(np.arange(100))).matches
    True
    >>> v = check_run(d, 2 * d(np.arange(100)))
    >>> v.fault, round(v.factor, 6)
    ('scaled', 2.0)
    """
    if not isinstance(design, Schedule):
        raise complain("check_run", "design", design, "a schedule (cosine(...), warmup(...), ...)")
    tr = as_trace(trace, "check_run")
    rtol = _tolerance("rtol", rtol, 0.0, 0.5)
    t, r = tr.ticks, tr.rates
    e = design(t)
    scale = float(np.max(np.abs(e))) if e.size else 0.0
    atol = 1e-9 * scale if atol is None else _tolerance("atol", atol, 0.0, math.inf)
    spe = None
    if steps_per_epoch is not None:
        if isinstance(steps_per_epoch, bool) or not isinstance(steps_per_epoch, (int, np.integer)) \
                or not 1 <= steps_per_epoch <= 2 ** 53:
            raise complain("check_run", "steps_per_epoch", steps_per_epoch, "a whole number in [1, 2**53] or None")
        spe = int(steps_per_epoch)
    # rates near the float range overflow in the ratios and products below: inf or nan there simply fails the
    # comparison, so the checks stay quiet about it (warnings are errors in the tests)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        return _check(design, tr, t, r, e, rtol, atol, spe)


def _check(design: Schedule, tr: Trace, t: np.ndarray, r: np.ndarray, e: np.ndarray, rtol: float, atol: float,
           spe: int | None) -> Verdict:
    off = ~_close(r, e, rtol, atol)
    n = int(t.size)
    if not off.any():
        return Verdict(True, None, None, 0.0, rtol, atol, n)
    i = int(np.argmax(off))
    base = dict(first_tick=int(t[i]), share=float(off.mean()), rtol=rtol, atol=atol, points=n,
                expected=float(e[i]), logged=float(r[i]))
    sample = _sample(n, i)
    found: list[tuple[str, dict[str, Any]]] = []
    for code, hypotheses in (("per_epoch", _per_epoch(design, tr, spe)),
                             ("per_micro_batch", _per_micro_batch(design)),
                             ("restarted_warmup", _restarted(design, tr, e, i, rtol, atol)),
                             ("off_by_one", _off_by_one(design)),
                             ("scaled", _scaled(design, r, e, atol)),
                             ("budget", _budget(design, tr, sample, rtol, atol))):
        for evidence, predict in hypotheses:
            if _explains(predict, t, r, sample, rtol, atol):
                found.append((code, evidence))
                break
    if not found:
        return Verdict(False, "other", **base)
    (code, evidence), rest = found[0], found[1:]
    return Verdict(False, code, evidence=evidence, also=tuple(c for c, _ in rest), **base)


def _tolerance(name: str, value: Any, lo: float, hi: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not (lo <= float(value) <= hi):
        raise complain("check_run", name, value, f"a number in [{lo:g}, {hi:g}]")
    return float(value)


def _close(r: np.ndarray, e: np.ndarray, rtol: float, atol: float) -> np.ndarray:
    with np.errstate(invalid="ignore", over="ignore"):
        return np.abs(r - e) <= rtol * np.abs(e) + atol


def _sample(n: int, i: int) -> np.ndarray:
    """Indices checked before the whole trace: both ends, the first departure and a spread between."""
    idx = np.concatenate([np.arange(min(n, 6)), np.arange(i, min(n, i + 6)), np.arange(max(0, n - 4), n),
                          np.linspace(0, n - 1, _SAMPLE).astype(np.int64)])
    return np.unique(idx)


def _explains(predict: Callable[[np.ndarray], np.ndarray], t: np.ndarray, r: np.ndarray, sample: np.ndarray,
              rtol: float, atol: float) -> bool:
    try:
        if not _close(r[sample], predict(t[sample]), rtol, atol).all():
            return False
        return bool(_close(r, predict(t), rtol, atol).all())
    except ScheduleError:  # a candidate design that cannot exist (a stage made too short, ...)
        return False


Hypotheses = Iterator[tuple[dict[str, Any], Callable[[np.ndarray], np.ndarray]]]


def _per_epoch(design: Schedule, tr: Trace, spe: int | None) -> Hypotheses:
    for k in ([spe] if spe is not None else _epoch_guesses(tr)):
        if k < 2:
            continue
        yield ({"steps_per_epoch": k, "form": "epoch count"}, lambda t, k=k: design(t // k))
        yield ({"steps_per_epoch": k, "form": "epoch start"}, lambda t, k=k: design(k * (t // k)))


def _epoch_guesses(tr: Trace) -> list[int]:
    """Epoch lengths suggested by the trace: the lengths (in ticks) of its runs of one constant rate."""
    r, t = tr.rates, tr.ticks
    if r.size < 2:
        return []
    change = np.flatnonzero(r[1:] != r[:-1]) + 1
    if change.size == 0:
        return []
    starts = t[change]
    lengths = np.diff(np.concatenate([[t[0]], starts]))
    values, counts = np.unique(lengths[1:] if lengths.size > 1 else lengths, return_counts=True)
    order = np.argsort(-counts, kind="stable")
    out: list[int] = []
    for v in values[order][:MAX_EPOCH_GUESSES]:
        for k in (int(v), int(starts[0])):
            if k not in out:
                out.append(k)
    return out[:MAX_EPOCH_GUESSES]


def _per_micro_batch(design: Schedule) -> Hypotheses:
    for k in range(2, MAX_ACCUMULATION + 1):
        for j in sorted({0, k - 1}):
            yield ({"accumulation": k, "offset": j}, lambda t, k=k, j=j: design(k * t + j))


def _off_by_one(design: Schedule) -> Hypotheses:
    yield ({"shift": 1}, lambda t: design(t + 1))
    yield ({"shift": -1}, lambda t: design(np.maximum(t - 1, 0)))


def _scaled(design: Schedule, r: np.ndarray, e: np.ndarray, atol: float) -> Hypotheses:
    ok = np.abs(e) > max(atol, 0.0) * 10
    if not ok.any():
        return
    c = float(np.median(r[ok] / e[ok]))
    if math.isfinite(c) and c > 0:
        yield ({"factor": c}, lambda t: c * design(t))


def _restarted(design: Schedule, tr: Trace, e: np.ndarray, i: int, rtol: float, atol: float) -> Hypotheses:
    """The design until the first departure, then the design again from its tick 0, resume after resume."""
    t, r = tr.ticks, tr.rates
    resumes: list[int] = []
    start = i
    while len(resumes) < MAX_RESUMES:
        lo = int(t[start - 1]) + 1 if start > 0 else 0
        hi = int(t[start])
        best = None
        near = slice(start, min(t.size, start + 64))
        for R in range(hi, max(lo, hi - 1024) - 1, -1):  # the resume lies between the last matching log and this one
            if R <= (resumes[-1] if resumes else 0):
                break
            ahead = _close(r[near], design(t[near] - R), rtol, atol)  # the next 64 logs pick the resume tick
            reach = int(np.argmin(ahead)) if not ahead.all() else ahead.size
            if reach and (best is None or reach > best[1]):
                best = (R, reach)
            if reach == ahead.size:
                break
        if best is None:
            return
        if best[1] == near.stop - start:  # it explains all 64: how far it goes, in growing chunks
            best = (best[0], _reach(lambda x, R=best[0]: design(x - R), t, r, start, rtol, atol))
        resumes.append(best[0])
        start += best[1]
        if start >= t.size:
            break
    else:
        return
    bounds = np.array(resumes)

    def predict(x: np.ndarray) -> np.ndarray:
        k = np.searchsorted(bounds, x, side="right")
        origin = np.where(k > 0, bounds[np.maximum(k - 1, 0)], 0)
        return design(x - origin)

    # the run repeats the design's ticks 0 .. (the longest stretch it ran again, at most up to the first resume)
    spans = np.diff(np.append(bounds, int(t[-1]) + 1))
    segment = (0, int(min(int(spans.max()), resumes[0])))
    yield ({"resumes": tuple(resumes), "segment": segment}, predict)


def _reach(predict: Callable[[np.ndarray], np.ndarray], t: np.ndarray, r: np.ndarray, i0: int, rtol: float,
           atol: float) -> int:
    """How many logs from ``i0`` on ``predict`` explains in a row, read in chunks that grow fourfold."""
    i, chunk = i0, 256
    while i < t.size:
        j = min(t.size, i + chunk)
        ok = _close(r[i:j], predict(t[i:j]), rtol, atol)
        if not ok.all():
            return i - i0 + int(np.argmin(ok))
        i, chunk = j, chunk * 4
    return t.size - i0


def _budget(design: Schedule, tr: Trace, sample: np.ndarray, rtol: float, atol: float) -> Hypotheses:
    L = design.length
    if L is None:
        return
    t, r = tr.ticks[sample], tr.rates[sample]
    top = max(int(tr.ticks[-1]) + 1, 2)
    for form, build in (("stretched", lambda m: design.stretch(m)), ("last stage", lambda m: _retail(design, m))):
        m = _search_length(build, t, r, L, top)
        if m is not None and m != L:
            made = build(m)
            if made is not None:
                yield ({"length": m, "design_length": L, "form": form}, made)


def _search_length(build: Callable[[int], Schedule | None], t: np.ndarray, r: np.ndarray, L: int,
                   top: int) -> int | None:
    """The whole length M whose design fits the sampled points best: a log grid, then finer grids around the best."""
    def err(m: int) -> float:
        try:
            s = build(m)
        except ScheduleError:
            return math.inf
        if s is None:
            return math.inf
        e = s(t)
        with np.errstate(over="ignore", invalid="ignore"):
            return float(np.nan_to_num(np.max(np.abs(r - e) / (np.abs(e) + 1e-300)), nan=math.inf))

    lo, hi = 1, max(4 * max(L, top), 8)
    grid = np.unique(np.geomspace(lo, hi, 200).round().astype(np.int64))
    errs = [err(int(m)) for m in grid]
    if not np.isfinite(np.min(errs)):
        return None
    best = int(grid[int(np.argmin(errs))])
    width = max(int(best * (hi / lo) ** (1 / 199)) - best + 1, 2)
    while True:
        cand = np.unique(np.clip(np.linspace(best - width, best + width, 41).round().astype(np.int64), 1, None))
        errs = [err(int(m)) for m in cand]
        best = int(cand[int(np.argmin(errs))])
        if width <= 20:
            break
        width = max(width // 10, 20)
    return best


def _retail(design: Schedule, total: int) -> Schedule | None:
    """``design`` with its last stage lengthened or shortened so the whole lasts ``total`` ticks (None if it can't)."""
    if total < 1:
        return None
    parts = design._stage_parts()
    if len(parts) > 1:
        head = sum(p.length for p in parts[:-1])
        last = _retail(parts[-1], total - head)
        if last is None:
            return None
        from .combine import stages
        return stages(*parts[:-1], last)
    warmed = design._warmed()
    names = {f.name for f in dataclasses.fields(design)}
    if warmed is not None and "target" in names:
        rest = total - (design.steps if getattr(design, "place", "before") == "before" else 0)
        inner = _retail(warmed, rest)
        return None if inner is None else dataclasses.replace(design, target=inner)
    if "steps" in names and not design.children():
        return dataclasses.replace(design, steps=total)
    return None
