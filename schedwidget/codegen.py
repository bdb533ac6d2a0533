"""Code generation behind ``schedwidget.export``: a schedule as one stdlib-only Python function.

The writer walks the node tree and writes each node's formula operation by
operation in the same order as the core (``_at``/``_held``), so the function
equals ``s(t)`` up to the last bit of a library ``cos``/``exp``/``pow``.  Only
validated numbers (written by ``repr(float)``) and validated identifiers ever
reach the source.
"""

from __future__ import annotations

import builtins
import keyword
import math
import re
import textwrap
from typing import Callable

import numpy as np

from .schedule import MAX_TICKS, Schedule, ScheduleError, complain

__all__ = ["check_name", "function_source", "UNITS"]

_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
#: Stems of the generated code's own local names (``r1``, ``u2``, ``starts1``...); each is followed by a number.
HELPER_STEMS = ("r", "u", "c", "x", "k", "i", "start", "span", "at", "level", "xs", "ys", "slope", "starts", "spans")
_HELPER = re.compile("(?:" + "|".join(HELPER_STEMS) + r")[0-9]+")
#: Names the generated code itself uses: its modules, the builtins it calls, its argument ``t`` and clock ``u``.
#: A function of one of these names would shadow them (helpers of the form ``<stem><number>`` are refused too).
TAKEN = frozenset({"math", "bisect", "t", "u"}) | frozenset(dir(builtins))
#: Above this many pieces a lookup table and ``bisect`` replace an if/elif chain.
CHAIN_MAX = 8
#: Most restart cycles written out as a table for an unbounded clock (later cycles are found by a loop).
CYCLE_TABLE_MAX = 1024
#: Most entries in one table of generated source (knots points, drops ticks): its compile time grows with it
#: (65,536 knots: about 0.2 s to write and 0.4 s to compile here).  Shrinking restarts tables stay far below
#: (a cycle table ends where cycles reach one tick: at most about 3,700 cycles with growth >= 0.5 and <= 0.99).
TABLE_MAX = 2 ** 16
TABLE_OWNERS = {"at": ("drops", "at"), "level": ("drops", "at"), "xs": ("knots", "points"),
                "ys": ("knots", "points"), "slope": ("knots", "points"), "starts": ("restarts", "cycles"),
                "spans": ("restarts", "cycles")}
UNITS = ("step", "epoch")


def check_name(owner: str, name: object, taken: frozenset[str] = TAKEN) -> str:
    """``name`` if it is a plain ASCII identifier that is not a keyword, a dunder or taken; else ScheduleError.

    >>> check_name("to_python", "lr_at")
    'lr_at'
    """
    plain = (isinstance(name, str) and name.isascii() and _IDENT.fullmatch(name) is not None
             and not keyword.iskeyword(name) and not keyword.issoftkeyword(name)
             and not name.startswith("__"))  # dunders, and __x, which a class body would mangle
    if not plain:
        raise complain(owner, "name", name, "a plain Python identifier (ASCII letters, digits and _, "
                       "not starting with a digit or with __, not a keyword)", "for example 'lr_at'")
    if name in taken or _HELPER.fullmatch(name):
        raise complain(owner, "name", name, "a name the generated code does not use itself",
                       "math, bisect, t, u, Python's builtins, the generated helpers (r1, u1, starts1, ...: "
                       f"{', '.join(HELPER_STEMS)} followed by a number) and the snippet's own names are taken; "
                       "try 'lr_at'")
    return name  # type: ignore[return-value]


def num(x: float) -> str:
    """A finite number as source that reads back bit-exactly."""
    v = float(x)
    if not math.isfinite(v):
        raise ScheduleError(f"to_python: every constant must be finite, got {v!r} "
                            "(the design's lengths or rates overflow a float)")
    return repr(v)


def plus(a: float, d: float, rest: str) -> str:
    """Source for ``a + d * rest`` (same bits: ``a - |d| * rest`` when d < 0, no ``0.0 +``)."""
    if a == 0.0:
        return f"{num(d)} * {rest}"
    return f"{num(a)} {'-' if d < 0 else '+'} {num(abs(d))} * {rest}"


def _atom(e: str) -> bool:
    return _IDENT.fullmatch(e) is not None or re.fullmatch(r"[0-9.e+-]+", e) is not None


Sink = Callable[[str], str]


