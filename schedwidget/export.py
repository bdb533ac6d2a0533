"""Exports that cannot drift: standalone Python source, a torch LambdaLR factor, and a ready torch snippet.

Two routes into training code:

* ``to_python`` / ``to_torch`` write source that needs only the standard
  library (and torch for the snippet): paste it into training code that must
  not depend on schedwidget.
* ``make_scheduler(optimizer, design, ...)`` builds a ``LambdaLR`` of
  ``RateFactor`` objects (schedwidget needed at training time) after checking
  every param group's starting lr against ``base_lr`` and its multiplier.  A
  factor's state is the design's spec, so ``scheduler.state_dict()`` and every
  checkpoint carry the design itself; a loaded state is checked field by field
  and a checkpoint of another design is refused unless ``resume_with`` says
  which design to continue on.  ``torch_factor`` returns the bare factors.

torch is never imported here: ``make_scheduler`` finds it through the
optimizer it is given (``sys.modules``), and the snippet is only text.
"""

from __future__ import annotations

import builtins
import json
import math
import sys
import weakref
from numbers import Real
from typing import Any, Callable, Sequence

from .budget import check_length
from .codegen import TAKEN, UNITS, check_name, function_source
from .schedule import MAX_TICKS, Schedule, ScheduleError, complain

__all__ = ["to_python", "make_scheduler", "torch_factor", "to_torch", "RateFactor"]

#: Most param groups a design is exported for (one factor object, or one snippet multiplier, each).
MAX_GROUPS = 10_000
#: Names the torch snippet defines itself besides the function.
SNIPPET_NAMES = frozenset({"torch", "BASE_LR", "GROUP_MULTIPLIERS", "ExportedFactor", "make_scheduler"})
#: Names the snippet's factor reads inside ``__call__(self, t)``, where a function of that name would be shadowed.
SNIPPET_LOCALS = frozenset({"self", "t"})
#: Compiled functions, keyed by the canonical spec text a RateFactor holds (kept out of its __dict__).
_COMPILED: dict[str, Callable[[int], float]] = {}


def _schedule(owner: str, s: Any) -> Schedule:
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule (built with cosine(), warmup(), ...)")
    return s


def _unit(owner: str, unit: Any) -> str:
    if not isinstance(unit, str) or unit not in UNITS:  # a numpy array compares element by element
        raise complain(owner, "unit", _brief(unit), "one of 'step', 'epoch'")
    return unit


def _spe(owner: str, spe: Any) -> int | None:
    # the same bounds as codegen's own check, so to_python and to_torch refuse a huge value in their own name
    if spe is not None and (isinstance(spe, bool) or not isinstance(spe, int) or not 1 <= spe <= MAX_TICKS):
        raise complain(owner, "steps_per_epoch", spe, "a whole number >= 1 and <= 2**53 or None")
    return spe


def to_python(s: Schedule, name: str = "lr_at", unit: str = "step", steps_per_epoch: int | None = None) -> str:
    """Source of one function ``name(t)`` equal to ``s(t)``, needing only the standard library.

    The text starts with its imports (``math``, and ``bisect`` when a long
    table is looked up), then one ``def`` whose docstring states the unit, the
    budget, the peak and what happens past the end.  A negative or non-integer
    ``t`` raises ValueError.

    Parameters
    ----------
    s : the schedule.
    name : the function's name: a plain ASCII identifier, not a keyword, dunder or builtin.
    unit : "step" or "epoch", the unit of the clock (stated in the docstring).
    steps_per_epoch : adds the budget in epochs to the docstring (unit "step").

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> namespace = {}
    >>> exec(to_python(warmup(cosine(0.1, steps=97_750), steps=5_750)), namespace)
    >>> namespace["lr_at"](5_750)
    0.1
    """
    _schedule("to_python", s)
    check_name("to_python", name)
    body, modules = function_source(s, name, _unit("to_python", unit), _spe("to_python", steps_per_epoch))
    return "".join(f"import {m}\n" for m in sorted(modules)) + "\n\n" + body


# ------------------------------------------------------------------ factor objects
#: The keys of a factor's state, as LambdaLR.state_dict() saves it (the instance __dict__).
FIELDS = ("base_lr", "design", "multiplier")
#: The two explicit choices when a checkpoint's design differs from the new one.
RESUME_CHOICES = ("saved", "new")
#: At most this many compiled designs are kept (crafted checkpoints must not grow memory without bound).
COMPILED_MAX = 256
_INF = math.inf


class _Shown:
    """A value shown in a message as given text (no quotes), e.g. a shortened repr."""

    def __init__(self, text: str) -> None:
        self.text = text

    def __repr__(self) -> str:
        return self.text


def _brief(value: Any, limit: int = 80) -> _Shown:
    """``repr(value)`` cut to ``limit`` characters; never raises (huge ints, odd objects)."""
    try:
        text = repr(value)
    except Exception:  # noqa: BLE001 - a crafted object's repr may fail; the message must not
        text = f"<{type(value).__name__}>"
    return _Shown(text if len(text) <= limit else text[:limit - 3] + "...")


def _design_text(s: Schedule) -> str:
    from .spec import to_spec

    return json.dumps(to_spec(s), sort_keys=True, separators=(",", ":"))


