"""What a value must be: every rate finite and >= 0, in the core, in the generated function and in the factor.

``check`` dispatches on the type a public function returned.  A violated
promise raises ``Broken`` (never a product exception), whose ``route`` and
``what`` name the failure class.
"""

from __future__ import annotations

import json
import math
import numbers
from pathlib import Path
from typing import Any

import numpy as np

import schedwidget as sw
from schedwidget.schedule import MAX_TICKS, Schedule, ScheduleError

#: Ticks of the large array evaluated in the core (a training run's worth of one evaluation).
ARRAY_TICKS = 4001


#: What the running case is doing (read by the runner to name a timeout): the call itself or a check's route.
PHASE = ["the call", ""]


def phase(name: str, detail: str = "") -> None:
    PHASE[0], PHASE[1] = name, detail


class Broken(Exception):
    """A returned value that breaks a promise (a check failure, not an exception of the library)."""

    def __init__(self, route: str, what: str, detail: str) -> None:
        super().__init__(f"{route}: {what}: {detail}")
        self.route, self.what, self.detail = route, what, detail


def ticks_for(s: Schedule) -> tuple[list[int], np.ndarray]:
    """Scalar ticks (0, 1, length-1, length, beyond, 2**53) and a large array over and past the budget."""
    n = s.length
    if n is None:
        scalars = [0, 1, 2, 1000, 10 ** 6, 2 ** 31, MAX_TICKS]
        top = 10 ** 6
    else:
        scalars = [0, 1, n - 1, n, n + 1, 2 * n, MAX_TICKS]
        top = min(2 * n, MAX_TICKS)
    scalars = sorted({min(max(t, 0), MAX_TICKS) for t in scalars})
    grid = np.linspace(0.0, float(top), ARRAY_TICKS).astype(np.int64)
    arr = np.unique(np.concatenate([grid, np.asarray(scalars, dtype=np.int64)]))
    return scalars, arr


def rate(route: str, v: Any, where: str) -> float:
    """``v`` if it is a real, finite number >= 0 (a Python or numpy float or int, not bool/complex)."""
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Real):
        raise Broken(route, f"returned {type(v).__name__}", f"{v!r:.80} at {where}")
    if isinstance(v, float) or isinstance(v, np.floating):
        if math.isnan(v):
            raise Broken(route, "nan", f"at {where}")
        if math.isinf(v):
            raise Broken(route, "inf", f"{v!r} at {where}")
    if v < 0:
        raise Broken(route, "negative", f"{v!r} at {where}")
    return float(v)


def rates(route: str, arr: Any, shape: tuple[int, ...] | None, where: str) -> None:
    """Every entry of a float64 array finite and >= 0 (and the expected shape)."""
    if not isinstance(arr, np.ndarray) or arr.dtype != np.float64:
        raise Broken(route, "not a float64 array", f"{type(arr).__name__} {getattr(arr, 'dtype', '')} at {where}")
    if shape is not None and arr.shape != shape:
        raise Broken(route, "wrong shape", f"{arr.shape} for ticks of shape {shape}")
    bad = ~np.isfinite(arr)
    if bad.any():
        i = int(np.argmax(bad))
        raise Broken(route, "nan" if np.isnan(arr.flat[i]) else "inf", f"entry {i} of {where}")
    if (arr < 0).any():
        i = int(np.argmax(arr < 0))
        raise Broken(route, "negative", f"{arr.flat[i]!r} at entry {i} of {where}")


#: Exports equal the core "up to the last bit of a library cos/exp/pow" (codegen's promise); this much is allowed.
AGREE_RTOL = 1e-9


def agree(route: str, v: float, core: float, t: int) -> None:
    """An exported rate equals the core's rate at the same tick (a silent wrong rate is the worst failure)."""
    if abs(v - core) > AGREE_RTOL * max(abs(v), abs(core)) and abs(v - core) > 1e-300:
        raise Broken(route, "differs from the core s(t)", f"{v!r} vs s({t}) = {core!r}")


