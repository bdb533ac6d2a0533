"""Spec generators: valid specs of random designs, then mutated; spec files with hostile text.

The mutators read the registry of kinds and the parameter declarations: which
fields a node has, which hold numbers (and their bounds), which hold child
schedules or lists.  A new kind is mutated like the others without a change here.
"""

from __future__ import annotations

import copy
import json
import math
import random
from pathlib import Path
from typing import Any, Callable

import schedwidget as sw
from schedwidget.schedule import MAX_TICKS
from schedwidget.spec import FORMAT_VERSION, KINDS

from . import atoms
from .atoms import src
from .designs import combinators, design, draw_value
from .checks import check, check_with_facts
from .runner import Case


# ------------------------------------------------------------------ walking a spec
def nodes(spec: Any) -> list[dict]:
    """Every schedule node (a dict with a known ``kind``) in a spec, without recursion."""
    out, todo = [], [spec.get("schedule") if isinstance(spec, dict) else None]
    while todo:
        n = todo.pop()
        if not isinstance(n, dict) or not isinstance(n.get("kind"), str) or n["kind"] not in KINDS:
            continue
        out.append(n)
        for name, p in KINDS[n["kind"]].params().items():
            if p.kind == "schedule":
                todo.append(n.get(name))
            elif p.kind == "schedules" and isinstance(n.get(name), list):
                todo.extend(n[name])
    return out


def kinds_with(*param_kinds: str) -> list[str]:
    """Kinds that have a parameter of each given declaration kind."""
    return [k for k, c in KINDS.items() if all(any(p.kind == pk for p in c.params().values()) for pk in param_kinds)]


def wrapper(rng: random.Random, kind: str, target: dict, **fixed: Any) -> dict:
    """A node of ``kind`` (one "schedule" parameter) around ``target``, other fields drawn valid-ish."""
    node: dict[str, Any] = {"kind": kind}
    for name, p in KINDS[kind].params().items():
        if p.kind == "schedule":
            node[name] = target
        elif name in fixed:
            node[name] = fixed[name]
        elif p.kind in ("rate", "ratio", "ticks", "count", "flag", "choice"):
            if p.optional and p.kind in ("count",):
                node[name] = None
                continue
            v = draw_value(rng, p, 0.0, lambda: None)
            node[name] = v
    return node


def single_wrappers() -> list[str]:
    """Combinator kinds with exactly one child schedule."""
    return [k for k in combinators() if [p.kind for p in KINDS[k].params().values()].count("schedule") == 1
            and not any(p.kind == "schedules" for p in KINDS[k].params().values())]


# ------------------------------------------------------------------ mutators
Mutated = tuple[Any, "str | None"]  # (spec, repro text or None for "from_spec(src(spec))")


def _pick_field(rng: random.Random, spec: dict) -> tuple[dict, str, Any] | None:
    ns = nodes(spec)
    if not ns:
        return None
    n = rng.choice(ns)
    names = [k for k in n if k != "kind"] or ["kind"]
    name = rng.choice(names + ["kind"]) if rng.random() < 0.1 else rng.choice(names)
    p = KINDS[n["kind"]].params().get(name)
    return n, name, p


def m_atom(rng, spec):
    """A field (or the kind) replaced by a bad value of any type."""
    picked = _pick_field(rng, spec)
    if picked:
        n, name, _ = picked
        n[name] = rng.choice(atoms.ANY)()
    return spec, None


def m_edge(rng, spec):
    """A number just outside (or exactly on an open edge of) its declared bounds, or of another type."""
    picked = _pick_field(rng, spec)
    if not picked or picked[2] is None:
        return m_atom(rng, spec)
    n, name, p = picked
    lo = p.lo if p.lo is not None else 0.0
    hi = p.hi if p.hi is not None else float(MAX_TICKS)
    pool: list[Any] = [math.nextafter(lo, -math.inf), lo, math.nextafter(hi, math.inf), hi, hi * 10, -hi,
                       MAX_TICKS + 1, float(MAX_TICKS), MAX_TICKS, 10.5, 10.0, repr(n.get(name))[:50], [n.get(name)]]
    if p.kind in ("ticks", "count"):
        pool += [int(lo) - 1, 2 ** 64, 10 ** 30, -(2 ** 63)]
    n[name] = rng.choice(pool)
    return spec, None


