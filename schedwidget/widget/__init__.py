"""The Jupyter designer: ipywidgets + bqplot + traitlets over the schedule core.

``ScheduleDesigner`` is the one public name; the panels live in their own modules
(``stages``, ``canvas``, ``readout``, ``compare``, ``codeview``, and the replay
and rescale panels).  Nothing here ships front-end code of its own.
"""

from __future__ import annotations

from .designer import ScheduleDesigner

__all__ = ["ScheduleDesigner"]
