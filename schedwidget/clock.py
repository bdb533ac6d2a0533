"""``TrackClock``: runs tracks and per-group designs on an optimizer, one tick at a time.

A small plain class: it reads and writes ``optimizer.param_groups`` (a list of dicts) and keeps one integer,
the tick.  torch is never imported; any object with such a ``param_groups`` list works.  At tick ``t`` every
group's ``"lr"`` is its rate design at ``t``, and each tracked key is set: ``"momentum"`` (SGD, RMSprop) or
``betas[0]`` (Adam-type optimizers) for the momentum track, ``betas[1]`` for beta2, ``"weight_decay"``.
"""

from __future__ import annotations

import json
from typing import Any, Callable

from .schedule import ScheduleError, complain
from .tracks import GroupDesigns, as_groups

__all__ = ["TrackClock"]

#: The optimizer entry each track writes; a momentum writes "momentum" where the group has one, else betas[0].
KEYS = {"rate": "lr", "momentum": "momentum", "beta2": "betas", "weight_decay": "weight_decay"}


def _shown(text: str) -> Any:
    from .factor import _Shown

    return _Shown(text)


def _keys_of(group: dict) -> str:
    keys = [k for k in group if k != "params"]
    return "{" + ", ".join(repr(k) for k in keys[:12]) + (", ..." if len(keys) > 12 else "") + "}"


def _put(group: dict, key: str, value: float) -> None:
    """Set ``group[key]``; a tensor entry keeps its identity (filled in place), as torch's own schedulers do."""
    old = group.get(key)
    if hasattr(old, "fill_"):
        old.fill_(value)
    else:
        group[key] = value


def _put_beta(group: dict, index: int, value: float) -> None:
    betas = list(group["betas"])
    if hasattr(betas[index], "fill_"):
        betas[index].fill_(value)
    else:
        betas[index] = value
    group["betas"] = tuple(betas)


def _design_text(g: GroupDesigns) -> str:
    from .spec import to_spec

    return json.dumps(to_spec(g), sort_keys=True, separators=(",", ":"))