class _Writer:
    """Writes the body of the generated function, one node at a time."""

    #: Most restart cycles a node writes as a table (later cycles: a loop, which branch-free code cannot have).
    cycle_table_max = CYCLE_TABLE_MAX

    def __init__(self) -> None:
        self.lines: list[str] = []
        self.count: dict[str, int] = {}
        self.modules = {"math"}

    def fresh(self, stem: str) -> str:
        assert stem in HELPER_STEMS, f"{stem!r}: add it to HELPER_STEMS so that check_name refuses it"
        self.count[stem] = self.count.get(stem, 0) + 1
        return f"{stem}{self.count[stem]}"

    def put(self, ind: int, text: str) -> None:
        self.lines.append("    " * ind + text)

    def table(self, ind: int, stem: str, values) -> str:
        if len(values) > TABLE_MAX:
            owner, what = TABLE_OWNERS[stem]
            raise complain(owner, what, f"{len(values):,} entries", f"at most {TABLE_MAX:,} entries to be written "
                           "as source (to_python, torch_factor, to_torch)",
                           "generated code keeps them in one table, compiled on every import; the design itself "
                           "evaluates any length in schedwidget")
        name = self.fresh(stem)
        body = ", ".join(num(v) for v in values) + ("," if len(values) == 1 else "")
        wrapped = textwrap.wrap(body, 96 - 4 * ind, break_on_hyphens=False)
        if len(wrapped) == 1:
            self.put(ind, f"{name} = ({wrapped[0]})")
        else:
            self.put(ind, f"{name} = (")
            for line in wrapped:
                self.put(ind + 1, line)
            self.put(ind, ")")
        return name

    # -------------------------------------------------------------- protocol
    def emit(self, s: Schedule, u: str, bound: float | None, ind: int, sink: Sink) -> None:
        """Statements whose every branch ends in ``sink(<s._at(u)>)``; ``bound`` caps ``u`` (None: unknown)."""
        s._source(self, u, bound, ind, sink)

    def value(self, s: Schedule, u: str, bound: float | None, ind: int) -> str:
        """An expression for ``s._at(u)``: inline when it fits one line, else a result variable."""
        mark, saved = len(self.lines), dict(self.count)
        var = self.fresh("r")
        self.emit(s, u, bound, ind, lambda e: f"{var} = {e}")
        if len(self.lines) == mark + 1:
            expr = self.lines.pop().strip()[len(var) + 3:]
            self.count = saved
            return expr if _atom(expr) else f"({expr})"
        return var

    def held(self, s: Schedule, u: str, bound: float | None, ind: int) -> tuple[str, float | None]:
        """The clock ``s._held`` reads: ``u`` clamped to ``s.length`` unless ``bound`` shows it cannot pass it."""
        n = s.length
        if n is None or (bound is not None and bound <= n):
            return u, bound
        v = self.fresh("u")
        # a conditional costs less than a min() call, and the factor runs once per training step
        self.put(ind, f"{v} = {u} if {u} < {num(n)} else {num(n)}")
        return v, float(n)

    def clock(self, expr: str, ind: int) -> str:
        if _IDENT.fullmatch(expr):
            return expr
        v = self.fresh("u")
        self.put(ind, f"{v} = {expr}")
        return v

    def chain(self, u: str, ind: int, cuts, branch: Callable[[int, int], None]) -> None:
        """``if u < cuts[0]: branch 0 / elif u < cuts[1]: branch 1 ... / else: branch len(cuts)``.

        Past CHAIN_MAX cuts the chain becomes a balanced tree of ``if``/``else`` halves (an ``elif`` chain of
        thousands of stages nests too deep for Python's compiler), so a branch is found in log2(len(cuts)) tests.
        """
        def tree(lo: int, hi: int, j: int) -> None:  # branches lo..hi, separated by cuts[lo:hi]
            if hi - lo <= CHAIN_MAX:
                if hi == lo:
                    branch(lo, j)
                    return
                for i in range(lo, hi):
                    self.put(j, f"{'if' if i == lo else 'elif'} {u} < {num(cuts[i])}:")
                    branch(i, j + 1)
                self.put(j, "else:")
                branch(hi, j + 1)
                return
            mid = (lo + hi + 1) // 2  # the first branch of the upper half
            self.put(j, f"if {u} < {num(cuts[mid - 1])}:")
            tree(lo, mid - 1, j + 1)
            self.put(j, "else:")
            tree(mid, hi, j + 1)

        tree(0, len(cuts), ind)

    def pieces(self, xs, ys, u, ind, sink, curve: str, end: float) -> None:
        """Through knots ``xs``/``ys``: linear as ``np.interp`` (in log(rate) for 'log'), 'hold', or half cosines.

        ``end`` is the core's own value at and past the last knot.
        """
        n = len(xs)
        if curve == "hold":
            cuts, leaf = xs[1:], lambda i, j: self.put(j, sink(num(ys[i])))
        elif curve == "cosine":  # the core clips the piece index, so the last piece runs on past its end
            cuts = xs[1:-1]

            def leaf(i, j):
                frac = f"({u} - {num(xs[i])}) / {num(xs[i + 1] - xs[i])}"
                self.put(j, sink(plus(ys[i], ys[i + 1] - ys[i], f"(1.0 - math.cos(math.pi * ({frac}))) / 2.0")))
        else:
            wrap = (lambda e: f"math.exp({e})") if curve == "log" else (lambda e: e)
            slopes = [(ys[i + 1] - ys[i]) / (xs[i + 1] - xs[i]) for i in range(n - 1)]
            cuts = xs[1:]

            def leaf(i, j):
                self.put(j, sink(num(end) if i == n - 1 else wrap(plus(ys[i], slopes[i], f"({u} - {num(xs[i])})"))))
        if len(cuts) <= CHAIN_MAX:
            self.chain(u, ind, list(cuts), leaf)
            return
        assert curve != "cosine", "half-cosine pieces come only from one_cycle's four knots"
        self.modules.add("bisect")
        tx, ty = self.table(ind, "xs", xs), self.table(ind, "ys", ys)
        if curve == "hold":
            self.put(ind, sink(f"{ty}[bisect.bisect_right({tx}, {u}) - 1]"))
            return
        tsl = self.table(ind, "slope", slopes)
        i = self.fresh("i")
        self.put(ind, f"if {u} >= {num(xs[-1])}:")
        self.put(ind + 1, sink(num(end)))
        self.put(ind, "else:")
        self.put(ind + 1, f"{i} = bisect.bisect_right({tx}, {u}) - 1")
        self.put(ind + 1, sink(wrap(f"{ty}[{i}] + {tsl}[{i}] * ({u} - {tx}[{i}])")))



