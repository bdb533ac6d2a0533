"""The shipped schema as plain predicates: a spec of plain JSON values is checked without jsonschema.

For a document made only of plain JSON values these predicates decide exactly what Draft 2020-12 decides
for the keywords the shipped schema uses (a 2,000-case test keeps them equal to jsonschema); anything they
do not know sends the document to jsonschema.
"""

from __future__ import annotations

import functools
from typing import Any, Callable

from .schedule import KINDS
from .schema import _schema_for

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
