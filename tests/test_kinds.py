"""Issue 11: each kind owns what it knows; kinds register themselves; clean values (Sum and Product siblings,
Facts by keyword, restarts reporting every cycle's joins)."""

from __future__ import annotations

import dataclasses
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import schedwidget as sw
from schedwidget.combine import Product, Sum
from schedwidget.schedule import KINDS, Schedule

PACKAGE = Path(sw.__file__).parent
NODE_MODULES = {"schedule.py", "leaf.py", "shapes.py", "pieces.py", "stages.py", "restarts.py", "combine.py"}
#: No module outside the node classes is exempt: the budget arithmetic asks warmups, stages, restarts, scales, clips,
#: open flat rates and knots tables through the protocol (``_warmed``, ``_stage_parts``, ``_pointwise_target``,
#: ``_constant_open``, ``_ends_at_last_entry``).
ELSEWHERE: dict[str, set[str]] = {}


class TestRegistry:
    """Every kind registers itself when its class is defined."""

    def test_the_spec_registry_is_the_class_registry(self):
        from schedwidget import spec

        assert spec.KINDS is KINDS
        assert list(KINDS) == ["flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle",
                               "one_cycle", "knots", "stages", "warmup", "restarts", "product", "sum", "scale",
                               "clip", "stretch"]

    def test_registered_class_is_the_final_slotted_one(self):
        for kind, cls in KINDS.items():
            assert cls.kind == kind and "__slots__" in cls.__dict__ and dataclasses.is_dataclass(cls)

    def test_a_second_class_of_a_taken_kind_is_refused(self):
        with pytest.raises(TypeError, match="kind 'flat' is already registered by schedwidget.shapes.Flat"):
            type("Impostor", (Schedule,), {"kind": "flat", "__slots__": ()})
        assert KINDS["flat"] is sw.shapes.Flat

    def test_no_dispatch_on_node_classes_outside_the_node_modules(self):
        # the grep: isinstance() against a node class appears only where the node classes live
        names = [c.__name__ for c in KINDS.values()] + ["_Leaf", "_Pair"]
        found, seen = [], set()
        for path in sorted(PACKAGE.rglob("*.py")):  # every module, the designer's (widget/) included
            name = path.relative_to(PACKAGE).as_posix()
            seen.add(name)
            if name in NODE_MODULES:
                continue
            asked = [n for n in names if n not in ELSEWHERE.get(name, ())]
            for i, line in enumerate(path.read_text().splitlines(), 1):
                if "isinstance(" in line and any(f"{n}," in line or f"{n})" in line for n in asked):
                    found.append(f"{name}:{i}: {line.strip()}")
        assert found == []
        assert {"budget.py", "rebatch.py", "proportion.py", "widget/form.py", "widget/stages.py"} <= seen  # the walk reaches the designer's modules


class TestSiblings:
    """Sum and Product are siblings: neither is a kind of the other."""

    def test_neither_is_the_other(self):
        a, b = sw.flat(0.1, steps=10), sw.cosine(0.1, steps=10)
        assert isinstance(a * b, Product) and not isinstance(a * b, Sum)
        assert isinstance(a + b, Sum) and not isinstance(a + b, Product)
        assert repr(a + b) == f"({a!r} + {b!r})" and repr(a * b) == f"({a!r} * {b!r})"

    def test_each_states_its_own_operand_words(self):
        assert Sum.params()["left"].doc == "first term" and Product.params()["left"].doc == "first factor"


class TestFactsByKeyword:
    def test_positional_construction_is_refused(self):
        f = sw.facts(sw.cosine(0.1, steps=100))
        values = [getattr(f, x.name) for x in dataclasses.fields(f)]
        with pytest.raises(TypeError):
            type(f)(*values)
        assert type(f)(**{x.name: getattr(f, x.name) for x in dataclasses.fields(f)}) == f


