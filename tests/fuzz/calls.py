"""Call generators: bad factory arguments, bad ticks, bad factor states, bad metric histories and CSVs.

The factory generator walks ``schedwidget.__all__``: a factory named after a
registered kind gets the parameters of a valid design of that kind, any other
function gets a valid baseline derived from its signature (parameter names and
annotations), and then one or two arguments are replaced by bad values.  A new
public function joins with a generic baseline.
"""

from __future__ import annotations

import inspect
import json
import os
import random
from pathlib import Path
from typing import Any

import numpy as np

import schedwidget as sw
from schedwidget.schedule import Schedule
from schedwidget.spec import KINDS

from . import atoms
from .atoms import atom, design_src, src
from .checks import Broken, check, check_factor, rate, rates, run_source
from .designs import design
from .runner import Case

#: Public names that are result or error types, not calls that take user input.
NOT_CALLS = {"Schedule", "ScheduleError", "Facts", "PlateauReplay", "Design", "json_schema"}
#: Arguments that only tune a message or are internal (never mutated).
QUIET = {"owner"}


def _valid_schedule(rng: random.Random, finite: bool | None = None, extreme: float = 0.08) -> Schedule:
    s = design(rng, depth=rng.choice([0, 1, 2]), extreme=extreme, finite=finite)
    atoms.remember(s, design_src(s))
    return s


def _baseline(rng: random.Random, name: str, fn: Any, folder: Path) -> tuple[list, dict]:
    """Valid positional and keyword arguments for public callable ``name``."""
    if name in KINDS:
        s = design(rng, depth=1, extreme=0.1, kind=name)
        sig = inspect.signature(fn)
        args: list = []
        kwargs: dict = {}
        for pname, p in sig.parameters.items():
            if p.kind == p.VAR_POSITIONAL:
                args = [atoms.remember(c, design_src(c)) for c in s.children()]
            elif hasattr(s, pname):
                v = getattr(s, pname)
                kwargs[pname] = atoms.remember(v, design_src(v)) if isinstance(v, Schedule) else v
        return args, kwargs
    sig = inspect.signature(fn)
    kwargs = {}
    s = _valid_schedule(rng)
    n = s.length
    for pname, p in sig.parameters.items():
        ann = str(p.annotation)
        if pname in QUIET:
            continue
        required = p.default is inspect.Parameter.empty
        if pname in ("s", "target", "schedule") or (ann.startswith("Schedule") and required):
            kwargs[pname] = s
        elif pname == "base":
            kwargs[pname] = None if rng.random() < 0.6 else _valid_schedule(rng)
        elif pname in ("base_lr", "start_lr", "lr"):
            kwargs[pname] = rng.choice([0.1, 1e-3, 3e-4, 1.0])
        elif pname == "steps" and name == "scale_for_batch":
            kwargs[pname] = None if rng.random() < 0.7 else rng.randint(1, 10 ** 6)
        elif pname == "steps":
            kwargs[pname] = (n if n is not None else rng.randint(1, 10 ** 5)) if rng.random() < 0.8 else None
            if p.default is inspect.Parameter.empty and kwargs[pname] is None:
                kwargs[pname] = n or 100
        elif pname == "groups":
            kwargs[pname] = None if rng.random() < 0.5 else [1.0, rng.choice([0.1, 10.0, 0.0])]
        elif pname == "steps_per_epoch":
            kwargs[pname] = None if rng.random() < 0.5 else rng.choice([1, 100, 1150])
        elif pname in ("from_batch", "to_batch", "batch", "samples", "epochs"):
            kwargs[pname] = rng.choice([1, 3, 96, 128, 256, 1000, 1024, 4096, 147_200])
        elif pname in ("metric", "source"):
            kwargs[pname] = [round(rng.random(), 4) for _ in range(rng.randint(1, 40))]
        elif pname == "d":
            kwargs[pname] = sw.to_spec(s)
        elif pname == "path":
            f = folder / f"base_{rng.randrange(10 ** 9)}.json"
            if name in ("load", "load_design"):
                sw.save(s, f)
            kwargs[pname] = str(f)
        elif pname == "multiplier":
            kwargs[pname] = rng.choice([1.0, 0.1, 10.0])
        elif p.default is not inspect.Parameter.empty:
            if rng.random() < 0.3 and p.default is None:
                continue
            kwargs[pname] = p.default
        else:  # a new public function: the suite says it has no baseline for this argument
            kwargs[pname] = None
    return [], kwargs


