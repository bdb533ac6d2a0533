"""Readouts and pictures of tracks: ``facts`` per track, one sentence per track with how torch's AdamW applies
weight decay, the decay per step as a design of its own, and small multiples on one clock."""

from __future__ import annotations

from typing import Any

from .schedule import Schedule, complain
from .tracks import GroupDesigns, Tracks, _brief, as_groups

__all__ = ["decay_per_step", "track_facts", "tracks_sentence", "tracks_svg"]

#: Each track's picture: the first words of its title and the name of its y axis.
PICTURE_WORDS = {"rate": ("learning-rate schedule", "rate"),
                 "momentum": ("momentum schedule (SGD momentum or the first Adam beta)", "momentum"),
                 "beta2": ("second Adam beta schedule", "beta2"),
                 "weight_decay": ("weight-decay schedule", "weight decay")}


def decay_per_step(t: Tracks) -> Schedule | None:
    """``rate * weight_decay``: the share of each weight that torch's AdamW takes off per step, or None.

    torch's AdamW (and Adam or SGD with decoupled weight decay) multiplies every weight by
    ``1 - lr * weight_decay`` at each step (``p -= lr * wd * p``), so the decay per step follows the rate.
    """
    if not isinstance(t, Tracks):
        raise complain("decay_per_step", "t", _brief(t), "tracks(...)",
                       "the decay per step is the rate times the weight-decay track of a tracks value")
    if t.weight_decay is None:
        return None
    return t.rate * t.weight_decay


def _groups_of(x: Any) -> GroupDesigns:
    g = as_groups("track_facts", x)
    if g is None:
        raise complain("track_facts", "design", _brief(x), "tracks(...) or per_group(...)",
                       "for a single schedule use facts()")
    return g


def track_facts(x: Tracks | GroupDesigns, steps: int | None = None, steps_per_epoch: int | None = None,
                unit: str = "step") -> dict[str, Any]:
    """``facts()`` of every track, keyed by track name (and ``"decay_per_step"`` with a weight decay).

    For per-group designs the keys are ``"<group>.<track>"``, with the group's name or its index.
    Every track is read over the rate's budget (``steps``, needed when the rate is open-ended).
    """
    from .facts import facts

    g = _groups_of(x)
    out: dict[str, Any] = {}
    single = len(g) == 1 and isinstance(x, Tracks)
    for i, t in enumerate(g.groups):
        prefix = "" if single else f"{g.names[i] if g.names else i}."
        n = steps if steps is not None else t.length
        items = list(t.items())
        d = decay_per_step(t)
        if d is not None:
            items.append(("decay_per_step", d))
        for name, s in items:
            out[prefix + name] = facts(s, steps=n, steps_per_epoch=steps_per_epoch, unit=unit)
    return out


def tracks_sentence(x: Tracks | GroupDesigns, steps: int | None = None, steps_per_epoch: int | None = None,
                    unit: str = "step") -> str:
    """One line per track (its ``facts`` sentence), and how torch's AdamW applies the weight decay."""
    found = track_facts(x, steps, steps_per_epoch, unit)
    lines = []
    for key, f in found.items():
        if key.endswith("decay_per_step"):
            lines.append(f"{key}: torch's AdamW multiplies each weight by (1 - lr * weight_decay) every step "
                         f"(p -= lr * wd * p), so the decay per step is rate x weight_decay: from {f.first:.3g} "
                         f"at the first {unit}, peak {f.peak:.3g} at {unit} {f.peak_at:,}, {f.final:.3g} at the "
                         f"last {unit}.")
        elif key.split(".")[-1] == "rate":
            lines.append(f"{key}: {f.sentence}")
        else:  # a momentum or a decay is read for its range as much as its peak
            lines.append(f"{key}: {f.first:.6g} at the first {unit}, lowest {f.minimum:.6g} at {unit} "
                         f"{f.minimum_at:,}, highest {f.peak:.6g} at {unit} {f.peak_at:,}, {f.final:.6g} at the "
                         f"last {unit} ({f.steps - 1:,}).")
    return "\n".join(lines)


def tracks_svg(x: Tracks | GroupDesigns, steps: int | None = None, width: int = 640, height: int = 180,
               unit: str = "step", steps_per_epoch: int | None = None) -> str:
    """Small multiples: one picture per track (and group) on the same clock, stacked, each with its own axis.

    Each panel's title and y axis say what it shows (``"momentum schedule ..."``, axis ``"momentum"``);
    per-group panels start with the group's name.
    """
    from .svg import _xml, default_window, render_svg

    g = _groups_of(x)
    panels: list[tuple[str, str]] = []
    for i, t in enumerate(g.groups):
        n = steps if steps is not None else (t.length if t.length is not None else default_window(t.rate))
        label = "" if len(g) == 1 else f"{g.names[i] if g.names else f'group {i}'}: "
        for name, s in t.items():
            title, axis = PICTURE_WORDS[name]
            body = render_svg(s, steps=n, width=width, height=height, unit=unit, steps_per_epoch=steps_per_epoch,
                              title=label + title, axis=axis)
            panels.append((label + name.replace("_", " "), body))
    gap = 18
    total = len(panels) * (height + gap)
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{total}" '
           f'viewBox="0 0 {width} {total}" font-family="sans-serif" data-role="tracks">',
           f"<title>{_xml('tracks on one clock: ' + ', '.join(p[0] for p in panels), 200)}</title>"]
    for k, (label, body) in enumerate(panels):
        y = k * (height + gap)
        out.append(f'<text data-role="track" x="8" y="{y + 13}" font-size="12" fill="#334155">{_xml(label)}</text>')
        out.append(body.replace("<svg ", f'<svg x="0" y="{y + gap}" ', 1))
    out.append("</svg>")
    return "\n".join(out)
