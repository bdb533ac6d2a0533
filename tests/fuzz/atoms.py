"""Bad values for the fuzz generators, each with the Python source that rebuilds it (for repros).

A value is drawn fresh for every case (``Atom.make()``), and its source is
remembered by ``id`` so ``src`` can write a short repro of any structure that
holds it (a spec dict, an argument list).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from decimal import Decimal
from fractions import Fraction
from pathlib import Path
from typing import Any, Callable

import numpy as np

#: Source text of values made by atoms, keyed by id (the values are kept alive by the cases that hold them).
_SOURCES: dict[int, tuple[Any, str]] = {}

#: Imports every repro assumes.
PRELUDE = ("import functools, math, json, numpy as np\nfrom fractions import Fraction\nfrom decimal import Decimal\n"
           "from pathlib import Path\nimport schedwidget as sw\nfrom schedwidget import *\n")


@dataclass(frozen=True)
class Atom:
    """One bad value: how to make it and its source."""

    source: str
    make: Callable[[], Any]

    def __call__(self) -> Any:
        v = self.make()
        if not isinstance(v, (bool, int, float, str, type(None))) or (isinstance(v, int) and abs(v) >= 10 ** 18):
            _SOURCES[id(v)] = (v, self.source)
        return v


def atom(source: str, make: Callable[[], Any] | None = None) -> Atom:
    """An atom whose value is ``eval(source)`` unless ``make`` is given."""
    if make is None:
        ns = _namespace()
        return Atom(source, lambda: eval(source, ns))  # noqa: S307 - our own constant text
    return Atom(source, make)


def _namespace() -> dict[str, Any]:
    import schedwidget

    ns = {n: getattr(schedwidget, n) for n in schedwidget.__all__}
    import functools

    ns.update({"functools": functools, "np": np, "math": math, "Fraction": Fraction, "Decimal": Decimal, "Path": Path, "float": float})
    return ns


def design_src(s: Any) -> str:
    """``repr(s)`` of a schedule, or ``from_spec(...)`` when its repr is broken (that is checked elsewhere)."""
    try:
        return repr(s)
    except Exception:  # noqa: BLE001
        from schedwidget.spec import to_spec

        return f"from_spec({src(to_spec(s))})"


def remember(value: Any, source: str) -> Any:
    """Record ``source`` as the repro text of ``value`` (for values built outside the catalogue)."""
    _SOURCES[id(value)] = (value, source)
    return value


# ------------------------------------------------------------------ catalogues
#: Numbers no parameter should accept silently (some are fine for some parameters; the runner judges outcomes).
NUMBERS = [atom(s) for s in (
    "float('nan')", "float('inf')", "float('-inf')", "-1", "-1.0", "-1e-300", "0", "0.0", "-0.0", "5e-324",
    "1e308", "1.7976931348623157e308", "2**53", "2**53 + 1", "2**53 - 1", "2**63", "2**64", "-(2**63)",
    "10**400", "-(10**400)", "10**5000 - 1", "-(10**5000)", "1.5", "0.5", "9007199254740992.0", "1e16",
    "1e300", "4.9e-324", "np.float64('nan')", "np.float32(0.1)", "np.int64(2**62)", "np.uint64(2**64 - 1)",
    "np.float64(1e308)", "np.int8(-1)", "Fraction(1, 3)", "Decimal('NaN')", "Decimal('1e400')",
    "complex(1, 0)", "1j", "True", "False", "np.bool_(True)",
)]

#: Values of the wrong type.
WRONG_TYPES = [atom(s) for s in (
    "None", "'0.1'", "''", "'nan'", "[]", "{}", "[0.1]", "[[0, 0.1]]", "{'kind': 'flat'}", "b'\\x00'",
    "(1, 2)", "{1, 2}", "'x' * 100000", "[0.1] * 3", "object()", "math", "print", "np.array([0.1, 0.2])",
    "np.array(0.1)", "np.ma.masked_array([1.0], mask=[True])", "Path('/')",
)]

#: Everything.
ANY = NUMBERS + WRONG_TYPES

#: Integer cycle counts that a restarts node must refuse or handle in bounded time.
CYCLES = [atom(s) for s in ("2**53", "2**53 - 1", "2**52 + 1", "10**12", "10**9", "10**7", "2**31", "10**6")]
#: Growth values near the edges of what restarts accepts.
GROWTHS = [1.0, 1.01, 0.99, 2.0, 0.5, 10.0, 1.0000001, 0.5000001]


# ------------------------------------------------------------------ source
def src(v: Any, budget: list[int] | None = None) -> str:
    """Short Python source for ``v`` (exact where it can be; ``...`` marks a cut, for huge structures)."""
    budget = [4000] if budget is None else budget
    known = _SOURCES.get(id(v))
    if known is not None and known[0] is v:
        return known[1]
    if budget[0] <= 0:
        return "..."
    budget[0] -= 1
    if v is None or isinstance(v, bool):
        return repr(v)
    if type(v) is int:
        return repr(v) if abs(v) < 10 ** 18 else _big(v)
    if type(v) is float:
        return f"float({str(v)!r})" if not math.isfinite(v) else repr(v)
    if type(v) is str:
        if len(v) > 60:
            return f"{v[:1]!r} * {len(v)}" if v == v[:1] * len(v) else repr(v[:40]) + " + ..."
        return repr(v)
    if isinstance(v, np.generic):
        return f"np.{type(v).__name__}({src(v.item(), budget)})"
    if isinstance(v, Path):
        return f"Path({str(v)!r})"
    if isinstance(v, (list, tuple)):
        body = _seq(v, budget)
        return f"[{body}]" if isinstance(v, list) else (f"({body},)" if len(v) == 1 else f"({body})")
    if isinstance(v, dict):
        return "{" + ", ".join(f"{src(k, budget)}: {src(x, budget)}" for k, x in v.items()) + "}"
    if isinstance(v, np.ndarray):
        if v.size <= 8:
            return f"np.array({v.tolist()!r}, dtype={v.dtype.str!r})"
        return f"<array shape={v.shape} dtype={v.dtype}>"
    text = repr(v)
    return text if len(text) <= 200 else text[:160] + " ..."


def _seq(v, budget) -> str:
    n = len(v)
    if n > 12:
        if all(x == v[0] and type(x) is type(v[0]) for x in v[:2000]) and all(x == v[0] for x in v):
            return f"*[{src(v[0], budget)}] * {n}"
        return ", ".join(src(x, budget) for x in v[:6]) + f", ... ({n} items)"
    return ", ".join(src(x, budget) for x in v)


def _big(v: int) -> str:
    sign, a = ("-", -v) if v < 0 else ("", v)
    k = a.bit_length()
    for base, e in ((2, k - 1), (2, k)):
        d = a - base ** e
        if abs(d) < 10 ** 6:
            return f"{sign}(2**{e}{d:+d})" if d else f"{sign}2**{e}"
    e10 = int(k * math.log10(2))
    for e in (e10 - 1, e10, e10 + 1):
        d = a - 10 ** e
        if abs(d) < 10 ** 6:
            return f"{sign}(10**{e}{d:+d})" if d else f"{sign}10**{e}"
    return f"<a {e10 + 1}-digit int>" if e10 > 4000 else repr(v)