_SPEC_TEXT = "the JSON text of a spec (a str, as RateFactor saves it)"


def _read_design(owner: str, text: Any) -> Schedule:
    """The schedule a saved design text describes, through the validating spec loader; never runs the text."""
    from .spec import from_spec

    if not isinstance(text, str):
        raise complain(owner, "design", _brief(text), _SPEC_TEXT)
    try:
        spec = json.loads(text)
    except (ValueError, RecursionError):
        raise complain(owner, "design", _brief(text), _SPEC_TEXT) from None
    try:
        return from_spec(spec)
    except ScheduleError as exc:
        raise ScheduleError(f"{owner}: design must be a valid spec: {exc}") from None
    except (RecursionError, OverflowError, MemoryError, TypeError, ValueError, KeyError) as exc:
        raise complain(owner, "design", _brief(text), "a valid spec", f"{type(exc).__name__}: {exc}"[:200]) from None


def _build(owner: str, s: Schedule) -> Callable[[int], float]:
    """The generated function of a validated design (only validated numbers and names reach its source)."""
    try:
        text, modules = function_source(s, "rate_at", doc=False)
        code = compile(text, "<schedwidget RateFactor>", "exec")
    except (RecursionError, MemoryError, OverflowError, SyntaxError) as exc:  # a design too deep or wide to compile
        raise complain(owner, "design", _brief(s), "a design Python can compile",
                       f"{type(exc).__name__}: {exc}"[:200]) from None
    namespace: dict[str, Any] = {"__builtins__": builtins, **{m: __import__(m) for m in modules}}
    exec(code, namespace)
    return namespace["rate_at"]


def _compiled(owner: str, s: Schedule) -> str:
    """The canonical text of a fresh design, with its generated function compiled and cached under it.

    The function is written first: a design too large to write as source (a table over ``TABLE_MAX``
    entries) is refused before its spec text is made and read back, which for 100,000 knots took seconds.
    A text read from a checkpoint still goes through the validating loader (``_canonical``).
    """
    last = _LAST_DESIGN.get("pair")
    if last is not None and last[0] is s and last[1] in _COMPILED:  # one design, many groups: built once
        return last[1]
    fn = _build(owner, s)
    text = _design_text(s)
    _remember(text, fn)
    _LAST_DESIGN["pair"] = (s, text)
    return text


#: The design last compiled by ``_compiled`` and its text (a list of group factors shares one design).
_LAST_DESIGN: dict[str, tuple[Schedule, str]] = {}


def _remember(text: str, fn: Callable[[int], float]) -> None:
    if len(_COMPILED) >= COMPILED_MAX:
        _COMPILED.clear()
    _COMPILED[text] = fn


def _canonical(owner: str, design: Any) -> tuple[str, Callable[[int], float]]:
    """The canonical text of a saved design and its generated function (compiled once per design).

    A text that is not in the cache is rebuilt through the validating spec
    loader, so no code is ever read from a checkpoint; spacing or key order in
    a saved text never counts as a difference.
    """
    fn = _COMPILED.get(design) if isinstance(design, str) else None
    if fn is not None:
        return design, fn
    s = _read_design(owner, design)
    text = _design_text(s)
    fn = _COMPILED.get(text)
    if fn is None:
        fn = _build(owner, s)
        _remember(text, fn)
    return text, fn


def _positive(owner: str, name: str, value: Any, zero: bool = False) -> float:
    v = math.nan
    if isinstance(value, Real) and not isinstance(value, bool):
        try:
            v = float(value)
        except (OverflowError, ValueError, TypeError):  # an int too large for a float, an odd Real
            pass
    if not (math.isfinite(v) and (v >= 0 if zero else v > 0)):
        raise complain(owner, name, _brief(value), f"a finite number {'>=' if zero else '>'} 0")
    return v


class _Valid:
    """A factor state that passed every check: the canonical design text, the numbers as floats, the function."""

    __slots__ = ("text", "base_lr", "multiplier", "fn")

    def __init__(self, text: str, base_lr: float, multiplier: float, fn: Callable[[int], float]) -> None:
        self.text, self.base_lr, self.multiplier, self.fn = text, base_lr, multiplier, fn

    def same(self, other: _Valid) -> bool:
        return (self.text, self.base_lr, self.multiplier) == (other.text, other.base_lr, other.multiplier)

    def describe(self) -> str:
        """In words for a message: multiplier x the design (base_lr)."""
        return f"{self.multiplier:g} x {_read_design('RateFactor', self.text)!r} (base_lr {self.base_lr!r})"


