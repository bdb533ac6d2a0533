"""A fixed corpus of inputs that broke a promise once: issue 10's examples and what larger fuzz runs found.

Each entry is one Python expression, evaluated with the names of ``schedwidget``
(and ``np``, ``functools`` ...) in scope; its outcome is judged like any case.
Entries stay after the fix, so a regression shows up by name.
"""

from __future__ import annotations

import random

from .atoms import _namespace
from .runner import Case


# ------------------------------------------------------------------ corpus
#: Inputs that broke a promise once (issue 10 and this suite's own findings): kept so they stay fixed.
CORPUS = [
    "poly(0.1, steps=10**12, power=0.5).stretch(100000006)",
    "ramp(0.1, 0.0, steps=10**12).stretch(100000006)",
    "scale_for_batch(poly(0.1, steps=100_000_001, power=0.9), 128, 96)",
    "flat(1e308) + flat(1e308)",
    "flat(1e308, steps=10) * flat(1e308)",
    "ramp(1.7e308, 0.0, steps=10, curve='cosine')",
    "ramp(0.0, 1.7e308, steps=10, curve='cosine')",
    "one_cycle(1.7e308, steps=100, curve='cosine')",
    "one_cycle(1e308, steps=3, low=1e308, final=1e308)",
    "warmup(cosine(1.7976931348623157e308, steps=10), steps=5)",
    "flat(1e308, steps=10) * 1e10",
    "facts(inv_sqrt(0.1, warmup=1000, steps=2**53 - 1))",
    "facts(poly(0.1, steps=2**53, power=100.0))",
    "to_python(flat(0.1, steps=2**52 + 1) >> flat(0.01))",
    "flat(0.1, steps=2**52 + 1) >> flat(0.01)",
    "facts(0.1)",
    "to_spec(None)",
    "from_spec(None)",
    "flat(0.1)(np.array(5))",
    "flat(0.1)([[1, 2], [3]])",
    "flat(0.1)(np.ma.masked_array([1, 2], mask=[False, True]))",
    "load(3)",
    "save(flat(0.1), 3)",
    "restarts(cosine(0.1, steps=10), cycles=2**53)",
    "restarts(cosine(0.1, steps=1), cycles=2**53 - 1, growth=1.0)",
    "restarts(cosine(0.1, steps=1), growth=0.5)",
    "restarts(restarts(restarts(restarts(restarts(restarts(restarts(restarts(restarts(restarts("
    "cosine(0.1, steps=10), cycles=1), cycles=1), cycles=1), cycles=1), cycles=1), cycles=1), cycles=1), "
    "cycles=1), cycles=1), cycles=1)",
    "stages(*[flat(0.1, steps=1)] * 3000)",
    "facts(stages(*[flat(0.1, steps=1)] * 3000))",
    "triangle(0.0, 0.1, half_period=1, shrink=5e-324)",
    "exp_decay(1e308, 0.5, steps=2**53)",
    "inv_sqrt(1e308, warmup=1)",
    "knots([(0, 1e308), (2**53, 1e308)])",
    "knots([(0, 1e308), (1, 0.0)], interp='hold')",
    "drops(1e308, at=[1, 2**53 - 1], factor=5e-324)",
    "scale_for_batch(flat(0.1), 256, 1024)",
    "scale_for_batch(flat(0.1, steps=10), 1, 2**53)",
    "scale_for_batch(flat(1e308, steps=10), 1, 10**6)",
    "torch_factor(flat(0.1), 0.1, groups=[1.0, 10.0])",
    "torch_factor(flat(1e308), 5e-324)",
    "to_torch(flat(0.1), 0.1, name='self')",
    "to_torch(flat(0.1), 0.1, name='t')",
    "to_python(flat(0.1), name='__x')",
    "plateau_source(0.1, name='_x')",
    "replay_plateau([0.5] * 10, 10**400)",
    "replay_plateau([0.5] * 10, 0.1, factor=10**400)",
    "replay_plateau(np.ma.masked_array([0.5, 0.6], mask=[False, True]), 0.1)",
    "read_metric(b'a\\n' + b'9' * 5000 + b'\\n')",
    "read_metric(b'a\\n\"' + b'x' * 200000 + b'\"\\n')",
    "read_metric(np.ma.masked_array([0.5], mask=[True]))",
    "read_metric([10**400])",
    "check_length(flat(0.1, steps=10), 10**400)",
    "Budget(samples=10**400, batch=1, epochs=1)",
    "Budget(samples=2**53, batch=1, epochs=2**53)",
    # found by `python -m tests.fuzz --seed 1 --scale 4` and --scale 3 (rarer than the default mix reaches)
    "check_length(flat(0.1, steps=4), 4, unit=np.array([0.1, 0.2]))",
    "to_spec(flat(0.1), unit=10**5000 - 1)",
    "save(flat(0.1), 'x.json', unit=10**5000 - 1)",
    "to_python(flat(0.1), unit=np.array(['step']))",
    "to_python(flat(0.1), unit=np.array([0.1, 0.2]))",
    "facts(flat(0.1), steps=10, unit=np.array(['step']))",
    "scale_for_batch(flat(0.1, steps=10), 1, 2, rule=np.array(['linear']))",
    "read_metric(10**5000 - 1)",  # --seed 2 --scale 4
    "torch_factor(flat(0.1), 0.1, groups=np.array(0.1))",  # --seed 5 --scale 4
    "to_torch(flat(0.1), 0.1, groups=np.array(0.1))",
    # --seed 6 --scale 10 (factories and the other call generators only)
    "scale_for_batch(flat(0.1), 147200, 96, rule=np.array([0.1, 0.2]))",
    "torch_factor(cosine(0.1, steps=10), 0.001, groups=[1.0] * 100000)",
    # --seed 3 --scale 4: rejecting one bad field of a 10**5-point knots node costs time x its depth (2 s at 40)
    "from_spec({'version': 1, 'schedule': functools.reduce(lambda d, _: {'kind': 'scale', 'factor': 1.0, "
    "'target': d}, range(40), {'kind': 'knots', 'points': [[i, 0.1] for i in range(100000)], 'steps': 2**53 + 2})})",
    # --seed 2 --scale 4: a valid design whose export took 1.2 s CPU (nested shrinking restarts, huge cycle counts)
    "restarts(restarts(stages(ramp(3.5216220173827844e-06, 0.20764738050137269, steps=53), "
    "restarts(ramp(1.3618848887976135e-06, 0.0027048402837452114, steps=46962, curve='cosine'), cycles=1, "
    "growth=1.938750461951282, peak_decay=0.4865088876768176), flat(0.005094960999786323, steps=197), "
    "exp_decay(0.021849418901487987, 0.745153686955058, every=9, steps=61) * 3.219811257689282), "
    "cycles=10**12, growth=0.5, peak_decay=0.5630318302335382), cycles=4503599627370497, growth=0.5, "
    "peak_decay=0.5000001)",
]


def corpus(rng: random.Random, n: int) -> list[Case]:
    """The fixed corpus above (every entry, then random repeats are not needed: ``n`` is ignored past it)."""
    ns = _namespace()
    return [Case("corpus", (lambda text=text: eval(text, ns)), text)  # noqa: S307 - our own constant text
            for text in CORPUS]
