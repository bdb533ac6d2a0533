"""Schedules as data: versioned JSON specs, the shipped JSON Schema, atomic save and safe load.

A spec file looks like::

    {"version": 1, "unit": "step", "steps_per_epoch": 1150,
     "schedule": {"kind": "warmup", "steps": 5750, "start": 0.0, "curve": "linear",
                  "target": {"kind": "cosine", "peak": 0.1, "floor": 0.0, "steps": 97750}}}

Loading parses JSON, validates it against the schema and rebuilds the value
through one registry of kinds; nothing in a spec is ever executed.

Limits (each stated in its message): a spec file is a regular file of at most
``MAX_SPEC_BYTES`` (16 MiB); schedules nest at most ``MAX_DEPTH`` (48) deep; a
spec holds at most ``MAX_VALUES`` JSON values and a design at most ``MAX_NODES``
schedules; every integer fits a float (``|n| < 2**1024``, at most 309 digits).
Paths are ``str`` or ``os.PathLike`` (bytes paths and file descriptors are refused).

Validation has two routes with one outcome: a spec made of plain JSON values is
checked by predicates compiled once from the shipped schema (exactly its rules);
only a spec they reject (or one holding other Python types) goes to ``jsonschema``,
which is imported then, for its messages.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import os
import stat
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable

from . import combine as _combine, shapes as _shapes  # noqa: F401 - defining the kinds registers them
from .schedule import KINDS, MAX_TICKS, Schedule, ScheduleError, as_whole, complain

if TYPE_CHECKING:  # jsonschema costs ~0.8 s to import (its format checkers); it is loaded only to validate
    import jsonschema

__all__ = ["FORMAT_VERSION", "Design", "to_spec", "from_spec", "read_design", "save", "load", "load_design",
           "json_schema", "KINDS", "MAX_DEPTH", "MAX_SPEC_BYTES", "MAX_VALUES", "MAX_NODES", "read_file"]

FORMAT_VERSION = 1
UNITS = ("step", "epoch")


@dataclass(frozen=True)
class Design:
    """A schedule with the unit of its clock, as stored in a spec file."""

    schedule: Schedule
    unit: str = "step"
    steps_per_epoch: int | None = None


#: Deepest nesting of schedule nodes a spec may have (real designs are a handful deep).
MAX_DEPTH = 48
#: Most schedule nodes a design written as a spec may have (a 3,000-stage design has about 3,001).
MAX_NODES = 100_000
#: Most JSON values (objects, arrays, numbers, strings...) a spec may hold.
MAX_VALUES = 2 ** 22
#: Largest spec file ``load`` reads, in bytes (16 MiB; a 20-stage design is about 5 KB).
MAX_SPEC_BYTES = 16 * 2 ** 20
#: Integers in a spec must be smaller than this in magnitude: every number must fit a float.
INT_LIMIT = 2 ** 1024
#: JSON container levels a spec may nest: the top object, two per schedule (a node and its
#: list of parts) and two for a knots table (the list of pairs and a pair).
MAX_JSON_DEPTH = 2 * MAX_DEPTH + 3


def _type_words(v: Any) -> str:
    return "None" if v is None else f"a {type(v).__name__}"


# ------------------------------------------------------------------- writing
def _node(s: Schedule) -> dict[str, Any]:
    out: dict[str, Any] = {"kind": s.kind}
    for name, p in type(s).params().items():
        v = getattr(s, name)
        if p.kind == "schedule":
            v = _node(v)
        elif p.kind == "schedules":
            v = [_node(c) for c in v]
        elif p.kind == "points":
            v = [[t, y] for t, y in v]
        elif p.kind == "ticklist":
            v = list(v)
        out[name] = v
    return out


def _check_size(s: Schedule, owner: str) -> None:
    """Refuse a design a spec file cannot hold: deeper than MAX_DEPTH or with more than MAX_NODES schedules.

    Walks the design without recursion, so any design gets an answer in bounded time
    (a design that reuses one sub-design many times is counted as the tree it writes).
    """
    todo, seen = [(s, 1)], 0
    while todo:
        node, level = todo.pop()
        seen += 1
        if level > MAX_DEPTH:
            raise complain(owner, "s", f"a design more than {MAX_DEPTH} schedules deep",
                           f"at most {MAX_DEPTH} nested schedules (the limit of spec files)",
                           "a design this deep is almost certainly built by mistake, e.g. in a loop")
        if seen > MAX_NODES:
            raise complain(owner, "s", f"a design of more than {MAX_NODES:,} schedules",
                           f"at most {MAX_NODES:,} schedules (the limit of spec files)")
        todo.extend((c, level + 1) for c in node.children())


def to_spec(s: Schedule, unit: str | None = None, steps_per_epoch: int | None = None) -> dict[str, Any]:
    """Plain-JSON spec of ``s`` with the format version (and the clock's unit when given).

    ``s`` must be a Schedule at most ``MAX_DEPTH`` deep with at most ``MAX_NODES``
    schedules (what a spec file may hold); anything else is a ScheduleError.
    """
    if not isinstance(s, Schedule):
        raise complain("to_spec", "s", None if s is None else _type_words(s),
                       "a Schedule (built with flat, cosine, stages, ...)")
    _check_size(s, "to_spec")
    spec: dict[str, Any] = {"version": FORMAT_VERSION}
    if unit is not None:
        if not isinstance(unit, str) or unit not in UNITS:  # an array or a 5,000-digit int: compare and show safely
            raise complain("to_spec", "unit", unit, "one of 'step', 'epoch'")
        spec["unit"] = unit
    if steps_per_epoch is not None:
        spe = as_whole(steps_per_epoch)
        if spe is None or spe < 1:
            raise complain("to_spec", "steps_per_epoch", steps_per_epoch, "a whole number >= 1 or None")
        spec["steps_per_epoch"] = spe
    spec["schedule"] = _node(s)
    return spec


# ------------------------------------------------------------------- schema
def _param_schema(p) -> dict[str, Any]:
    if p.kind in ("rate", "ratio"):
        out: dict[str, Any] = {"type": "number"}
        if p.lo is not None:
            out["exclusiveMinimum" if p.lo_open else "minimum"] = p.lo
        if p.hi is not None:
            out["exclusiveMaximum" if p.hi_open else "maximum"] = p.hi
    elif p.kind in ("ticks", "count"):
        out = {"type": "integer", "minimum": int(p.lo or 0), "maximum": int(p.hi) if p.hi is not None else MAX_TICKS}
    elif p.kind == "flag":
        out = {"type": "boolean"}
    elif p.kind == "choice":
        out = {"enum": list(p.choices)}
    elif p.kind == "ticklist":
        out = {"type": "array", "items": {"type": "integer", "minimum": int(p.lo or 0), "maximum": MAX_TICKS},
               "minItems": 1}
    elif p.kind == "points":
        pair = {"type": "array", "prefixItems": [{"type": "integer", "minimum": 0, "maximum": MAX_TICKS},
                                                 {"type": "number", "minimum": 0}],
                "items": False, "minItems": 2}
        out = {"type": "array", "items": pair, "minItems": 2}
    elif p.kind == "schedule":
        out = {"$ref": "#/$defs/node"}
    elif p.kind == "schedules":
        out = {"type": "array", "items": {"$ref": "#/$defs/node"}, "minItems": 2}
    else:  # pragma: no cover - a new kind must be taught here
        raise AssertionError(p.kind)
    if p.optional:
        out = {"anyOf": [out, {"type": "null"}]}
    out["description"] = p.doc
    return out


def json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of spec files, generated from the parameter declarations."""
    defs: dict[str, Any] = {}
    for kind, cls in KINDS.items():
        props: dict[str, Any] = {"kind": {"const": kind}}
        required = ["kind"]
        for f in dataclasses.fields(cls):
            if "param" not in f.metadata:
                continue
            props[f.name] = _param_schema(f.metadata["param"])
            if f.default is dataclasses.MISSING:
                required.append(f.name)
            else:
                props[f.name]["default"] = list(f.default) if isinstance(f.default, tuple) else f.default
        defs[kind] = {"type": "object", "properties": props, "required": required,
                      "additionalProperties": False, "description": (cls.__doc__ or "").strip()}
    defs["node"] = {
        "type": "object", "required": ["kind"],
        "properties": {"kind": {"enum": list(KINDS)}},
        "allOf": [{"if": {"properties": {"kind": {"const": k}}, "required": ["kind"]},
                   "then": {"$ref": f"#/$defs/{k}"}} for k in KINDS],
    }
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "urn:schedwidget:spec:1",
        "title": "schedwidget schedule spec",
        "type": "object",
        "required": ["version", "schedule"],
        "properties": {
            "version": {"type": "integer", "minimum": 1, "maximum": FORMAT_VERSION},
            "unit": {"enum": list(UNITS)},
            "steps_per_epoch": {"anyOf": [{"type": "integer", "minimum": 1}, {"type": "null"}]},
            "note": {"type": "string"},
            "schedule": {"$ref": "#/$defs/node"},
        },
        "additionalProperties": False,
        "$defs": defs,
    }


