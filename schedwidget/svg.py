"""Static picture of a schedule, for places where widgets do not render.

``render_svg`` draws the same points the designer's curve panel draws
(``schedwidget.sample.trace``): the polyline with jumps as vertical edges,
bands where a cycle is shorter than a pixel, stage joins as thin dotted lines,
pinned designs ("ghosts") in muted greys with their labels, and axes with a
few ticks at nice numbers.  The result is one standalone SVG document (no
script, no external font or stylesheet), so a saved notebook, an HTML export
or a repository's web view shows the curve without a kernel.
"""

from __future__ import annotations

import math
from numbers import Integral
from typing import Sequence
from xml.sax.saxutils import escape

import numpy as np

from .facts import warmup_of
from .sample import Trace, budget_of, trace
from .schedule import OPEN_WINDOW, Schedule, complain, window

__all__ = ["render_svg", "default_window"]

CURVE = "#0f766e"                    # deep teal: the current design
JOIN = "#64748b"                     # slate: stage joins
GHOSTS = ("#9ca3af", "#6b7280", "#a8a29e", "#78716c", "#d1d5db")  # muted greys, as the designer's pins
INK = "#334155"                      # axes and labels
GRID = "#e5e7eb"
#: A log axis spans at most this many decades below the highest rate.
MAX_DECADES = 12
LEFT, RIGHT, TOP, BOTTOM = 58.0, 22.0, 24.0, 34.0


def default_window(s: Schedule) -> int:
    """The budget a picture of ``s`` uses when none is given: its length, or a window showing its structure.

    For an open-ended schedule: a stage list shows its fixed stages plus a window
    for the open last one; endless restarts show three cycles; drops show the
    last drop plus a quarter; an inverse square root shows ten warmups; a
    triangle three cycles; an exponential decay runs until it is under 1 % of
    its peak; anything else ``OPEN_WINDOW`` ticks.

    >>> from schedwidget import drops, restarts, cosine
    >>> default_window(drops(0.1, at=(30, 60)))
    75
    >>> default_window(restarts(cosine(0.1, steps=100)))
    300
    """
    if not isinstance(s, Schedule):
        raise complain("default_window", "s", s, "a Schedule")
    return window(s)  # each kind says what window shows its structure (``_window``)


def nice_ticks(lo: float, hi: float, target: int = 5) -> np.ndarray:
    """Ticks at 1, 2 or 5 times a power of ten covering ``[lo, hi]``, about ``target`` of them."""
    span = hi - lo
    if not span > 0:
        return np.array([lo])
    raw = span / target
    mag = 10.0 ** math.floor(math.log10(raw))
    step = min((m * mag for m in (1.0, 2.0, 5.0, 10.0)), key=lambda st: abs(span / st - target))
    k0, k1 = math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9)
    return np.arange(k0, k1 + 1, dtype=float) * step


def short(v: float) -> str:
    """A tick label: ``0``, ``2000``, ``64k``, ``1.5M``, ``2B``, ``0.02``, ``1e-5``."""
    if v == 0:
        return "0"
    a = abs(v)
    for size, suffix, start in ((1e9, "B", 1e9), (1e6, "M", 1e6), (1e3, "k", 1e4)):
        if a >= start:
            return f"{v / size:.3g}" + suffix
    if a >= 1 and float(v).is_integer():
        return str(int(v))
    text = f"{v:.3g}"
    if "e" in text:
        mant, exp = text.split("e")
        text = f"{mant}e{int(exp)}"
    return text


def _xml(text: str, limit: int = 60) -> str:
    text = str(text)
    return escape(text if len(text) <= limit else text[: limit - 1] + "\u2026")


def _words(name: str, value: object, limit: int) -> str:
    """A caption the picture shows (a title or an axis name): one line of text, escaped when drawn."""
    if not isinstance(value, str) or not value.strip() or len(value) > limit or "\n" in value:
        raise complain("render_svg", name, value, f"a non-empty line of text of at most {limit} characters")
    return value.strip()


