"""Branch-free lowering: the stdlib function body every kind writes (``_source``), rewritten for arrays.

Each kind writes its formula once, as scalar source (``Schedule._source``).  This module turns that body into
straight-line code over an array module (numpy, ``jax.numpy`` or ``keras.ops``): every ``if``/``else`` becomes
both branches computed and a ``where`` that picks one (if-conversion), ``a if c else b`` a ``where``,
``math.f`` the module's ``f``, ``max``/``min``/``abs`` their elementwise forms, ``bisect`` a ``searchsorted`` and a
table lookup a ``take``.  Nothing here asks which kind a node is: it reads only the generated text, so a new kind
gets its array, JAX and Keras forms from its one ``_source``.

Only numbers (written by ``repr(float)``), validated names and the writer's own helper names reach the text.
The rewritten body applies the scalar body's operations in the same order, so with numpy it gives the core's
values (the core evaluates with numpy too).  The writer passes a bound on every clock (2**53 at most), so
restart tables cover the whole clock and no loop is written.
"""

from __future__ import annotations

import ast
import math
import textwrap
from dataclasses import dataclass

from .codegen import TABLE_MAX, _Writer, num
from .schedule import MAX_TICKS, Schedule

__all__ = ["Target", "NUMPY", "JAX", "KERAS", "lower"]


@dataclass(frozen=True)
class Target:
    """How one array module spells the operations the lowered body needs (``m`` is the module's name)."""

    m: str
    table: str  # a tuple of floats -> an array of the clock's float type
    exact_div: bool = False  # XLA: divide by a runtime value, never by a constant (see _Expr.visit_BinOp)

    def call(self, op: str) -> str:
        return f"{self.m}.{op}"


NUMPY = Target("np", "np.asarray")
JAX = Target("jnp", "jnp.asarray", exact_div=True)
KERAS = Target("ops", "ops.convert_to_tensor", exact_div=True)

_MATH = {"floor", "cos", "exp", "sqrt", "log"}
_BUILTINS = {"max": "maximum", "min": "minimum", "abs": "abs"}


class _ArrayWriter(_Writer):
    """The scalar writer with every clock bounded: restart tables reach the bound, so no loop is needed."""

    cycle_table_max = TABLE_MAX

    def emit(self, s, u, bound, ind, sink):
        # every clock inside a design stays within about 2**53 (the outer clock is clamped to the length or
        # refused above 2**53); an unknown bound is read as that, so restart tables cover every cycle
        super().emit(s, u, float(MAX_TICKS) if bound is None else bound, ind, sink)


class _Expr(ast.NodeTransformer):
    """Rewrites one scalar expression for arrays, reading renamed variables through ``env``."""

    def __init__(self, target: Target, env: dict[str, str], sizes: dict[str, int], clock: str) -> None:
        self.t, self.env, self.sizes, self.clock = target, env, sizes, clock

    def visit_BinOp(self, node: ast.BinOp) -> ast.expr:
        node = self.generic_visit(node)  # type: ignore[assignment]
        if self.t.exact_div and isinstance(node.op, ast.Div) and isinstance(node.right, ast.Constant):
            # XLA turns x / c into x * (1 / c): u / 33.0 at u = 33 came out 1.0000000000000002, and a poly's
            # (1 - u / 33) ** 0.9 nan at its end.  A divisor XLA cannot fold (u * 0.0 + c is c exactly for
            # every finite clock) keeps the correctly rounded division the core does.
            zero = ast.BinOp(ast.Name(self.clock, ast.Load()), ast.Mult(), ast.Constant(0.0))
            node.right = ast.BinOp(zero, ast.Add(), node.right)
        return node

    def _fn(self, name: str) -> ast.expr:
        return ast.parse(self.t.call(name), mode="eval").body

    def visit_Name(self, node: ast.Name) -> ast.expr:
        return ast.Name(self.env.get(node.id, node.id), ast.Load())

    def visit_Attribute(self, node: ast.Attribute) -> ast.expr:
        if isinstance(node.value, ast.Name) and node.value.id == "math" and node.attr == "pi":
            return ast.Constant(math.pi)
        raise AssertionError(f"unexpected attribute in generated source: {ast.unparse(node)}")

    def visit_IfExp(self, node: ast.IfExp) -> ast.expr:
        return ast.Call(self._fn("where"), [self.visit(node.test), self.visit(node.body), self.visit(node.orelse)], [])

    def visit_Subscript(self, node: ast.Subscript) -> ast.expr:  # a table read: table[index]
        # every branch is computed on every tick, so an index may leave the table where its branch is not
        # taken: clipped, it reads a value that np.where drops (an index error in numpy, TensorFlow)
        table = self.visit(node.value)
        assert isinstance(table, ast.Name) and table.id in self.sizes, ast.unparse(node)
        index = ast.Call(self._fn("clip"), [self.visit(node.slice), ast.Constant(0),
                                             ast.Constant(self.sizes[table.id] - 1)], [])
        return ast.Call(self._fn("take"), [table, index], [])

    def visit_Call(self, node: ast.Call) -> ast.expr:
        f, args = node.func, [self.visit(a) for a in node.args]
        assert not node.keywords, ast.unparse(node)
        if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name):
            if f.value.id == "math" and f.attr in _MATH:
                return ast.Call(self._fn(f.attr), args, [])
            if f.value.id == "bisect" and f.attr == "bisect_right":
                return ast.Call(self._fn("searchsorted"), args, [ast.keyword("side", ast.Constant("right"))])
        if isinstance(f, ast.Name) and f.id in _BUILTINS:
            assert len(args) == 2 or f.id == "abs", ast.unparse(node)
            return ast.Call(self._fn(_BUILTINS[f.id]), args, [])
        raise AssertionError(f"unexpected call in generated source: {ast.unparse(node)}")