class TestRestartsJoins:
    """restarts reports the joins of every cycle's inner stages (Loshchilov & Hutter 2017 cycles, our warmup)."""

    def test_every_cycle_of_a_warmup(self):
        # issue 11: restarts(warmup(cosine(...), 10), cycles=3) reported no joins; the warmup alone reports one
        s = sw.restarts(sw.warmup(sw.cosine(0.1, steps=90), 10), cycles=3)
        assert sw.facts(s).joins == (10, 110, 210)
        assert sw.facts(sw.warmup(sw.cosine(0.1, steps=90), 10)).joins == (10,)

    def test_growing_cycles_move_the_joins_in_proportion(self):
        s = sw.restarts(sw.warmup(sw.cosine(0.1, steps=90), 10), cycles=3, growth=2.0)
        # cycles of 100, 200, 400 ticks starting at 0, 100, 300: the join at 10 % of each
        assert sw.facts(s).joins == (10, 120, 340)

    def test_open_ended_restarts_cap_their_joins(self):
        s = sw.restarts(sw.warmup(sw.cosine(0.1, steps=9), 1))
        joins = s._joins()
        assert joins.size == sw.schedule.EDGE_CAP and joins[0] == 1.0 and np.all(np.diff(joins) == 10.0)

    def test_drawn_joins_of_every_cycle(self):
        from schedwidget.sample import trace

        s = sw.restarts(sw.warmup(sw.cosine(0.1, steps=90), 10), cycles=3)
        assert trace(s).joins.tolist() == [10, 110, 210]


class TestNodeReadouts:
    """The drawing window, half-life and plateau lead-in come from the nodes themselves."""

    def test_windows(self):
        from schedwidget.schedule import window

        assert window(sw.exp_decay(0.1, 0.5) + sw.drops(0.1, at=(30, 60))) == 75
        assert window(sw.flat(0.1) * sw.inv_sqrt(1.0, warmup=400)) == 4000
        assert window(sw.warmup(sw.triangle(0.0, 1.0, half_period=10), 5)) == 65
        assert window(sw.exp_decay(0.1, 0.5).clip(low=0.01)) == 7

    def test_lead_in_of_a_stage_list_starting_with_a_falling_ramp_is_zero(self):
        from schedwidget.plateau import lead_in

        assert lead_in(sw.ramp(0.1, 0.0, 5) >> sw.flat(0.1)) == 0
        assert lead_in(sw.ramp(0.0, 0.1, 5) >> sw.flat(0.1)) == 5
        assert lead_in(sw.ramp(0.0, 0.1, 5)) == 0  # a bare ramp is a design, not a warmup stage

    def test_repeat_and_warmup_answer_through_the_protocol(self):
        c = sw.cosine(0.1, steps=10)
        r, w = sw.restarts(c, cycles=2), sw.warmup(c, steps=3)
        assert r._repeated() == c and w._warmed() == c
        assert r._warmed() is None and w._repeated() is None and c._repeated() is None and c._warmed() is None
        assert sw.restarts(w, cycles=2)._warmed() is None  # a warmup inside restarts is not the design's warmup

    def test_half_life_through_a_stretch_not_through_restarts(self):
        s = sw.exp_decay(0.1, 0.5, steps=10)
        assert sw.facts(s.stretch(20)).half_life == pytest.approx(2.0)
        assert sw.facts(sw.restarts(s, cycles=2)).half_life is None