def _check(width, height, log, unit, steps_per_epoch, ghosts) -> list[tuple[str, Schedule]]:
    for name, value, lo in (("width", width, 160), ("height", height, 100)):
        if isinstance(value, bool) or not isinstance(value, Integral) or not lo <= value <= 4000:
            raise complain("render_svg", name, value, f"a whole number of pixels in [{lo}, 4000]")
    if not isinstance(log, (bool, np.bool_)):
        raise complain("render_svg", "log", log, "True or False")
    if unit not in ("step", "epoch"):
        raise complain("render_svg", "unit", unit, "one of 'step', 'epoch'")
    if steps_per_epoch is not None:
        if isinstance(steps_per_epoch, bool) or not isinstance(steps_per_epoch, Integral) or steps_per_epoch < 1:
            raise complain("render_svg", "steps_per_epoch", steps_per_epoch, "a whole number >= 1 or None")
        if unit == "epoch":
            raise complain("render_svg", "steps_per_epoch", steps_per_epoch, "None when unit='epoch'",
                           "the clock already counts epochs")
    out: list[tuple[str, Schedule]] = []
    for i, g in enumerate(ghosts):
        if not (isinstance(g, tuple) and len(g) == 2 and isinstance(g[0], str) and isinstance(g[1], Schedule)):
            raise complain("render_svg", f"ghosts[{i}]", g, "a (label, Schedule) pair")
        out.append(g)
    return out


class _Plot:
    """The mapping from (tick, rate) to pixels, and the axes' ticks."""

    def __init__(self, n: int, ys: list[np.ndarray], log: bool, width: int, height: int, top: float):
        self.n, self.log = n, log
        self.x0, self.x1 = LEFT, width - RIGHT
        self.y0, self.y1 = top, height - BOTTOM      # y0 is the top edge in pixels
        allv = np.concatenate(ys) if ys else np.zeros(1)
        hi = float(np.max(allv)) if allv.size else 0.0
        if log:
            pos = allv[allv > 0]
            if pos.size == 0:
                self.lo_dec, self.hi_dec = -3, 0
            else:
                self.hi_dec = math.ceil(math.log10(float(np.max(pos))) - 1e-12)
                self.lo_dec = max(math.floor(math.log10(float(np.min(pos))) + 1e-12), self.hi_dec - MAX_DECADES)
                if self.lo_dec >= self.hi_dec:
                    self.lo_dec = self.hi_dec - 1
        else:
            self.top = hi * 1.06 if hi > 0 else 1.0

    def px(self, t: np.ndarray | float) -> np.ndarray:
        return self.x0 + (np.asarray(t, float) / self.n) * (self.x1 - self.x0)

    def py(self, y: np.ndarray | float) -> np.ndarray:
        y = np.asarray(y, float)
        if self.log:
            floor = 10.0 ** self.lo_dec
            with np.errstate(divide="ignore"):
                frac = (np.log10(np.maximum(y, floor)) - self.lo_dec) / (self.hi_dec - self.lo_dec)
        else:
            frac = y / self.top
        return self.y1 - np.clip(frac, 0.0, 1.0) * (self.y1 - self.y0)

    def yticks(self) -> list[tuple[float, str]]:
        if self.log:
            decades = range(self.lo_dec, self.hi_dec + 1)
            stride = max(1, math.ceil(len(decades) / 7))
            return [(10.0 ** k, f"1e{k}") for k in decades if (k - self.hi_dec) % stride == 0]
        return [(v, short(v)) for v in nice_ticks(0.0, self.top, 5)]


def _points(p: _Plot, x: np.ndarray, y: np.ndarray) -> str:
    """``points`` text for a polyline, rounded to 1/100 px, repeated points dropped."""
    xy = np.round(np.stack([p.px(x), p.py(y)], axis=1), 2)
    if len(xy) > 1:
        keep = np.concatenate([[True], np.any(xy[1:] != xy[:-1], axis=1)])
        xy = xy[keep]
    return " ".join(f"{a:.2f},{b:.2f}" for a, b in xy)


