"""The JSON Schema of spec files: generated from the parameter declarations, shipped as a file, and the
validators the loader asks for messages (jsonschema, imported only when a message is needed)."""

from __future__ import annotations

import dataclasses
import functools
import json
from typing import TYPE_CHECKING, Any

from . import combine as _combine, shapes as _shapes  # noqa: F401 - defining the kinds registers them
from .schedule import KINDS

if TYPE_CHECKING:  # jsonschema costs ~0.8 s to import (its format checkers); it is loaded only to validate
    import jsonschema

__all__ = ["json_schema", "shipped_schema", "FORMAT_VERSION", "UNITS", "SCHEMA_FILE"]

FORMAT_VERSION = 1
UNITS = ("step", "epoch")
#: The tracks a spec may hold besides the rate, and what each one is.
TRACK_WORDS = {"momentum": "SGD momentum or the first Adam beta, in [0, 1) at every tick",
               "beta2": "the second Adam beta, in [0, 1) at every tick",
               "weight_decay": "the optimizer's weight decay, >= 0 at every tick"}


# ------------------------------------------------------------------- schema
def json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of spec files, generated from the parameter declarations."""
    defs: dict[str, Any] = {}
    for kind, cls in KINDS.items():
        props: dict[str, Any] = {"kind": {"const": kind}}
        required = ["kind"]
        for f in dataclasses.fields(cls):
            if "param" not in f.metadata:
                continue
            props[f.name] = f.metadata["param"].schema()  # each parameter kind writes its own schema
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
    defs["tracks"] = {
        "type": "object",
        "properties": {name: {"$ref": "#/$defs/node", "description": words} for name, words in TRACK_WORDS.items()},
        "additionalProperties": False,
        "description": "designs of other hyperparameters on the rate's clock (each checked for its own range "
                       "when loaded)",
    }
    defs["group"] = {
        "type": "object", "required": ["schedule"],
        "properties": {"name": {"type": "string", "description": "the param group's name (a Python identifier)"},
                       "schedule": {"$ref": "#/$defs/node"}, "tracks": {"$ref": "#/$defs/tracks"}},
        "additionalProperties": False,
        "description": "one param group's design: its rate and optional tracks",
    }
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "urn:schedwidget:spec:1",
        "title": "schedwidget schedule spec",
        "type": "object",
        "required": ["version"],
        "anyOf": [{"required": ["schedule"]}, {"required": ["groups"]}],
        "properties": {
            "version": {"type": "integer", "minimum": 1, "maximum": FORMAT_VERSION},
            "unit": {"enum": list(UNITS)},
            "steps_per_epoch": {"anyOf": [{"type": "integer", "minimum": 1}, {"type": "null"}]},
            "note": {"type": "string"},
            "schedule": {"$ref": "#/$defs/node", "description": "the rate design"},
            "tracks": {"$ref": "#/$defs/tracks"},
            "groups": {"type": "array", "minItems": 1, "items": {"$ref": "#/$defs/group"},
                       "description": "one design per param group, in optimizer.param_groups order "
                                      "(instead of schedule and tracks)"},
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