SCHEMA_FILE = "spec.schema.json"


def _shallow(schema: dict[str, Any], root: str | None) -> jsonschema.Draft202012Validator:
    """A validator of the shipped schema in which a child schedule is checked only for its kind.

    The loader then checks each node against its own kind's definition, instead
    of trying every kind's if/then branch at every node (the same rules, ~10x faster).
    """
    import jsonschema  # here, not at the top: `import schedwidget` must stay light (tests/test_import.py)

    defs = dict(schema["$defs"])
    defs["node"] = {"type": "object", "required": ["kind"], "properties": {"kind": {"enum": list(KINDS)}}}
    body = {**schema, "$defs": defs} if root is None else {"$ref": f"#/$defs/{root}", "$defs": defs}
    return jsonschema.Draft202012Validator(body)


def _validator(kind: str | None = None) -> jsonschema.Draft202012Validator:
    return _validator_for(tuple(KINDS), kind)


@functools.lru_cache(maxsize=None)
def _validator_for(kinds: tuple[str, ...], kind: str | None) -> jsonschema.Draft202012Validator:
    return _shallow(_schema_for(kinds), kind)


def _problems(d: dict[str, Any], plain: bool = False) -> list[tuple[list, str, str]]:
    """(path, message, validator) for every schema problem, node by node, without recursion.

    For a plain document (``plain``), a node whose own fields the predicates accept is
    not sent to jsonschema (each node is read once, its children stubbed) and long lists
    are shortened first (``_compact``), so the cost of finding the messages does not
    grow with the size of the valid parts; the first three bad items of a list are reported.
    """
    found = [(list(e.absolute_path), e.message, e.validator) for e in _validator().iter_errors(d)]
    table = _table() if plain else {}
    todo = [(d.get("schedule"), ["schedule"])]
    while todo:
        node, path = todo.pop()
        kind = node.get("kind") if isinstance(node, dict) else None
        if not isinstance(kind, str) or kind not in KINDS:
            continue  # reported by the parent's check of the child's kind
        if plain and kind in table and table[kind](_own_fields(kind, node)):
            pass  # this node's own fields are valid: only its children (visited below) can hold problems
        else:
            _report(found, kind, node, path, plain)
        for name, p in KINDS[kind].params().items():
            child = node.get(name)
            if p.kind == "schedule":
                todo.append((child, path + [name]))
            elif p.kind == "schedules" and isinstance(child, list):
                todo.extend((c, path + [name, i]) for i, c in enumerate(child))
    return found