def _two(a: str, b: str, width: int = 110) -> tuple[str, str]:
    """Two descriptions cut to ``width`` characters around where they first differ."""
    if max(len(a), len(b)) <= width:
        return a, b
    same = next((i for i, (x, y) in enumerate(zip(a, b)) if x != y), min(len(a), len(b)))
    start = max(0, same - width // 3)

    def cut(s: str) -> str:
        return ("..." if start else "") + s[start:start + width] + ("..." if len(s) > start + width else "")
    return cut(a), cut(b)


_CHOOSE = ("choose explicitly: make_scheduler(optimizer, design, state=<the saved scheduler.state_dict()>, "
           "resume_with='saved') continues on the checkpoint's design, resume_with='new' continues on the new "
           "design from the saved tick; load the optimizer's state first")


def _valid_state(owner: str, state: Any) -> _Valid:
    """Check a factor state (a loaded checkpoint's or a fresh one) field by field; ScheduleError otherwise.

    The design is compared in canonical form, so spacing or key order in a
    saved text never counts as a difference.
    """
    allowed = "a dict with exactly the keys 'base_lr', 'design', 'multiplier' (what RateFactor saves)"
    if not isinstance(state, dict):
        raise complain(owner, "state", _brief(state), allowed)
    missing = [k for k in FIELDS if k not in state]
    extra = sorted(repr(k) for k in state if k not in FIELDS)
    if missing or extra:
        why = "; ".join(([f"missing {', '.join(map(repr, missing))}"] if missing else [])
                        + ([f"unexpected {', '.join(extra)}"[:120]] if extra else []))
        raise complain(owner, "state", _Shown("{" + ", ".join(sorted(repr(k) for k in state))[:120] + "}"),
                       allowed, why)
    base_lr = _positive(owner, "base_lr", state["base_lr"])
    multiplier = _positive(owner, "multiplier", state["multiplier"], zero=True)
    if not math.isfinite(multiplier / base_lr):
        raise complain(owner, "multiplier / base_lr", multiplier / base_lr, "a finite number",
                       f"multiplier={multiplier!r} and base_lr={base_lr!r} overflow a float together")
    text, fn = _canonical(owner, state["design"])
    return _Valid(text, base_lr, multiplier, fn)


#: Per factor (by id), kept outside its __dict__ so that a checkpoint never carries it:
#: the state last checked, as (that state's copy, function, multiplier, base_lr) for the hot path ...
_CHECKED: dict[int, tuple[dict[str, Any], Callable[[int], float], float, float]] = {}
#: ... and the design it was built with (what a loaded state is compared against).
_BUILT: dict[int, _Valid] = {}


def _forget(key: int) -> None:
    _CHECKED.pop(key, None)
    _BUILT.pop(key, None)


class RateFactor:
    """A picklable ``LambdaLR`` factor: ``s(t) * multiplier / base_lr``, checked after every load.

    A plain class, not a lambda or closure, with all of its state in the
    instance ``__dict__``: the design's spec as canonical JSON text,
    ``base_lr`` and ``multiplier``.  ``LambdaLR.state_dict()`` saves exactly
    that dict and ``load_state_dict()`` restores it (with ``__dict__.update``,
    which no method of ours sees), so a checkpoint carries the design.

    What the factor was built with, and the state it last checked, are kept
    outside the instance (so no checkpoint carries them).  The first call
    after its ``__dict__`` changes checks the new state field by field like a
    fresh one (keys, ``base_lr`` finite > 0, ``multiplier`` finite >= 0, the
    design through the validating spec loader: no code is ever read from a
    checkpoint) and compares it with what the factor was built with: another
    design, multiplier or base_lr is refused, never used.  To resume on
    purpose from a checkpoint of another design, use
    ``make_scheduler(..., state=..., resume_with="saved" | "new")``.  Every
    factor value is checked to be finite and >= 0 before it is returned.

    Build it with ``make_scheduler`` (or ``torch_factor``).

    Examples
    --------
    >>> from schedwidget import cosine
    >>> f = RateFactor(cosine(0.1, steps=100), base_lr=0.1, multiplier=0.5)
    >>> f(0), f(100)
    (0.5, 0.0)
    >>> f.__dict__.update(base_lr=0.0)   # what loading a corrupted checkpoint does
    >>> f(1)
    Traceback (most recent call last):
    ...
    schedwidget.schedule.ScheduleError: RateFactor: base_lr must be a finite number > 0, got 0.0
    """

    def __init__(self, s: Schedule, base_lr: float, multiplier: float = 1.0) -> None:
        self.design = _compiled("RateFactor", _schedule("RateFactor", s))
        self.base_lr = _positive("RateFactor", "base_lr", base_lr)
        self.multiplier = _positive("RateFactor", "multiplier", multiplier, zero=True)
        self._built(_valid_state("RateFactor", self.__dict__))

    def _built(self, valid: _Valid) -> None:
        """Record ``valid`` as what this factor was built with, and as checked."""
        key = id(self)
        if key not in _BUILT:
            weakref.finalize(self, _forget, key).atexit = False
        _BUILT[key] = valid
        _CHECKED[key] = (dict(self.__dict__), valid.fn, valid.multiplier, valid.base_lr)

    def __setstate__(self, state: Any) -> None:
        """pickle and copy: the state is checked like a loaded one and becomes what the factor was built with."""
        valid = _valid_state("RateFactor", state)
        self.__dict__.update(state)
        self._built(valid)

    def _check(self) -> tuple[dict[str, Any], Callable[[int], float], float, float]:
        """Check a changed state (a load): valid field by field, and the design the factor was built with."""
        valid = _valid_state("RateFactor", self.__dict__)
        built = _BUILT.get(id(self))
        if built is None:  # made without __init__ or pickle (object.__new__): nothing to compare with
            self._built(valid)
        elif not valid.same(built):
            saved, new = _two(valid.describe(), built.describe())
            raise complain("RateFactor", "a loaded state's design", _Shown(f"the checkpoint's {saved}"),
                           f"the new design this factor was built with, {new}", _CHOOSE)
        checked = _CHECKED[id(self)] = (dict(self.__dict__), valid.fn, valid.multiplier, valid.base_lr)
        return checked

    def __call__(self, t: int) -> float:
        # The hot path (once per training step): one lookup and one dict comparison tell that the state is
        # the one last checked; a load (LambdaLR's __dict__.update) changes it and sends us through _check.
        try:
            checked = _CHECKED[id(self)]
            stale = checked[0] != self.__dict__
        except Exception:  # noqa: BLE001 - never checked (made without __init__), or a crafted value whose ==
            stale = True   # misbehaves: check the state properly
        if stale:
            checked = self._check()
        try:
            x = checked[1](t) * checked[2] / checked[3]
        except (ValueError, OverflowError) as exc:  # the generated function refuses a negative or fractional t
            raise complain("RateFactor", "t", _brief(t), "a whole number of ticks >= 0",
                           f"{type(exc).__name__}: {exc}"[:160]) from None
        try:
            if 0.0 <= x < _INF:
                return x
        except TypeError:  # not a real number at all
            pass
        raise complain("RateFactor", f"the factor at t={t!r}", _brief(x), "a finite number >= 0",
                       "the design gives no usable rate there")

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, RateFactor):
            return NotImplemented
        return self.__dict__ == other.__dict__

    __hash__ = None  # type: ignore[assignment]  # mutable: load_state_dict updates it in place

    def __repr__(self) -> str:
        return (f"RateFactor(base_lr={self.__dict__.get('base_lr')!r}, multiplier={self.__dict__.get('multiplier')!r}, "
                f"design={str(self.__dict__.get('design'))[:60]}...)")


