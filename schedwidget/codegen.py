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


def _f(x: float) -> str:
    """A finite number as source that reads back bit-exactly."""
    v = float(x)
    if not math.isfinite(v):
        raise ScheduleError(f"to_python: every constant must be finite, got {v!r} "
                            "(the design's lengths or rates overflow a float)")
    return repr(v)


def _plus(a: float, d: float, rest: str) -> str:
    """Source for ``a + d * rest`` (same bits: ``a - |d| * rest`` when d < 0, no ``0.0 +``)."""
    if a == 0.0:
        return f"{_f(d)} * {rest}"
    return f"{_f(a)} {'-' if d < 0 else '+'} {_f(abs(d))} * {rest}"


def _atom(e: str) -> bool:
    return _IDENT.fullmatch(e) is not None or re.fullmatch(r"[0-9.e+-]+", e) is not None


Sink = Callable[[str], str]


class _Writer:
    """Writes the body of the generated function, one node at a time."""

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
        body = ", ".join(_f(v) for v in values) + ("," if len(values) == 1 else "")
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
        getattr(self, "_" + s.kind)(s, u, bound, ind, sink)

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
        self.put(ind, f"{v} = {u} if {u} < {_f(n)} else {_f(n)}")
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
                    self.put(j, f"{'if' if i == lo else 'elif'} {u} < {_f(cuts[i])}:")
                    branch(i, j + 1)
                self.put(j, "else:")
                branch(hi, j + 1)
                return
            mid = (lo + hi + 1) // 2  # the first branch of the upper half
            self.put(j, f"if {u} < {_f(cuts[mid - 1])}:")
            tree(lo, mid - 1, j + 1)
            self.put(j, "else:")
            tree(mid, hi, j + 1)

        tree(0, len(cuts), ind)

    # ---------------------------------------------------------------- leaves
    def _flat(self, s, u, bound, ind, sink):
        self.put(ind, sink(_f(s.lr)))

    def _ramp(self, s, u, bound, ind, sink):
        x = f"({u} / {_f(s.steps)})"
        if s.curve == "linear":
            self.put(ind, sink(_plus(s.start, s.end - s.start, x)))
        elif s.curve == "geometric":
            a, b = math.log(s.start), math.log(s.end) - math.log(s.start)
            self.put(ind, sink(f"math.exp({_plus(a, b, x)})"))
        else:
            self.put(ind, sink(_plus(s.end, s.start - s.end, f"(1.0 + math.cos(math.pi * {x})) / 2.0")))

    def _cosine(self, s, u, bound, ind, sink):  # the core's order: floor + (peak - floor) / 2 * (1 + cos(u * pi / L))
        rest = f"(1.0 + math.cos({u} * {_f(math.pi / s.steps)}))"
        self.put(ind, sink(_plus(s.floor, (s.peak - s.floor) / 2.0, rest)))

    def _exp_decay(self, s, u, bound, ind, sink):
        k = u if s.every == 1 else f"{u} / {_f(s.every)}"
        k = f"math.floor({k})" if s.staircase else (k if s.every == 1 else f"({k})")
        self.put(ind, sink(f"{_f(s.peak)} * {_f(s.factor)} ** {k}"))

    def _drops(self, s, u, bound, ind, sink):
        at = [float(a) for a in s.at]
        levels = s._at(np.array([0.0, *at])).tolist()   # the core's own level after each drop
        if len(at) <= CHAIN_MAX:
            self.chain(u, ind, at, lambda i, j: self.put(j, sink(_f(levels[i]))))
            return
        self.modules.add("bisect")
        ticks, rates = self.table(ind, "at", at), self.table(ind, "level", levels)
        self.put(ind, sink(f"{rates}[bisect.bisect_right({ticks}, {u})]"))

    def _poly(self, s, u, bound, ind, sink):
        base = f"(1.0 - {u} / {_f(s.steps)})"
        self.put(ind, sink(_plus(s.floor, s.peak - s.floor, base if s.power == 1.0 else f"{base} ** {_f(s.power)}")))

    def _inv_sqrt(self, s, u, bound, ind, sink):
        w = _f(s.warmup)  # min(u / w, sqrt(w / u)) picks u / w exactly when u < w (both are 1.0 at u = w)
        self.put(ind, sink(f"{_f(s.peak)} * ({u} / {w} if {u} < {w} else math.sqrt({w} / {u}))"))

    def _triangle(self, s, u, bound, ind, sink):
        h = float(s.half_period)
        c, x = self.fresh("c"), self.fresh("x")
        self.put(ind, f"{c} = math.floor(1.0 + {u} / {_f(2.0 * h)})  # cycle number, from 1")
        self.put(ind, f"{x} = abs({u} / {_f(h)} - 2.0 * {c} + 1.0)")
        rest = f"max(0.0, 1.0 - {x})" + ("" if s.shrink == 1.0 else f" * {_f(s.shrink)} ** ({c} - 1.0)")
        self.put(ind, sink(_plus(s.low, s.high - s.low, rest)))

    def _pieces(self, xs, ys, u, ind, sink, curve: str, end: float) -> None:
        """Through knots ``xs``/``ys``: linear as ``np.interp`` (in log(rate) for 'log'), 'hold', or half cosines.

        ``end`` is the core's own value at and past the last knot.
        """
        n = len(xs)
        if curve == "hold":
            cuts, leaf = xs[1:], lambda i, j: self.put(j, sink(_f(ys[i])))
        elif curve == "cosine":  # the core clips the piece index, so the last piece runs on past its end
            cuts = xs[1:-1]

            def leaf(i, j):
                frac = f"({u} - {_f(xs[i])}) / {_f(xs[i + 1] - xs[i])}"
                self.put(j, sink(_plus(ys[i], ys[i + 1] - ys[i], f"(1.0 - math.cos(math.pi * ({frac}))) / 2.0")))
        else:
            wrap = (lambda e: f"math.exp({e})") if curve == "log" else (lambda e: e)
            slopes = [(ys[i + 1] - ys[i]) / (xs[i + 1] - xs[i]) for i in range(n - 1)]
            cuts = xs[1:]

            def leaf(i, j):
                self.put(j, sink(_f(end) if i == n - 1 else wrap(_plus(ys[i], slopes[i], f"({u} - {_f(xs[i])})"))))
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
        self.put(ind, f"if {u} >= {_f(xs[-1])}:")
        self.put(ind + 1, sink(_f(end)))
        self.put(ind, "else:")
        self.put(ind + 1, f"{i} = bisect.bisect_right({tx}, {u}) - 1")
        self.put(ind + 1, sink(wrap(f"{ty}[{i}] + {tsl}[{i}] * ({u} - {tx}[{i}])")))

    def _one_cycle(self, s, u, bound, ind, sink):
        xs, ys = (a.tolist() for a in s._knots())
        self._pieces(xs, ys, u, ind, sink, s.curve, ys[-1])

    def _knots(self, s, u, bound, ind, sink):
        xs, ys = (a.tolist() for a in s._xy())
        end = float(s._at(np.array([xs[-1]]))[0])
        if s.interp == "log":
            ys = np.log(np.asarray(ys)).tolist()
        self._pieces(xs, ys, u, ind, sink, s.interp, end)

    # ----------------------------------------------------------- combinators
    def _stages(self, s, u, bound, ind, sink):
        starts = s.starts().tolist()
        last = len(s.parts) - 1

        def branch(i, j):
            part = s.parts[i]
            if i == last:
                v = u if starts[i] == 0.0 else self.clock(f"{u} - {_f(starts[i])}", j)
                pb = None if bound is None else bound - starts[i]
            else:  # u < starts[i + 1], so this stage's clock cannot pass its length
                v = u if i == 0 else self.clock(f"{u} - {_f(starts[i])}", j)
                pb = float(part.length)
            v, pb = self.held(part, v, pb, j)
            self.emit(part, v, pb, j, sink)
        self.chain(u, ind, starts[1:], branch)

    def _warmup(self, s, u, bound, ind, sink):
        self.emit(s.as_stages(), u, bound, ind, sink)

    def _restarts(self, s, u, bound, ind, sink):
        L = float(s.target.length)
        last = None if s.cycles is None else s.cycles - 1
        k, start, ln = self.fresh("k"), self.fresh("start"), self.fresh("span")
        if s.growth == 1.0:
            q = f"math.floor({u} / {_f(L)})"
            self.put(ind, f"{k} = {q}  # cycle number, from 0" if last is None else f"{k} = min({q}, {last})")
            self.put(ind, f"{start}, {ln} = {k} * {_f(L)}, {_f(L)}")
        else:
            self._cycle_table(s, u, bound, ind, k, start, ln, last)
        # as the core: a stretched cycle is read on its inner clock in one step (one rounding, not two)
        inner = s.target._unstretched()
        Li = float(inner.length)
        if s._same_clock():  # as the core: equal cycles of an unstretched target run on the cycle clock itself
            local = self.clock(f"{u} - {start}", ind)
        else:
            local = self.clock(f"(({u} - {start}) * {_f(Li)}) / {ln}", ind)
        # Held as in the core, unless it provably cannot pass Li: inside a cycle u - start <= span, and when
        # span * Li is exact (<= 2**53) rounding is monotone, so ((u - start) * Li) / span <= (span * Li) / span = Li.
        # Otherwise the two roundings can pass Li by an ulp (a poly there gives a complex number).
        within = s.cycles is None or (bound is not None and s.length is not None and bound <= s.length)
        widest = L if s.growth <= 1.0 else (math.inf if s.length is None else float(s.length))
        exact = widest * Li <= MAX_TICKS
        v, pb = self.held(inner, local, Li if within and exact else None, ind)
        e = self.value(inner, v, pb, ind)
        self.put(ind, sink(e if s.peak_decay == 1.0 else f"{e} * {_f(s.peak_decay)} ** {k}"))

    def _cycle_table(self, s, u, bound, ind, k, start, ln, last):
        """Cycle number, start and length from a table of cycles (and a loop or closed form past it)."""
        L = float(s.target.length)
        total = math.inf if s.length is None else float(s.length)
        if s.growth > 1.0:
            starts, lens = s._table(min(bound if bound is not None else 64.0 * L, total))
            starts, lens = starts[:CYCLE_TABLE_MAX], lens[:CYCLE_TABLE_MAX]
        else:
            starts, lens = s._table(0.0)
        n, end = len(starts), float(starts[-1] + lens[-1])
        complete = s.cycles is not None and n >= s.cycles
        past = not complete and (bound is None or bound >= end)
        self.modules.add("bisect")
        ts, tl = self.table(ind, "starts", starts.tolist()), self.table(ind, "spans", lens.tolist())
        j = ind
        if past:
            self.put(ind, f"if {u} < {_f(end)}:")
            j = ind + 1
        self.put(j, f"{k} = bisect.bisect_right({ts}, {u}) - 1")
        self.put(j, f"{start}, {ln} = {ts}[{k}], {tl}[{k}]")
        if not past:
            return
        self.put(ind, "else:")
        cap = "" if last is None else f" and {k} < {last}"
        if s.growth < 1.0:  # every cycle after the table is one tick long
            extra = f"math.floor({u} - {_f(end)})"
            self.put(ind + 1, f"{k} = {n} + " + (extra if last is None else f"min({extra}, {last - n})"))
            self.put(ind + 1, f"{start}, {ln} = {_f(end)} + ({k} - {n}), 1.0")
            return
        size = f"max(1.0, math.floor({_f(L)} * {_f(s.growth)} ** {k} + 0.5))"
        self.put(ind + 1, f"{k}, {start} = {n}, {_f(end)}  # past the table: later cycles one by one")
        self.put(ind + 1, f"{ln} = {size}")
        self.put(ind + 1, f"while {u} >= {start} + {ln}{cap}:")
        self.put(ind + 2, f"{k}, {start} = {k} + 1, {start} + {ln}")
        self.put(ind + 2, f"{ln} = {size}")

    def _product(self, s, u, bound, ind, sink, op: str = "*"):
        parts = []
        for child in (s.left, s.right):
            v, pb = self.held(child, u, bound, ind)
            parts.append(self.value(child, v, pb, ind))
        self.put(ind, sink(f"{parts[0]} {op} {parts[1]}"))

    def _sum(self, s, u, bound, ind, sink):
        self._product(s, u, bound, ind, sink, "+")

    def _scale(self, s, u, bound, ind, sink):
        self.put(ind, sink(f"{self.value(s.target, u, bound, ind)} * {_f(s.factor)}"))

    def _clip(self, s, u, bound, ind, sink):
        e = self.value(s.target, u, bound, ind)
        # a conditional on a plain name costs a third of a max() call, and the factor runs once per training step
        if s.low is not None:
            e = f"{e} if {e} > {_f(s.low)} else {_f(s.low)}" if e.isidentifier() else f"max({e}, {_f(s.low)})"
        if s.high is not None:
            e = f"min({e}, {_f(s.high)})"
        self.put(ind, sink(e))

    def _stretch(self, s, u, bound, ind, sink):
        a, b = float(s.target.length), float(s.steps)
        v = self.clock(f"({u} * {_f(a)}) / {_f(b)}", ind)
        # as the core: the target is read held, since (u * a) / b can pass its length by an ulp
        v, pb = self.held(s.target, v, None if bound is None else (bound * a) / b, ind)
        self.emit(s.target, v, pb, ind, sink)


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


