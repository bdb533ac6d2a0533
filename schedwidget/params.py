"""Parameter declarations: ``Param`` (one per parameter of a kind) and the parameter kinds it names.

A parameter kind is a small class that knows, for every parameter of that kind, the words for its
allowed range, how to check and normalise a value, its JSON Schema, how a spec writes and reads it, and
which control the designer shows for it (``control``).  ``Param.kind`` is the kind's name (a string the
designer and the fuzz suite read); ``Param.kind_of`` is the kind object.  A new parameter kind is one
subclass of ``ParamKind`` with a ``name``: it registers itself.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from numbers import Integral, Real
from typing import Any, Callable, ClassVar

import numpy as np

__all__ = ["Param", "param", "ParamKind", "PARAM_KINDS", "ScheduleError", "complain", "as_whole",
           "check_ticklist", "MAX_TICKS"]

#: Largest tick or length: every whole number up to 2**53 is exact as a float64 clock.
MAX_TICKS = 2 ** 53


class ScheduleError(ValueError):
    """Every bad input: names the parameter, the value given and what is allowed."""


def _shown(value: Any) -> str:
    """``repr(value)`` for a message: huge integers by their size, very long texts cut."""
    if isinstance(value, Integral) and not isinstance(value, bool) and abs(int(value)) >= 10 ** 60:
        return f"an integer of about {int(abs(int(value)).bit_length() * 0.30103) + 1} digits"
    try:
        text = repr(value)
    except Exception:  # noqa: BLE001 - a message must never fail on an odd value
        return f"a {type(value).__name__}"
    return text if len(text) <= 300 else text[:297] + "..."


def complain(owner: str, name: str, value: Any, allowed: str, hint: str | None = None) -> ScheduleError:
    """Build the one message format used for every bad parameter."""
    msg = f"{owner}: {name} must be {allowed}, got {_shown(value)}"
    if hint:
        msg += f" ({hint})"
    return ScheduleError(msg)


#: Every parameter kind by name (filled by ``ParamKind.__init_subclass__``).
PARAM_KINDS: dict[str, ParamKind] = {}


class ParamKind:
    """What every parameter of one kind shares; subclasses override what differs.

    ``control`` names the designer's control: ``log_slider``, ``slider``, ``int_slider``, ``length`` (a text box
    of a length in ticks, epochs or a share of the run), ``dropdown``, ``checkbox``, ``ticklist`` (a text box of
    ticks), ``points`` (a text box of (tick, rate) pairs), ``schedule`` (a nested design) or ``schedules`` (a list
    of them).  ``share_of`` says what a typed share ("6 %") of a value is a share of: "peak" for a rate, "run"
    for a length, None when a share means nothing.  ``scaled`` is the value with every tick in it multiplied by a
    ratio (the designer's proportional edits; ``budget.scale_ticks``).
    """

    name: ClassVar[str] = ""
    #: How many schedules a value holds: 0, one ("schedule") or a list ("schedules").
    nests: ClassVar[str] = ""
    share_of: ClassVar[str | None] = None

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if cls.__dict__.get("name"):
            PARAM_KINDS[cls.name] = cls()

    def control(self, p: Param) -> str:
        return self.name

    def allowed(self, p: Param) -> str:
        return self.name

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        return value

    def schema(self, p: Param) -> dict[str, Any]:
        raise NotImplementedError

    def encode(self, p: Param, value: Any, node: Callable[[Any], Any]) -> Any:
        """The value as plain JSON (``node`` writes a nested schedule)."""
        return value

    def decode(self, p: Param, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        """A spec's plain JSON value as the constructor takes it (``build`` reads a nested schedule)."""
        return value

    def scaled(self, p: Param, value: Any, r: float, node: Callable[[Any], Any]) -> Any:
        """``value`` with every tick in it multiplied by ``r``, rounded half up to whole ticks (``node`` scales a
        nested schedule); a value that holds no tick is kept."""
        return value


def scaled_tick(v: int, r: float, lo: float) -> int:
    """``v * r`` rounded half up to a whole tick, at least ``lo``."""
    return max(int(lo), int(math.floor(v * r + 0.5)))


class _Number(ParamKind):
    noun: ClassVar[str] = "a finite number"

    def control(self, p: Param) -> str:
        return "log_slider" if p.log else "slider"

    def allowed(self, p: Param) -> str:
        if p.lo is not None and p.hi is not None:
            left, right = ("(" if p.lo_open else "["), (")" if p.hi_open else "]")
            return f"{self.noun} in {left}{_num(p.lo)}, {_num(p.hi)}{right}"
        if p.lo is not None:
            return f"{self.noun} {'>' if p.lo_open else '>='} {_num(p.lo)}"
        return self.noun

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        if isinstance(value, bool) or not isinstance(value, Real):
            raise complain(owner, name, value, p.allowed(), p.hint)
        try:
            v = float(value)
        except OverflowError:  # an int too large for a float
            v = math.inf
        if not math.isfinite(v):
            raise complain(owner, name, value, p.allowed(), p.hint)
        if p.lo is not None and (v < p.lo or (p.lo_open and v == p.lo)):
            raise complain(owner, name, value, p.allowed(), p.hint)
        if p.hi is not None and (v > p.hi or (p.hi_open and v == p.hi)):
            raise complain(owner, name, value, p.allowed(), p.hint)
        return v

    def schema(self, p: Param) -> dict[str, Any]:
        out: dict[str, Any] = {"type": "number"}
        if p.lo is not None:
            out["exclusiveMinimum" if p.lo_open else "minimum"] = p.lo
        if p.hi is not None:
            out["exclusiveMaximum" if p.hi_open else "maximum"] = p.hi
        return out


class Rate(_Number):
    """An absolute learning rate: always a log slider (a rate spans decades; a rate of 0 sits at the slider's low
    end), with a text box that also takes a share of the peak."""

    name = "rate"
    noun = "a finite rate"
    share_of = "peak"

    def control(self, p: Param) -> str:
        return "log_slider"


class Ratio(_Number):
    """A plain number (a factor, an exponent, a share)."""

    name = "ratio"


class _Whole(ParamKind):
    def control(self, p: Param) -> str:
        return "int_slider"

    def allowed(self, p: Param) -> str:
        words = f"a whole number >= {int(p.lo if p.lo is not None else 0)}"
        if p.hi is not None:
            words += f" and <= {int(p.hi)}"
        return words + (" or None" if p.optional else "")

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        out = as_whole(value)
        if out is None or (p.lo is not None and out < p.lo) or (p.hi is not None and out > p.hi):
            raise complain(owner, name, value, p.allowed(), p.hint)
        if out > MAX_TICKS:
            raise complain(owner, name, value, "a whole number <= 2**53",
                           "above that, ticks are no longer exact on a float64 clock")
        return out

    def schema(self, p: Param) -> dict[str, Any]:
        return {"type": "integer", "minimum": int(p.lo or 0), "maximum": int(p.hi) if p.hi is not None else MAX_TICKS}


class Ticks(_Whole):
    """A whole number of clock ticks (a length, a period, a warmup): a length text box (ticks, epochs or a share
    of the run), not a slider."""

    name = "ticks"
    share_of = "run"

    def control(self, p: Param) -> str:
        return "length"

    def scaled(self, p: Param, value: Any, r: float, node: Callable[[Any], Any]) -> Any:
        return scaled_tick(value, r, p.lo or 1)


class Count(_Whole):
    """A whole number that is not a length (cycles, patience)."""

    name = "count"


class Flag(ParamKind):
    """True or False."""

    name = "flag"

    def control(self, p: Param) -> str:
        return "checkbox"

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        if not isinstance(value, (bool, np.bool_)):
            raise complain(owner, name, value, "True or False", p.hint)
        return bool(value)

    def schema(self, p: Param) -> dict[str, Any]:
        return {"type": "boolean"}


class Choice(ParamKind):
    """One of a few named options (``Param.choices``)."""

    name = "choice"

    def control(self, p: Param) -> str:
        return "dropdown"

    def allowed(self, p: Param) -> str:
        return "one of " + ", ".join(repr(c) for c in p.choices)

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        if not isinstance(value, str) or value not in p.choices:
            raise complain(owner, name, value, p.allowed(), p.hint)
        return value

    def schema(self, p: Param) -> dict[str, Any]:
        return {"enum": list(p.choices)}


class TickList(ParamKind):
    """A strictly increasing list of whole ticks, each >= ``Param.lo``."""

    name = "ticklist"

    def check(self, p: Param, owner: str, name: str, value: Any) -> Any:
        return check_ticklist(owner, name, value, int(p.lo or 0))

    def schema(self, p: Param) -> dict[str, Any]:
        return {"type": "array", "items": {"type": "integer", "minimum": int(p.lo or 0), "maximum": MAX_TICKS},
                "minItems": 1}

    def encode(self, p: Param, value: Any, node: Callable[[Any], Any]) -> Any:
        return list(value)

    def decode(self, p: Param, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        return tuple(value)

    def scaled(self, p: Param, value: Any, r: float, node: Callable[[Any], Any]) -> Any:
        return tuple(scaled_tick(t, r, p.lo or 0) for t in value)


class Points(ParamKind):
    """(tick, rate) pairs; the kind that takes them checks them as a whole (knots)."""

    name = "points"

    def schema(self, p: Param) -> dict[str, Any]:
        pair = {"type": "array", "prefixItems": [{"type": "integer", "minimum": 0, "maximum": MAX_TICKS},
                                                 {"type": "number", "minimum": 0}],
                "items": False, "minItems": 2}
        return {"type": "array", "items": pair, "minItems": 2}

    def encode(self, p: Param, value: Any, node: Callable[[Any], Any]) -> Any:
        return [[t, y] for t, y in value]

    def decode(self, p: Param, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        return tuple((t, y) for t, y in value)

    def scaled(self, p: Param, value: Any, r: float, node: Callable[[Any], Any]) -> Any:
        return tuple((int(math.floor(t * r + 0.5)), y) for t, y in value)


class Child(ParamKind):
    """One nested schedule (a combinator's target)."""

    name = "schedule"
    nests = "one"

    def schema(self, p: Param) -> dict[str, Any]:
        return {"$ref": "#/$defs/node"}

    def encode(self, p: Param, value: Any, node: Callable[[Any], Any]) -> Any:
        return node(value)

    def decode(self, p: Param, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        return build(value, where)

    def scaled(self, p: Param, value: Any, r: float, node: Callable[[Any], Any]) -> Any:
        return node(value)


class Children(ParamKind):
    """A list of nested schedules (stages)."""

    name = "schedules"
    nests = "list"

    def schema(self, p: Param) -> dict[str, Any]:
        return {"type": "array", "items": {"$ref": "#/$defs/node"}, "minItems": 2}

    def encode(self, p: Param, value: Any, node: Callable[[Any], Any]) -> Any:
        return [node(c) for c in value]

    def decode(self, p: Param, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        return tuple(build(c, f"{where}[{i}]") for i, c in enumerate(value))


@dataclass(frozen=True, slots=True)
class Param:
    """One parameter's declaration: validation, widget controls, schema, spec and docs read it.

    ``kind`` names a parameter kind (``PARAM_KINDS``): ``rate`` (absolute learning rate), ``ratio`` (a plain
    number), ``ticks`` (a whole number of clock ticks), ``count`` (a whole number), ``flag``, ``choice``,
    ``ticklist``, ``points``, ``schedule`` or ``schedules``.  ``soft`` is the slider's usual range, ``log``
    a log scale; ``control`` says which control the designer shows.
    """

    kind: str
    doc: str
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False
    hi_open: bool = False
    soft: tuple[float, float] | None = None
    log: bool = False
    choices: tuple[str, ...] = ()
    optional: bool = False
    hint: str | None = None
    kind_of: ParamKind = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.kind not in PARAM_KINDS:
            raise TypeError(f"Param: kind must be one of {', '.join(PARAM_KINDS)}, got {self.kind!r}")
        object.__setattr__(self, "kind_of", PARAM_KINDS[self.kind])

    @property
    def control(self) -> str:
        """The designer's control for this parameter (see ``ParamKind``)."""
        return self.kind_of.control(self)

    def allowed(self) -> str:
        """Words for the allowed range, used in every message about this parameter."""
        return self.kind_of.allowed(self)

    def check(self, owner: str, name: str, value: Any) -> Any:
        """Return the normalised value or raise ScheduleError naming ``owner.name``."""
        if value is None and self.optional:
            return None
        return self.kind_of.check(self, owner, name, value)

    def schema(self) -> dict[str, Any]:
        """This parameter's JSON Schema (with None when optional, and its doc)."""
        out = self.kind_of.schema(self)
        if self.optional:
            out = {"anyOf": [out, {"type": "null"}]}
        out["description"] = self.doc
        return out

    def encode(self, value: Any, node: Callable[[Any], Any]) -> Any:
        """``value`` as plain JSON for a spec (None stays None)."""
        return None if value is None else self.kind_of.encode(self, value, node)

    def decode(self, value: Any, build: Callable[[Any, str], Any], where: str) -> Any:
        """A spec's value as the constructor takes it (None stays None; the constructor checks the rest)."""
        return None if value is None else self.kind_of.decode(self, value, build, where)


def param(default: Any = dataclass, **declaration: Any) -> Any:
    """A dataclass field that carries its Param declaration in ``metadata['param']``."""
    meta = {"param": Param(**declaration)}
    if default is dataclass:
        return field(metadata=meta)
    return field(default=default, metadata=meta)


def as_whole(value: Any) -> int | None:
    """``value`` as a Python int if it is a whole number (int, numpy int, integral float), else None."""
    if isinstance(value, bool):
        return None
    if isinstance(value, Integral):
        return int(value)
    if isinstance(value, Real) and math.isfinite(value) and float(value).is_integer():
        return int(value)
    return None


def check_ticklist(owner: str, name: str, value: Any, lo: int) -> tuple[int, ...]:
    """A strictly increasing tuple of whole ticks, each >= lo."""
    try:
        items = iter(value) if not isinstance(value, (str, bytes)) else None
    except TypeError:  # not iterable, or a 0-d array
        items = None
    if items is None:
        raise complain(owner, name, value, f"a list of whole ticks >= {lo}, strictly increasing")
    out: list[int] = []
    for i, v in enumerate(items):
        w = as_whole(v)
        if w is None or w < lo or w > MAX_TICKS:
            raise complain(owner, f"{name}[{i}]", v, f"a whole number >= {lo} and <= 2**53")
        if out and w <= out[-1]:
            raise complain(owner, f"{name}[{i}]", v, f"a tick > {name}[{i - 1}] = {out[-1]}",
                           "ticks must increase strictly: sort them and remove duplicates")
        out.append(w)
    return tuple(out)


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else repr(float(x))