def m_unknown_field(rng, spec):
    ns = nodes(spec)
    target = rng.choice(ns) if ns and rng.random() < 0.8 else spec
    target[rng.choice(["stepz", "Steps", "__class__", "kind ", "", "extra", "lr_lambda"])] = rng.choice(atoms.ANY)()
    return spec, None


def m_kind(rng, spec):
    ns = nodes(spec)
    if ns:
        rng.choice(ns)["kind"] = rng.choice(list(KINDS) + ["Flat", "cosine ", "", "__init__", "unknown", 1, None])
    return spec, None


def m_drop(rng, spec):
    picked = _pick_field(rng, spec)
    if picked:
        n, name, _ = picked
        n.pop(name, None)
    return spec, None


def m_top(rng, spec):
    """The top level: version, unit, steps per epoch, note, the schedule itself, or not a dict at all."""
    key = rng.choice(["version", "unit", "steps_per_epoch", "note", "schedule", "whole"])
    if key == "whole":
        return rng.choice([[spec], json.dumps(spec, default=repr), None, 1, spec.get("schedule"), True]), None
    spec[key] = rng.choice(atoms.ANY + [atoms.atom(s) for s in (
        "0", "2", "'1'", "1.0", "'epoch'", "'steps'", "'x' * 1000000", "[]")])()
    return spec, None


def m_huge_list(rng, spec):
    """A list parameter (drop ticks, knots, stages) with 10**3..10**5 entries."""
    n = rng.choice([1000, 10 ** 4, 10 ** 5])
    which = rng.choice(["ticklist", "points", "schedules"])
    kinds = kinds_with(which)
    if not kinds:
        return m_atom(rng, spec)
    kind = rng.choice(kinds)
    node: dict[str, Any] = {"kind": kind}
    leaf = sw.to_spec(sw.flat(0.1, steps=2))["schedule"]
    for name, p in KINDS[kind].params().items():
        if p.kind == "ticklist":
            node[name] = atoms.remember(list(range(1, n + 1)), f"list(range(1, {n + 1}))")
        elif p.kind == "points":
            node[name] = atoms.remember([[i, 0.1] for i in range(n)], f"[[i, 0.1] for i in range({n})]")
        elif p.kind == "schedules":
            n = min(n, rng.choice([100, 1000, 3000]))
            node[name] = atoms.remember([dict(leaf) for _ in range(n)], f"[{src(leaf)}] * {n}")
        elif p.kind == "ticks" and not p.optional:
            node[name] = n + 1
        elif p.kind == "ticks":
            node[name] = n + 1 if rng.random() < 0.5 else None
        elif p.kind == "schedule":
            node[name] = leaf
    spec["schedule"] = node
    return spec, None


def m_restarts(rng, spec):
    """The design repeated with a huge cycle count (2**53, 10**12 ...) and any growth."""
    kinds = [k for k in kinds_with("schedule", "count")]
    if not kinds:
        return m_atom(rng, spec)
    kind = rng.choice(kinds)
    counts = {n: rng.choice(atoms.CYCLES)() for n, p in KINDS[kind].params().items() if p.kind == "count"}
    node = wrapper(rng, kind, spec["schedule"], **counts)
    for name, p in KINDS[kind].params().items():
        if p.kind == "ratio" and p.lo is not None and p.lo <= 1.0 <= (p.hi or 2) and rng.random() < 0.7:
            node[name] = rng.choice(atoms.GROWTHS)
    spec["schedule"] = node
    return spec, None


def m_nest(rng, spec):
    """The design wrapped in 2..60 combinators (restarts of 1-3 cycles, scale, clip, stretch, warmup ...)."""
    depth = rng.choice([2, 3, 5, 8, 10, 12, 15, 20, 40, 47, 48, 49, 60])
    node = spec["schedule"]
    for _ in range(depth):
        kind = rng.choice(single_wrappers())
        fixed = {n: rng.randint(1, 3) for n, p in KINDS[kind].params().items() if p.kind == "count"}
        node = wrapper(rng, kind, node, **fixed)
    spec["schedule"] = node
    return spec, None