def torch_factor(s: Schedule, base_lr: float, groups: Sequence[float] | None = None) -> RateFactor | list[RateFactor]:
    """A picklable factor for ``torch.optim.lr_scheduler.LambdaLR``, or one per param group.

    Prefer ``make_scheduler``, which also checks the optimizer's param groups.
    Build the optimizer with ``lr=base_lr`` for every group.  Without ``groups``
    the result is one ``RateFactor`` (LambdaLR applies it to every group); with
    ``groups=[1.0, 0.1, ...]`` it is a list with one factor per group, in the
    order of ``optimizer.param_groups``, whose rates are ``s(t) * multiplier``.
    Needs schedwidget at training time; for code without it use ``to_torch``.

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> s = warmup(cosine(0.1, steps=97_750), steps=5_750)
    >>> body, head = torch_factor(s, base_lr=0.1, groups=[1.0, 0.5])
    >>> body(5_750), head(5_750)
    (1.0, 0.5)
    """
    _schedule("torch_factor", s)
    _positive("torch_factor", "base_lr", base_lr)
    if groups is None:
        return RateFactor(s, base_lr)
    return [RateFactor(s, base_lr, m) for m in _multipliers("torch_factor", groups)]


def _multipliers(owner: str, groups: Any) -> tuple[float, ...]:
    try:
        items = None if isinstance(groups, (str, bytes)) else list(groups)
    except TypeError:  # not iterable, or a 0-d array
        items = None
    if items is None:
        raise complain(owner, "groups", _brief(groups), "a non-empty list of multipliers, one per param group")
    if len(items) > MAX_GROUPS:  # each group is a factor object: bounded work for any list
        raise complain(owner, "groups", _Shown(f"a list of {len(items):,} multipliers"),
                       f"at most {MAX_GROUPS:,} multipliers, one per param group",
                       "an optimizer with more param groups than that is almost certainly built by mistake")
    out = tuple(_positive(owner, f"groups[{i}]", m, zero=True) for i, m in enumerate(items))
    if not out:
        raise complain(owner, "groups", groups, "a non-empty list of multipliers, one per param group",
                       "use None for one schedule shared by every group")
    return out


# ------------------------------------------------------------------ the checked way into an optimizer
def _lambda_lr(optimizer: Any) -> Any:
    """torch's LambdaLR class, for an optimizer that is a torch optimizer.

    The core never imports torch: training code that only designs schedules
    must not need it, and ``import schedwidget`` stays light.  An optimizer
    passed in means torch is loaded already, so its module is read from
    ``sys.modules``, which imports nothing.
    """
    optim = getattr(sys.modules.get("torch"), "optim", None)
    if optim is None or not isinstance(optimizer, optim.Optimizer):
        raise complain("make_scheduler", "optimizer", _Shown(f"a {type(optimizer).__name__}"),
                       "a torch optimizer (torch.optim.SGD(...), torch.optim.AdamW(...), ...)")
    return optim.lr_scheduler.LambdaLR


def _start_lrs(optimizer: Any, resuming: bool) -> list[float]:
    """Each param group's starting lr: its "initial_lr" (set by a scheduler, kept by a checkpoint), else its lr."""
    out = []
    for i, group in enumerate(optimizer.param_groups):
        if resuming and "initial_lr" not in group:
            raise complain("make_scheduler", f"param_groups[{i}]", _Shown("a group without 'initial_lr'"),
                           "the optimizer's state from the checkpoint (it carries each group's starting lr)",
                           "call optimizer.load_state_dict(...) before make_scheduler(..., state=...)")
        lr = group.get("initial_lr", group.get("lr"))
        try:
            v = float(lr)  # a float, or a one-element tensor
        except (TypeError, ValueError, OverflowError):
            v = math.nan
        if not (math.isfinite(v) and v >= 0):
            raise complain("make_scheduler", f"param_groups[{i}]['lr']", _brief(lr), "a finite number >= 0")
        out.append(v)
    return out


