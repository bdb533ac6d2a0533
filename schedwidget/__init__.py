"""schedwidget: design learning-rate schedules as exact, composable values.

The core (this package's top level) needs only numpy and the standard library;
the Jupyter designer is loaded on first use of ``ScheduleDesigner``.
"""

from __future__ import annotations

from typing import Any

from .budget import Budget, check_length, scale_for_batch
from .combine import restarts, stages, warmup
from .export import RateFactor, make_scheduler, to_python, to_torch, torch_factor
from .facts import Facts, facts
from .metrics import read_metric
from .plateau import PlateauReplay, plateau_source, replay_plateau
from .schedule import Schedule, ScheduleError
from .shapes import cosine, drops, exp_decay, flat, inv_sqrt, knots, one_cycle, poly, ramp, triangle
from .spec import Design, from_spec, json_schema, load, load_design, save, to_spec
from .tracks import GroupDesigns, Tracks, inverse_momentum, load_tracks, per_group, tracks, tracks_from_spec

__version__ = "0.1.0"

__all__ = [
    "Schedule", "ScheduleError",
    "flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle", "one_cycle", "knots",
    "stages", "warmup", "restarts",
    "Facts", "facts",
    "replay_plateau", "plateau_source", "PlateauReplay", "read_metric",
    "to_python", "to_torch", "torch_factor", "RateFactor", "make_scheduler",
    "Budget", "check_length", "scale_for_batch",
    "Design", "to_spec", "from_spec", "save", "load", "load_design", "json_schema",
    "tracks", "Tracks", "per_group", "GroupDesigns", "inverse_momentum", "tracks_from_spec", "load_tracks",
    # loaded on first use (below): inverse questions, exports to other frameworks, the clock, the tracks' readouts
    # and exports, reading logs back (traces, check_run, recover, the range test)
    "solve", "check_run", "Verdict", "FAULTS", "recover", "Recovery",
    "to_jax", "to_keras",
    "TrackClock", "to_torch_tracks", "track_facts", "tracks_sentence", "tracks_svg", "decay_per_step",
    "read_trace", "read_traces", "Trace",
    "read_range_test", "RangeReading", "run_range_test", "RangeRun", "sweep_rates",
]

#: Names loaded from their module on first use, so ``import schedwidget`` stays light for training code.  No module
#: is named like a function it exports (the solver lives in inverse.py, check_run in run_check.py, recover in
#: recovery.py): once a submodule is imported anywhere, Python binds the package attribute of its name to the
#: module, and __getattr__ would never run for a function of the same name.
_LATER = {
    "solve": "inverse", "check_run": "run_check", "Verdict": "run_check", "FAULTS": "run_check",
    "recover": "recovery", "Recovery": "recovery",
    "to_jax": "export_jax", "to_keras": "export_keras",
    "TrackClock": "clock", "to_torch_tracks": "track_export",
    "track_facts": "track_readouts", "tracks_sentence": "track_readouts", "tracks_svg": "track_readouts",
    "decay_per_step": "track_readouts",
    "read_trace": "trace", "read_traces": "trace", "Trace": "trace",
    "read_range_test": "range_test", "RangeReading": "range_test",
    "run_range_test": "range_run", "RangeRun": "range_run", "sweep_rates": "range_run",
}


def __getattr__(name: str) -> Any:
    # The designer pulls in ipywidgets and bqplot; training code that imports
    # schedwidget for the exported factor must not pay for (or need) them.
    if name == "ScheduleDesigner":
        from .widget import ScheduleDesigner

        return ScheduleDesigner
    if name in _LATER:
        from importlib import import_module

        value = getattr(import_module(f".{_LATER[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'schedwidget' has no attribute {name!r}")