#: A valid node that stands in for a child while its parent's own fields are checked (the child is checked itself).
_STUB = {"kind": "flat", "lr": 0.0}


def _own_fields(kind: str, node: dict[str, Any]) -> dict[str, Any]:
    """``node`` with every child of a known kind replaced by a valid stub: checking it reads each node once.

    Checking a whole subtree at every node cost its depth times its size (40 scales over 100,000 knots: 4.3
    million predicate calls, 3.5 s).  A child of an unknown kind is kept, so the parent reports it.
    """
    out = dict(node)
    for name, p in KINDS[kind].params().items():
        child = node.get(name)
        if p.kind == "schedule" and _known(child):
            out[name] = _STUB
        elif p.kind == "schedules" and type(child) is list:
            out[name] = [_STUB if _known(c) else c for c in child]
    return out


def _known(node: Any) -> bool:
    return type(node) is dict and isinstance(node.get("kind"), str) and node["kind"] in KINDS


def _report(found: list, kind: str, node: dict[str, Any], path: list, plain: bool) -> None:
    """Append the problems of ``node``'s own fields (its children are checked on their own)."""
    shown, remap = _compact(kind, node) if plain else (node, {})
    for e in _validator(kind).iter_errors(shown):
        where = list(e.absolute_path)
        if len(where) > 1 and where[0] in remap and isinstance(where[1], int):
            where[1] = remap[where[0]][where[1]]
        found.append((path + where, e.message, e.validator))


def shipped_schema_cached() -> dict[str, Any]:
    """The schema specs are checked against, read once per set of kinds (do not mutate the result).

    That is the shipped file while the registry holds exactly the kinds it lists (always, for the
    package's own kinds: a test keeps the two equal); a kind registered later (a plugin, a test's toy
    kind) is checked against the schema generated from the registry, so it loads before any file is
    regenerated.
    """
    return _schema_for(tuple(KINDS))


@functools.lru_cache(maxsize=4)
def _schema_for(kinds: tuple[str, ...]) -> dict[str, Any]:
    shipped = shipped_schema()
    listed = shipped.get("$defs", {}).get("node", {}).get("properties", {}).get("kind", {}).get("enum", [])
    return shipped if tuple(listed) == kinds else json_schema()


def shipped_schema() -> dict[str, Any]:
    """The schema file shipped inside the package (a test keeps it equal to ``json_schema()``)."""
    from importlib import resources  # here: ~6 ms of import that only reading the schema needs

    return json.loads(resources.files("schedwidget").joinpath(SCHEMA_FILE).read_text("utf-8"))


