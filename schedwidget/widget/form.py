"""The editable form of a design: an optional warmup, then a list of stages.

The designer edits a design as

* an optional **warmup** at the start (``warmup(rest, steps, start, curve)``: a ramp
  up to the first stage's first rate), then
* an ordered list of **stages**, each a leaf shape (``cosine``, ``drops``, ...) or
  ``restarts(leaf, ...)`` of one.

``read_form(s)`` turns a schedule into that form, or returns None when the design
does not fit it (a product, a clip, a stretch, nested stages inside restarts, ...);
such a design is still drawn and read out, and is edited in code.
``Form.build()`` turns the form back into one schedule value.  This module is
pure: no widgets.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from numbers import Integral
from typing import Any

from ..combine import Warmup, restarts, stages, warmup
from ..proportion import absorb_rounding, has_own_length, scale_node
from ..schedule import Param, Schedule, ScheduleError, complain
from ..shapes import Cosine, Drops, ExpDecay, Flat, InvSqrt, Knots, OneCycle, Poly, Ramp, Triangle, cosine

__all__ = ["LEAVES", "SHAPE_WORDS", "Warm", "Form", "read_form", "new_stage", "scale_ticks", "fit_total", "rescale",
           "demo_design", "whole", "filler", "fit_run", "stage_span", "reshape", "keep_positions"]

DEMO_STEPS_PER_EPOCH, DEMO_EPOCHS, DEMO_BATCH = 1150, 90, 128

#: Leaf shapes a stage can be, by kind (the "add stage" menu, in this order).
LEAVES: dict[str, type[Schedule]] = {c.kind: c for c in (
    Cosine, Ramp, Flat, ExpDecay, Drops, Poly, InvSqrt, Triangle, OneCycle, Knots)}

#: The shapes in words, as the menus show them (published methods keep their usual names).
SHAPE_WORDS: dict[str, str] = {
    "cosine": "cosine annealing", "ramp": "straight line", "flat": "constant", "exp_decay": "exponential decay",
    "drops": "step drops", "poly": "polynomial decay", "inv_sqrt": "inverse square root",
    "triangle": "triangle (cyclical)", "one_cycle": "one-cycle", "knots": "rates at chosen points"}


@dataclass(frozen=True)
class Warm:
    """The warmup at the start of a design: its own parameters, without the target."""

    steps: int
    start: float = 0.0
    curve: str = "linear"
    place: str = "before"

    kind = "warmup"

    @property
    def before(self) -> bool:
        """Whether the warmup comes before the stages (its ticks then add to the design's length)."""
        return self.place == "before"

    @staticmethod
    def params() -> dict[str, Param]:
        """Warmup's declared parameters that the form edits: those it holds (not the target; a parameter the core
        adds later is left at its default until the form holds it)."""
        held = {f.name for f in dataclasses.fields(Warm)}
        return {k: p for k, p in Warmup.params().items() if p.control != "schedule" and k in held}


@dataclass(frozen=True)
class Form:
    """A design as the stages panel edits it: ``warm`` (or None), then ``stages`` in order."""

    stages: tuple[Schedule, ...]
    warm: Warm | None = None

    def build(self) -> Schedule:
        """The schedule this form describes (raises ScheduleError for an invalid combination).

        >>> from schedwidget import cosine
        >>> Form((cosine(0.1, steps=90),), Warm(10)).build()(10)
        0.1
        """
        if not self.stages:
            raise complain("designer", "stages", 0, "at least one stage", "add a shape with 'Add stage'")
        body = stages(*self.stages)
        if self.warm is None:
            return body
        w = self.warm
        return warmup(body, steps=w.steps, start=w.start, curve=w.curve, place=w.place)

    def signature(self) -> tuple:
        """What the controls depend on: the kind of each stage and whether it repeats."""
        rows = tuple((leaf_of(s).kind, s._repeated() is not None) for s in self.stages)
        return (self.warm is not None,) + rows


def leaf_of(stage: Schedule) -> Schedule:
    """The leaf shape of a stage (itself, or the shape a ``restarts`` repeats)."""
    cycle = stage._repeated()
    return stage if cycle is None else cycle


def is_leaf(s: Schedule) -> bool:
    """Whether ``s`` is a leaf shape: a node built from no other schedule (one of ``LEAVES``, or a kind defined
    outside the package: its controls come from its declarations like every other's)."""
    return not s.children()


def _is_stage(s: Schedule) -> bool:
    return is_leaf(leaf_of(s))


def read_form(s: Schedule) -> Form | None:
    """The editable form of ``s``, or None if it does not fit (it can still be drawn and edited in code).

    >>> from schedwidget import cosine, warmup
    >>> f = read_form(warmup(cosine(0.1, steps=90), 10))
    >>> f.warm.steps, [st.kind for st in f.stages]
    (10, ['cosine'])
    """
    warm = None
    if s._warmed() is not None:
        warm = Warm(steps=s.steps, start=s.start, curve=s.curve, place=getattr(s, "place", "before"))
        s = s._warmed()
    parts = s._stage_parts()
    if not all(_is_stage(p) for p in parts):
        return None
    return Form(tuple(parts), warm)


def new_stage(kind: str, rate: float, length: int) -> Schedule:
    """A new stage of shape ``kind`` starting near ``rate`` and lasting ``length`` ticks.

    These are starting points to edit, not recommendations.

    >>> new_stage("cosine", 0.1, 100)
    cosine(peak=0.1, floor=0.0, steps=100)
    """
    r = rate if rate > 0 and math.isfinite(rate) else 0.1
    n = max(int(length), 3)
    made = {
        "cosine": lambda: Cosine(peak=r, floor=0.0, steps=n),
        "ramp": lambda: Ramp(start=r, end=r / 10, steps=n),
        "flat": lambda: Flat(lr=r, steps=n),
        "exp_decay": lambda: ExpDecay(peak=r, factor=0.95, every=max(1, n // 90), steps=n),
        "drops": lambda: Drops(peak=r, at=(n // 2,), factor=0.1, steps=n),
        "poly": lambda: Poly(peak=r, floor=0.0, steps=n, power=1.0),
        "inv_sqrt": lambda: InvSqrt(peak=r, warmup=max(1, n // 10), steps=n),
        "triangle": lambda: Triangle(low=r / 10, high=r, half_period=max(1, n // 8), steps=n),
        "one_cycle": lambda: OneCycle(peak=r, steps=n, low=r / 10, final=r / 1000),
        "knots": lambda: Knots(points=((0, r), (n, r / 10))),
    }
    if kind not in made:
        raise complain("designer", "shape", kind, "one of " + ", ".join(repr(k) for k in LEAVES))
    return made[kind]()


# ------------------------------------------------------------------ the run as the frame
def _fixed_length(stage: Schedule) -> bool:
    """Whether a stage's length is its own ``steps`` parameter (so it can fill the rest of the run)."""
    return has_own_length(stage)


def filler(form: Form, chosen: int | None = None) -> int | None:
    """The stage that fills the rest of the run: ``chosen`` when it can, else the longest stage with a length
    of its own (the main decay stage in the usual designs), else None.

    >>> from schedwidget import cosine, flat
    >>> filler(Form((flat(0.1, steps=10), cosine(0.1, steps=90))))
    1
    """
    if chosen is not None and 0 <= chosen < len(form.stages) and _fixed_length(form.stages[chosen]):
        return chosen
    best = None
    for i, st in enumerate(form.stages):
        if _fixed_length(st) and (best is None or st.steps > form.stages[best].steps):
            best = i
    return best


def fit_run(form: Form, total: int, chosen: int | None = None, keep: int | None = None,
            edited: tuple[str, str, Any] | None = None) -> Form:
    """``form`` with its filling stage lengthened or shortened so the design is exactly ``total`` ticks long.

    Nothing changes when the design is open-ended, has no stage that can fill, or the filling stage is
    ``keep`` (the stage whose length the person just typed: then the design may differ from the run, and
    the readout says so).  The arithmetic is the core's ``budget.absorb``.

    >>> from schedwidget import cosine
    >>> fit_run(Form((cosine(0.1, steps=95),), Warm(20)), 100).build().length
    100
    """
    from ..budget import absorb

    i = filler(form, chosen)
    if i is None or i == keep or any(st.length is None for st in form.stages):
        return form
    before = form.warm is not None and form.warm.before  # a warmup laid over the stages adds no ticks
    lengths = [st.length for st in form.stages] + ([form.warm.steps] if before else [])
    new = absorb(lengths, total, i, *(edited or ()))[i]
    if new == form.stages[i].steps:
        return form
    stages_ = list(form.stages)
    stages_[i] = dataclasses.replace(stages_[i], steps=new)
    return Form(tuple(stages_), form.warm)


def stage_span(form: Form, i: int) -> tuple[int, int | None]:
    """Where stage ``i`` starts on the run's clock and its length (None: open-ended); a warmup laid over the
    stages moves no start."""
    start = form.warm.steps if form.warm is not None and form.warm.before else 0
    for st in form.stages[:i]:
        start += st.length or 0
    return start, form.stages[i].length


def keep_positions(old: Form, new: Form) -> Form:
    """``new`` with each stage's positions (a drops stage's ``at``) kept where they were *on the run's clock*
    when an edit of another stage moved the stage's start (a shorter warmup leaves "the drop at epoch 30" at
    epoch 30).  Only stages whose positions the edit left alone, in a form of the same structure, move; a
    position that would leave its stage keeps its place in the stage instead.

    >>> from schedwidget import drops
    >>> f = Form((drops(0.1, at=(25,), steps=85),), Warm(5))
    >>> keep_positions(f, Form(f.stages, Warm(3))).stages[0].at
    (27,)
    """
    if old.signature() != new.signature():
        return new
    stages_ = list(new.stages)
    for i, (a, b) in enumerate(zip(old.stages, new.stages)):
        shift = stage_span(old, i)[0] - stage_span(new, i)[0]
        la, lb = leaf_of(a), leaf_of(b)
        if not shift:
            continue
        moved = {}
        for name, p in type(lb).params().items():
            if p.control == "ticklist" and getattr(la, name) == getattr(lb, name):
                at = tuple(t + shift for t in getattr(lb, name))
                if at and at[0] >= max(1, int(p.lo or 0)) and (lb.length is None or at[-1] < lb.length):
                    moved[name] = at
        if moved:
            leaf = dataclasses.replace(lb, **moved)
            stages_[i] = leaf if b._repeated() is None else dataclasses.replace(b, target=leaf)
    return Form(tuple(stages_), new.warm)


def reshape(stage: Schedule, kind: str) -> Schedule:
    """``stage`` as a stage of shape ``kind`` over the same span, starting at the same rate.

    >>> from schedwidget import cosine
    >>> reshape(cosine(0.1, steps=100), "exp_decay").length, reshape(cosine(0.1, steps=100), "flat")(0)
    (100, 0.1)
    """
    leaf = leaf_of(stage)
    n = leaf.length if leaf.length is not None else 100
    start = float(leaf(0))
    new = new_stage(kind, start, n)
    if kind == "knots":
        new = Knots(points=((0, start), (n - 1, start / 10)), steps=n) if "steps" in Knots.params() else new
    return new


# ------------------------------------------------------------------ proportions (the core's arithmetic)
def scale_ticks(form: Form, r: float) -> Form:
    """Every tick of every stage (and of the warmup) multiplied by ``r``, rounded to whole ticks.

    Rates, factors and cycle counts are kept; raises ScheduleError if rounding
    breaks the design (for example two drops landing on the same tick).

    >>> from schedwidget import cosine
    >>> scale_ticks(Form((cosine(0.1, steps=90),), Warm(10)), 2.0).build().length
    200
    """
    if not (r > 0 and math.isfinite(r)):
        raise complain("designer", "scale", r, "a finite number > 0")
    warm = scale_node(form.warm, r) if form.warm is not None else None
    return Form(tuple(scale_node(s, r) for s in form.stages), warm)


def fit_total(form: Form, total: int) -> Form:
    """``form`` scaled in proportion so that its length is exactly ``total`` ticks.

    Ticks are scaled by ``total / length`` and rounded; the last stage with a
    ``steps`` parameter absorbs the rounding difference.  An open-ended design
    is scaled by the ratio of the budgets instead and keeps no exact total.

    >>> from schedwidget import cosine
    >>> fit_total(Form((cosine(0.1, steps=95),), Warm(5)), 1000).build().length
    1000
    """
    length = form.build().length
    if length is None:
        raise ScheduleError("designer: an open-ended design has no total to fit; scale it with scale_ticks")
    out = scale_ticks(form, total / length)
    got = out.build().length
    if got == total:
        return out
    stages_ = absorb_rounding(out.stages, total - got)
    return out if stages_ is None else Form(stages_, out.warm)


def rescale(s: Schedule, budget: int, new_budget: int) -> Schedule:
    """``s`` for a budget of ``new_budget`` ticks instead of ``budget``, in proportion.

    An editable design has every stage's ticks scaled (exactly to ``new_budget`` when
    its length was the budget, see ``fit_total``); any other design with a length is
    ``stretch``-ed; an open-ended one that does not fit the form is returned as is.

    >>> from schedwidget import cosine, warmup
    >>> rescale(warmup(cosine(0.1, steps=85), steps=5), 90, 90 * 1150)
    warmup(target=cosine(peak=0.1, floor=0.0, steps=97750), steps=5750, start=0.0, curve='linear')
    """
    form = read_form(s)
    if form is not None:
        if s.length == budget:
            return fit_total(form, new_budget).build()
        return scale_ticks(form, new_budget / budget).build()
    if s.length is not None:
        return s.stretch(max(1, round(s.length * new_budget / budget)))
    return s


def demo_design() -> Schedule:
    """The demo scenario's starting point: 5 epochs of linear warmup to 0.1, then cosine to 0 (90 x 1,150 steps).

    A place to start shaping from, not a recommendation.

    >>> demo_design().length
    103500
    """
    spe = DEMO_STEPS_PER_EPOCH
    return warmup(cosine(0.1, 0.0, steps=(DEMO_EPOCHS - 5) * spe), steps=5 * spe)


def whole(owner: str, name: str, value: Any, optional: bool) -> int | None:
    """``value`` as an int >= 1 (or None when ``optional``), else a ScheduleError naming ``owner.name``."""
    if value is None and optional:
        return None
    if isinstance(value, bool) or not isinstance(value, Integral) or value < 1:
        raise complain(owner, name, value, "a whole number >= 1" + (" or None" if optional else ""))
    return int(value)
