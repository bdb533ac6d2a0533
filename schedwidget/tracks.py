"""More than the rate: momentum, the second Adam beta and weight decay on the rate's clock, and a design per group.

``tracks(rate, momentum=None, beta2=None, weight_decay=None)`` holds a rate design and optional designs for other
hyperparameters read on the same clock; each is checked for its own range at every tick of its budget (through the
design's interval bounds, then a bounded scan where those bounds are not tight enough).  ``per_group(...)`` holds
one design (or set of tracks) per optimizer param group.  ``inverse_momentum`` builds the momentum that moves
against a one-cycle or triangular rate (Smith 2018) from our own kinds.  The torch side is ``clock.TrackClock``;
readouts and pictures are in ``track_readouts``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Iterator, Mapping, Sequence

import numpy as np

from .schedule import MAX_TICKS, Schedule, ScheduleError, complain

__all__ = ["Tracks", "tracks", "GroupDesigns", "per_group", "as_groups", "inverse_momentum", "TRACK_NAMES",
           "check_track", "tracks_from_spec", "load_tracks"]

#: The tracks, in order; ``rate`` is always there.
TRACK_NAMES = ("rate", "momentum", "beta2", "weight_decay")
#: Each other track's range: (lowest, highest, whether the highest is excluded) and its words.
RANGES = {"momentum": (0.0, 1.0, True, "in [0, 1) at every tick"),
          "beta2": (0.0, 1.0, True, "in [0, 1) at every tick"),
          "weight_decay": (0.0, math.inf, False, ">= 0 at every tick")}
#: The one-cycle momentum companion's defaults (0.95 down to 0.85): common practice, no source for the values;
#: the shape (momentum falling while the rate rises, rising while it falls) is Smith 2018's cyclical momentum.
MOMENTUM_HIGH, MOMENTUM_LOW = 0.95, 0.85


def _brief(value: Any, limit: int = 100) -> Any:
    from .factor import _brief as brief

    return brief(value, limit)


def _peak(s: Schedule) -> tuple[float, int, bool]:
    """The highest value of ``s`` at any tick (its held value past its length included), the first tick there,
    and whether every tick was read (budgets up to 2**21 ticks); longer ones are read the way ``facts`` reads
    them, from a grid refined by interval bounds, in bounded work."""
    from .sample import breaks
    from .scan import _grid, _refine_peak, _scan, work

    n = s.length
    end = MAX_TICKS if n is None else int(n) + 1  # ticks [0, end): the held value at the length included
    brk = breaks(s, end)
    extra = np.concatenate([brk, brk - 1, [end - 1]]).astype(np.int64)
    grid, exact = _grid(end, 2 ** 21, extra[(extra >= 0) & (extra < end)], work(s))
    peak, at, *_ = _scan(s, grid, end)
    if not exact:
        peak, at = _refine_peak(s, grid, peak, at)
    return peak, at, exact


def check_track(owner: str, name: str, s: Any) -> Schedule:
    """``s`` if it is a Schedule whose values stay in the range of track ``name`` at every tick.

    The design's interval bounds over its whole budget settle it in one call for every design built from
    monotone pieces; where they are not tight (products, sums), budgets up to 2**21 ticks are read tick by
    tick, and a longer budget that the bounds do not keep inside the range is refused.
    """
    if not isinstance(s, Schedule):
        raise complain(owner, name, _brief(s), "a Schedule (flat(0.9), ramp(...), inverse_momentum(...), ...)",
                       "a constant is flat(value)" if isinstance(s, (int, float)) else None)
    lo, hi, open_hi, words = RANGES[name]
    n = s.length
    b = float(MAX_TICKS if n is None else n)
    top = float(s._span(np.array([0.0]), np.array([b]))[1][0])
    if top < hi or (top == hi and not open_hi):
        return s  # the interval bound settles it for every tick
    peak, at, exact = _peak(s)
    inside = peak < hi or (peak == hi and not open_hi)
    if inside and exact:
        return s  # every tick read
    if inside:  # a grid found nothing, but it cannot vouch for every tick: refuse what is not shown to fit
        raise complain(owner, name, _brief(s), f"a design whose values stay {words}",
                       f"its interval bounds reach {top!r}, and its budget is too long to read every tick; hold "
                       f"it inside the range, e.g. with .clip(high=...)")
    hint = f"it reaches {peak!r} at tick {at:,}"
    if name in ("momentum", "beta2"):
        hint += "; a momentum of 1 or more never forgets a gradient and diverges"
    raise complain(owner, name, _brief(s), f"a design whose values stay {words}", hint)


@dataclass(frozen=True, slots=True)
class Tracks:
    """A rate design and optional designs for other hyperparameters, read on the same clock.

    Build it with ``tracks(...)``.  ``momentum`` is SGD's momentum or the first Adam beta, ``beta2`` the
    second Adam beta, ``weight_decay`` the optimizer's weight decay; each holds its value past its length,
    like every design.  ``t(7)`` gives a dict of the values at tick 7.
    """

    rate: Schedule
    momentum: Schedule | None = None
    beta2: Schedule | None = None
    weight_decay: Schedule | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.rate, Schedule):
            raise complain("tracks", "rate", _brief(self.rate), "a Schedule (cosine(...), one_cycle(...), ...)")
        n = self.rate.length
        for name in TRACK_NAMES[1:]:
            s = getattr(self, name)
            if s is None:
                continue
            check_track("tracks", name, s)
            if s.length is not None and s.length != n:
                raise complain("tracks", f"{name}'s length", s.length,
                               f"the rate's length ({'open-ended' if n is None else f'{n:,}'}) or None",
                               "every track runs on the rate's clock; stretch it with .stretch(n), or use an "
                               "open-ended design (flat(0.9)) for a constant")

    @property
    def length(self) -> int | None:
        """The rate's length: the budget every track runs on."""
        return self.rate.length

    def items(self) -> Iterator[tuple[str, Schedule]]:
        """(name, design) for the rate and every track that is set, in ``TRACK_NAMES`` order."""
        for name in TRACK_NAMES:
            s = getattr(self, name)
            if s is not None:
                yield name, s

    def names(self) -> tuple[str, ...]:
        return tuple(name for name, _ in self.items())

    def __call__(self, t: Any) -> dict[str, Any]:
        """The value of every track at tick(s) ``t``: a dict from track name to a float or an array."""
        return {name: s(t) for name, s in self.items()}

    def scaled(self, factor: float) -> Tracks:
        """The same tracks with the rate multiplied by ``factor`` (a param group's multiplier)."""
        return self if factor == 1.0 else replace(self, rate=self.rate * factor)

    def __repr__(self) -> str:
        return "tracks(" + ", ".join(f"{name}={s!r}" for name, s in self.items()) + ")"


