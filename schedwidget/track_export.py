"""The ready snippet for tracks and per-group designs: one function per track and group, and a small clock class.

The snippet needs only the standard library at training time (no schedwidget, and no torch scheduler class):
its ``TrackClock`` reads and writes ``optimizer.param_groups`` and keeps one integer, like ``schedwidget.clock``.
"""

from __future__ import annotations

from string import Template
from typing import Any

from .codegen import TAKEN
from .schedule import complain

__all__ = ["to_torch_tracks"]

#: Names the snippet defines itself besides the generated functions.
SNIPPET_NAMES = frozenset({"TRACKS", "TrackClock", "make_scheduler", "torch"})

_HEAD = """\
# Schedules exported by schedwidget: export them again rather than editing them.
# Unit: $unit. Budget: $budget. $groups_doc
# Tracks set at every tick: $tracks_doc.
# Needs only the standard library at training time (not schedwidget, not a torch scheduler class).
#
# Use:
#     optimizer = torch.optim.$example
#     scheduler = make_scheduler(optimizer)  # every group now holds the values of t = 0
#     for epoch in range(epochs):
#         for inputs, targets in loader:
#             loss = loss_fn(model(inputs), targets)
#             loss.backward()
#             optimizer.step()
#             optimizer.zero_grad()
$loop#
# The clock t counts $counts.
#
# Resume (both ways continue with exactly the values of an uninterrupted run):
# * State dicts: save model.state_dict(), optimizer.state_dict() and scheduler.state_dict() ({"tick": t}).
#   To resume, build model and optimizer as before, optimizer.load_state_dict(...),
#   scheduler = make_scheduler(optimizer), then scheduler.load_state_dict(...).
# * By tick alone: scheduler = make_scheduler(optimizer, start_tick=k), k = $done.
#
# Momentum: SGD and RMSprop groups get "momentum"; Adam-type groups (with "betas") get betas[0].
# Weight decay: torch's AdamW multiplies each weight by (1 - lr * weight_decay) at every step
# (p -= lr * wd * p), so the decay applied per step is the rate times the weight decay.
$imports
"""

_TAIL = """

TRACKS = [  # one dict per param group, in optimizer.param_groups order: track -> function of t
$table]


class TrackClock:
    \"\"\"Sets each param group's lr and tracked hyperparameters to their functions' values at tick t.\"\"\"

    def __init__(self, optimizer, tracks, start_tick=0):
        if type(start_tick) is not int or start_tick < 0:
            raise ValueError(f"start_tick must be a whole number >= 0, got {start_tick!r}")
        groups = optimizer.param_groups
        if len(groups) != len(tracks):
            raise ValueError(
                f"these schedules were exported for {len(tracks)} param group(s), the optimizer has "
                f"{len(groups)}: export them again with one design per group (in param_groups order)")
        self.optimizer, self.tick, self.slots = optimizer, start_tick, []
        for i, (group, functions) in enumerate(zip(groups, tracks)):
            slots = []
            for track, function in functions.items():
                if track == "momentum" and "momentum" not in group and "betas" in group:
                    key, index = "betas", 0
                else:
                    key, index = {"rate": ("lr", None), "momentum": ("momentum", None), "beta2": ("betas", 1),
                                  "weight_decay": ("weight_decay", None)}[track]
                if key not in group:
                    raise ValueError(f"param_groups[{i}] has no {key!r} entry for the {track} track; choose "
                                     f"an optimizer that has one, or export the design without that track")
                slots.append((key, index, function))
            self.slots.append(slots)
        self._write()

    def _write(self):
        for group, slots in zip(self.optimizer.param_groups, self.slots):
            for key, index, function in slots:
                value = function(self.tick)
                if index is not None:
                    betas = list(group["betas"])
                    betas[index] = value
                    group["betas"] = tuple(betas)
                elif hasattr(group[key], "fill_"):  # a tensor entry keeps its identity
                    group[key].fill_(value)
                else:
                    group[key] = value

    def step(self):
        \"\"\"Move to the next tick and write its values.\"\"\"
        self.tick += 1
        self._write()

    def state_dict(self):
        return {"tick": self.tick}

    def load_state_dict(self, state):
        tick = state["tick"]
        if type(tick) is not int or tick < 0:
            raise ValueError(f"state['tick'] must be a whole number >= 0, got {tick!r}")
        self.tick = tick
        self._write()


def make_scheduler(optimizer, start_tick=0):
    \"\"\"A TrackClock running TRACKS; start_tick = $done (0 for a fresh run).\"\"\"
    return TrackClock(optimizer, TRACKS, start_tick)
"""