# ----------------------------------------------------- the schema as predicates
# For a document made only of plain JSON values (dict with str keys, list, str, int,
# float, bool, None), these predicates decide exactly what Draft 2020-12 decides for
# the keywords the shipped schema uses: "number" is int or float (bools are not
# numbers), "integer" is an int or an integral float, bounds compare as Python does,
# enums and consts are strings compared by equality.  A keyword they do not know makes
# the predicate answer False, which only sends the document to jsonschema.
_Check = Callable[[Any], bool]
_NUMBER = (int, float)
_TYPES: dict[str, _Check] = {
    "object": lambda v: type(v) is dict,
    "array": lambda v: type(v) is list,
    "string": lambda v: type(v) is str,
    "boolean": lambda v: type(v) is bool,
    "null": lambda v: v is None,
    "number": lambda v: type(v) in _NUMBER,
    "integer": lambda v: type(v) is int or (type(v) is float and v.is_integer()),
}
_IGNORED = ("description", "default", "title", "$schema", "$id", "$defs")


def _never(v: Any) -> bool:
    return False


def _compile(schema: Any, table: dict[str, _Check]) -> _Check:
    """One predicate for ``schema`` (a sub-schema of the shipped one); ``table`` maps $defs names to predicates."""
    if schema is True:
        return lambda v: True
    if schema is False:
        return _never
    if not isinstance(schema, dict):
        return _never
    checks: list[_Check] = []
    bounds = {k: schema[k] for k in _BOUNDS if k in schema}
    if not all(type(b) in _NUMBER for b in bounds.values()):
        return _never
    numeric = schema.get("type") in ("number", "integer") and bounds
    if numeric:  # one function for the type and its bounds (the hot path of long tables)
        checks.append(_number(_TYPES[schema["type"]], **bounds))
    for key, val in schema.items():
        if key in _IGNORED or (numeric and (key == "type" or key in _BOUNDS)):
            continue
        if key == "type" and isinstance(val, str) and val in _TYPES:
            checks.append(_TYPES[val])
        elif key in _BOUNDS:
            checks.append(_bound(key, val))
        elif key in ("enum", "const"):
            allowed = val if key == "enum" else [val]
            if not all(isinstance(a, str) for a in allowed):
                return _never
            names = frozenset(allowed)
            checks.append(lambda v, names=names: type(v) is str and v in names)
        elif key == "anyOf" and isinstance(val, list):
            subs = [_compile(x, table) for x in val]
            checks.append(lambda v, subs=subs: any(f(v) for f in subs))
        elif key == "$ref" and isinstance(val, str) and val.startswith("#/$defs/"):
            name = val[len("#/$defs/"):]
            checks.append(lambda v, name=name: table[name](v))
        elif key == "properties" and isinstance(val, dict):
            props = {k: _compile(x, table) for k, x in val.items()}
            closed = schema.get("additionalProperties") is False
            checks.append(_properties(props, closed))
        elif key == "additionalProperties" and val is False and "properties" in schema:
            continue  # part of the "properties" predicate
        elif key == "required" and isinstance(val, list):
            need = tuple(val)
            checks.append(lambda v, need=need: type(v) is not dict or all(k in v for k in need))
        elif key == "minItems" and type(val) is int:
            checks.append(lambda v, n=val: type(v) is not list or len(v) >= n)
        elif key == "prefixItems" and isinstance(val, list):
            continue  # with "items"
        elif key == "items":
            checks.append(_items([_compile(x, table) for x in schema.get("prefixItems", ())], val, table))
        else:
            return _never
    if "prefixItems" in schema and "items" not in schema:
        return _never
    return _all_of(checks)


_BOUNDS = ("minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum")


def _all_of(checks: list[_Check]) -> _Check:
    if not checks:
        return lambda v: True
    if len(checks) == 1:
        return checks[0]
    if len(checks) == 2:
        a, b = checks
        return lambda v: a(v) and b(v)
    if len(checks) == 3:
        a, b, c = checks
        return lambda v: a(v) and b(v) and c(v)

    def every(v: Any) -> bool:
        for f in checks:
            if not f(v):
                return False
        return True
    return every


def _number(is_type: _Check, minimum: float | None = None, maximum: float | None = None,
            exclusiveMinimum: float | None = None, exclusiveMaximum: float | None = None) -> _Check:  # noqa: N803
    """The type test and the bounds in one function; a bound fails as in jsonschema (``v < minimum``)."""
    def check(v: Any) -> bool:
        if not is_type(v):
            return False
        if minimum is not None and v < minimum:
            return False
        if maximum is not None and v > maximum:
            return False
        if exclusiveMinimum is not None and v <= exclusiveMinimum:
            return False
        return exclusiveMaximum is None or v < exclusiveMaximum
    return check