def _base(base_lr: Any, starts: list[float]) -> float:
    """base_lr as given (a group must start there), or the common starting lr of every group."""
    if base_lr is None:
        if len(set(starts)) > 1:
            shown = ", ".join(f"{v!r}" for v in starts[:6]) + (", ..." if len(starts) > 6 else "")
            raise complain("make_scheduler", "base_lr", None,
                           f"given when the param groups start at different lrs (found {shown})",
                           f"pass the lr the design's rates are meant for, e.g. base_lr={starts[0]!r}; a group "
                           "starting at 10x base_lr then runs at 10x the design")
        return _positive("make_scheduler", "base_lr (every param group's lr)", starts[0])
    base = _positive("make_scheduler", "base_lr", base_lr)
    if base not in starts:
        shown = ", ".join(f"{v!r}" for v in sorted(set(starts))[:6])
        raise complain("make_scheduler", "base_lr", base_lr, f"the starting lr of a param group (found {shown})",
                       f"build the optimizer with lr=base_lr, or pass base_lr={starts[0]!r}; otherwise every rate "
                       f"would be {starts[0] / base:g}x the design")
    return base


def _shares(owner: str, starts: list[float], bases: Sequence[float], mults: Sequence[float], given: bool) -> None:
    """A group's share of the design comes from its multiplier or from its starting lr, never from both."""
    for i, (lr, base, m) in enumerate(zip(starts, bases, mults)):
        if lr != base and m != 1.0:
            ratio = lr / base
            fixed = "[" + ", ".join("1" if j == i else f"{x:g}" for j, x in enumerate(mults)) + "]"
            source = f"groups[{i}]={m:g}" if given else f"the checkpoint's multiplier {m:g}"
            raise complain(owner, f"param_groups[{i}]['lr']", lr,
                           f"base_lr={base!r} when {source} sets its share (it starts at {ratio:g}x base_lr, "
                           f"and the multiplier would apply on top: a {ratio * m:g}x rate)",
                           f"set that group's lr to base_lr, or pass groups={fixed} to keep the {ratio:g}x "
                           "its lr already gives")


def _tick(start_tick: Any) -> int:
    if isinstance(start_tick, bool) or not isinstance(start_tick, int) or start_tick < 0:
        raise complain("make_scheduler", "start_tick", _brief(start_tick),
                       "a whole number >= 0 (the ticks already done; 0 for a fresh run)")
    return start_tick


