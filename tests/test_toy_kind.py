"""Adding a kind is one class: a toy kind defined here, in the test file only, gets evaluation, a spec
round trip, schema validation, generated source equal at every tick, an SVG and designer controls without
touching the package.

The class below is the worked example of DEVELOPERS.md ("How a node works"), word for word.
"""

from __future__ import annotations

from typing import ClassVar

import numpy as np
import pytest

import schedwidget as sw
from schedwidget.schedule import KINDS
from schedwidget.svg import render_svg


def define_toy():
    # --- the worked example (DEVELOPERS.md) -------------------------------------------------------
    from schedwidget.codegen import num
    from schedwidget.leaf import Leaf, node
    from schedwidget.schedule import complain, param

    @node
    class Halfway(Leaf):
        """``high`` for the first half of ``steps`` ticks, ``low`` from the middle on."""

        kind: ClassVar[str] = "halfway"
        high: float = param(kind="rate", lo=0.0, soft=(1e-6, 1.0), log=True, doc="rate in the first half")
        low: float = param(kind="rate", lo=0.0, soft=(1e-6, 1.0), log=True, doc="rate from the middle on")
        steps: int = param(kind="ticks", lo=2, soft=(2, 100_000), doc="length in ticks")

        def __post_init__(self) -> None:
            self._validate()
            if self.low > self.high:
                raise complain("halfway", "low", self.low, f"<= high = {self.high!r}")

        def _at(self, u):                      # the formula on the real clock u (numpy, no loop)
            return np.where(u < self.steps / 2, self.high, self.low)

        def _edges(self, hi):                  # where it may jump, up to hi
            half = self.steps / 2
            return np.array([half]) if half <= hi else np.empty(0)

        def _source(self, w, u, bound, ind, sink):   # the same formula as generated source
            w.put(ind, sink(f"{num(self.high)} if {u} < {num(self.steps / 2)} else {num(self.low)}"))
    # --- end of the worked example ------------------------------------------------------------------
    return Halfway


@pytest.fixture(scope="module")
def Halfway():
    cls = define_toy()
    yield cls
    del KINDS["halfway"]  # the registry is shared by the whole test session: leave it as the package ships it


@pytest.fixture
def designs(Halfway):
    toy = Halfway(high=0.1, low=0.01, steps=9)
    return [toy, sw.warmup(toy, 3), sw.restarts(toy, cycles=3, growth=2.0) >> sw.cosine(0.01, steps=5),
            toy * sw.flat(0.5), toy.stretch(20), sw.stages(toy, sw.flat(0.001))]


class TestToyKind:
    def test_registered_by_its_definition(self, Halfway):
        assert KINDS["halfway"] is Halfway

    def test_evaluation(self, Halfway):
        s = Halfway(high=0.1, low=0.01, steps=9)
        assert s(np.arange(11)).tolist() == [0.1] * 5 + [0.01] * 6  # 4.5 is the middle: ticks 5.. are low
        assert s(4) == 0.1 and s(10 ** 6) == 0.01
        with pytest.raises(sw.ScheduleError, match=r"halfway: low must be <= high = 0.1, got 0.2"):
            Halfway(high=0.1, low=0.2, steps=9)
        with pytest.raises(sw.ScheduleError, match=r"halfway: steps must be a whole number >= 2"):
            Halfway(high=0.1, low=0.0, steps=1)

    def test_spec_round_trip(self, designs):
        for s in designs:
            assert sw.from_spec(s.to_spec()) == s
            assert eval(repr(s), {**vars(sw), "halfway": KINDS["halfway"]}) == s

    def test_schema_validation(self, designs):
        import jsonschema

        schema = sw.json_schema()
        assert "halfway" in schema["$defs"] and schema["$defs"]["halfway"]["required"] == ["kind", "high", "low",
                                                                                          "steps"]
        for s in designs:
            jsonschema.validate(s.to_spec(), schema)
        bad = {"version": 1, "schedule": {"kind": "halfway", "high": 0.1, "low": -1.0, "steps": 9}}
        with pytest.raises(jsonschema.ValidationError):
            jsonschema.validate(bad, schema)
        with pytest.raises(sw.ScheduleError, match=r"schedule\.low: -1\.0 is less than the minimum of 0"):
            sw.from_spec(bad)

    def test_generated_source_equal_at_every_tick(self, designs):
        for s in designs:
            ns: dict = {}
            exec(sw.to_python(s), ns)
            t = np.arange((s.length or 40) + 3)
            assert [ns["lr_at"](int(x)) for x in t] == s(t).tolist()
            factor = sw.torch_factor(s, 0.1)
            assert [factor(int(x)) for x in t] == (s(t) / 0.1).tolist()

    def test_readouts_and_svg(self, designs, Halfway):
        s = Halfway(high=0.1, low=0.01, steps=9)
        f = sw.facts(s)
        assert (f.peak, f.breaks, f.under_10) == (0.1, (5,), 5)
        for d in designs:
            svg = render_svg(d)
            assert svg.startswith("<svg") and "<polyline" in svg

    def test_the_package_schema_is_unchanged_once_the_toy_is_gone(self, Halfway):
        from schedwidget.spec import shipped_schema

        saved = KINDS.pop("halfway")
        try:
            assert sw.json_schema() == shipped_schema()
        finally:
            KINDS["halfway"] = saved