def _bound(key: str, b: float) -> _Check:
    # written as jsonschema tests them (``instance < minimum`` is the error), so nan passes every bound there
    # and here alike; the parameter check then refuses it with its own message
    if key == "minimum":
        return lambda v: type(v) not in _NUMBER or not v < b
    if key == "maximum":
        return lambda v: type(v) not in _NUMBER or not v > b
    if key == "exclusiveMinimum":
        return lambda v: type(v) not in _NUMBER or not v <= b
    return lambda v: type(v) not in _NUMBER or not v >= b


def _properties(props: dict[str, _Check], closed: bool) -> _Check:
    def check(v: Any) -> bool:
        if type(v) is not dict:
            return True
        for k, x in v.items():
            f = props.get(k)
            if f is None:
                if closed:
                    return False
            elif not f(x):
                return False
        return True
    return check


def _items(prefix: list[_Check], rest: Any, table: dict[str, _Check]) -> _Check:
    if rest is False and len(prefix) == 2:  # a (tick, rate) pair
        p0, p1 = prefix
        return lambda v: type(v) is not list or (len(v) <= 2 and (not v or p0(v[0])) and (len(v) < 2 or p1(v[1])))
    if rest is False:
        return lambda v: type(v) is not list or (len(v) <= len(prefix) and all(f(x) for f, x in zip(prefix, v)))
    each = _compile(rest, table)
    n = len(prefix)
    return lambda v: type(v) is not list or (all(f(x) for f, x in zip(prefix, v)) and all(each(x) for x in v[n:]))


def _node_form(kinds: list[str]) -> dict[str, Any]:
    """The shipped schema's definition of a schedule node: an object whose kind picks its definition."""
    return {"type": "object", "required": ["kind"], "properties": {"kind": {"enum": kinds}},
            "allOf": [{"if": {"properties": {"kind": {"const": k}}, "required": ["kind"]},
                       "then": {"$ref": f"#/$defs/{k}"}} for k in kinds]}


def _table() -> dict[str, _Check]:
    """A predicate per definition of the schema (``node`` dispatches on the kind), compiled once per set of kinds."""
    return _table_for(tuple(KINDS))


@functools.lru_cache(maxsize=4)
def _table_for(kinds_now: tuple[str, ...]) -> dict[str, _Check]:
    schema = _schema_for(kinds_now)
    defs = schema.get("$defs", {})
    table: dict[str, _Check] = {}
    for name, sub in defs.items():
        if name != "node":
            table[name] = _compile(sub, table)
    kinds = [k for k in defs.get("node", {}).get("properties", {}).get("kind", {}).get("enum", [])]
    if defs.get("node") == _node_form(kinds) and all(k in table for k in kinds):
        # the allOf of if/then branches picks exactly the branch whose const equals the kind
        chosen = {k: table[k] for k in kinds}
        table["node"] = lambda v: type(v) is dict and type(v.get("kind")) is str and (
            v["kind"] in chosen and chosen[v["kind"]](v))
    else:  # a node definition of another form: leave every spec to jsonschema
        table["node"] = _never
    return table


def _accepts() -> _Check:
    """The predicate for a whole spec, compiled once per set of kinds."""
    return _accepts_for(tuple(KINDS))


@functools.lru_cache(maxsize=4)
def _accepts_for(kinds: tuple[str, ...]) -> _Check:
    return _compile({k: v for k, v in _schema_for(kinds).items() if k != "$defs"}, _table_for(kinds))


def _item_check(kind: str, name: str) -> _Check | None:
    """The predicate for one item of a list parameter of ``kind`` (None when ``name`` is not such a list)."""
    return _item_check_for(tuple(KINDS), kind, name)


@functools.lru_cache(maxsize=None)
def _item_check_for(kinds: tuple[str, ...], kind: str, name: str) -> _Check | None:
    sub = _schema_for(kinds)["$defs"].get(kind, {}).get("properties", {}).get(name, {})
    if not isinstance(sub, dict) or sub.get("type") != "array" or not isinstance(sub.get("items"), dict):
        return None
    if not all(isinstance(n, int) and n <= 2 for k, n in sub.items() if k == "minItems"):
        return None
    return _compile(sub["items"], _table_for(kinds))


#: A list parameter longer than this is shortened before jsonschema reads it (see ``_compact``).
_LONG = 16