def make_scheduler(optimizer: Any, design: Any, base_lr: float | None = None,
                   groups: Sequence[float] | None = None, start_tick: int = 0, *,
                   state: dict[str, Any] | None = None, resume_with: str | None = None) -> Any:
    """A torch ``LambdaLR`` that runs ``design`` on ``optimizer``, after checking the optimizer's param groups.

    The documented way to use the factor (``RateFactor``): group ``i`` runs at
    ``design(t) * share_i``, where the share comes from ``groups[i]`` or from
    the group's own starting lr (``lr / base_lr``), never from both: a group
    built at 10x ``base_lr`` with ``groups[i] = 10`` would run at 100x and is
    refused.  Each group's starting lr is its ``"initial_lr"`` when a scheduler
    or checkpoint set one, else its ``lr``.  Call ``scheduler.step()`` once per
    tick of the design's clock (after ``optimizer.step()`` for a step clock,
    after each epoch for an epoch clock).

    Parameters
    ----------
    optimizer : a torch optimizer; torch is not imported here (it is already loaded).
    design : the schedule (or a ``Design`` from ``load_design``); its values are absolute rates.
    base_lr : the lr the design's rates are meant for.  None: every group's starting lr, which must be
        the same for all; given: at least one group must start there.
    groups : one multiplier per param group, in ``optimizer.param_groups`` order (None: 1 for each); the
        count must match the optimizer's.
    start_tick : resume by tick alone: the ticks already done (the next update uses ``design(start_tick)``).
        As in the ``to_torch`` snippet: ``LambdaLR(..., last_epoch=start_tick - 1)``, with "initial_lr" set to
        each group's starting lr where it is missing.
    state : resume from a saved ``scheduler.state_dict()``; load the optimizer's state first (it carries
        each group's starting lr), then call ``make_scheduler(optimizer, design, state=...)`` instead of
        ``scheduler.load_state_dict(...)``.  Every saved factor is checked field by field; the next update
        uses the rate of the saved tick.
    resume_with : needed (with ``state``) only when the checkpoint's design differs from ``design`` (another
        design, multiplier or base_lr): ``"saved"`` continues on the checkpoint's design, ``"new"`` continues
        on ``design`` from the saved tick.  Without it a difference is a ScheduleError naming both designs.
        A plain ``scheduler.load_state_dict(...)`` of another design is refused too, at the next step.

    Returns
    -------
    torch.optim.lr_scheduler.LambdaLR with one ``RateFactor`` per param group.

    Raises
    ------
    ScheduleError
        A param group whose starting lr and multiplier would both scale it, a group count other than
        ``len(groups)``, an ambiguous or unmatched ``base_lr``, a bad ``start_tick``, a saved state that is
        not what ``LambdaLR.state_dict()`` saves (each factor field checked like a fresh one), or a
        checkpoint of another design without ``resume_with``.

    Notes
    -----
    Resuming from a checkpoint (model, optimizer and scheduler state dicts)::

        optimizer.load_state_dict(ckpt["optimizer"])           # first: it carries each group's starting lr
        scheduler = make_scheduler(optimizer, design, groups=[1, 10], state=ckpt["scheduler"])
        # the design changed since the checkpoint (a longer run): say which one to continue on
        scheduler = make_scheduler(optimizer, longer, groups=[1, 10], state=ckpt["scheduler"], resume_with="new")

    By tick alone: ``make_scheduler(optimizer, design, groups=[1, 10], start_tick=k)``, k the ticks done.

    Examples
    --------
    >>> import torch
    >>> from schedwidget import cosine, warmup
    >>> body, head = torch.nn.Linear(4, 4), torch.nn.Linear(4, 2)
    >>> optimizer = torch.optim.SGD([{"params": body.parameters()}, {"params": head.parameters()}], lr=3e-4)
    >>> scheduler = make_scheduler(optimizer, warmup(cosine(3e-4, steps=900), steps=100), groups=[1, 10])
    >>> [group["lr"] for group in optimizer.param_groups]     # the first update: t = 0
    [0.0, 0.0]
    >>> head_at_10x = torch.optim.SGD([{"params": body.parameters()},
    ...                                {"params": head.parameters(), "lr": 3e-3}], lr=3e-4)
    >>> make_scheduler(head_at_10x, warmup(cosine(3e-4, steps=900), steps=100), base_lr=3e-4, groups=[1, 10])
    Traceback (most recent call last):
    ...
    schedwidget.schedule.ScheduleError: make_scheduler: param_groups[1]['lr'] must be base_lr=0.0003 when groups[1]=10 sets its share (it starts at 10x base_lr, and the multiplier would apply on top: a 100x rate), got 0.003 (set that group's lr to base_lr, or pass groups=[1, 1] to keep the 10x its lr already gives)
    """
    lambda_lr = _lambda_lr(optimizer)
    from .spec import Design

    s = design.schedule if isinstance(design, Design) else design
    if not isinstance(s, Schedule):
        raise complain("make_scheduler", "design", _brief(design),
                       "a Schedule (built with cosine(), warmup(), ...) or a Design from load_design()")
    tick = _tick(start_tick)
    if resume_with is not None and resume_with not in RESUME_CHOICES:
        raise complain("make_scheduler", "resume_with", _brief(resume_with), "None, 'saved' or 'new'",
                       "'saved' continues on the checkpoint's design, 'new' on the new design from the saved tick")
    if state is None and resume_with is not None:
        raise complain("make_scheduler", "resume_with", resume_with, "None when no state is given",
                       "it chooses between a checkpoint's design and the new one: pass state=<the saved "
                       "scheduler.state_dict()> too")
    if state is not None and tick:
        raise complain("make_scheduler", "start_tick", tick, "0 when state is given (the state carries its tick)")
    starts = _start_lrs(optimizer, resuming=state is not None)
    n = len(starts)
    base = _base(base_lr, starts)
    mults = (1.0,) * n if groups is None else _multipliers("make_scheduler", groups)
    if len(mults) != n:
        raise complain("make_scheduler", "groups", _brief(list(groups or ())),
                       f"one multiplier per param group: the optimizer has {n}",
                       "list them in optimizer.param_groups order")
    _shares("make_scheduler", starts, [base] * n, mults, True)
    factors = [RateFactor(s, base, m) for m in mults]
    if state is None:
        if tick:  # LambdaLR(..., last_epoch >= 0) reads "initial_lr": the starting lr just checked
            for group, lr in zip(optimizer.param_groups, starts):
                group.setdefault("initial_lr", lr)
        return lambda_lr(optimizer, lr_lambda=factors, last_epoch=tick - 1)
    tick, chosen = _choose(factors, state, resume_with, starts)   # every check before anything is touched
    scheduler = lambda_lr(optimizer, lr_lambda=factors)
    scheduler.load_state_dict({**state, "lr_lambdas": chosen})
    for f in factors:  # what was loaded is now what each factor was built with
        f._built(_valid_state("make_scheduler", f.__dict__))
    # the rates of the saved tick, as an uninterrupted run's scheduler.step() set them
    for group, b, f in zip(optimizer.param_groups, scheduler.base_lrs, factors):
        rate = b * f(tick)
        if hasattr(group["lr"], "fill_"):  # a tensor lr keeps its identity, as torch's own step does
            group["lr"].fill_(rate)
        else:
            group["lr"] = rate
    scheduler._last_lr = [group["lr"] for group in optimizer.param_groups]
    return scheduler