def m_deep(rng, spec):
    """Hundreds to 10**5 levels of nesting of one wrapper kind, built without recursion."""
    depth = rng.choice([100, 500, 1000, 10 ** 4, 10 ** 5])
    kind = rng.choice(single_wrappers())
    leaf = sw.to_spec(sw.flat(0.1, steps=10))["schedule"]
    template = wrapper(rng, kind, None, **{n: 1 for n, p in KINDS[kind].params().items() if p.kind == "count"})
    key = next(n for n, p in KINDS[kind].params().items() if p.kind == "schedule")
    node = leaf
    for _ in range(depth):
        node = {**template, key: node}
    rest = src({k: v for k, v in template.items() if k != key})
    repro = (f"d = {src(leaf)}\nfor _ in range({depth}):\n    d = {{**{rest}, "
             f"{key!r}: d}}\nfrom_spec({{'version': 1, 'schedule': d}})")
    return {"version": FORMAT_VERSION, "schedule": node}, repro


def m_python(rng, spec):
    """Python-only values in a spec built in code: tuples, numpy scalars, NaN, a list of nodes as a tuple."""
    picked = _pick_field(rng, spec)
    if picked:
        n, name, _ = picked
        v = n[name]
        if isinstance(v, list):
            n[name] = tuple(v)
        elif isinstance(v, float):
            n[name] = rng.choice([atoms.atom(f"np.float64({v!r})"), atoms.atom(f"np.float32({v!r})"),
                                  atoms.atom("np.float64('nan')")])()
        elif isinstance(v, int) and not isinstance(v, bool):
            n[name] = rng.choice([atoms.atom(f"np.int64({v})"), atoms.atom(f"np.uint8({v % 256})"),
                                  atoms.atom(f"float({v})")])()
    return spec, None


MUTATORS: list[Callable] = [m_atom, m_atom, m_edge, m_edge, m_unknown_field, m_kind, m_drop, m_top,
                            m_huge_list, m_restarts, m_restarts, m_nest, m_nest, m_deep, m_python]


def _from_spec_case(generator: str, spec: Any, repro: str | None, facts: bool = False) -> Case:
    text = repro if repro is not None else f"from_spec({src(spec)})"
    return Case(generator, lambda: sw.from_spec(spec), text, check_with_facts if facts else check)


def valid_specs(rng: random.Random, n: int) -> list[Case]:
    """Specs of random valid designs (some with parameters at their hard edges): each must give clean rates."""
    out = []
    for i in range(n):
        s = design(rng, depth=rng.choice([0, 1, 2, 3]), extreme=0.25 if i % 2 else 0.03)
        # the readout (facts) on every other case: it reads up to 2**21 ticks one by one, the costliest check
        out.append(_from_spec_case("valid_specs", sw.to_spec(s), None, facts=i % 2 == 0))
    return out


def drawn_specs(rng: random.Random, n: int) -> list[Case]:
    """Nodes drawn straight from the declarations (cross-field rules unchecked): loading decides."""
    out = []
    for _ in range(n):
        kind = rng.choice(list(KINDS))
        node = {"kind": kind}
        for name, p in KINDS[kind].params().items():
            v = draw_value(rng, p, 0.3, lambda: sw.to_spec(design(rng, 1, 0.1, finite=True))["schedule"])
            node[name] = list(v) if isinstance(v, tuple) else v
        out.append(_from_spec_case("drawn_specs", {"version": FORMAT_VERSION, "schedule": node}, None))
    return out


