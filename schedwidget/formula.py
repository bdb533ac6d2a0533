"""One formula, two outputs: a small expression tree of a leaf's closed form, evaluated by numpy and written
as generated source from the same nodes, so the two cannot drift apart.

A leaf builds its formula from ``clock()`` (the real clock ``u``), numbers and the operators ``+ - * / **``
and ``cos``, ``exp``, ``floor``, ``sqrt``; ``evaluate(u)`` gives the float64 array (in place where a node owns its
intermediate array, as hand-written numpy would) and ``source(u)`` the expression for ``math``-only code.
Both apply the same operations in the same order; the differential tests compare them at every tick.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = ["Formula", "clock", "const", "cos", "exp", "floor", "sqrt"]

_NP = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide, "**": np.power}
_COMMUTES = {"+", "*"}


class Formula:
    """A node of the expression tree."""

    __slots__ = ()

    def _eval(self, u: np.ndarray) -> tuple[Any, bool]:
        """The value (an array or a float) and whether this node owns the array (may overwrite it)."""
        raise NotImplementedError

    def source(self, u: str) -> str:
        """The same value as a Python expression of the clock name ``u`` (needs only ``math``)."""
        raise NotImplementedError

    def evaluate(self, u: np.ndarray) -> np.ndarray:
        value, _ = self._eval(u)
        return np.broadcast_to(np.asarray(value, dtype=np.float64), np.shape(u)).copy() if np.ndim(value) == 0 \
            else value

    # operators build the tree (a plain number becomes a constant)
    def __add__(self, other: Any) -> Formula:
        return _bin("+", self, other)

    def __radd__(self, other: Any) -> Formula:
        return _bin("+", other, self)

    def __sub__(self, other: Any) -> Formula:
        return _bin("-", self, other)

    def __rsub__(self, other: Any) -> Formula:
        return _bin("-", other, self)

    def __mul__(self, other: Any) -> Formula:
        return _bin("*", self, other)

    def __rmul__(self, other: Any) -> Formula:
        return _bin("*", other, self)

    def __truediv__(self, other: Any) -> Formula:
        return _bin("/", self, other)

    def __pow__(self, other: Any) -> Formula:
        return _bin("**", self, other)

    def __rpow__(self, other: Any) -> Formula:
        return _bin("**", other, self)


class _Clock(Formula):
    __slots__ = ()

    def _eval(self, u):
        return u, False  # the caller's array: never overwritten

    def source(self, u: str) -> str:
        return u


class _Const(Formula):
    __slots__ = ("value",)

    def __init__(self, value: float) -> None:
        self.value = float(value)

    def _eval(self, u):
        return self.value, False

    def source(self, u: str) -> str:
        if not math.isfinite(self.value):
            raise ValueError(f"a formula constant must be finite, got {self.value!r}")
        return repr(self.value)


class _Bin(Formula):
    __slots__ = ("op", "left", "right")

    def __init__(self, op: str, left: Formula, right: Formula) -> None:
        self.op, self.left, self.right = op, left, right

    def _eval(self, u):
        a, own_a = self.left._eval(u)
        b, own_b = self.right._eval(u)
        f = _NP[self.op]
        if own_a:
            return f(a, b, out=a), True
        if own_b and self.op in _COMMUTES:
            return f(b, a, out=b), True  # a + b == b + a and a * b == b * a, bit for bit
        out = f(a, b)
        return out, np.ndim(out) > 0

    def source(self, u: str) -> str:
        return f"({self.left.source(u)} {self.op} {self.right.source(u)})"


class _Call(Formula):
    __slots__ = ("name", "arg")

    _NP = {"cos": np.cos, "exp": np.exp, "floor": np.floor, "sqrt": np.sqrt}

    def __init__(self, name: str, arg: Formula) -> None:
        self.name, self.arg = name, arg

    def _eval(self, u):
        a, own = self.arg._eval(u)
        f = self._NP[self.name]
        if own:
            return f(a, out=a), True
        out = f(a)
        return out, np.ndim(out) > 0

    def source(self, u: str) -> str:
        return f"math.{self.name}({self.arg.source(u)})"


def _term(x: Any) -> Formula:
    return x if isinstance(x, Formula) else _Const(x)


def _bin(op: str, a: Any, b: Any) -> Formula:
    a, b = _term(a), _term(b)
    # x + 0.0, x * 1.0, x ** 1.0 and x / 1.0 are x itself (no operation: both outputs skip it)
    if op == "+" and isinstance(a, _Const) and a.value == 0.0:
        return b
    if op in ("+", "-") and isinstance(b, _Const) and b.value == 0.0:
        return a
    if op in ("*", "/", "**") and isinstance(b, _Const) and b.value == 1.0:
        return a
    if op == "*" and isinstance(a, _Const) and a.value == 1.0:
        return b
    return _Bin(op, a, b)


def clock() -> Formula:
    """The real clock ``u``."""
    return _Clock()


def const(x: float) -> Formula:
    return _Const(x)


def cos(x: Formula) -> Formula:
    return _Call("cos", _term(x))


def exp(x: Formula) -> Formula:
    return _Call("exp", _term(x))


def floor(x: Formula) -> Formula:
    return _Call("floor", _term(x))


def sqrt(x: Formula) -> Formula:
    """The square root (numpy's and ``math.sqrt`` are both correctly rounded, so the two outputs agree bit for bit)."""
    return _Call("sqrt", _term(x))