def check_schedule(s: Schedule, facts: bool = False) -> None:
    """The core at scalar ticks and on a large array, the generated function, the factor (and the readout)."""
    phase("repr(s)")
    repr(s)  # a design always prints (as Python that rebuilds it)
    phase("core s(t)")
    scalars, arr = ticks_for(s)
    core = {t: rate("core s(t)", s(t), f"t={t}") for t in scalars}
    rates("core s(array)", s(arr), arr.shape, f"an array of {arr.size} ticks up to {int(arr[-1])}")
    rates("core s(array), unsorted", s(arr[::-37]), arr[::-37].shape, "ticks in falling order")
    phase("to_python(s)")
    try:
        text = sw.to_python(s)
    except ScheduleError:
        text = None
    if text is not None:
        ns: dict[str, Any] = {}
        phase("compiling the generated source", f"{len(text):,} characters of to_python(s)")
        try:
            code = compile(text, "<generated lr_at>", "exec")
        except (SyntaxError, RecursionError, MemoryError, ValueError) as exc:
            raise Broken("to_python(s)", f"source does not compile ({type(exc).__name__})",
                         f"{len(text):,} characters: {exc}"[:200]) from None
        phase("the generated lr_at(t)")
        exec(code, ns)
        fn = ns["lr_at"]
        for t in scalars:
            agree("generated lr_at(t)", rate("generated lr_at(t)", fn(t), f"t={t}"), core[t], t)
    phase("torch_factor(s, 0.1) and its calls")
    try:
        factor = sw.torch_factor(s, 0.1)
    except ScheduleError:
        factor = None
    if factor is not None:
        for t in scalars:
            agree("torch_factor(s, 0.1)(t) * 0.1", rate("torch_factor(s, 0.1)(t)", factor(t), f"t={t}") * 0.1,
                  core[t], t)
    if facts:
        phase("facts(s)")
        try:
            f = sw.facts(s, steps=None if s.length is not None else 1000)
        except ScheduleError:
            return
        check_facts(f)


def check_facts(f: Any) -> None:
    for name in ("first", "peak", "minimum", "final", "after", "mean", "area"):
        rate(f"facts(s).{name}", getattr(f, name), "the readout")


def check_factor(route: str, factor: Any, ticks=(0, 1, 10, 10 ** 6, MAX_TICKS)) -> None:
    for t in ticks:
        rate(route, factor(t), f"t={t}")


def run_source(kind: str, name: str):
    """A check for generated source: it compiles, runs, and what it defines gives clean rates.

    ``kind`` is "function" (``to_python``: ``name(t)`` at a few ticks) or
    "plateau" (``plateau_source``: ``name().update(metric)`` a few times).
    """
    def run(text: Any) -> None:
        check(text)
        if not isinstance(text, str):
            return
        phase(f"running the generated source of {kind}")
        ns: dict[str, Any] = {}
        exec(compile(text, "<generated>", "exec"), ns)
        if kind == "function":
            for t in (0, 1, 10, 10 ** 6):
                rate(f"generated {kind} {name}(t)", ns[name](t), f"t={t}")
        else:
            rule = ns[name]()
            rate(f"generated {name}().rate", rule.rate, "the start")
            for i, m in enumerate((0.5, 0.5, 0.5, 0.5, 0.6, 0.4)):
                rate(f"generated {name}().update(m)", rule.update(m), f"update {i}")
    return run


def check_with_facts(result: Any) -> None:
    """``check``, and for a schedule also its readout (``facts``: describing a design is bounded too)."""
    if isinstance(result, Schedule):
        check_schedule(result, facts=True)
    else:
        check(result)


def check(result: Any) -> None:
    """Check whatever a public function returned; unknown types pass (they carry no rate)."""
    phase(f"checking the {type(result).__name__} returned")
    if isinstance(result, Schedule):
        check_schedule(result)
    elif isinstance(result, sw.Design):
        check_schedule(result.schedule)
    elif isinstance(result, sw.RateFactor):
        check_factor("RateFactor(t)", result)
    elif isinstance(result, list) and result and all(isinstance(r, sw.RateFactor) for r in result):
        for r in result:
            check_factor("RateFactor(t) of a group", r)
    elif isinstance(result, sw.PlateauReplay):
        rates("replay_plateau(...).rates", np.asarray(result.rates), None, "the replay")
        rate("replay_plateau(...).next_rate", result.next_rate, "the replay")
    elif isinstance(result, sw.Facts):
        check_facts(result)
    elif isinstance(result, np.ndarray):  # read_metric: nan cells are kept by design
        if result.dtype != np.float64 or result.ndim != 1 or result.size == 0:
            raise Broken("read_metric", "not a non-empty 1-D float64 array", f"{result.dtype} {result.shape}")
    elif isinstance(result, dict) and "schedule" in result:  # to_spec
        try:
            json.dumps(result, allow_nan=False)
        except (TypeError, ValueError) as exc:
            raise Broken("to_spec", "not plain JSON", str(exc)[:100]) from None
    elif isinstance(result, str) and "def " in result:
        # to_python / to_torch / plateau_source text: it must compile (running it is run_source's job)
        try:
            compile(result, "<generated>", "exec")
        except (SyntaxError, RecursionError, MemoryError, ValueError) as exc:
            raise Broken("generated source", f"does not compile ({type(exc).__name__})",
                         f"{len(result):,} characters: {exc}"[:200]) from None
    elif isinstance(result, float):  # a rate: s(t) at one tick
        rate("s(t)", result, "the tick given")
    elif isinstance(result, (Path, int, str, dict)) or result is None:
        return
    elif isinstance(result, sw.Budget):
        for name in ("steps", "steps_per_epoch"):
            v = getattr(result, name)
            if not isinstance(v, int) or v < 1:
                raise Broken("Budget", f"{name} not a whole number >= 1", repr(v))
