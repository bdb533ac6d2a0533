"""What every leaf shape shares: the frozen-value decorator, the declaration helpers and the leaf base class.

A leaf is a formula of one real clock ``u`` on ``[0, steps]`` with its parameters declared once.
The kinds themselves live in ``shapes`` (closed forms) and ``pieces`` (piecewise and cyclic shapes).
"""

from __future__ import annotations

from dataclasses import dataclass

from .formula import Formula
from .schedule import Schedule, check_top, complain, monotone_range, param

__all__ = ["node", "Leaf", "ClosedForm", "RATE_SOFT", "TICK_SOFT"]

node = dataclass(frozen=True, slots=True, repr=False, kw_only=True)

RATE_SOFT = (1e-6, 1.0)
TICK_SOFT = (1, 100_000)


def _rate(doc: str, default=dataclass, positive: bool = False):
    return param(default, kind="rate", lo=0.0, lo_open=positive, soft=RATE_SOFT, log=True, doc=doc)


def _steps(doc: str = "length of the shape in ticks", optional: bool = False):
    if optional:
        return param(None, kind="ticks", lo=1, soft=TICK_SOFT, optional=True,
                     doc=doc + "; None for open-ended")
    return param(kind="ticks", lo=1, soft=TICK_SOFT, doc=doc,
                 hint="a shape needs at least one tick; use flat() for a constant rate")


class _Leaf(Schedule):
    __slots__ = ()

    @property
    def length(self) -> int | None:
        return self.steps  # type: ignore[attr-defined]

    def _range(self, a, b):
        return monotone_range(self._at, a, b)

    def _top(self) -> float:
        # every leaf formula stays within its rate parameters (a geometric ramp within an ulp)
        return max((v for n, p in self.params().items() if p.kind == "rate" and (v := getattr(self, n)) is not None),
                   default=0.0)

    def _validate(self) -> None:
        super()._validate()
        for n, p in self.params().items():
            if p.kind == "rate" and getattr(self, n) is not None:
                check_top(self.kind, n, getattr(self, n), getattr(self, n), "a rate")


def _floor_not_above_peak(s) -> None:
    if s.floor > s.peak:
        raise complain(s.kind, "floor", s.floor, f"<= peak = {s.peak!r}",
                       "a decay cannot end above its peak; for a rising curve use ramp(..., curve='cosine')")


class ClosedForm(_Leaf):
    """A leaf whose formula is one closed form (``formula.Formula``): numpy evaluation and generated source
    both come from ``_formula()``, so they apply the same operations in the same order."""

    __slots__ = ("_tree",)  # the formula, built on first use and kept (not a field: equality never sees it)

    def _formula(self) -> Formula:
        raise NotImplementedError

    def _tree_of(self) -> Formula:
        try:
            return self._tree
        except AttributeError:
            tree = self._formula()
            object.__setattr__(self, "_tree", tree)
            return tree

    def _at(self, u):
        return self._tree_of().evaluate(u)

    def _source(self, w, u, bound, ind, sink):
        w.put(ind, sink(self._tree_of().source(u)))


#: The public name of the leaf base class: a new leaf kind subclasses it (see DEVELOPERS.md, "How a node works").
Leaf = _Leaf
