"""The torch factor route: ``RateFactor`` objects for ``LambdaLR``, ``torch_factor`` and ``make_scheduler``.

``make_scheduler(optimizer, design, ...)`` (in ``scheduler.py``) builds a ``LambdaLR`` of
``RateFactor`` objects (schedwidget needed at training time) after checking
every param group's starting lr against ``base_lr`` and its multiplier.  A
factor's state is the design's spec, so ``scheduler.state_dict()`` and every
checkpoint carry the design itself; a loaded state is checked field by field
and a checkpoint of another design is refused unless ``resume_with`` says
which design to continue on.  ``torch_factor`` returns the bare factors.

torch is never imported here.
"""

from __future__ import annotations

import builtins
import json
import math
import weakref
from numbers import Real
from typing import Any, Callable, Sequence

from .codegen import function_source
from .schedule import Schedule, ScheduleError, complain

__all__ = ["torch_factor", "RateFactor"]

#: Most param groups a design is exported for (one factor object, or one snippet multiplier, each).
MAX_GROUPS = 10_000
#: Compiled functions, keyed by the canonical spec text a RateFactor holds (kept out of its __dict__).
_COMPILED: dict[str, Callable[[int], float]] = {}


def _schedule(owner: str, s: Any) -> Schedule:
    if not isinstance(s, Schedule):
        raise complain(owner, "s", s, "a Schedule (built with cosine(), warmup(), ...)")
    return s


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
        s = from_spec(spec)
    except ScheduleError as exc:
        raise ScheduleError(f"{owner}: design must be a valid spec: {exc}") from None
    except (RecursionError, OverflowError, MemoryError, TypeError, ValueError, KeyError) as exc:
        raise complain(owner, "design", _brief(text), "a valid spec", f"{type(exc).__name__}: {exc}"[:200]) from None
    if not isinstance(s, Schedule):  # a safeguard: a factor computes one rate, whatever the spec reader returns
        raise complain(owner, "design", _brief(text), "the spec of one schedule (a factor sets one rate)",
                       "tracks and per-group designs run through make_scheduler's TrackClock")
    return s


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