def _draw(p: _Plot, tr: Trace, color: str, role: str, width: float) -> list[str]:
    out = []
    for a, b, lo, hi in zip(tr.band_x0, tr.band_x1, tr.band_lo, tr.band_hi):
        xa, xb = float(p.px(a)), float(p.px(b + 1))
        ya, yb = float(p.py(hi)), float(p.py(lo))
        out.append(f'<polygon data-role="{role}-band" fill="{color}" fill-opacity="0.3" stroke="none" '
                   f'points="{xa:.2f},{ya:.2f} {xb:.2f},{ya:.2f} {xb:.2f},{yb:.2f} {xa:.2f},{yb:.2f}"/>')
    out.append(f'<polyline data-role="{role}" fill="none" stroke="{color}" stroke-width="{width}" '
               f'stroke-linejoin="round" points="{_points(p, tr.x, tr.y)}"/>')
    return out


def _axes(p: _Plot, unit: str, spe: int | None, axis: str = "rate") -> list[str]:
    out = [f'<g data-role="axes" font-size="11" fill="{INK}">']
    for v, label in p.yticks():
        y = float(p.py(v))
        out.append(f'<line data-role="ygrid" stroke="{GRID}" x1="{p.x0:.2f}" x2="{p.x1:.2f}" y1="{y:.2f}" y2="{y:.2f}"/>')
        out.append(f'<text data-role="ytick" x="{p.x0 - 6:.2f}" y="{y + 4:.2f}" text-anchor="end">{_xml(label)}</text>')
    scale = float(spe) if spe else 1.0
    name = "epoch" if spe else unit
    for v in nice_ticks(0.0, p.n / scale, 6):
        x = float(p.px(v * scale))
        out.append(f'<line stroke="{INK}" x1="{x:.2f}" x2="{x:.2f}" y1="{p.y1:.2f}" y2="{p.y1 + 4:.2f}"/>')
        out.append(f'<text data-role="xtick" x="{x:.2f}" y="{p.y1 + 16:.2f}" text-anchor="middle">{_xml(short(v))}</text>')
    out.append(f'<line stroke="{INK}" x1="{p.x0:.2f}" x2="{p.x1:.2f}" y1="{p.y1:.2f}" y2="{p.y1:.2f}"/>')
    out.append(f'<line stroke="{INK}" x1="{p.x0:.2f}" x2="{p.x0:.2f}" y1="{p.y0:.2f}" y2="{p.y1:.2f}"/>')
    out.append(f'<text data-role="xlabel" x="{p.x1:.2f}" y="{p.y1 + 30:.2f}" text-anchor="end">{name}</text>')
    ylabel = f"{axis} (log)" if p.log else axis
    out.append(f'<text data-role="ylabel" x="6" y="{p.y0 - 10:.2f}" text-anchor="start">{ylabel}</text>')
    out.append("</g>")
    return out


def _legend(p: _Plot, ghosts: list[tuple[str, Schedule]]) -> list[str]:
    rows = [("current", CURVE)] + [(label, GHOSTS[i % len(GHOSTS)]) for i, (label, _) in enumerate(ghosts)]
    w = 34 + 6.5 * max(len(label[:40]) for label, _ in rows)
    x, y = p.x1 - w - 4, p.y0 + 4
    out = [f'<g data-role="legend" font-size="11" fill="{INK}">',
           f'<rect x="{x:.2f}" y="{y:.2f}" width="{w:.2f}" height="{6 + 15 * len(rows)}" '
           'fill="#ffffff" fill-opacity="0.85" stroke="#e5e7eb"/>']
    for i, (label, color) in enumerate(rows):
        yy = y + 13 + 15 * i
        out.append(f'<line stroke="{color}" stroke-width="2" x1="{x + 6:.2f}" x2="{x + 24:.2f}" '
                   f'y1="{yy - 4:.2f}" y2="{yy - 4:.2f}"/>')
        out.append(f'<text data-role="label" x="{x + 29:.2f}" y="{yy:.2f}">{_xml(label, 40)}</text>')
    out.append("</g>")
    return out