def tracks(rate: Schedule, momentum: Schedule | None = None, beta2: Schedule | None = None,
           weight_decay: Schedule | None = None) -> Tracks:
    """A rate design with optional momentum, second-beta and weight-decay designs on the same clock.

    Each other design is checked for its own range at every tick: momentum and beta2 in [0, 1), weight decay
    >= 0; a design with a length must have the rate's length (an open-ended one, such as ``flat(0.999)``,
    holds one value throughout).

    Examples
    --------
    >>> from schedwidget import flat, one_cycle
    >>> rate = one_cycle(0.1, steps=100, tail=0.1)
    >>> t = tracks(rate, momentum=inverse_momentum(rate), weight_decay=flat(5e-4))
    >>> t(45)["rate"], t(45)["momentum"]
    (0.1, 0.85)
    """
    return Tracks(rate, momentum, beta2, weight_decay)


def _tracks_of(owner: str, where: str, x: Any) -> Tracks:
    if isinstance(x, Tracks):
        return x
    if isinstance(x, Schedule):
        return Tracks(x)
    raise complain(owner, where, _brief(x), "a Schedule or tracks(...)")


@dataclass(frozen=True, slots=True)
class GroupDesigns:
    """One set of tracks per optimizer param group, in ``optimizer.param_groups`` order (``names`` optional)."""

    groups: tuple[Tracks, ...]
    names: tuple[str, ...] | None = None

    def __post_init__(self) -> None:
        from .factor import MAX_GROUPS

        if not isinstance(self.groups, tuple) or not self.groups or len(self.groups) > MAX_GROUPS:
            raise complain("per_group", "designs", _brief(self.groups),
                           f"between 1 and {MAX_GROUPS:,} designs, one per param group")
        for i, g in enumerate(self.groups):
            if not isinstance(g, Tracks):
                raise complain("per_group", f"designs[{i}]", _brief(g), "tracks(...)")
        if self.names is not None:
            from .codegen import check_name

            if len(self.names) != len(self.groups):
                raise complain("per_group", "names", self.names, f"one name per group ({len(self.groups)})")
            for i, name in enumerate(self.names):
                try:  # a builtin's name is fine here: functions are named "<group>_lr_at"
                    check_name("per_group", name, frozenset())
                except ScheduleError as exc:
                    raise ScheduleError(f"per_group: group name {i}: {exc}") from None
            if len(set(self.names)) != len(self.names):
                raise complain("per_group", "names", self.names, "distinct names")

    def __len__(self) -> int:
        return len(self.groups)

    def label(self, i: int) -> str:
        return f"group {i}" if self.names is None else f"group {i} ({self.names[i]!r})"

    def __repr__(self) -> str:
        if self.names is None:
            return f"per_group([{', '.join(map(repr, self.groups))}])"
        return "per_group({" + ", ".join(f"{n!r}: {g!r}" for n, g in zip(self.names, self.groups)) + "})"