def _describe(s: Schedule, unit: str, spe: int | None) -> list[str]:
    n = s.length
    # an open-ended design is described over twice its longest part (at most 2**53 ticks, the longest clock)
    span = n if n is not None else min(MAX_TICKS, max([10_000] + [2 * c.length for c in s.walk() if c.length is not None]))
    peak, peak_at, exact = _peak(s, span)
    per = ("one tick is one optimizer update: call scheduler.step() after every optimizer.step()"
           if unit == "step" else "one tick is one epoch: call scheduler.step() once after each epoch")
    ep = f" ({n / spe:g} epochs of {spe:,} steps)" if spe and unit == "step" and n is not None else ""
    first = "the first update" if unit == "step" else "the first epoch"
    lines = [f"Learning rate at tick t (an int >= 0; t = 0 is {first}).", "",
             f"Unit: {unit} ({per}).",
             f"Budget: {n:,} {unit}s{ep}." if n is not None else "Budget: open-ended (no planned length).",
             f"Peak: {peak!r} at {unit} {peak_at:,}" + ("" if exact else " (read from a grid of ticks)")
             + ("." if n is not None else f" (first {span:,} {unit}s)."),
             (f"Past the end (t >= {n:,}) the rate stays at {s(n)!r}, the value the design reaches at t = {n:,}."
              if n is not None else "Past the end: never ends; the formula runs on.")]
    design = repr(s)
    if len(design) > 600:
        design = design[:597] + "..."
    lines += ["", "Generated by schedwidget from:"] + ["    " + x for x in textwrap.wrap(design, 84)]
    return lines


def function_source(s: Schedule, name: str, unit: str = "step", steps_per_epoch: int | None = None,
                    doc: bool = True) -> tuple[str, set[str]]:
    """The function's source and the modules it imports (no import lines)."""
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
        w.put(1, f"u = float(t) if t < {int(n)} else {_f(n)}  # past the end the rate holds")
    w.emit(s, "u", None if n is None else float(n), 1, lambda e: f"return {e}")
    head = [f"def {name}(t):"]
    if doc:
        text = _describe(s, unit, steps_per_epoch)
        head += ['    """' + text[0]] + [("    " + x).rstrip() for x in text[1:]] + ['    """']
    return "\n".join(head + w.lines) + "\n", w.modules