def render_svg(s: Schedule, steps: int | None = None, log: bool = False, width: int = 640, height: int = 240,
               unit: str = "step", steps_per_epoch: int | None = None,
               ghosts: Sequence[tuple[str, Schedule]] = (), title: str = "learning-rate schedule",
               axis: str = "rate") -> str:
    """A standalone SVG picture of ``s`` over ``steps`` ticks, from the points the designer draws.

    Parameters
    ----------
    s : the schedule (the current design, drawn in deep teal).
    steps : budget in ticks; default its length, or ``default_window(s)`` when open-ended.
    log : a log rate axis labelled at powers of ten; rates <= 0 sit on the axis bottom.
    width, height : size in pixels.
    unit : "step" or "epoch", the unit of the clock (the x axis title).
    steps_per_epoch : label the x axis in epochs (unit "step" only).
    ghosts : pinned designs as ``(label, schedule)`` pairs, drawn in greys over the same budget.
    title : what the picture shows, first words of its ``<title>`` (``"momentum schedule"`` for a momentum
        track); the budget, pinned designs and warmup follow.
    axis : the name of the y axis (``"momentum"``, ``"weight decay"``; default ``"rate"``).

    Examples
    --------
    >>> from schedwidget import drops
    >>> svg = render_svg(drops(0.1, at=(32_000, 48_000), steps=64_000), steps_per_epoch=1_150)
    >>> svg.startswith("<svg") and "#0f766e" in svg
    True
    """
    pinned = _check(width, height, log, unit, steps_per_epoch, ghosts)
    title, axis = _words("title", title, 120), _words("axis", axis, 40)
    if not isinstance(s, Schedule):
        raise complain("render_svg", "s", s, "a Schedule (built with cosine(), ramp(), stages(), ...)")
    n = budget_of(s, default_window(s) if steps is None and s.length is None else steps, "render_svg")
    cur = trace(s, n)
    others = [(label, trace(g, n)) for label, g in pinned]
    p = _Plot(n, [cur.y, cur.band_hi, *[t.y for _, t in others], *[t.band_hi for _, t in others]],
              bool(log), int(width), int(height), TOP)
    title = f"{title} over {n:,} {unit}s" + (f", with {len(others)} pinned" if others else "")
    warm = warmup_of(s)  # which warmup the design has, in the title a reader hovers over and as data
    if warm is not None:
        title += (f"; warmup laid over the first {warm[1]:,.0f} {unit}s" if warm[0] == "over"
                  else f"; warmup of {warm[1]:,.0f} {unit}s before the schedule")
    place = "" if warm is None else f' data-warmup="{warm[0]}"'
    body = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
            f'viewBox="0 0 {width} {height}" font-family="sans-serif" data-steps="{n}"{place}>',
            f"<title>{_xml(title, 200)}</title>",
            f'<rect width="{width}" height="{height}" fill="#ffffff"/>']
    body += _axes(p, unit, steps_per_epoch, axis)
    for j in cur.joins:
        x = float(p.px(j))
        body.append(f'<line data-role="join" stroke="{JOIN}" stroke-width="1" stroke-dasharray="2 3" '
                    f'x1="{x:.2f}" x2="{x:.2f}" y1="{p.y0:.2f}" y2="{p.y1:.2f}"/>')
    for i, (_, t) in enumerate(others):
        body += _draw(p, t, GHOSTS[i % len(GHOSTS)], "ghost", 1.5)
    body += _draw(p, cur, CURVE, "curve", 2.0)
    if others:
        body += _legend(p, pinned)
    body.append("</svg>")
    return "\n".join(body)