def _choose(factors: list[RateFactor], state: Any, resume_with: str | None,
            starts: list[float]) -> tuple[int, list[dict[str, Any]]]:
    """The saved tick and the factor states to load: each saved one checked, a different design only by choice."""
    owner, n = "make_scheduler", len(factors)
    if not isinstance(state, dict):
        raise complain(owner, "state", _brief(state), "a dict saved by scheduler.state_dict()")
    tick = state.get("last_epoch")
    if isinstance(tick, bool) or not isinstance(tick, int) or tick < 0:
        raise complain(owner, "state['last_epoch']", _brief(tick), "a whole number >= 0 (the ticks already done)")
    saved, bases = state.get("lr_lambdas"), state.get("base_lrs")
    if not isinstance(saved, list) or len(saved) != n:
        raise complain(owner, "state['lr_lambdas']", _brief(saved), f"a list with one entry per param group ({n})")
    if not isinstance(bases, list) or len(bases) != n or any(
            not isinstance(b, Real) or isinstance(b, bool) or b != lr for b, lr in zip(bases, starts)):
        raise complain(owner, "state['base_lrs']", _brief(bases),
                       f"each param group's starting lr in the loaded optimizer, {starts!r}",
                       "load the optimizer's state from the same checkpoint first")
    chosen, differ = [], []
    for i, (f, d) in enumerate(zip(factors, saved)):
        new = _valid_state(owner, f.__dict__)
        if d is None:  # the saved run used a plain function: torch kept nothing to compare with
            if resume_with != "new":
                raise complain(owner, f"state['lr_lambdas'][{i}]", None, "a saved RateFactor state",
                               "that run used a function torch does not save; pass resume_with='new' to "
                               f"continue on the new design from the saved tick {tick}")
            chosen.append(dict(f.__dict__))
            continue
        old = _valid_state(f"{owner}: state['lr_lambdas'][{i}]", d)
        if not old.same(new):
            differ.append((i, old, new))
        chosen.append(dict(f.__dict__) if resume_with == "new" else dict(d))
    if differ and resume_with is None:
        i, old, new = differ[0]
        a, b = _two(old.describe(), new.describe())
        raise complain(owner, f"state's design for param_groups[{i}]", _Shown(f"the checkpoint's {a}"),
                       f"the new design {b} unless resume_with says which to keep",
                       f"pass resume_with='saved' to continue on the checkpoint's design, or resume_with='new' "
                       f"to continue on the new design from the saved tick {tick}")
    if resume_with == "saved":
        kept = [_valid_state(owner, d) for d in chosen]
        _shares(owner, starts, [v.base_lr for v in kept], [v.multiplier for v in kept], False)
    return tick, chosen


# ------------------------------------------------------------------ torch snippet
_HEAD = """\
# Learning-rate schedule exported by schedwidget: export it again rather than editing it.
# Unit: $unit. Budget: $budget. Each param group's rate is $name(t) * its multiplier.
# Needs only torch and the standard library at training time (not schedwidget).
#
# Use:
#     optimizer = torch.optim.SGD(param_groups, lr=BASE_LR, momentum=0.9)  # every group at BASE_LR
#     scheduler = make_scheduler(optimizer)
#     for epoch in range(epochs):
#         for inputs, targets in loader:
#             loss = loss_fn(model(inputs), targets)
#             loss.backward()
#             optimizer.step()
#             optimizer.zero_grad()
$loop#
# The clock t counts $counts.
$clock#
# Resume (both ways continue with exactly the rates of an uninterrupted run):
# * State dicts: save model.state_dict(), optimizer.state_dict() and scheduler.state_dict().
#   To resume, build model and optimizer as before, call scheduler = make_scheduler(optimizer)
#   BEFORE optimizer.load_state_dict(...) (building a scheduler resets every group's lr), then
#   scheduler.load_state_dict(...).
# * By tick alone: scheduler = make_scheduler(optimizer, start_tick=k), k = $done.
#   torch's LambdaLR(..., last_epoch=k - 1) needs "initial_lr" in every param group;
#   make_scheduler sets it to BASE_LR where it is missing.
$imports
import torch

BASE_LR = $base  # every param group's lr when the optimizer is built
GROUP_MULTIPLIERS = $mults  # $groups_doc


"""

_TAIL = """

class ExportedFactor:
    \"\"\"LambdaLR factor for one param group: $name(t) * multiplier / BASE_LR.

    A small class rather than a lambda: scheduler.state_dict() saves its __dict__
    ({"multiplier": ...}), load_state_dict() restores it, and torch.save can pickle it.
    \"\"\"

    def __init__(self, multiplier):
        self.multiplier = float(multiplier)

    def __call__(self, t):
        return $name(t) * self.multiplier / BASE_LR


def make_scheduler(optimizer, start_tick=0):
    \"\"\"A LambdaLR running $name; start_tick = $done (0 for a fresh run).\"\"\"
    if type(start_tick) is not int or start_tick < 0:
        raise ValueError(f"start_tick must be a whole number >= 0, got {start_tick!r}")
    groups = optimizer.param_groups
    multipliers = GROUP_MULTIPLIERS or (1.0,) * len(groups)
    if len(groups) != len(multipliers):
        raise ValueError(
            f"this schedule was exported for {len(multipliers)} param group(s), the optimizer has "
            f"{len(groups)}: export it again with one multiplier per group (in param_groups order)")
    for i, group in enumerate(groups):
        lr = group.get("initial_lr", group["lr"])
        if lr != BASE_LR:
            raise ValueError(
                f"param_groups[{i}] starts at lr={lr!r}, not BASE_LR={BASE_LR!r}: build the optimizer "
                "with lr=BASE_LR for every group (GROUP_MULTIPLIERS sets each group's share)")
        if start_tick > 0:
            group.setdefault("initial_lr", BASE_LR)
    factors = [ExportedFactor(m) for m in multipliers]
    return torch.optim.lr_scheduler.LambdaLR(optimizer, lr_lambda=factors, last_epoch=start_tick - 1)
"""