class TrackClock:
    """Sets every param group's rate and tracked hyperparameters to their designs' values at the current tick.

    Build it with ``make_scheduler(optimizer, tracks(...))`` or with a design per group, or directly:
    ``TrackClock(optimizer, design, start_tick=0)``.  On construction the groups hold the values of tick
    ``start_tick`` (the next update's); ``step()`` moves to the next tick and writes its values.  Call
    ``step()`` once per tick of the design's clock (after ``optimizer.step()``).

    ``state_dict()`` is ``{"tick": k, "design": <the spec as JSON text>}``; ``load_state_dict(state)`` checks
    the design is this clock's and continues at tick k with exactly the values of an uninterrupted run.

    A group that lacks a tracked key is refused when the clock is built, naming the group and the key.
    """

    def __init__(self, optimizer: Any, design: Any, start_tick: int = 0, multipliers: Any = None) -> None:
        owner = "TrackClock"
        groups = as_groups(owner, design, multipliers)
        if groups is None:  # a single Schedule: one set of tracks holding only the rate
            groups = as_groups(owner, _only_rate(design), multipliers)
        assert groups is not None
        if isinstance(start_tick, bool) or not isinstance(start_tick, int) or start_tick < 0:
            raise complain(owner, "start_tick", start_tick, "a whole number >= 0 (the ticks already done)")
        self.optimizer = optimizer
        self.design = groups
        self._text = _design_text(groups)
        self._writers = self._check(owner, optimizer, groups)
        self.tick = start_tick
        self._write()

    # ----------------------------------------------------------------------- checks
    @staticmethod
    def _check(owner: str, optimizer: Any, g: GroupDesigns) -> list[list[tuple[str, Callable[[int], float]]]]:
        from .factor import _build

        param_groups = getattr(optimizer, "param_groups", None)
        if not isinstance(param_groups, list) or not all(isinstance(x, dict) for x in param_groups):
            raise complain(owner, "optimizer", _shown(f"a {type(optimizer).__name__}"),
                           "an optimizer whose param_groups is a list of dicts (torch.optim.SGD(...), AdamW(...))")
        if len(param_groups) != len(g):
            raise complain(owner, "design", _shown(f"designs for {len(g)} param group(s)"),
                           f"one design per param group: the optimizer has {len(param_groups)}",
                           "list them in optimizer.param_groups order, or give one design with groups=[...] "
                           "multipliers")
        out = []
        for i, (group, t) in enumerate(zip(param_groups, g.groups)):
            if g.names is not None and "name" in group and group["name"] != g.names[i]:
                raise complain(owner, f"param_groups[{i}]['name']", group["name"],
                               f"{g.names[i]!r}, the name of design {i}",
                               "a mapping of designs is read in param_groups order; list the designs in that order")
            writers = []
            for track, s in t.items():
                key = KEYS[track]
                if track == "momentum" and "momentum" not in group and "betas" in group:
                    key = "betas"
                if key not in group:
                    what = {"momentum": "'momentum' (SGD, RMSprop) or 'betas' (Adam, AdamW, ...)",
                            "beta2": "'betas' (Adam, AdamW, ...)"}.get(track, repr(key))
                    raise complain(owner, f"param_groups[{i}]", _shown(f"a group with keys {_keys_of(group)}"),
                                   f"a group with a {what} entry for the {track} track",
                                   f"this optimizer has no {track} to set; choose an optimizer that has one, or "
                                   f"leave the {track} track out")
                if key == "betas" and (not isinstance(group["betas"], (tuple, list)) or len(group["betas"]) != 2):
                    raise complain(owner, f"param_groups[{i}]['betas']", group["betas"], "a pair (beta1, beta2)")
                slot = key if key != "betas" else ("betas[0]" if track == "momentum" else "betas[1]")
                writers.append((slot, _build(owner, s)))
            out.append(writers)
        return out

    # ----------------------------------------------------------------------- running
    def values(self, t: int | None = None) -> list[dict[str, float]]:
        """Each group's values at tick ``t`` (default: the current tick), keyed as the optimizer's entries
        (``"lr"``, ``"momentum"``, ``"betas[0]"``, ``"betas[1]"``, ``"weight_decay"``)."""
        k = self.tick if t is None else t
        return [{slot: fn(k) for slot, fn in writers} for writers in self._writers]

    def _write(self) -> None:
        for group, vals in zip(self.optimizer.param_groups, self.values()):
            for slot, v in vals.items():
                if slot.startswith("betas["):
                    _put_beta(group, int(slot[6]), v)
                else:
                    _put(group, slot, v)

    def step(self) -> None:
        """Move to the next tick and write its values into every param group."""
        self.tick += 1
        self._write()

    # ----------------------------------------------------------------------- checkpoints
    def state_dict(self) -> dict[str, Any]:
        """``{"tick": k, "design": spec text}``: plain values, safe for ``torch.save`` and JSON alike."""
        return {"tick": self.tick, "design": self._text}

    def load_state_dict(self, state: Any) -> None:
        """Continue at the saved tick (writing its values); the saved design must be this clock's."""
        owner = "TrackClock.load_state_dict"
        if not isinstance(state, dict):
            raise complain(owner, "state", _shown(f"a {type(state).__name__}"), "a dict saved by state_dict()")
        tick = state.get("tick")
        if isinstance(tick, bool) or not isinstance(tick, int) or tick < 0:
            raise complain(owner, "state['tick']", tick, "a whole number >= 0 (the ticks already done)")
        saved = saved_design(owner, state)
        if _design_text(saved) != self._text:
            raise complain(owner, "state['design']", _shown("another design"), "this clock's design",
                           "pass resume_with='saved' to make_scheduler(optimizer, design, state=state) to "
                           "continue on the checkpoint's design, or resume_with='new' to continue on this design "
                           "from the saved tick")
        self.tick = tick
        self._write()

    def __repr__(self) -> str:
        return f"TrackClock(tick={self.tick}, design={self.design!r})"


def saved_design(owner: str, state: Any) -> GroupDesigns:
    """The per-group designs a saved ``state_dict()`` holds, through the validating spec loader."""
    from .spec import read_design

    text = state.get("design") if isinstance(state, dict) else None
    if not isinstance(text, str):
        raise complain(owner, "state['design']", _shown(repr(type(text).__name__)),
                       "the JSON text of a spec, as TrackClock.state_dict() saves it")
    try:
        d = read_design(json.loads(text))
    except (ValueError, RecursionError) as exc:
        if isinstance(exc, ScheduleError):
            raise ScheduleError(f"{owner}: state['design'] must be a valid spec: {exc}") from None
        raise complain(owner, "state['design']", _shown(text[:60] + "..."), "the JSON text of a spec") from None
    g = as_groups(owner, d)
    return g if g is not None else as_groups(owner, _only_rate(d.schedule))  # type: ignore[return-value]


def _only_rate(s: Any) -> Any:
    from .tracks import Tracks

    return Tracks(s)