class TestToyInTheDesigner:
    """The designer (headless) builds the toy's controls from its declarations alone, and they edit the design."""

    @pytest.fixture
    def designer(self, Halfway):
        from schedwidget import ScheduleDesigner

        return ScheduleDesigner(sw.warmup(Halfway(high=0.1, low=0.01, steps=1000), 50))

    def test_controls_come_from_the_declarations(self, designer):
        d = designer
        high, low, steps = (d.control(0, n) for n in ("high", "low", "steps"))
        assert (high.control, low.control, steps.control) == ("log_slider", "log_slider", "length")
        assert (high.text.value, low.text.value, steps.text.value) == ("0.1", "0.01", "1,000")
        assert d.control("warmup", "steps").text.value == "50"
        shapes = [w for w in _widgets(d.stages) if "sw-stage-shape" in w._dom_classes]
        assert [w.value for w in shapes] == ["halfway"] and ("halfway", "halfway") in shapes[0].options

    def test_a_changed_control_changes_the_design(self, designer, Halfway):
        d = designer
        d.control(0, "high").text.value = "0.2"
        assert d.error == "" and d.schedule == sw.warmup(Halfway(high=0.2, low=0.01, steps=1000), 50)
        d.control(0, "steps").text.value = "10 %"  # a share of the run of 1,050 ticks
        assert d.error == "" and d.schedule == sw.warmup(Halfway(high=0.2, low=0.01, steps=105), 50)
        d.control(0, "low").text.value = "0.5"  # the toy's own check refuses it; the design is kept
        assert d.error == "halfway: low must be <= high = 0.2, got 0.5"
        assert d.schedule == sw.warmup(Halfway(high=0.2, low=0.01, steps=105), 50)
        d.control(0, "high").slider.value = 0.5  # the slider edits the same parameter
        assert d.schedule.target.high == 0.5


def _widgets(w):
    yield w
    for c in getattr(w, "children", ()):
        yield from _widgets(c)


def test_the_guide_shows_this_class_word_for_word():
    """DEVELOPERS.md's worked example is the class tested above (so the guide stays true)."""
    import inspect
    import re
    import textwrap
    from pathlib import Path

    guide = (Path(__file__).parent.parent / "DEVELOPERS.md").read_text()
    block = re.search(r"### Worked example: adding a kind.*?```python\n(.*?)```", guide, re.S).group(1)
    shown = block[block.index("@node"):].strip()
    here = inspect.getsource(define_toy)
    here = textwrap.dedent(here[here.index("    @node"):here.index("    # --- end of the worked example")]).strip()
    assert shown == here