_LOOP = {
    "step": "#             scheduler.step()  # once per optimizer update, right after optimizer.step()\n",
    "epoch": "#         scheduler.step()  # once per epoch, after the epoch's last optimizer.step()\n",
}
_CLOCK = {
    "step": """\
# * Gradient accumulation over A micro-batches: t counts optimizer updates, not micro-batches;
#   call scheduler.step() right after each optimizer.step(), once per update.
# * Several processes (DistributedDataParallel): every process builds its own scheduler and steps
#   it once per update, so all of them read the same t.
# * Mixed precision: when GradScaler skips an update (inf/NaN gradients), scaler.step(optimizer)
#   does not run optimizer.step(), but scheduler.step() still advances t. Keep calling it: t then
#   counts attempted updates and the schedule ends with the loop (skips are rare and come early,
#   while the scale settles; torch may warn once that scheduler.step() ran before optimizer.step()).
#   To count only applied updates, read scaler.get_scale() before and after scaler.update() and
#   call scheduler.step() only when it did not drop.
""",
    "epoch": """\
# * Gradient accumulation, several processes (DistributedDataParallel) or updates that GradScaler
#   skips change nothing: t counts epochs, so every process calls scheduler.step() once after
#   each epoch, never inside the batch loop.
""",
}


def _snippet_name(name: Any) -> str:
    """A function name the snippet can call from its factor class: not shadowed there, not private or mangled."""
    check_name("to_torch", name, TAKEN | SNIPPET_NAMES | SNIPPET_LOCALS)
    if name.startswith("_"):
        raise complain("to_torch", "name", name, "a public identifier, not starting with _",
                       "the snippet calls it from a class, where Python renames __x to _ExportedFactor__x; "
                       "try 'lr_at'")
    return name


def to_torch(s: Schedule, base_lr: float, unit: str = "step", groups: Sequence[float] | None = None,
             steps: int | None = None, name: str = "lr_at", steps_per_epoch: int | None = None) -> str:
    """A ready torch snippet: the generated function, a picklable factor class and ``make_scheduler``.

    The snippet needs only torch and the standard library.  Its comments say
    where ``scheduler.step()`` goes for the unit, what the clock counts (with
    gradient accumulation, several processes or skipped mixed-precision
    updates) and how to resume, by state dicts or by tick alone.  With
    ``groups=[1.0, 0.1, ...]`` the group count is checked when the scheduler is
    built; every group must start at ``lr=base_lr``.

    Parameters
    ----------
    s : the schedule.
    base_lr : the optimizer's lr for every param group (> 0).
    unit : "step" (scheduler.step() after every update) or "epoch" (after every epoch).
    groups : one rate multiplier per param group, or None for the same rate in every group.
    steps : the budget the snippet is for, in ticks of ``unit``, or a ``Budget``; a design of
        another length is a ScheduleError (budget mismatch).
    name : the function's name: a plain identifier that the snippet does not use itself (not ``self``,
        ``t``, ``torch``, ``BASE_LR``, ``make_scheduler``, ...) and not starting with ``_`` (the snippet's
        factor class calls it, and Python renames ``__x`` inside a class).
    steps_per_epoch : adds the budget in epochs to the comments (unit "step").

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> text = to_torch(warmup(cosine(0.1, steps=97_750), steps=5_750), base_lr=0.1, steps=103_500)
    >>> "LambdaLR(optimizer, lr_lambda=factors" in text
    True
    """
    from string import Template

    _schedule("to_torch", s)
    _snippet_name(name)
    _unit("to_torch", unit)
    spe = _spe("to_torch", steps_per_epoch)
    base = _positive("to_torch", "base_lr", base_lr)
    mults = None if groups is None else _multipliers("to_torch", groups)
    if steps is not None:
        check_length(s, steps, unit, owner="to_torch")
    body, modules = function_source(s, name, unit, spe)
    n = s.length
    budget = "open-ended" if n is None else f"{n:,} {unit}s"
    if n is not None and spe and unit == "step":
        budget += f" ({n / spe:g} epochs of {spe:,} steps)"
    words = dict(
        unit=unit, budget=budget, name=name, loop=_LOOP[unit], clock=_CLOCK[unit],
        counts="optimizer updates: t = k is the (k+1)-th update" if unit == "step"
        else "finished epochs: every update in epoch e uses the rate for t = e",
        done="the optimizer updates already done" if unit == "step" else "the epochs already done",
        imports="".join(f"import {m}\n" for m in sorted(modules)), base=repr(base),
        mults="None" if mults is None else "(" + ", ".join(map(repr, mults)) + (",)" if len(mults) == 1 else ")"),
        groups_doc="the same rate for every param group" if mults is None
        else "one per param group, in optimizer.param_groups order",
    )
    return Template(_HEAD).substitute(words) + body + Template(_TAIL).substitute(words)