def _compact(kind: str, node: dict[str, Any]) -> tuple[dict[str, Any], dict[str, list[int]]]:
    """A copy of a plain node whose long lists keep only what can produce a message, and the index maps back.

    A long list whose items all pass keeps its first two (a prefix of a valid list is
    valid: the lists' schemas have no keyword that looks at the whole list but
    ``minItems`` <= 2); a long list with bad items keeps the first three of them (and
    passing items up to two), and ``remap[name][j]`` is the original index of item j.
    So jsonschema's work, and the time to a message, no longer grows with the tables.
    """
    out, remap = dict(node), {}
    for name, v in node.items():
        if type(v) is not list or len(v) <= _LONG:
            continue
        check = _item_check(kind, name)
        if check is None:
            continue
        bad = []
        for i, x in enumerate(v):
            if not check(x):
                bad.append(i)
                if len(bad) == 3:
                    break
        good = [i for i in range(min(len(v), 5)) if i not in bad][:max(0, 2 - len(bad))]
        keep = sorted(bad + good)
        out[name] = [v[i] for i in keep]
        if bad:
            remap[name] = keep
    return out, remap


# ------------------------------------------------------------------- reading
def _where(path) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


class _LongInt:
    """Stands for an integer literal too long to convert (the scan reports it with its JSON path)."""

    __slots__ = ("digits",)

    def __init__(self, digits: int) -> None:
        self.digits = digits


def _parse_int(text: str) -> int | _LongInt:
    digits = len(text.lstrip("-"))
    return _LongInt(digits) if digits > 310 else int(text)


_SCALARS = (str, float, bool, type(None))


def _scan(d: Any) -> bool:
    """Check the limits that keep loading bounded, without recursion; True when every value is plain JSON.

    At most MAX_DEPTH schedules (JSON objects below the top one) on any path and at
    most MAX_JSON_DEPTH nested containers, at most MAX_NODES schedules and
    MAX_VALUES values in all, every integer
    smaller than INT_LIMIT in magnitude, object keys strings, and only JSON values
    (dict, list, str, int, float, bool, None; subclasses of them are left to jsonschema,
    so the result is False).  A cycle or a shared sub-document counts as the tree it
    unfolds to, so it ends at a limit.
    """
    todo: list[tuple[Any, int, int, Any]] = [(d, 1, 0, None)]
    seen, objects, plain = 1, 0, True

    def path(link: Any) -> str:
        parts = []
        while link is not None:
            link, key = link
            parts.append(key)
        parts.reverse()
        return _where(parts) if len(parts) <= 12 else f"{_where(parts[:5])} ... {_where(parts[-5:])}"

    def too_big(digits: str, link: Any) -> ScheduleError:
        return ScheduleError(f"spec: {path(link)}: an integer must be smaller than 2**1024 (about 1.8e308, a "
                             f"float's range) in magnitude, got one of {digits} digits")

    while todo:
        node, level, nodes, link = todo.pop()
        is_dict = isinstance(node, dict)
        if level > MAX_JSON_DEPTH or (is_dict and nodes > MAX_DEPTH):
            raise ScheduleError(f"spec: nesting must be at most {MAX_DEPTH} schedules deep, got more at "
                                f"{path(link)} (at most {MAX_JSON_DEPTH} levels of JSON objects and arrays; "
                                "a design this deep is almost certainly generated by mistake)")
        seen += len(node)
        if seen > MAX_VALUES:
            raise ScheduleError(f"spec: a spec must hold at most {MAX_VALUES:,} JSON values, got more "
                                "(a design this large is almost certainly generated by mistake)")
        if type(node) is not dict and type(node) is not list:
            plain = False
        below = nodes + 1 if is_dict else nodes
        for key, v in (node.items() if is_dict else enumerate(node)):
            t = type(v)
            if t in _SCALARS:
                pass
            elif t is int:
                if not -INT_LIMIT < v < INT_LIMIT:
                    raise too_big(f"about {int(v.bit_length() * 0.30103) + 1:,}", (link, key))
            elif isinstance(v, (dict, list)):
                todo.append((v, level + 1, below, (link, key)))
                if isinstance(v, dict):
                    objects += 1
                    if objects > MAX_NODES:
                        raise ScheduleError(f"spec: a spec must hold at most {MAX_NODES:,} schedules, got more "
                                            "(a design this large is almost certainly generated by mistake)")
            elif t is _LongInt:
                raise too_big(f"{v.digits:,}", (link, key))
            elif isinstance(v, (str, float, int)) and not isinstance(v, bool):  # e.g. numpy.float64
                plain = False
                if isinstance(v, int) and not -INT_LIMIT < v < INT_LIMIT:
                    raise too_big(f"about {int(int(v).bit_length() * 0.30103) + 1:,}", (link, key))
            else:
                raise ScheduleError(f"spec: {path((link, key))} must be a JSON value (an object, array, string, "
                                    f"number, true, false or null), got a {type(v).__name__}")
            if is_dict and type(key) is not str:
                raise ScheduleError(f"spec: {path(link)}: object keys must be strings, got {key!r:.60}")
    return plain


