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
from .solve import solve
from .spec import Design, from_spec, json_schema, load, load_design, save, to_spec

__version__ = "0.1.0"

__all__ = [
    "Schedule", "ScheduleError",
    "flat", "ramp", "cosine", "exp_decay", "drops", "poly", "inv_sqrt", "triangle", "one_cycle", "knots",
    "stages", "warmup", "restarts",
    "Facts", "facts", "solve",
    "replay_plateau", "plateau_source", "PlateauReplay", "read_metric",
    "to_python", "to_torch", "torch_factor", "RateFactor", "make_scheduler",
    "Budget", "check_length", "scale_for_batch",
    "Design", "to_spec", "from_spec", "save", "load", "load_design", "json_schema",
]


def __getattr__(name: str) -> Any:
    # The designer pulls in ipywidgets and bqplot; training code that imports
    # schedwidget for the exported factor must not pay for (or need) them.
    if name == "ScheduleDesigner":
        from .widget import ScheduleDesigner

        return ScheduleDesigner
    raise AttributeError(f"module 'schedwidget' has no attribute {name!r}")
