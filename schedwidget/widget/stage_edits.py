"""The stages panel's edits: each button, box and menu of a stage builds a new form and proposes it.

``StageEdits`` is a mixin of ``StagesPanel`` (``self.d`` is the designer, ``self.form`` the editable form of its
design, ``self.fill`` the stage chosen to fill the rest of the run, ``self.shape`` the 'new stage' menu).  Every
edit goes through ``_propose``: the stage that fills the rest keeps the run's length, and drops keep their
positions on the run's clock when an earlier stage's length changes.
"""

from __future__ import annotations

import dataclasses
from typing import Any

from ..combine import restarts
from ..schedule import ScheduleError
from .form import Form, Warm, filler, fit_run, keep_positions, leaf_of, new_stage, reshape

__all__ = ["StageEdits"]


class StageEdits:
    """The handlers behind a stage's controls (mixed into ``StagesPanel``)."""

    # -------------------------------------------------------------- editing
    def _propose(self, form: Form, keep: int | None = None, edited: tuple | None = None) -> None:
        """Make ``form`` the design; the stage that fills the rest keeps the run's length (not when it is ``keep``,
        the stage whose own length was typed)."""
        if self.d.schedule.length == self.d.steps or self.d.schedule.length is None:
            form = fit_run(form, self.d.steps, self.fill, keep, edited + (self.d.unit,) if edited else None)
        old = self.form
        if old is not None:
            form = keep_positions(old, form)  # drops stay at their positions of the run when a start moves
        self.d.propose(form.build())

    def _edit(self, where: str, part: str, name: str, value: Any) -> None:
        if self._quiet:
            return
        form = self.form
        if where == "warm":
            self._propose(Form(form.stages, dataclasses.replace(form.warm, **{name: value})),
                          edited=("warmup", name, value))
            return
        if name == "steps" and part != "repeat" and int(where) == filler(form, self.fill):
            keep = int(where)
        else:
            keep = None
        i = int(where)
        stages_ = list(form.stages)
        s = stages_[i]
        if part == "repeat":
            stages_[i] = dataclasses.replace(s, **{name: value})
        elif s._repeated() is not None:
            stages_[i] = dataclasses.replace(s, target=dataclasses.replace(s.target, **{name: value}))
        else:
            stages_[i] = dataclasses.replace(s, **{name: value})
        edited = (leaf_of(s).kind, name, value) if name == "steps" and part != "repeat" else None
        self._propose(Form(tuple(stages_), form.warm), keep, edited)

    def _fills(self, where: str, on: bool) -> None:
        """Choose the stage that fills the rest of the run (unticking goes back to the longest stage)."""
        if self._quiet:
            return
        self.fill = int(where) if on else None
        self.redraw()

    def _reshape(self, where: str, kind: str) -> None:
        """Give stage ``where`` another shape, keeping its span and its starting rate."""
        if self._quiet:
            return
        form = self.form
        i = int(where)
        stages_ = list(form.stages)
        s = stages_[i]
        new = reshape(s, kind)
        stages_[i] = new if s._repeated() is None else dataclasses.replace(s, target=new)
        self._propose(Form(tuple(stages_), form.warm))

    def _insert(self, at: int) -> None:
        """Insert a stage of the chosen shape at position ``at``: it starts at the rate where the stage before it
        ends and lasts a tenth of the run (taken from the stage that fills the rest)."""
        form = self.form
        kind = self.shape.value
        if form is None or kind == "warmup":
            return self._add()
        if at > 0:
            before = leaf_of(form.stages[at - 1])
            n = before.length
            rate = float(before(n - 1)) if n else float(before(0))
        else:
            rate = float(leaf_of(form.stages[0])(0))
        peak = self.d.facts.peak if self.d.facts is not None else 0.0
        if not rate > peak * 1e-6:  # a stage before that ends at (about) 0: start the new one at the peak
            rate = self.d.facts.peak if self.d.facts is not None and self.d.facts.peak > 0 else 0.1
        stages_ = list(form.stages)
        stages_.insert(at, new_stage(kind, rate, max(3, self.d.steps // 10)))
        if self.fill is not None and self.fill >= at:
            self.fill += 1
        self._propose(Form(tuple(stages_), form.warm))

    def _repeat(self, where: str, on: bool) -> None:
        if self._quiet:
            return
        form = self.form
        i = int(where)
        stages_ = list(form.stages)
        s = stages_[i]
        if on and s._repeated() is None:
            stages_[i] = restarts(s, cycles=2)
        elif not on and s._repeated() is not None:
            stages_[i] = s.target
        self._propose(Form(tuple(stages_), form.warm))

    def _remove(self, where: str) -> None:
        form = self.form
        if where == "warm":
            self._propose(Form(form.stages, None))
            return
        stages_ = list(form.stages)
        i = int(where)
        del stages_[i]
        if self.fill is not None:
            self.fill = None if self.fill == i else self.fill - (self.fill > i)
        self._propose(Form(tuple(stages_), form.warm))

    def _move(self, where: str, by: int) -> None:
        form = self.form
        i = int(where)
        j = i + by
        stages_ = list(form.stages)
        if where == "warm" or not 0 <= j < len(stages_):
            return
        stages_[i], stages_[j] = stages_[j], stages_[i]
        if self.fill in (i, j):
            self.fill = j if self.fill == i else i
        self._propose(Form(tuple(stages_), form.warm))

    def _add(self, _button: Any = None) -> None:
        """Add a stage of the chosen shape at the end (a warmup goes first, once)."""
        form = self.form
        if form is None:
            return
        n = self.d.steps
        kind = self.shape.value
        if kind == "warmup":
            if form.warm is not None:
                raise ScheduleError("designer: a design has at most one warmup, got a second one "
                                    "(edit the warmup at the top, or remove it first)")
            self._propose(Form(form.stages, Warm(steps=max(1, n // 20))))
            return
        self._insert(len(form.stages))