#: Bad values for arguments by name (beside the generic catalogue).
SPECIAL = {
    "name": [atom(s) for s in ("'self'", "'t'", "'__x'", "'_x'", "'lr at'", "''", "'class'", "'print'", "'math'",
                                "'torch'", "'x' * 5000", "'lr_at\\n'", "'é'", "'BASE_LR'", "'make_scheduler'")],
    "unit": [atom(s) for s in ("'steps'", "'Epoch'", "None", "'epoch'", "''")],
    "groups": [atom(s) for s in ("[]", "[float('nan')]", "[2**64]", "'1,2'", "{1: 2}", "[1.0, -1.0]",
                                  "(m for m in [1.0])", "[1.0] * 100000", "[10**400]", "np.array([1.0, 0.1])",
                                  "np.ma.masked_array([1.0], mask=[True])", "np.array(0.1)")],
    "rule": [atom(s) for s in ("'Linear'", "'sqrt '", "None")],
    "keep": [atom(s) for s in ("'sample'", "None")],
    "goal": [atom(s) for s in ("'maximize'", "'MAX'", "None")],
}


def paths(folder: Path, write: bool) -> list[atoms.Atom]:
    """Bad paths: for a function that writes, only places inside ``folder`` (the suite may run as root)."""
    f = str(folder)
    names = [f, f + "/missing/x.json", f + "/x\x00.json", f + "/" + "x" * 300]
    safe = [atom(repr(x)) for x in names] + [atom(f"Path({f!r})"), atom("3"), atom("None"),
                                             atom(repr((f + "/x.json").encode())), atom("Path('')"), atom("['x.json']")]
    if write:
        return safe
    return safe + [atom(s) for s in ("'/'", "'/nonexistent/x.json'", "'/dev/null'", "'/dev/zero'",
                                     f"{f + '/fifo'!r}", "'/proc/self/mem'", "'0.1'")]


def factories(rng: random.Random, n: int, folder: Path) -> list[Case]:
    """Every public callable with one or two arguments replaced by bad values (10 % left valid)."""
    names = [x for x in sw.__all__ if x not in NOT_CALLS and callable(getattr(sw, x))]
    if not (folder / "fifo").exists():
        os.mkfifo(folder / "fifo")
    out = []
    for i in range(n):
        name = names[i % len(names)]
        fn = getattr(sw, name)
        args, kwargs = _baseline(rng, name, fn, folder)
        keys = [k for k in kwargs if k not in QUIET]
        if keys and rng.random() < 0.9:
            for k in rng.sample(keys, min(len(keys), rng.choice([1, 1, 2]))):
                if k == "path":
                    pool = paths(folder, write=name == "save")
                else:
                    pool = SPECIAL.get(k, []) + atoms.ANY
                kwargs[k] = rng.choice(pool)()
        elif args and rng.random() < 0.5:
            args[rng.randrange(len(args))] = rng.choice(atoms.ANY)()
        call = ", ".join([src(a) for a in args] + [f"{k}={src(v)}" for k, v in kwargs.items()])
        chk = check
        if name == "to_python":  # the text must run and its function give clean rates, whatever the name
            chk = run_source("function", kwargs.get("name", "lr_at"))
        elif name == "plateau_source":
            chk = run_source("plateau", kwargs.get("name", "PlateauRate"))
        out.append(Case("factories", (lambda fn=fn, a=args, k=kwargs: fn(*a, **k)), f"{name}({call})", chk))
    return out


# ------------------------------------------------------------------ ticks
TICKS = [atom(s) for s in (
    "np.array(5)", "np.array(5.0)", "np.array(-1)", "np.array(2**53 + 1, dtype=object)", "np.int64(7)",
    "np.uint64(2**64 - 1)", "np.array([2**63 - 1])", "np.array([2**53 + 1])", "np.array([2**53], dtype=np.uint64)",
    "[[1, 2], [3]]", "[1, [2]]", "np.array([1, 'a'], dtype=object)", "np.array([1, 2], dtype=object)",
    "np.array(['1', '2'])", "np.array([1 + 0j])", "np.array([True, False])", "True", "False",
    "np.ma.masked_array([1, 2, 3], mask=[False, True, False])", "np.ma.masked_array(5, mask=True)",
    "np.ma.masked_array([1.0, float('nan')], mask=[False, True])", "2**53", "2**53 + 1", "2**64", "10**5000 - 1",
    "-(10**400)", "-1", "1.0", "1.5", "float('nan')", "float('inf')", "-0.0", "np.float16(3)", "np.float32(16777217)",
    "np.float64(2**53)", "np.array([1.5])", "np.array([float('nan')])", "np.array([], dtype=np.int64)",
    "np.array([], dtype=float)", "np.zeros((0, 3), dtype=np.int64)", "np.arange(6).reshape(2, 3)",
    "np.arange(24).reshape(2, 3, 4)", "np.arange(10)[::-1]", "np.arange(10, dtype=np.int8)",
    "np.array([-1, 1])", "np.array([200], dtype=np.uint8)", "np.array(['2020-01-01'], dtype='datetime64[D]')",
    "np.array([1, 2], dtype=np.timedelta64)", "None", "'5'", "b'5'", "[1, 2, 3]", "(0, 1)", "[]", "[1.0, 2.0]",
    "[1, 2.5]", "[True]", "[None]", "range(5)", "{1, 2}", "{'t': 1}", "Fraction(3, 1)", "Decimal('3')",
    "Decimal('NaN')", "complex(3, 0)", "np.arange(2 * 10**6)", "np.full(3, 2**53)", "np.array([[0]], order='F')",
    "np.arange(12).reshape(3, 4)[:, ::2]", "np.array([0, 1]).view(np.float64)", "memoryview(b'ab')",
    "np.array([1.0, 2.0], dtype='>f8')", "np.array([1, 2], dtype='>i8')", "np.longdouble(5)",
)]


