"""Hypothesis strategies: random valid schedules of every kind, nested several levels deep."""

from __future__ import annotations

from hypothesis import strategies as st

import schedwidget as sw

rates = st.floats(1e-5, 1.0, allow_nan=False, allow_infinity=False)
lengths = st.integers(1, 400)
ratios = st.floats(0.05, 1.0)


@st.composite
def leaves(draw, finite: bool = True):
    """A random leaf shape; with finite=True it always has a length."""
    kind = draw(st.sampled_from(["flat", "ramp", "cosine", "exp_decay", "drops", "poly",
                                 "inv_sqrt", "triangle", "one_cycle", "knots"]))
    n = draw(lengths)
    opt_n = n if finite else draw(st.one_of(st.none(), st.just(n)))
    if kind == "flat":
        return sw.flat(draw(rates), steps=opt_n)
    if kind == "ramp":
        curve = draw(st.sampled_from(["linear", "geometric", "cosine"]))
        return sw.ramp(draw(rates), draw(rates), n, curve=curve)
    if kind == "cosine":
        a, b = sorted([draw(rates), draw(rates)])
        return sw.cosine(b, a, steps=n)
    if kind == "exp_decay":
        return sw.exp_decay(draw(rates), draw(ratios), every=draw(st.integers(1, 50)),
                            staircase=draw(st.booleans()), steps=opt_n)
    if kind == "drops":
        at = sorted(draw(st.sets(st.integers(1, max(1, n - 1)), min_size=1, max_size=4)))
        if at[-1] >= n:
            n = at[-1] + 1
        return sw.drops(draw(rates), at=tuple(at), factor=draw(ratios), steps=n if finite else opt_n and n)
    if kind == "poly":
        a, b = sorted([draw(rates), draw(rates)])
        return sw.poly(b, a, steps=n, power=draw(st.floats(0.2, 3.0)))
    if kind == "inv_sqrt":
        w = draw(st.integers(1, n))
        return sw.inv_sqrt(draw(rates), warmup=w, steps=opt_n)
    if kind == "triangle":
        a, b = sorted([draw(rates), draw(rates)])
        return sw.triangle(a, b, half_period=draw(st.integers(1, 60)), shrink=draw(ratios), steps=opt_n)
    if kind == "one_cycle":
        return sw.one_cycle(draw(rates), steps=max(n, 30), tail=draw(st.floats(0.05, 0.5)),
                            curve=draw(st.sampled_from(["linear", "cosine"])))
    ticks = sorted(draw(st.sets(st.integers(1, 400), min_size=1, max_size=5)))
    interp = draw(st.sampled_from(["linear", "log", "hold"]))
    pts = [(0, draw(rates))] + [(t, draw(rates)) for t in ticks]
    extra = draw(st.one_of(st.none(), st.integers(0, 50)))  # steps past the last knot hold its rate
    return sw.knots(pts, interp=interp, steps=None if extra is None else ticks[-1] + extra)


def combine(children):
    """One level of combinators over already-finite schedules."""
    @st.composite
    def build(draw):
        kind = draw(st.sampled_from(["stages", "warmup", "restarts", "product", "sum", "scale", "clip", "stretch"]))
        a = draw(children)
        if kind == "stages":
            return sw.stages(a, draw(children))
        if kind == "warmup":
            return sw.warmup(a, steps=draw(st.integers(1, a.length)), start=draw(st.floats(0.0, 1e-3)),
                             curve=draw(st.sampled_from(["linear", "cosine"])))
        if kind == "restarts":
            return sw.restarts(a, cycles=draw(st.integers(1, 4)), growth=draw(st.sampled_from([1.0, 1.5, 2.0, 0.7])),
                               peak_decay=draw(ratios))
        if kind == "product":
            return a * draw(children)
        if kind == "sum":
            return a + draw(children)
        if kind == "scale":
            return a * draw(st.floats(0.0, 3.0))
        if kind == "clip":
            lo = draw(st.one_of(st.none(), st.floats(0.0, 0.01)))
            hi = draw(st.one_of(st.none(), st.floats(0.02, 1.0))) if lo is not None else draw(st.floats(0.02, 1.0))
            return a.clip(low=lo, high=hi)
        return a.stretch(draw(st.integers(1, 600)))
    return build()


#: Finite schedules nested up to three combinator levels deep.
schedules = combine(combine(combine(leaves())))
#: Any valid schedule, including shallow ones and open-ended leaves.
any_schedule = st.one_of(leaves(finite=False), combine(leaves()), combine(combine(leaves())), schedules)