def _check_schema(d: Any) -> None:
    """The limits, then the schema: a ScheduleError naming up to three problems by their JSON paths."""
    if not isinstance(d, dict):
        raise ScheduleError(f"spec: the top level must be a JSON object, got {type(d).__name__}")
    plain = _scan(d)
    version = d.get("version")
    if isinstance(version, int) and not isinstance(version, bool) and version > FORMAT_VERSION:
        raise ScheduleError(f"spec: version must be <= {FORMAT_VERSION}, got {version} "
                            "(this file was written by a newer schedwidget; upgrade to read it)")
    if plain and _accepts()(d):
        return
    errors = sorted(_problems(d, plain), key=lambda e: (-len(e[0]), e[1]))
    useful = [e for e in errors if e[2] not in ("allOf", "if", "$ref")] or errors
    lines_all: list[str] = []
    for path, message, _ in useful:
        line = f"{_where(path)}: {message}"
        if line not in lines_all:
            lines_all.append(line)
    useful = lines_all
    if useful:
        lines = useful[:3]
        more = f" (+{len(useful) - 3} more)" if len(useful) > 3 else ""
        raise ScheduleError("spec: " + "; ".join(lines) + more +
                            " (fix these fields, or rebuild the file with schedwidget.save)")


def _build(node: dict[str, Any], where: str) -> Schedule:
    cls = KINDS[node["kind"]]
    kwargs: dict[str, Any] = {}
    for name, p in cls.params().items():
        if name not in node:
            continue
        v = node[name]
        if p.kind == "schedule":
            v = _build(v, f"{where}.{name}")
        elif p.kind == "schedules":
            v = tuple(_build(c, f"{where}.{name}[{i}]") for i, c in enumerate(v))
        elif p.kind == "points":
            v = tuple((t, y) for t, y in v)
        elif p.kind == "ticklist":
            v = tuple(v)
        kwargs[name] = v
    try:
        return cls(**kwargs)
    except ScheduleError as exc:
        raise ScheduleError(f"spec: {where}: {exc}") from None
    except (ArithmeticError, TypeError, ValueError) as exc:  # a constructor's check that is not a ScheduleError yet
        raise ScheduleError(f"spec: {where}: {node['kind']} cannot be built from these values "
                            f"({type(exc).__name__}: {exc})") from None


def read_design(d: Any) -> Design:
    """Validate a parsed spec and rebuild its Design (schedule, unit, steps per epoch).

    Any input gets a Design or a ScheduleError, in bounded time (see the module's limits).
    """
    _check_schema(d)
    return Design(_build(d["schedule"], "schedule"), d.get("unit", "step"), d.get("steps_per_epoch"))


def from_spec(d: Any) -> Schedule:
    """Rebuild a schedule from its spec (validated first; nothing is executed)."""
    return read_design(d).schedule


def check_path(owner: str, path: Any, name: str = "path") -> str:
    """``path`` as a str file path: a ``str`` or an ``os.PathLike`` that gives one; anything else is refused."""
    if isinstance(path, str) or (isinstance(path, os.PathLike) and not isinstance(path, bytes)):
        try:
            out = os.fspath(path)
        except TypeError:
            out = None
        if isinstance(out, str) and out and "\0" not in out:
            return out
    raise complain(owner, name, path if isinstance(path, (str, bytes, int)) else _type_words(path),
                   "a file path: a non-empty str or os.PathLike such as pathlib.Path",
                   "bytes paths and file descriptors are not accepted; decode bytes with os.fsdecode")