def mutated_specs(rng: random.Random, n: int) -> list[Case]:
    """Valid specs with one to three mutations each."""
    out = []
    for _ in range(n):
        spec: Any = copy.deepcopy(sw.to_spec(design(rng, depth=rng.choice([0, 1, 2]), extreme=0.05)))
        repro = None
        for _ in range(rng.choice([1, 1, 1, 2, 3])):
            if not isinstance(spec, dict) or not isinstance(spec.get("schedule"), dict):
                break
            try:  # in place, so values made by atoms keep their short source for the repro
                spec, repro = rng.choice(MUTATORS)(rng, spec)
            except Exception:  # noqa: BLE001 - a mutator that cannot apply to an earlier mutation's output
                continue
            if repro is not None:
                break
        out.append(_from_spec_case("mutated_specs", spec, repro))
    return out


# ------------------------------------------------------------------ spec files
def spec_texts(rng: random.Random, n: int, folder: Path) -> list[Case]:
    """Spec files whose text is hostile: deep brackets, 5,000-digit numbers, NaN, binary garbage, huge notes."""
    out = []
    for i in range(n):
        base = json.dumps(sw.to_spec(design(rng, depth=rng.choice([0, 1]), extreme=0.05)))
        what = rng.choice(["brackets", "objects", "digits", "digits", "literal", "garbage", "note", "truncate",
                           "dup", "bom", "whitespace"])
        if what in ("brackets", "objects"):
            depth = rng.choice([100, 1000, 10 ** 4, 10 ** 5])
            if what == "brackets":
                expr = f"'{{\"version\": 1, \"schedule\": ' + '[' * {depth} + ']' * {depth} + '}}'"
            else:
                expr = (f"'{{\"version\": 1, \"schedule\": ' + '{{\"kind\": \"scale\", \"factor\": 1, \"target\": ' "
                        f"* {depth} + '{{\"kind\": \"flat\", \"lr\": 0.1}}' + '}}' * {depth} + '}}'")
        elif what == "digits":
            k = rng.choice([400, 4000, 4299, 4301, 5000, 20000])
            number = rng.choice([f"'9' * {k}", f"'1' + '0' * {k}", f"'-' + '9' * {k}", f"'0.' + '1' * {k}",
                                 f"'1e' + '9' * {min(k, 50)}"])
            target = rng.choice(_numbers_in(base) or ["0.1"])
            expr = f"{base!r}.replace({target!r}, {number}, 1)"
        elif what == "literal":
            target = rng.choice(_numbers_in(base) or ["0.1"])
            lit = rng.choice(["NaN", "Infinity", "-Infinity", "1e999", "-0", "true", "null", "\"0.1\""])
            expr = f"{base!r}.replace({target!r}, {lit!r}, 1)"
        elif what == "garbage":
            expr = rng.choice(["bytes(range(256)).decode('latin-1')", "'\\x00' * 1000", "'\\ud800'",
                               f"{base[:20]!r} + '\\xff\\xfe'", "''", "'null'", "'[]'", "'1' * 100000"])
        elif what == "note":
            expr = f"{base[:-1]!r} + ', \"note\": \"' + 'x' * {rng.choice([10 ** 5, 10 ** 6, 10 ** 7])} + '\"}}'"
        elif what == "truncate":
            expr = f"{base!r}[:{rng.randint(1, len(base) - 1)}]"
        elif what == "dup":
            expr = f"{base!r}.replace('\"kind\"', '\"kind\": \"unknown\", \"kind\"', 1)"
        elif what == "bom":
            expr = f"'\\ufeff' + {base!r}"
        else:
            expr = f"' ' * {rng.choice([10 ** 5, 10 ** 6, 10 ** 7])} + {base!r}"
        path = folder / f"spec_{i}.json"
        text = eval(expr)  # noqa: S307 - our own expression, kept as the repro
        data = text.encode("utf-8", errors="surrogatepass")
        path.write_bytes(data)
        loader = rng.choice(["load", "load_design"])
        repro = (f"open('f.json', 'w', encoding='utf-8', errors='surrogatepass').write({expr})\n"
                 f"{loader}('f.json')")
        fn = getattr(sw, loader)
        out.append(Case("spec_files", (lambda fn=fn, path=path: fn(path)), repro))
    return out


def _numbers_in(text: str) -> list[str]:
    import re

    return [m for m in re.findall(r"(?<=: )-?[0-9][0-9.e+-]*", text)]