def test_import_has_no_node_dispatch_left_in_readout_modules():
    """The readout modules import no node class (they ask nodes through the protocol)."""
    code = ("import schedwidget.facts as f, schedwidget.svg as s, schedwidget.plateau as p; "
            "from schedwidget.schedule import KINDS; "
            "print(sorted(n for m in (f, s, p) for n, v in vars(m).items() if v in KINDS.values()))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


class TestParamKinds:
    """Parameter kinds are small classes: check, schema, encode, decode and the designer's control hint."""

    def test_every_declared_parameter_has_a_kind_object_and_a_control(self):
        from schedwidget.params import PARAM_KINDS

        controls = {"log_slider", "slider", "int_slider", "length", "dropdown", "checkbox", "ticklist", "points",
                    "schedule", "schedules"}
        for cls in KINDS.values():
            for p in cls.params().values():
                assert p.kind_of is PARAM_KINDS[p.kind] and p.control in controls

    def test_controls_follow_the_declaration(self):
        from schedwidget.shapes import Cosine, ExpDecay

        cos, exp = Cosine.params(), ExpDecay.params()
        # a length is a text box of ticks, epochs or a share of the run (the designer shows no slider for it)
        assert cos["peak"].control == "log_slider" and cos["steps"].control == "length"
        assert exp["factor"].control == "slider" and exp["staircase"].control == "checkbox"
        r = sw.restarts(sw.flat(0.1, steps=1)).params()
        assert r["target"].control == "schedule" and r["cycles"].control == "int_slider"
        # every rate is a log slider whose text box takes a share of the peak, a rate of 0 included
        assert sw.warmup(sw.flat(0.1, steps=2), 1).params()["start"].control == "log_slider"
        assert cos["peak"].kind_of.share_of == "peak" and cos["steps"].kind_of.share_of == "run"
        assert exp["factor"].kind_of.share_of is None

    def test_a_kind_scales_the_ticks_it_holds(self):
        from schedwidget.shapes import Drops, Knots

        d, k, r = Drops.params(), Knots.params(), sw.restarts(sw.flat(0.1, steps=1)).params()
        assert d["steps"].kind_of.scaled(d["steps"], 10, 0.25, None) == 3  # 2.5 rounds half up
        assert d["steps"].kind_of.scaled(d["steps"], 1, 0.1, None) == 1  # a length stays >= its lower bound
        assert d["at"].kind_of.scaled(d["at"], (10, 30), 0.5, None) == (5, 15)
        assert k["points"].kind_of.scaled(k["points"], ((0, 0.1), (9, 0.2)), 0.5, None) == ((0, 0.1), (5, 0.2))
        assert d["factor"].kind_of.scaled(d["factor"], 0.5, 3.0, None) == 0.5  # not a tick: kept
        assert r["cycles"].kind_of.scaled(r["cycles"], 4, 3.0, None) == 4  # a count is not a length
        assert r["target"].kind_of.scaled(r["target"], "child", 2.0, lambda c: c * 2) == "childchild"

    def test_an_unknown_kind_is_refused_at_declaration(self):
        from schedwidget.params import Param

        with pytest.raises(TypeError, match="Param: kind must be one of rate, ratio, ticks"):
            Param(kind="percent", doc="x")

    def test_encode_and_decode_are_inverse(self):
        from schedwidget.pieces import Knots
        from schedwidget.shapes import Drops

        p, q = Knots.params()["points"], Drops.params()["at"]
        pts = ((0, 0.1), (10, 0.01))
        assert p.encode(pts, None) == [[0, 0.1], [10, 0.01]] and p.decode([[0, 0.1], [10, 0.01]], None, "") == pts
        assert q.encode((3, 5), None) == [3, 5] and q.decode([3, 5], None, "") == (3, 5)


class TestOneFormulaTwoOutputs:
    """Closed-form leaves describe their formula once; numpy evaluation and generated source come from it."""

    def closed(self):
        from schedwidget.leaf import ClosedForm

        return [c for c in KINDS.values() if issubclass(c, ClosedForm)]

    def test_the_closed_forms_write_neither_output_by_hand(self):
        assert sorted(c.kind for c in self.closed()) == ["cosine", "exp_decay", "flat", "poly", "ramp"]
        for c in self.closed():
            assert "_at" not in c.__dict__ and "_source" not in c.__dict__ and "_formula" in c.__dict__

    def test_source_of_the_tree_equals_its_evaluation(self):
        import math

        designs = [sw.flat(0.1), sw.ramp(0.0, 0.1, 7), sw.ramp(0.01, 0.1, 7, curve="geometric"),
                   sw.ramp(0.1, 0.0, 7, curve="cosine"), sw.cosine(0.1, 0.001, steps=9),
                   sw.exp_decay(0.1, 0.9, every=3), sw.exp_decay(0.1, 0.9, staircase=False),
                   sw.poly(0.1, 0.0, steps=9, power=0.5), sw.poly(0.1, 0.01, steps=9)]
        u = np.linspace(0.0, 9.0, 37)
        for s in designs:
            expr = s._tree_of().source("u")
            by_source = [eval(expr, {"math": math, "u": float(x)}) for x in u]
            # equal up to one ulp of a library cos/exp/pow (math's and numpy's may differ there), as codegen promises
            assert np.allclose(by_source, s._at(u), rtol=5e-16, atol=0.0), repr(s)

    def test_the_caller_clock_is_never_overwritten(self):
        u = np.arange(10.0)
        for s in (sw.cosine(0.1, steps=9), sw.poly(0.1, steps=9), sw.exp_decay(0.1, 0.5, staircase=False)):
            s._at(u)
            assert u.tolist() == list(range(10))