_LOOP = {
    "step": "#             scheduler.step()  # once per optimizer update, right after optimizer.step()\n",
    "epoch": "#         scheduler.step()  # once per epoch, after the epoch's last optimizer.step()\n",
}


def to_torch_tracks(design: Any, unit: str = "step", steps: Any = None, name: str = "lr_at",
                    steps_per_epoch: int | None = None) -> str:
    """A ready snippet for ``tracks(...)`` or per-group designs: the functions, ``TRACKS`` and a clock class.

    Parameters
    ----------
    design : ``tracks(...)``, or a list or mapping of designs (Schedules or tracks), one per param group.
    unit : "step" or "epoch", where ``scheduler.step()`` goes.
    steps : the budget, in ticks of ``unit`` or a ``Budget``; every group's rate must have that length.
    name : the rate function's name (other tracks: ``momentum_at``, ``beta2_at``, ``weight_decay_at``;
        per group, the group's name or ``group<i>`` and ``_`` first).
    steps_per_epoch : adds the budget in epochs to the comments (unit "step").

    Examples
    --------
    >>> from schedwidget import flat, one_cycle
    >>> from schedwidget.tracks import inverse_momentum, tracks
    >>> rate = one_cycle(0.1, steps=1000)
    >>> text = to_torch_tracks(tracks(rate, momentum=inverse_momentum(rate), weight_decay=flat(5e-4)))
    >>> "def momentum_at(t):" in text and "class TrackClock:" in text
    True
    """
    from .budget import check_length
    from .export import _spe, _track_functions, _unit
    from .tracks import as_groups

    owner = "to_torch"
    u = _unit(owner, unit)
    spe = _spe(owner, steps_per_epoch)
    g = as_groups(owner, design)
    if g is None:
        raise complain(owner, "design", design, "tracks(...) or one design per param group",
                       "for a single schedule use to_torch(s, base_lr)")
    if steps is not None:
        for t in g.groups:
            check_length(t.rate, steps, u, owner=owner)
    code, names, _ = _track_functions(owner, g, name, u, spe, TAKEN | SNIPPET_NAMES | frozenset({"self"}))
    imports, _, body = code.partition("\n\n")
    n = g.groups[0].length
    budget = "open-ended" if n is None else f"{n:,} {u}s"
    if n is not None and spe and u == "step":
        budget += f" ({n / spe:g} epochs of {spe:,} steps)"
    tracks_used = sorted({k for fns in names for k in fns}, key=["rate", "momentum", "beta2", "weight_decay"].index)
    table = "".join("    {" + ", ".join(f"{k!r}: {v}" for k, v in fns.items()) + "},\n" for fns in names)
    adam = "beta2" in tracks_used
    words = dict(
        unit=u, budget=budget, loop=_LOOP[u],
        groups_doc="One design for the one param group." if len(g) == 1
        else f"One design per param group ({len(g)}), in optimizer.param_groups order.",
        tracks_doc=", ".join(t.replace("_", " ") for t in tracks_used),
        example=("AdamW(param_groups, lr=1e-3, betas=(0.9, 0.999), weight_decay=0.01)  # any starting values"
                 if adam else "SGD(param_groups, lr=0.1, momentum=0.9, weight_decay=5e-4)  # any starting values"),
        counts="optimizer updates: t = k is the (k+1)-th update" if u == "step"
        else "finished epochs: every update in epoch e uses the values for t = e",
        done="the optimizer updates already done" if u == "step" else "the epochs already done",
        imports=imports.rstrip("\n") + "\n" if imports.strip() else "", table=table,
    )
    return Template(_HEAD).substitute(words) + "\n" + body.lstrip("\n") + Template(_TAIL).substitute(words)