def _numbers(node: ast.Tuple) -> bool:
    """Whether a tuple holds only numbers (``-2.5`` is a minus sign on a constant): a table."""
    def number(e):
        return isinstance(e, ast.Constant) or (isinstance(e, ast.UnaryOp) and isinstance(e.op, ast.USub)
                                               and isinstance(e.operand, ast.Constant))
    return all(number(e) for e in node.elts)


class _Lowering:
    """If-conversion of the scalar body: every name is assigned once; a branch's names meet in a ``where``."""

    RESULT = "rate"  # the value a ``return`` hands back (a local name: the scalar body never uses it)

    def __init__(self, target: Target, clock: str) -> None:
        self.t, self.clock = target, clock
        self.lines: list[str] = []
        self.used: dict[str, int] = {}
        self.sizes: dict[str, int] = {}  # table name -> entries

    def bind(self, name: str, text: str) -> str:
        count = self.used.get(name, 0) + 1
        self.used[name] = count
        new = name if count == 1 else f"{name}_{count}"
        self.lines.append(f"{new} = {text}")
        return new

    def expr(self, node: ast.expr, env: dict[str, str]) -> str:
        return ast.unparse(_Expr(self.t, env, self.sizes, self.clock).visit(node))

    def table(self, name: str, values: list[float]) -> str:
        self.sizes[name] = len(values)
        body = ", ".join(num(v) for v in values) + ("," if len(values) == 1 else "")
        wrapped = textwrap.wrap(body, 92, break_on_hyphens=False)
        if len(wrapped) == 1:
            return self.bind(name, f"{self.t.table}(({wrapped[0]}))")
        self.lines.append(f"{name} = {self.t.table}((")  # tables are named once by the writer (fresh names)
        self.lines += ["    " + line for line in wrapped] + ["))"]
        self.used[name] = 1
        return name

    def block(self, body: list[ast.stmt], env: dict[str, str]) -> dict[str, str]:
        env = dict(env)
        for st in body:
            if isinstance(st, ast.Return):
                env[self.RESULT] = self.bind(self.RESULT, self.expr(st.value, env))
            elif isinstance(st, ast.Assign):
                (target,) = st.targets
                if isinstance(target, ast.Name) and isinstance(st.value, ast.Tuple) and _numbers(st.value):
                    env[target.id] = self.table(target.id, [float(ast.literal_eval(e)) for e in st.value.elts])
                elif isinstance(target, ast.Name):
                    env[target.id] = self.bind(target.id, self.expr(st.value, env))
                else:  # a, b = x, y: both read the names as they were
                    assert isinstance(target, ast.Tuple) and isinstance(st.value, ast.Tuple), ast.unparse(st)
                    texts = [self.expr(v, env) for v in st.value.elts]
                    for name, text in zip(target.elts, texts):
                        env[name.id] = self.bind(name.id, text)
            elif isinstance(st, ast.If):
                test = self.expr(st.test, env)
                if_env, else_env = self.block(st.body, env), self.block(st.orelse, env)
                for name in dict.fromkeys([*if_env, *else_env]):
                    a, b = if_env.get(name), else_env.get(name)
                    if a == b:
                        continue
                    if a is None or b is None:  # set in one branch only: read only there (the scalar body
                        env[name] = a or b       # would fail otherwise)
                        continue
                    env[name] = self.bind(name, f"{self.t.call('where')}({test}, {a}, {b})")
            else:
                raise AssertionError(f"unexpected statement in generated source: {ast.unparse(st)}")
        return env


def lower(s: Schedule, target: Target, clock: str = "u") -> tuple[list[str], str]:
    """Branch-free statements computing ``s._at(clock)`` elementwise, and the name that holds the rate.

    ``clock`` must already hold the clamped real clock (``min(t, length)``); it stays <= 2**53.
    """
    w = _ArrayWriter()
    n = s.length
    w.emit(s, clock, float(MAX_TICKS) if n is None else float(n), 1, lambda e: f"return {e}")
    tree = ast.parse("def f():\n" + "\n".join(w.lines) + "\n")
    body = tree.body[0].body  # type: ignore[attr-defined]
    low = _Lowering(target, clock)
    low.used[clock] = 1
    env = low.block(body, {})
    return low.lines, env[_Lowering.RESULT]