#: Budgets up to this many ticks are read tick by tick for the docstring's peak; longer ones through ``facts``.
PEAK_EXACT = 2 ** 20


def _peak(s: Schedule, n: int) -> tuple[float, int, bool]:
    """Peak rate over ``n`` ticks, where it first occurs, and whether every tick was read."""
    if n > PEAK_EXACT:
        from .facts import facts

        f = facts(s, steps=n, exact_up_to=2 ** 16)
        return f.peak, f.peak_at, f.exact
    best, at = -math.inf, 0
    for a in range(0, n, 2 ** 16):
        y = s(np.arange(a, min(n, a + 2 ** 16)))
        j = int(np.argmax(y))
        if y[j] > best:
            best, at = float(y[j]), a + j
    return best, at, True


#: What a generated function can be the schedule of: its docstring's first words and the word for its value.
SUBJECTS = {"rate": ("Learning rate", "rate"),
            "momentum": ("Momentum (SGD momentum or the first Adam beta)", "momentum"),
            "beta2": ("Second Adam beta", "beta2"),
            "weight_decay": ("Weight decay", "weight decay")}


def _subject(what: object) -> tuple[str, str]:
    if not isinstance(what, str) or what not in SUBJECTS:
        raise complain("to_python", "what", what, f"one of {', '.join(map(repr, SUBJECTS))}")
    return SUBJECTS[what]


