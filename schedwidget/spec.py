"""Schedules as data: versioned JSON specs, the shipped JSON Schema, atomic save and safe load.

A spec file looks like::

    {"version": 1, "unit": "step", "steps_per_epoch": 1150,
     "schedule": {"kind": "warmup", "steps": 5750, "start": 0.0, "curve": "linear",
                  "target": {"kind": "cosine", "peak": 0.1, "floor": 0.0, "steps": 97750}}}

Loading parses JSON, validates it against the schema and rebuilds the value
through one registry of kinds; nothing in a spec is ever executed.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import os
import tempfile
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .combine import Clip, Product, Restarts, Scaled, Stages, Stretch, Sum, Warmup
from .schedule import MAX_TICKS, Schedule, ScheduleError, as_whole, complain
from .shapes import Cosine, Drops, ExpDecay, Flat, InvSqrt, Knots, OneCycle, Poly, Ramp, Triangle

if TYPE_CHECKING:  # jsonschema costs ~0.8 s to import (its format checkers); it is loaded only to validate
    import jsonschema

__all__ = ["FORMAT_VERSION", "Design", "to_spec", "from_spec", "read_design", "save", "load", "load_design",
           "json_schema", "KINDS"]

FORMAT_VERSION = 1
UNITS = ("step", "epoch")

#: The one registry of kinds: spec "kind" -> class.
KINDS: dict[str, type[Schedule]] = {c.kind: c for c in (
    Flat, Ramp, Cosine, ExpDecay, Drops, Poly, InvSqrt, Triangle, OneCycle, Knots,
    Stages, Warmup, Restarts, Product, Sum, Scaled, Clip, Stretch)}


@dataclass(frozen=True)
class Design:
    """A schedule with the unit of its clock, as stored in a spec file."""

    schedule: Schedule
    unit: str = "step"
    steps_per_epoch: int | None = None


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


def to_spec(s: Schedule, unit: str | None = None, steps_per_epoch: int | None = None) -> dict[str, Any]:
    """Plain-JSON spec of ``s`` with the format version (and the clock's unit when given)."""
    spec: dict[str, Any] = {"version": FORMAT_VERSION}
    if unit is not None:
        if unit not in UNITS:
            raise ScheduleError(f"to_spec: unit must be one of 'step', 'epoch', got {unit!r}")
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


@functools.lru_cache(maxsize=None)
def _validator(kind: str | None = None) -> jsonschema.Draft202012Validator:
    return _shallow(shipped_schema(), kind)


def _problems(d: dict[str, Any]) -> list[tuple[list, str, str]]:
    """(path, message, validator) for every schema problem, node by node, without recursion."""
    found = [(list(e.absolute_path), e.message, e.validator) for e in _validator().iter_errors(d)]
    todo = [(d.get("schedule"), ["schedule"])]
    while todo:
        node, path = todo.pop()
        kind = node.get("kind") if isinstance(node, dict) else None
        if not isinstance(kind, str) or kind not in KINDS:
            continue  # reported by the parent's check of the child's kind
        found += [(path + list(e.absolute_path), e.message, e.validator) for e in _validator(kind).iter_errors(node)]
        for name, p in KINDS[kind].params().items():
            child = node.get(name)
            if p.kind == "schedule":
                todo.append((child, path + [name]))
            elif p.kind == "schedules" and isinstance(child, list):
                todo.extend((c, path + [name, i]) for i, c in enumerate(child))
    return found


def shipped_schema() -> dict[str, Any]:
    """The schema file shipped inside the package (a test keeps it equal to ``json_schema()``)."""
    return json.loads(resources.files("schedwidget").joinpath(SCHEMA_FILE).read_text("utf-8"))


# ------------------------------------------------------------------- reading
def _where(path) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


#: Deepest nesting of schedule nodes a spec may have (real designs are a handful deep).
MAX_DEPTH = 48


def _depth(d: Any) -> int:
    """Nesting depth of JSON containers, without recursion."""
    deepest, todo = 0, [(d, 1)]
    while todo:
        node, level = todo.pop()
        if isinstance(node, dict):
            todo.extend((v, level + 1) for v in node.values())
        elif isinstance(node, list):
            todo.extend((v, level + 1) for v in node)
        else:
            continue
        deepest = max(deepest, level)
    return deepest


def _check_schema(d: Any) -> None:
    if not isinstance(d, dict):
        raise ScheduleError(f"spec: the top level must be a JSON object, got {type(d).__name__}")
    depth = _depth(d)
    if depth > 2 * MAX_DEPTH:
        raise ScheduleError(f"spec: nesting must be at most {MAX_DEPTH} schedules deep, got about {depth // 2} "
                            "(a design this deep is almost certainly generated by mistake)")
    version = d.get("version")
    if isinstance(version, int) and not isinstance(version, bool) and version > FORMAT_VERSION:
        raise ScheduleError(f"spec: version must be <= {FORMAT_VERSION}, got {version} "
                            "(this file was written by a newer schedwidget; upgrade to read it)")
    errors = sorted(_problems(d), key=lambda e: (-len(e[0]), e[1]))
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


def read_design(d: Any) -> Design:
    """Validate a parsed spec and rebuild its Design (schedule, unit, steps per epoch)."""
    _check_schema(d)
    return Design(_build(d["schedule"], "schedule"), d.get("unit", "step"), d.get("steps_per_epoch"))


def from_spec(d: Any) -> Schedule:
    """Rebuild a schedule from its spec (validated first; nothing is executed)."""
    return read_design(d).schedule


def _read(path: str | os.PathLike) -> Any:
    p = Path(path)
    try:
        text = p.read_text("utf-8")
    except FileNotFoundError:
        raise ScheduleError(f"load: path must name an existing file, got {str(p)!r}") from None
    except (IsADirectoryError, PermissionError, UnicodeDecodeError) as exc:
        raise ScheduleError(f"load: {str(p)!r} cannot be read as UTF-8 text ({type(exc).__name__})") from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise ScheduleError(f"load: {str(p)!r} is not JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") from None


def load_design(path: str | os.PathLike) -> Design:
    """Read a spec file into a Design."""
    return read_design(_read(path))


def load(path: str | os.PathLike) -> Schedule:
    """Read a spec file into a Schedule (validated; loading never runs code)."""
    return load_design(path).schedule


def save(s: Schedule, path: str | os.PathLike, unit: str | None = None,
         steps_per_epoch: int | None = None) -> Path:
    """Write ``s`` as a spec file atomically: a temporary file in the same folder, then a rename.

    An existing file is replaced only once the new one is complete, so a crash
    mid-write never leaves half a design on disk.
    """
    if not isinstance(s, Schedule):
        raise ScheduleError(f"save: s must be a Schedule, got {type(s).__name__}")
    text = json.dumps(to_spec(s, unit, steps_per_epoch), indent=2) + "\n"
    target = Path(path)
    if not target.parent.is_dir():
        raise ScheduleError(f"save: path must be in an existing folder, got {str(target)!r}")
    write_atomic(target, text)
    return target


def write_atomic(target: Path, text: str) -> None:
    """Write ``text`` to a temporary file beside ``target``, then rename it over ``target``."""
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