def per_group(designs: Sequence[Schedule | Tracks] | Mapping[str, Schedule | Tracks]) -> GroupDesigns:
    """One design (a Schedule or ``tracks(...)``) per param group: a list in ``param_groups`` order, or a
    mapping from group names (in that order; checked against each group's ``"name"`` entry where it has one).

    Examples
    --------
    >>> from schedwidget import cosine, flat, stages, warmup
    >>> backbone = stages(flat(0.0, steps=10), warmup(cosine(0.01, steps=80), steps=10))
    >>> g = per_group({"backbone": backbone, "head": flat(0.01, steps=100)})
    >>> len(g), g.names
    (2, ('backbone', 'head'))
    """
    if isinstance(designs, GroupDesigns):
        return designs
    if isinstance(designs, Mapping):
        names = tuple(designs.keys())
        items = list(designs.values())
    elif isinstance(designs, (list, tuple)):
        names, items = None, list(designs)
    else:
        raise complain("per_group", "designs", _brief(designs),
                       "a list of designs in param-group order, or a mapping from group names to designs")
    return GroupDesigns(tuple(_tracks_of("per_group", f"designs[{i}]", x) for i, x in enumerate(items)),
                        names)  # type: ignore[arg-type]


def tracks_from_spec(d: Any) -> Tracks | GroupDesigns:
    """The tracks or per-group designs a parsed spec holds (a spec of one schedule gives ``tracks(it)``).

    The round trip of ``to_spec``: ``tracks_from_spec(to_spec(t)) == t``.
    """
    from .spec import read_design

    design = read_design(d)
    return Tracks(design.schedule) if design.tracks is None else design.tracks


def load_tracks(path: Any) -> Tracks | GroupDesigns:
    """Read a spec file of tracks or per-group designs (written by ``save``); one schedule gives ``tracks(it)``."""
    from .spec import load_design

    design = load_design(path)
    return Tracks(design.schedule) if design.tracks is None else design.tracks


def as_groups(owner: str, design: Any, multipliers: Sequence[float] | None = None) -> GroupDesigns | None:
    """The per-group designs ``design`` stands for, or None for a single Schedule (today's route).

    ``tracks(...)`` alone is one group's design (with ``multipliers``, one copy per multiplier, its rate
    scaled); a list or mapping is one design per group (then ``multipliers`` must be None).
    """
    from .factor import _multipliers
    from .spec import Design

    if isinstance(design, Design):
        design = design.schedule if design.tracks is None else design.tracks
    if isinstance(design, Schedule):
        return None
    if isinstance(design, Tracks):
        if multipliers is None:
            return GroupDesigns((design,))
        return GroupDesigns(tuple(design.scaled(m) for m in _multipliers(owner, multipliers)))
    if isinstance(design, (GroupDesigns, Mapping, list, tuple)):
        if multipliers is not None:
            raise complain(owner, "groups", _brief(multipliers), "None when a design is given per group",
                           "each group's design already sets its rate; scale a design with design * 0.1")
        return per_group(design)
    raise complain(owner, "design", _brief(design),
                   "a Schedule, tracks(...), or a list or mapping of them (one per param group)")