def _kind_of(mode: int) -> str:
    for test, words in ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a pipe (FIFO)"),
                        (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                        (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return words
    return "not a regular file"


def read_file(path: Any, owner: str, name: str = "path", cap: int = MAX_SPEC_BYTES,
              what: str = "name an existing file", folder: str = "it is a folder") -> bytes:
    """The bytes of a regular file of at most ``cap`` bytes, read without ever blocking.

    The path is checked with ``os.stat`` before it is opened, so a pipe, a device
    or a socket (which may never end, or never start) is refused with a message;
    the file is opened non-blocking and checked again on the open descriptor, and
    at most ``cap + 1`` bytes are read, so a file that grows meanwhile is refused too.
    Messages read ``"{owner}: {name} must {what}, got '...' (why)"``.
    """
    p = check_path(owner, path, name)

    def refuse(why: str) -> ScheduleError:
        return ScheduleError(f"{owner}: {name} must {what}, got {p!r} ({why})")

    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise refuse(f"no such file; relative paths start at {os.getcwd()}") from None
    except OSError as exc:
        raise refuse(f"it cannot be read: {exc.strerror or type(exc).__name__}") from None
    if not stat.S_ISREG(st.st_mode):
        kind = _kind_of(st.st_mode)
        raise refuse(folder if kind == "a folder" else
                     f"it is {kind}; only regular files are read, since a pipe or a device may never end")
    too_big = f"{{:,}} bytes; at most {cap:,} bytes ({cap / 2 ** 20:g} MiB) are read"
    if st.st_size > cap:
        raise refuse("it has " + too_big.format(st.st_size))
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(p, flags)
    except OSError as exc:
        raise refuse(f"it cannot be opened: {exc.strerror or type(exc).__name__}") from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):  # replaced by something else since the stat
            raise refuse("it is no longer a regular file")
        chunks, size = [], 0
        while size <= cap:
            chunk = os.read(fd, min(cap + 1 - size, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise refuse(f"reading it failed: {exc.strerror or type(exc).__name__}") from None
    finally:
        os.close(fd)
    if size > cap:
        raise refuse("it grew past " + too_big.format(cap))
    return b"".join(chunks)


def _read(path: Any, owner: str = "load") -> Any:
    data = read_file(path, owner, cap=MAX_SPEC_BYTES, folder="it is a folder, which cannot be read as a spec")
    shown = repr(os.fspath(path))
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScheduleError(f"{owner}: {shown} cannot be read as UTF-8 text (byte {exc.start:,}: {exc.reason})") \
            from None
    try:
        return json.loads(text, parse_int=_parse_int)
    except json.JSONDecodeError as exc:
        raise ScheduleError(f"{owner}: {shown} is not JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") \
            from None
    except RecursionError:
        raise ScheduleError(f"{owner}: {shown} nests JSON arrays or objects too deeply to read; a spec nests at most "
                            f"{MAX_JSON_DEPTH} levels ({MAX_DEPTH} schedules)") from None


def load_design(path: str | os.PathLike) -> Design:
    """Read a spec file into a Design.

    ``path`` is a ``str`` or ``os.PathLike`` naming a regular file of at most
    MAX_SPEC_BYTES (16 MiB); bytes paths, file descriptors, pipes and devices are
    refused with a ScheduleError, as is anything over the module's other limits.
    """
    return read_design(_read(path, "load"))


def load(path: str | os.PathLike) -> Schedule:
    """Read a spec file into a Schedule (validated; loading never runs code)."""
    return load_design(path).schedule


def save(s: Schedule, path: str | os.PathLike, unit: str | None = None,
         steps_per_epoch: int | None = None) -> Path:
    """Write ``s`` as a spec file atomically: a temporary file in the same folder, then a rename.

    An existing file is replaced only once the new one is complete, so a crash
    mid-write never leaves half a design on disk.  A replaced file keeps its
    permission bits; a new file gets the usual ones (0666 less the umask).  A
    symbolic link is written through: its target is replaced and the link stays.
    Only a regular file (or a new name) can be written.
    """
    if not isinstance(s, Schedule):
        raise ScheduleError(f"save: s must be a Schedule, got {type(s).__name__}")
    target = Path(check_path("save", path))
    text = json.dumps(to_spec(s, unit, steps_per_epoch), indent=2) + "\n"
    write_atomic(target, text, owner="save")
    return target


def write_atomic(target: Path, text: str, owner: str = "save", name: str = "path") -> None:
    """Write ``text`` to a temporary file beside the file ``target`` names, then rename it over that file.

    A symbolic link is followed to the file it names (which is replaced; the link
    stays).  The new file keeps the permission bits of the one it replaces, or for
    a new file 0666 less the umask (the kernel applies the umask at creation).
    Anything but a regular file (a folder, a pipe, a device) is refused.
    """
    shown = str(target)
    real = Path(os.path.realpath(target))
    if not real.parent.is_dir():
        raise complain(owner, name, shown, "in an existing folder",
                       None if real == Path(os.path.abspath(target)) else f"the link leads to {str(real)!r}")
    try:
        st = os.stat(real)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise complain(owner, name, shown, "a writable file", exc.strerror or type(exc).__name__) from None
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise complain(owner, name, shown, "a regular file or a new name", f"it is {_kind_of(st.st_mode)}")
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NOFOLLOW", 0)
    for _ in range(100):
        tmp = real.parent / f".{real.name}.{os.urandom(4).hex()}.tmp"  # not secrets: it loads OpenSSL (~10 ms)
        try:
            fd = os.open(tmp, flags, 0o666)
            break
        except FileExistsError:
            continue
    else:  # pragma: no cover - 100 collisions of 32 random bits
        raise complain(owner, name, shown, "a file whose folder accepts a temporary file",
                       "100 temporary names were taken")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            if st is not None:
                os.fchmod(fh.fileno(), stat.S_IMODE(st.st_mode))
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, real)
    except BaseException:
        if os.path.lexists(tmp):
            os.unlink(tmp)
        raise
    _sync_folder(real.parent)


def _sync_folder(folder: Path) -> None:
    """Flush the rename to disk where the platform allows it (best effort)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
