"""The designer's budget row: the handlers of its boxes (run length, unit, steps per epoch, batch) and the
designer's methods that change the budget or the clock with the design (``BudgetMethods``)."""

from __future__ import annotations

from ..budget import parse_length
from ..schedule import Schedule, as_whole, complain
from .controls import ParamControl
from .form import rescale, whole

__all__ = ["BudgetRow", "BudgetMethods"]


class BudgetRow:
    """The stages panel's handlers for the budget row's boxes (``self.d`` is the designer)."""

    def _unit_edited(self, change: dict) -> None:
        if not self._quiet:
            self.d.set_unit(change["new"])

    def _spe_edited(self, change: dict) -> None:
        if not self._quiet:
            self.d.steps_per_epoch = _known("steps/epoch", change["new"])

    def _total_edited(self, change: dict) -> None:
        if not self._quiet:
            d = self.d
            self.d.set_total(parse_length(change["new"], d.unit, d.steps_per_epoch, None, "designer", "run length", 1))

    def _batch_edited(self, change: dict) -> None:
        if not self._quiet:
            self.d.batch = _known("batch", change["new"])



def _known(name: str, text: str) -> int | None:
    """A typed whole number >= 1, or None for a blank box (unknown)."""
    t = str(text).strip().replace(",", "").replace("_", "")
    if not t or t == "0":
        return None
    try:
        n = as_whole(float(t))
    except ValueError:
        n = None
    if n is None or n < 1:
        raise complain("designer", name, text, "a whole number >= 1, or blank for unknown")
    return n



class BudgetMethods:
    """The designer's methods that change the budget or the clock with the design (the budget row calls them)."""

    def set_total(self, total: int) -> None:
        """A new budget; the design's ticks are scaled in proportion (stage by stage, or ``stretch``)."""
        total = whole("designer", "total", total, False)
        if total != self.steps:
            new = rescale(self.schedule, self.steps, total)
            with self._one_redraw():
                self.steps = total
                self.propose(new)

    def set_unit(self, unit: str) -> None:
        """Change the clock; with steps per epoch known the design is converted, otherwise relabelled."""
        self._check_unit({"value": unit})
        if unit == self.unit or not self.steps_per_epoch:
            self.unit = unit
            return
        spe = self.steps_per_epoch
        steps = self.steps * spe if unit == "step" else max(1, round(self.steps / spe))
        new = rescale(self.schedule, self.steps, steps)
        with self._one_redraw():
            self.unit, self.steps = unit, steps
            self.propose(new)
            self.canvas.x_choice.value = "epochs" if unit == "epoch" else "steps"

    def restore(self, s: Schedule, steps: int, unit: str, steps_per_epoch: int | None) -> None:
        """Put a design back with its budget and clock (one redraw)."""
        with self._one_redraw():
            self.unit, self.steps_per_epoch, self.steps = unit, steps_per_epoch, steps
            self.propose(s)

    def control(self, stage: int | str, name: str) -> ParamControl:
        """The control of parameter ``name`` of stage ``stage`` (0 = first stage; "warmup" = the warmup)."""
        return self.stages.control(stage, name)