def bad_ticks(rng: random.Random, n: int) -> list[Case]:
    """Valid designs called with bad ticks: 0-d, ragged, object/str/complex/bool, masked, huge, floats."""
    out = []
    for i in range(n):
        s = _valid_schedule(rng)
        a = TICKS[i % len(TICKS)]

        def call(s=s, a=a):
            t = a()
            v = s(t)
            arr = np.asarray(t) if not isinstance(t, np.ma.MaskedArray) else np.ma.getdata(t)
            if isinstance(v, np.ndarray):
                rates("s(t) on array ticks", v, arr.shape, "the given ticks")
            else:
                rate("s(t)", v, "the given tick")
            return None

        out.append(Case("bad_ticks", call, f"s = {design_src(s)}\ns({a.source})"))
    return out


# ------------------------------------------------------------------ factor states
def _corrupt_design(rng: random.Random, state: dict, other: Schedule) -> tuple[Any, str]:
    import json

    choice = rng.randrange(10)
    if choice == 0:
        return json.loads(state["design"]), "json.loads(state['design'])"
    if choice == 1:
        return [state["design"]], "[state['design']]"
    if choice == 2:
        return None, "None"
    if choice == 3:  # another valid design, in the canonical form a factor saves
        text = json.dumps(sw.to_spec(other), sort_keys=True, separators=(",", ":"))
        return text, f"json.dumps(to_spec({design_src(other)}), sort_keys=True, separators=(',', ':'))"
    if choice == 4:
        return state["design"][: len(state["design"]) // 2], "state['design'][:len(state['design']) // 2]"
    if choice == 5:
        return state["design"].replace("0.", "1" * 5000 + ".", 1), "state['design'].replace('0.', '1' * 5000 + '.', 1)"
    if choice == 6:
        return ('{"version": 1, "schedule": ' + '[' * 10 ** 5 + ']' * 10 ** 5 + '}',
                "'{\"version\": 1, \"schedule\": ' + '[' * 10**5 + ']' * 10**5 + '}'")
    if choice == 7:
        return state["design"].replace('"version":1', '"version":1,"note":1', 1), "state['design'] with a bad note"
    if choice == 8:
        return 12, "12"
    t = state["design"].replace("0.", "-0.", 1)
    return t, "state['design'].replace('0.', '-0.', 1)"


def factor_states(rng: random.Random, n: int) -> list[Case]:
    """RateFactor state dicts with corrupted fields, loaded by ``__dict__.update`` as torch's LambdaLR does."""
    out = []
    while len(out) < n:
        s = _valid_schedule(rng, extreme=0.0)
        base_lr = rng.choice([0.1, 1e-3, 1.0])
        groups = None if rng.random() < 0.7 else [1.0, 0.1]
        other = _valid_schedule(rng, extreme=0.0)
        try:
            probe = sw.torch_factor(s, base_lr, groups)
        except Exception:  # noqa: BLE001 - a design the factor refuses has no state to corrupt
            continue
        state = dict((probe[0] if isinstance(probe, list) else probe).__dict__)
        if not isinstance(state.get("design"), str):
            state["design"] = json.dumps(sw.to_spec(s), sort_keys=True, separators=(",", ":"))
        corrupt: dict[str, Any] = {}
        lines = []
        fields = [k for k in state] + ["extra"]
        benign = rng.random() < 0.2  # the ordinary resume: the same state loaded back, maybe respelled
        for key in [] if benign else rng.sample(fields, rng.choice([1, 1, 2])):
            if key == "design":
                corrupt[key], text = _corrupt_design(rng, state, other)
            elif key == "extra":
                corrupt[rng.choice(["__call__", "_cache", "lr_lambda"])], text = 1, "1"
                key = next(iter(k for k in corrupt if k not in state))
            else:
                a = rng.choice(atoms.NUMBERS + atoms.WRONG_TYPES[:8])
                corrupt[key], text = a(), a.source
            lines.append(f"state[{key!r}] = {text}")
        if benign and rng.random() < 0.5 and isinstance(state.get("design"), str):
            import json

            corrupt["design"] = json.dumps(json.loads(state["design"]), indent=1)  # same design, other spacing
            lines.append("state['design'] = json.dumps(json.loads(state['design']), indent=1)")
        swap = "design" in corrupt and isinstance(corrupt["design"], str) and corrupt["design"] != state["design"] \
            and _loads_as_other(corrupt["design"], state["design"])

        def call(s=s, base_lr=base_lr, groups=groups, state=state, corrupt=corrupt, swap=swap):
            made = sw.torch_factor(s, base_lr, groups)
            factor = made[0] if isinstance(made, list) else made
            factor.__dict__.update({**state, **corrupt})  # what LambdaLR.load_state_dict does
            values = [factor(t) for t in (0, 1, 10, 10 ** 6)]
            if swap:
                raise Broken("RateFactor after load_state_dict", "a different design loaded silently",
                             f"rates {values[:2]} come from the checkpoint's design, not the one constructed")
            check_factor("RateFactor(t) after load_state_dict", factor)
            return None

        gsrc = "" if groups is None else f", groups={groups!r}"
        pick = "[0]" if groups else ""
        repro = (f"s = {design_src(s)}\nfactor = torch_factor(s, {base_lr!r}{gsrc}){pick}\n"
                 "state = dict(factor.__dict__)\n"
                 + "\n".join(lines) + "\nfactor.__dict__.update(state)  # LambdaLR.load_state_dict\n"
                 "[factor(t) for t in (0, 1, 10, 10**6, 2**53)]")
        out.append(Case("factor_states", call, repro))
    return out


def _loads_as_other(text: str, mine: str) -> bool:
    """Whether ``text`` is a valid design spec other than ``mine`` (the design-swap case)."""
    import json

    try:
        theirs = sw.from_spec(json.loads(text))
    except Exception:  # noqa: BLE001 - only a loadable, different design counts as a swap
        return False
    return theirs != sw.from_spec(json.loads(mine))


# ------------------------------------------------------------------ metrics
CELLS = ["0.5", "nan", "NaN", "inf", "-inf", "1e999", "'9' * 5000", "'1' * 200000", "''", "' '", "'\"'", "'a,b'",
         "'\\x00'", "'0x10'", "'1_000'", "'١'", "'\\ufeff0.1'", "'1e-400'", "'-0'", "'true'"]

HISTORIES = [atom(s) for s in (
    "[]", "[float('nan')]", "[0.5, float('nan'), 0.6]", "[0.5, float('inf')]", "[10**400]", "[10**5000 - 1]",
    "[2**1024]", "[0.5, '0.6']", "[None]", "[True, False]", "[complex(1, 0)]", "[[0.5]]",
    "np.array([])", "np.array([[0.5, 0.6]])", "np.array(0.5)", "np.array([0.5, 0.6], dtype=object)",
    "np.array(['0.5'])", "np.array([1 + 0j])", "np.array([True, False])",
    "np.ma.masked_array([0.5, 0.6, 0.7], mask=[False, True, False])", "np.ma.masked_array([], mask=[])",
    "np.array([1e308, 1e308])", "np.array([-1e308, 1e308] * 100)", "np.array([2**63 - 1], dtype=np.int64)",
    "np.array([2**64 - 1], dtype=np.uint64)", "np.arange(10**6) / 10**6", "[0.5] * 10**5",
    "list(np.random.default_rng(0).random(10**5))", "(x for x in [0.5])", "{0.5, 0.6}", "{'a': 0.5}", "'0.5,0.6'",
    "range(10)", "np.float64(0.5)", "Decimal('0.5')", "[Decimal('NaN')]", "[Fraction(1, 3)]", "[np.float16(0.5)]",
    "np.array([0.5, 0.6], dtype=np.float16)", "np.array(['2020-01-01'], dtype='datetime64[D]')",
    "bytearray(b'a\\n0.5\\n')", "memoryview(b'a\\n0.5\\n')",
)]


def _csv_text(rng: random.Random) -> tuple[str, str]:
    """CSV text and its source: huge fields, huge ints, NaN, quotes, binary garbage, odd shapes."""
    kind = rng.randrange(9)
    if kind == 0:
        cell = rng.choice(CELLS)
        cell_src = cell if cell.startswith("'") else repr(cell)
        return f"'epoch,val\\n0,0.5\\n1,' + {cell_src} + '\\n'", "a bad cell"
    if kind == 1:
        return f"'epoch,val\\n' + ''.join(f'{{i}},0.5\\n' for i in range({rng.choice([10**3, 10**4, 10**5])}))", "long"
    if kind == 2:
        return f"'val\\n\"' + 'x' * {rng.choice([131072, 200000, 10**6])} + '\"\\n0.5\\n'", "a huge quoted field"
    if kind == 3:
        return "bytes(range(256)).decode('latin-1') * 4", "garbage"
    if kind == 4:
        return rng.choice(["''", "'#only a comment\\n'", "'epoch,val\\n'", "'\\n\\n\\n'", "'val'", "','",
                           "'\\ufeff'"]), "empty"
    if kind == 5:
        return rng.choice(["'a,b\\n1\\n'", "'a,b\\n1,2,3\\n'", "'\"a\\n0.5'", "'a\\r0.5\\r0.6'", "'a\\n\"0.5'",
                           "'a;b\\n0.5;0.6\\n'", "'a\\n0.5\\n' * 3"]), "odd shape"
    if kind == 6:
        return f"'val\\n' + '9' * {rng.choice([400, 4300, 5000, 10**5])} + '\\n'", "huge number"
    if kind == 7:
        return f"',' * {rng.choice([10**4, 10**5, 10**6])} + '\\n' + '0.5,' * 3", "many columns"
    return "'a\\x00b\\n0.5\\n'", "NUL"


def metrics(rng: random.Random, n: int, folder: Path) -> list[Case]:
    """read_metric on hostile CSVs (text, bytes, files) and arrays; replay_plateau on hostile histories."""
    out = []
    for i in range(n):
        route = rng.randrange(5)
        if route in (0, 1):
            expr, _ = _csv_text(rng)
            text = eval(expr)  # noqa: S307 - our own expression, kept as the repro
            column = rng.choice([None, None, None, "val", 0, 1, -1, 2 ** 64, 10 ** 5000 - 1, True, 1.0, "VAL"])
            colsrc = src(column)
            if route == 0:
                data = text.encode("utf-8", errors="surrogatepass")
                out.append(Case("metrics", (lambda d=data, c=column: sw.read_metric(d, c)),
                                f"read_metric(({expr}).encode('utf-8', 'surrogatepass'), {colsrc})"))
            else:
                path = folder / f"metric_{i}.csv"
                path.write_bytes(text.encode("utf-8", errors="surrogatepass"))
                out.append(Case("metrics", (lambda p=path, c=column: sw.read_metric(p, c)),
                                f"open('m.csv', 'w', encoding='utf-8', errors='surrogatepass')"
                                          f".write({expr})\nread_metric(Path('m.csv'), {colsrc})"))
        elif route == 2:
            a = rng.choice(HISTORIES)
            out.append(Case("metrics", (lambda a=a: sw.read_metric(a())), f"read_metric({a.source})"))
        else:
            a = rng.choice(HISTORIES + [atom("[0.5, 0.6, 0.6, 0.6, 0.6, 0.7]")] * 6)
            kwargs: dict[str, Any] = {}
            for name in rng.sample(["start_lr", "factor", "patience", "tolerance", "wait_after_drop", "floor",
                                    "goal", "relative", "base"], rng.choice([0, 1, 2])):
                pool = SPECIAL.get(name, []) + atoms.NUMBERS + atoms.WRONG_TYPES[:6]
                if name == "base":
                    pool = [atom(f"warmup(flat(0.1), {k})") for k in (1, 5, 2 ** 53)] + [atom("flat(0.0)")] + pool
                kwargs[name] = rng.choice(pool)()
            start = kwargs.pop("start_lr", 0.1)
            call = ", ".join([f"{k}={src(v)}" for k, v in kwargs.items()])
            fn = sw.replay_plateau if route == 3 else sw.plateau_source
            out.append(Case("metrics", (lambda fn=fn, a=a, st=start, k=kwargs: fn(a(), st, **k) if fn is
                                        sw.replay_plateau else fn(st, **k)),
                            (f"replay_plateau({a.source}, {src(start)}, {call})" if route == 3
                             else f"plateau_source({src(start)}, {call})"),
                            check if route == 3 else run_source("plateau", "PlateauRate")))
    return out
