"""Seeded fuzz suite: every input to a public function gets a clean value or a ScheduleError, fast.

``build(seed)`` makes the cases (a fixed mix of generators, reproducible from
the seed); ``run(seed)`` runs them in a child process and returns a ``Report``
with the counts by outcome, per generator, and one short repro per failure
class.  ``python -m tests.fuzz`` prints the table (``--findings FILE`` writes
the Markdown report).

Generators (each reusable on its own):

* ``valid_specs``   specs of random valid designs (some parameters at their hard edges);
* ``drawn_specs``   nodes drawn from the parameter declarations, cross-field rules unchecked;
* ``mutated_specs`` valid specs with wrong types, huge/NaN/inf numbers, unknown kinds and fields,
  huge lists, restarts with 2**53 cycles, nested restarts and deep nesting;
* ``spec_files``    spec files with hostile text (10**5 brackets, 5,000-digit numbers, garbage);
* ``factories``     every callable in ``schedwidget.__all__`` with bad arguments;
* ``bad_ticks``     ``s(t)`` with 0-d, ragged, object, str, complex, bool, masked, huge and float ticks;
* ``factor_states`` RateFactor states with corrupted fields, loaded the way LambdaLR does;
* ``metrics``       read_metric / replay_plateau / plateau_source with hostile CSVs and histories;
* ``transforms``    valid operations on valid designs (stretch to odd lengths, batch rescaling, +, *, >>, restarts);
* ``cli``           ``python -m schedwidget`` on hostile files, pipes, devices and arguments (never a traceback);
* ``corpus``        fixed inputs that broke a promise once (issue 10's examples), kept so they stay fixed.
"""

from __future__ import annotations

import random
import tempfile
import time
from pathlib import Path

from . import calls, corpus, routes, specs
from .runner import Case, Report, run_cases

__all__ = ["SEED", "MIX", "build", "run", "Case", "Report"]

#: The suite's fixed seed.
SEED = 20261202
#: Cases per generator in the default run.
MIX = {
    "valid_specs": 300,
    "drawn_specs": 200,
    "mutated_specs": 700,
    "spec_files": 120,
    "factories": 420,
    "bad_ticks": 200,
    "factor_states": 160,
    "metrics": 260,
    "transforms": 200,
    "cli": 120,
    "corpus": 0,  # every entry of corpus.CORPUS, whatever the count
}


def build(seed: int = SEED, mix: dict[str, int] | None = None, folder: Path | None = None) -> list[Case]:
    """The cases of one run: each generator gets its own ``random.Random`` derived from the seed."""
    mix = MIX if mix is None else mix
    folder = Path(tempfile.mkdtemp(prefix="schedwidget-fuzz-")) if folder is None else folder
    makers = {
        "valid_specs": lambda r, n: specs.valid_specs(r, n),
        "drawn_specs": lambda r, n: specs.drawn_specs(r, n),
        "mutated_specs": lambda r, n: specs.mutated_specs(r, n),
        "spec_files": lambda r, n: specs.spec_texts(r, n, folder),
        "factories": lambda r, n: calls.factories(r, n, folder),
        "bad_ticks": lambda r, n: calls.bad_ticks(r, n),
        "factor_states": lambda r, n: calls.factor_states(r, n),
        "metrics": lambda r, n: calls.metrics(r, n, folder),
        "transforms": lambda r, n: routes.transforms(r, n),
        "cli": lambda r, n: routes.cli(r, n, folder),
        "corpus": lambda r, n: corpus.corpus(r, n),
    }
    cases: list[Case] = []
    for name, count in mix.items():
        cases += makers[name](random.Random(f"{seed}:{name}"), count)
    return cases


def run(seed: int = SEED, mix: dict[str, int] | None = None, isolate: bool = True) -> Report:
    """Build and run the cases; the report holds the counts and the failure classes.

    A case that timed out runs once more in a fresh process, and stays a
    failure only if it times out (or fails otherwise) again: on a shared
    machine a case near the limit must not make the suite flaky, and a case
    that really takes over a second takes it twice.
    """
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="schedwidget-fuzz-") as name:  # spec files of up to 10 MB each
        folder = Path(name)
        cases = build(seed, mix, folder)
        outcomes = run_cases(cases, isolate=isolate, cwd=folder)
        slow = [i for i, o in enumerate(outcomes) if o.outcome == "failure" and o.klass.startswith(("timeout", "hang"))]
        if slow:
            again = run_cases([cases[i] for i in slow], isolate=isolate, cwd=folder)
            for i, o in zip(slow, again):
                o.index = i
                if o.outcome == "failure" and o.klass.startswith(("timeout", "hang")):
                    o.message = (o.message + "; " if o.message else "") + "timed out twice"
                outcomes[i] = o
    return Report(cases, outcomes, time.perf_counter() - t0, seed)