def _describe(s: Schedule, unit: str, spe: int | None, what: str = "rate", per: str | None = None,
              title: str | None = None) -> list[str]:
    """The generated function's docstring, line by line, for the schedule of ``what`` (a ``SUBJECTS`` key).

    ``per`` replaces the words on what one tick is (torch's ``scheduler.step()`` by default) and ``title`` the
    first line, for exports that run in other training loops.
    """
    head, word = _subject(what)
    n = s.length
    # an open-ended design is described over twice its longest part (at most 2**53 ticks, the longest clock)
    span = n if n is not None else min(MAX_TICKS, max([10_000] + [2 * c.length for c in s.walk() if c.length is not None]))
    peak, peak_at, exact = _peak(s, span)
    per = per or ("one tick is one optimizer update: call scheduler.step() after every optimizer.step()"
           if unit == "step" else "one tick is one epoch: call scheduler.step() once after each epoch")
    ep = f" ({n / spe:g} epochs of {spe:,} steps)" if spe and unit == "step" and n is not None else ""
    first = "the first update" if unit == "step" else "the first epoch"
    from .facts import warmup_of  # lazy, as _peak's facts: the readouts import the sampler, not the writer

    warm = warmup_of(s)
    if warm is None:
        warm_line = []
    elif warm[0] == "over":
        warm_line = [f"Warmup: laid over the first {warm[1]:,.0f} {unit}s; every later tick (drops, restarts) "
                     "counts from the start of the run."]
    else:
        warm_line = [f"Warmup: {warm[1]:,.0f} {unit}s before the schedule, whose own ticks start after it."]
    lines = [title or f"{head} at tick t (an int >= 0; t = 0 is {first}).", "",
             f"Unit: {unit} ({per}).",
             f"Budget: {n:,} {unit}s{ep}." if n is not None else "Budget: open-ended (no planned length).",
             *warm_line,
             f"Peak: {peak!r} at {unit} {peak_at:,}" + ("" if exact else " (read from a grid of ticks)")
             + ("." if n is not None else f" (first {span:,} {unit}s)."),
             (f"Past the end (t >= {n:,}) the {word} stays at {s(n)!r}, the value the design reaches at t = {n:,}."
              if n is not None else "Past the end: never ends; the formula runs on.")]
    design = repr(s)
    if len(design) > 600:
        design = design[:597] + "..."
    lines += ["", "Generated by schedwidget from:"] + ["    " + x for x in textwrap.wrap(design, 84)]
    from .fingerprint import docstring_lines  # the design report shows the same mark: code and report can be matched

    return lines + docstring_lines(s, unit)


def function_source(s: Schedule, name: str, unit: str = "step", steps_per_epoch: int | None = None,
                    doc: bool = True, what: str = "rate") -> tuple[str, set[str]]:
    """The function's source and the modules it imports (no import lines).

    ``what`` is the hyperparameter ``s`` schedules (a ``SUBJECTS`` key: ``"rate"``, ``"momentum"``,
    ``"beta2"``, ``"weight_decay"``); the docstring names it.
    """
    word = _subject(what)[1]
    if steps_per_epoch is not None and (isinstance(steps_per_epoch, bool) or not isinstance(steps_per_epoch, int)
                                        or not 1 <= steps_per_epoch <= MAX_TICKS):
        raise complain("to_python", "steps_per_epoch", steps_per_epoch, "a whole number >= 1 and <= 2**53 or None")
    w = _Writer()
    n = s.length
    w.put(1, "if type(t) is not int:")
    w.put(2, "if isinstance(t, float) and t.is_integer():")
    w.put(3, "t = int(t)")
    w.put(2, "elif isinstance(t, bool) or not hasattr(t, '__index__'):")
    w.put(3, f"raise ValueError(f'{name}: t must be a whole number of {unit}s (an int >= 0), got {{t!r}}')")
    w.put(2, "else:")
    w.put(3, "t = t.__index__()  # numpy and torch integers")
    w.put(1, "if t < 0:")
    first = "the first update" if unit == "step" else "the first epoch"
    w.put(2, f"raise ValueError(f'{name}: t must be >= 0 (t = 0 is {first}), got {{t!r}}')")
    if n is None:  # as the core: above 2**53 ticks are not exact on a float clock (and 10**400 is no float at all)
        w.put(1, f"if t > {MAX_TICKS}:")
        w.put(2, f"raise ValueError(f'{name}: t must be <= 2**53 (above that, ticks are not exact on a float clock), "
                 "got {t!r}')")
        w.put(1, "u = float(t)")
    else:
        w.put(1, f"u = float(t) if t < {int(n)} else {num(n)}  # past the end the {word} holds")
    w.emit(s, "u", None if n is None else float(n), 1, lambda e: f"return {e}")
    head = [f"def {name}(t):"]
    if doc:
        text = _describe(s, unit, steps_per_epoch, what)
        head += ['    """' + text[0]] + [("    " + x).rstrip() for x in text[1:]] + ['    """']
    return "\n".join(head + w.lines) + "\n", w.modules

