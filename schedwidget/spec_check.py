"""Checking a parsed spec before anything is built: the limits that keep loading bounded, then the schema,
with messages that name up to three problems by their JSON paths."""

from __future__ import annotations

from typing import Any

from .predicates import _accepts, _item_check, _table
from .schedule import KINDS, ScheduleError
from .schema import FORMAT_VERSION, _validator

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


def _problems(d: dict[str, Any], plain: bool = False) -> list[tuple[list, str, str]]:
    """(path, message, validator) for every schema problem, node by node, without recursion.

    For a plain document (``plain``), a node whose own fields the predicates accept is
    not sent to jsonschema (each node is read once, its children stubbed) and long lists
    are shortened first (``_compact``), so the cost of finding the messages does not
    grow with the size of the valid parts; the first three bad items of a list are reported.
    """
    found = [(list(e.absolute_path), e.message, e.validator) for e in _validator().iter_errors(d)]
    table = _table() if plain else {}
    todo = [(d.get("schedule"), ["schedule"])] + _track_todo(d, [])
    groups = d.get("groups")
    if isinstance(groups, list):
        for i, g in enumerate(groups):
            if isinstance(g, dict):
                todo.append((g.get("schedule"), ["groups", i, "schedule"]))
                todo += _track_todo(g, ["groups", i])
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
            if p.kind_of.nests == "one":
                todo.append((child, path + [name]))
            elif p.kind_of.nests == "list" and isinstance(child, list):
                todo.extend((c, path + [name, i]) for i, c in enumerate(child))
    return found


def _track_todo(holder: dict[str, Any], path: list) -> list[tuple[Any, list]]:
    """The track designs under ``holder["tracks"]`` with their JSON paths (each is checked like a schedule)."""
    found = holder.get("tracks")
    if not isinstance(found, dict):
        return []
    return [(node, path + ["tracks", name]) for name, node in found.items() if isinstance(name, str)]


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
        if p.kind_of.nests == "one" and _known(child):
            out[name] = _STUB
        elif p.kind_of.nests == "list" and type(child) is list:
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