# ------------------------------------------------------------------ the momentum companion
def _dyadic_scale(xs: Sequence[float], n: int) -> int:
    """The smallest power of two 2**j that makes every knot ``xs`` a whole tick, else the largest with
    ``n * 2**j <= 2**53`` (the knots then rounded to 2**-j ticks: for budgets under 2**23 ticks that moves
    them by under 2**-31 ticks, which changes no value by more than float rounding)."""
    top = max(0, (MAX_TICKS // max(int(n), 1)).bit_length() - 1)
    for j in range(0, top + 1):
        if all(math.ldexp(x, j).is_integer() for x in xs):
            return j
    return top


def _through(xs: Sequence[float], ys: Sequence[float], curve: str, n: int) -> Schedule:
    """The design through ``(xs[i], ys[i])``, each piece a ramp of ``curve``: on the clock scaled by 2**j so
    every knot is a whole tick, then stretched back (a power of two: the stretched clock is exact)."""
    from .combine import stages
    from .shapes import flat, ramp

    j = _dyadic_scale(xs, n)
    ticks = [round(math.ldexp(x, j)) for x in xs]
    parts = []
    for a, b, ya, yb in zip(ticks[:-1], ticks[1:], ys[:-1], ys[1:]):
        parts.append(flat(ya, steps=b - a) if ya == yb else ramp(ya, yb, b - a, curve=curve))
    s = stages(*parts)
    return s if j == 0 else s.stretch(n)


def inverse_momentum(design: Schedule, high: float = MOMENTUM_HIGH, low: float = MOMENTUM_LOW) -> Schedule:
    """The momentum that moves against a one-cycle or triangular rate: ``high`` where the rate is low, ``low``
    at its peak (Smith 2018, cyclical momentum; the defaults 0.95 and 0.85 are common practice, no source).

    A scaled (``design * c``) or stretched one is followed through to its shape.
    For ``one_cycle`` the momentum runs through the same phase ends with the same curve: ``high`` at the start,
    ``low`` at the peak, back to ``high`` where the cycle ends, then ``high`` through the tail.  For
    ``triangle`` it is ``high - (high - low) * shape`` with the triangle's own shape, amplitude shrinking
    alike each cycle (a triangle with ``shrink < 1`` needs ``steps``).  Built from ramps, flats, stages, a
    stretch and triangles, so it is exact at every tick and exports like any design.

    Examples
    --------
    >>> from schedwidget import one_cycle
    >>> m = inverse_momentum(one_cycle(0.1, steps=1000, tail=0.1))
    >>> m(0), m(450), m(900), m(1000)
    (0.95, 0.85, 0.95, 0.95)
    """
    owner = "inverse_momentum"
    from .factor import _positive

    hi, lo = _positive(owner, "high", high, zero=True), _positive(owner, "low", low, zero=True)
    if not hi < 1.0:
        raise complain(owner, "high", high, "a momentum in [0, 1)")
    if lo > hi:
        raise complain(owner, "low", low, f"<= high = {hi!r}", "the momentum is lowest where the rate peaks")
    if isinstance(design, Schedule):
        if design.kind == "scale":  # a scaled rate keeps its phases
            return inverse_momentum(design._pointwise_target(), hi, lo)
        inner = design._unstretched()
        if inner is not design:  # a stretched rate: the same phases, moved in proportion
            return inverse_momentum(inner, hi, lo).stretch(design.length)
    kind = getattr(design, "kind", None)
    knots_of = getattr(design, "_knots", None)
    if kind == "one_cycle" and callable(knots_of):
        xs, ys = knots_of()
        top = int(np.argmax(ys))
        ms = [lo if i == top else hi for i in range(len(xs))]
        xs, n = [float(x) for x in xs], int(design.length)
        if xs[-1] < n:  # a cycle that ends before its length (ends='on') holds its last value up to it
            xs, ms = xs + [float(n)], ms + [ms[-1]]
        return _through(xs, ms, getattr(design, "curve", "linear"), n)
    if kind == "triangle":
        return _triangle_momentum(design, hi, lo)
    raise complain(owner, "design", _brief(design), "a one_cycle(...) or triangle(...) design",
                   "for another shape, build the momentum design directly (ramp, stages, knots, ...)")


def _triangle_momentum(s: Any, hi: float, lo: float) -> Schedule:
    from .combine import stages
    from .shapes import knots, ramp, triangle

    h, n = int(s.half_period), s.length
    f = getattr(s, "fall", None) or h  # ticks of the fall (a triangle with unequal rise and fall), else h
    if s.shrink == 1.0 and (n is None or n > h):
        # a first falling half, then a triangle that rises while the rate falls: f ticks up, h ticks down
        rest = triangle(lo, hi, half_period=f, steps=None if n is None else n - h,
                        **({} if f == h else {"fall": h}))
        return stages(ramp(hi, lo, h), rest)
    if n is None:
        raise complain("inverse_momentum", "design", _brief(s), "a triangle with steps when shrink < 1",
                       "each cycle's momentum has its own low; give the triangle a budget (steps=...)")
    p = h + f
    starts = np.arange(0, n + 1, p, dtype=np.int64)
    ticks = np.unique(np.concatenate([starts, starts + h, [n]]))
    ticks = ticks[ticks <= n]
    if ticks.size > 2 ** 16:
        raise complain("inverse_momentum", "design", _brief(s), f"a triangle of at most {2 ** 15:,} cycles in its "
                       "budget when shrink < 1", "its momentum is a table of knots, two per cycle")
    span = s.high - s.low
    rate = s(ticks)
    ys = hi - (hi - lo) * (rate - s.low) / span if span > 0 else np.full(ticks.shape, hi)
    return knots(list(zip(ticks.tolist(), np.clip(ys, lo, hi).tolist())), steps=n)


def __getattr__(name: str) -> Any:
    # the readouts and pictures live in track_readouts.py (which imports this module); importable from here too
    if name in ("decay_per_step", "track_facts", "tracks_sentence", "tracks_svg"):
        from . import track_readouts

        return getattr(track_readouts, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
