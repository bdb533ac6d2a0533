"""The static SVG picture: well-formed, bounded, and drawn where the schedule says."""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from schedwidget import (ScheduleError, cosine, drops, exp_decay, flat, inv_sqrt, one_cycle, ramp, restarts,
                         stages, triangle, warmup)
from schedwidget.sample import trace
from schedwidget.svg import default_window, render_svg

NS = {"s": "http://www.w3.org/2000/svg"}


def parse(svg: str) -> ET.Element:
    root = ET.fromstring(svg)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    return root


def role(root: ET.Element, name: str, tag: str = "*") -> list[ET.Element]:
    return [e for e in root.iter() if e.get("data-role") == name and (tag == "*" or e.tag.endswith(tag))]


def points(el: ET.Element) -> np.ndarray:
    return np.array([[float(v) for v in p.split(",")] for p in el.get("points").split()])


def frame(root: ET.Element) -> tuple[float, float, float, float]:
    """Left, right, top and bottom of the plot area, read from the drawn axis lines."""
    axes = role(root, "axes")[0]
    lines = [e for e in axes if e.tag.endswith("line") and e.get("data-role") is None]
    xaxis = [e for e in lines if e.get("y1") == e.get("y2") and e.get("x1") != e.get("x2")][-1]
    yaxis = [e for e in lines if e.get("x1") == e.get("x2") and float(e.get("y2")) - float(e.get("y1")) > 20][-1]
    return (float(xaxis.get("x1")), float(xaxis.get("x2")), float(yaxis.get("y1")), float(yaxis.get("y2")))


def yscale(root: ET.Element) -> tuple[float, float]:
    """Pixel y of rate 0 and pixels per unit of rate, read from the first two y tick labels."""
    ticks = sorted((float(e.text), float(e.get("y")) - 4) for e in role(root, "ytick", "text"))
    (v0, y0), (v1, y1) = ticks[0], ticks[1]
    per_unit = (y0 - y1) / (v1 - v0)
    return y0 + v0 * per_unit, per_unit


def labels(root: ET.Element, name: str) -> dict[str, ET.Element]:
    return {e.text: e for e in role(root, name, "text")}


class TestRenderSvg:
    """render_svg draws a standalone, bounded picture from the sampled trace."""

    def test_well_formed_standalone(self):
        """The output parses as XML, declares the SVG namespace and pulls in nothing external."""
        svg = render_svg(warmup(cosine(0.1, steps=9_000), 1_000))
        root = parse(svg)
        assert root.get("font-family") == "sans-serif"
        for needle in ("<script", "href", "@import", "url("):
            assert needle not in svg
        curve = role(root, "curve", "polyline")
        assert len(curve) == 1 and curve[0].get("stroke") == "#0f766e"

    def test_repr_svg_is_render_svg(self):
        """A schedule's rich display is the same picture."""
        s = drops(0.1, at=(30,), steps=90)
        assert s._repr_svg_() == render_svg(s)

    @pytest.mark.parametrize("n", [10**3, 10**4, 10**6, 10**9])
    @pytest.mark.parametrize("make", [
        lambda: cosine(0.1, steps=100),
        lambda: restarts(cosine(0.1, steps=1_000)),
        lambda: triangle(0.001, 0.01, half_period=37, shrink=0.999),
        lambda: exp_decay(0.1, 0.9, every=7),
        lambda: drops(0.1, at=tuple(range(50, 5000, 50))),
    ])
    def test_point_count_bounded(self, make, n):
        """Budgets from 1e3 to 1e9 ticks give at most a few thousand points and a modest file."""
        svg = render_svg(make(), steps=n)
        root = parse(svg)
        total = sum(len(points(e)) for e in root.iter() if e.tag.endswith("polyline"))
        assert total <= 4_200  # trace draws <= 2 x 1,000 segments plus jump edges
        assert len(role(root, "curve-band", "polygon")) <= 1_000
        assert len(svg) < 400_000
        assert root.get("data-steps") == str(n)

    @pytest.mark.parametrize("n, at", [(64_000, 32_000), (1_000, 500), (10**9, 250_000_000)])
    def test_jump_is_vertical_at_its_tick(self, n, at):
        """A drop at tick ``at`` of ``n`` is one vertical edge at x = left + at / n * (right - left)."""
        s = drops(0.1, at=(at,), factor=0.1, steps=n)
        root = parse(render_svg(s))
        left, right, top, bottom = frame(root)
        xy = points(role(root, "curve", "polyline")[0])
        vertical = np.flatnonzero((np.diff(xy[:, 0]) == 0) & (np.abs(np.diff(xy[:, 1])) > 1))
        assert len(vertical) == 1
        i = vertical[0]
        assert xy[i, 0] == pytest.approx(left + at / n * (right - left), abs=0.01)
        # the edge runs from the old rate (0.1) down to the new one (0.1 * 0.1), read off the y grid lines
        y0, per_unit = yscale(root)
        assert xy[i, 1] == pytest.approx(y0 - 0.1 * per_unit, abs=0.02)
        assert xy[i + 1, 1] == pytest.approx(y0 - 0.01 * per_unit, abs=0.02)

    def test_jump_under_its_axis_tick(self):
        """The drop at 32,000 lines up with the x tick labelled 32k."""
        root = parse(render_svg(drops(0.1, at=(32_000,), steps=64_000), width=800))
        ticks = labels(root, "xtick")
        assert "32k" in ticks or "30k" in ticks
        xy = points(role(root, "curve", "polyline")[0])
        edge = xy[np.flatnonzero(np.diff(xy[:, 0]) == 0)[0], 0]
        if "32k" in ticks:
            assert edge == pytest.approx(float(ticks["32k"].get("x")), abs=0.01)
        else:  # ticks at 10k steps: 32k lies 2/10 of the way from 30k to 40k
            a, b = float(ticks["30k"].get("x")), float(ticks["40k"].get("x"))
            assert edge == pytest.approx(a + 0.2 * (b - a), abs=0.01)

    def test_axis_ticks_are_nice_numbers(self):
        """Tick values are 1, 2 or 5 times a power of ten, a handful per axis (common practice, no source)."""
        root = parse(render_svg(cosine(0.37, steps=64_000)))
        xs = [t for t in labels(root, "xtick")]
        assert xs == ["0", "10k", "20k", "30k", "40k", "50k", "60k"]
        ys = [float(t) for t in labels(root, "ytick")]
        assert 3 <= len(ys) <= 7 and ys[0] == 0.0
        step = ys[1] - ys[0]
        mant = step / 10 ** math.floor(math.log10(step))
        assert min(abs(mant - m) for m in (1, 2, 5)) < 1e-9
        assert max(ys) <= 0.37 * 1.06 + 1e-12

    def test_tick_labels_read_plainly(self):
        """Labels are short: 2000 stays whole, larger budgets use k, M and B."""
        for n, expected in ((8_000, "2000"), (64_000, "20k"), (3 * 10**6, "1M"), (2 * 10**9, "1B")):
            root = parse(render_svg(flat(0.1, steps=n)))
            assert expected in labels(root, "xtick"), (n, list(labels(root, "xtick")))

    def test_epoch_axis(self):
        """With steps_per_epoch the x axis counts epochs: 90 epochs of 1,150 steps (DESIGN.md demo scenario)."""
        s = cosine(0.1, steps=90 * 1_150)
        root = parse(render_svg(s, steps_per_epoch=1_150))
        ticks = labels(root, "xtick")
        assert list(ticks) == ["0", "20", "40", "60", "80"]
        left, right, _, _ = frame(root)
        assert float(ticks["40"].get("x")) == pytest.approx(left + 40 / 90 * (right - left), abs=0.01)
        assert labels(root, "xlabel").keys() == {"epoch"}

    def test_log_axis_labels_are_powers_of_ten(self):
        """On a log axis every label is 10**k and the labels are evenly spaced."""
        root = parse(render_svg(exp_decay(0.3, 0.95), steps=300, log=True))
        ticks = role(root, "ytick", "text")
        values = [float(t.text) for t in ticks]
        assert len(values) >= 3
        for v in values:
            assert math.log10(v) == pytest.approx(round(math.log10(v)), abs=1e-12)
        ys = np.array([float(t.get("y")) for t in ticks])
        gaps = np.diff(ys) / np.diff(np.log10(values))
        assert np.allclose(gaps, gaps[0])
        assert labels(root, "ylabel").keys() == {"rate (log)"}

    def test_log_axis_clips_zero_to_bottom(self):
        """Rates <= 0 sit on the bottom of a log axis; nothing leaves the frame."""
        root = parse(render_svg(warmup(cosine(0.1, steps=900), 100), log=True))
        _, _, top, bottom = frame(root)
        xy = points(role(root, "curve", "polyline")[0])
        assert xy[0, 1] == pytest.approx(bottom)      # the warmup starts at rate 0
        assert np.all((xy[:, 1] >= top - 1e-9) & (xy[:, 1] <= bottom + 1e-9))

    def test_joins_are_dotted_slate_lines(self):
        """Each stage join is one thin dotted slate line at its tick."""
        s = stages(ramp(0.0, 0.1, 500), cosine(0.1, steps=4_000), flat(0.001, steps=500))
        root = parse(render_svg(s))
        left, right, _, _ = frame(root)
        joins = role(root, "join", "line")
        assert [float(j.get("x1")) for j in joins] == pytest.approx(
            [left + t / 5_000 * (right - left) for t in (500, 4_500)], abs=0.01)
        for j in joins:
            assert j.get("stroke") == "#64748b" and j.get("stroke-dasharray") and j.get("x1") == j.get("x2")

    def test_sub_pixel_cycles_are_bands(self):
        """Cycles shorter than a pixel come out as filled polygons spanning their low and high rates."""
        root = parse(render_svg(triangle(0.001, 0.01, half_period=50), steps=10**6))
        bands = role(root, "curve-band", "polygon")
        assert bands
        y0, per_unit = yscale(root)
        ys = points(bands[len(bands) // 2])[:, 1]
        assert ys.min() == pytest.approx(y0 - 0.01 * per_unit, abs=0.05)
        assert ys.max() == pytest.approx(y0 - 0.001 * per_unit, abs=0.05)

    def test_ghosts_labelled_and_escaped(self):
        """Pinned designs are grey polylines with their labels, escaped as XML text."""
        label = 'peak 0.4 <batch 1,024> & "warm"'
        svg = render_svg(cosine(0.1, steps=1_000), ghosts=[(label, cosine(0.4, steps=1_000)),
                                                            ("b", flat(0.05))])
        assert "&lt;batch 1,024&gt; &amp;" in svg
        root = parse(svg)
        assert set(labels(root, "label")) == {"current", label, "b"}
        ghosts = role(root, "ghost", "polyline")
        assert len(ghosts) == 2
        for g in ghosts:
            assert g.get("stroke") != "#0f766e"
            r, gr, b = (int(g.get("stroke")[i:i + 2], 16) for i in (1, 3, 5))
            assert max(r, gr, b) - min(r, gr, b) <= 24   # a grey: channels nearly equal

    def test_open_ended_window(self):
        """An open-ended schedule without steps is drawn over a window that shows its structure."""
        assert default_window(flat(0.1)) == 1_000
        assert default_window(restarts(cosine(0.1, steps=100), growth=2.0)) == 700
        assert default_window(inv_sqrt(1.0, warmup=400)) == 4_000
        assert default_window(stages(ramp(0.0, 0.1, 50), drops(0.1, at=(100,)))) == 50 + 125
        assert default_window(exp_decay(0.1, 0.5)) == 7       # 0.5**7 < 1 % <= 0.5**6
        assert default_window(triangle(0.0, 1.0, half_period=10)) == 60
        assert parse(render_svg(flat(0.1))).get("data-steps") == "1000"

    def test_flat_zero(self):
        """A schedule that is zero everywhere still draws (on both axes)."""
        for log in (False, True):
            root = parse(render_svg(flat(0.0, steps=10), log=log))
            assert len(points(role(root, "curve", "polyline")[0])) >= 2

    @pytest.mark.parametrize("kwargs, match", [
        ({"width": 10}, r"render_svg: width must be a whole number of pixels in \[160, 4000\], got 10"),
        ({"height": 2.5}, r"render_svg: height must be a whole number of pixels in \[100, 4000\], got 2.5"),
        ({"log": "yes"}, r"render_svg: log must be True or False, got 'yes'"),
        ({"unit": "batch"}, r"render_svg: unit must be one of 'step', 'epoch', got 'batch'"),
        ({"steps_per_epoch": 0}, r"render_svg: steps_per_epoch must be a whole number >= 1 or None, got 0"),
        ({"unit": "epoch", "steps_per_epoch": 10},
         r"steps_per_epoch must be None when unit='epoch', got 10 \(the clock already counts epochs\)"),
        ({"ghosts": [cosine(0.1, steps=5)]}, r"render_svg: ghosts\[0\] must be a \(label, Schedule\) pair"),
        ({"steps": 0}, r"render_svg: steps must be a whole number >= 1, got 0"),
    ])
    def test_bad_input(self, kwargs, match):
        """Bad arguments raise ScheduleError naming the parameter, the value and what is allowed."""
        with pytest.raises(ScheduleError, match=match):
            render_svg(cosine(0.1, steps=100), **kwargs)

    def test_title_and_axis_say_what_is_drawn(self):
        """title and axis name what the picture shows (a momentum track is no learning-rate schedule); the
        default is the rate's, and the budget and the warmup still follow the title."""
        plain = parse(render_svg(cosine(0.1, steps=100)))
        assert plain.find("s:title", NS).text == "learning-rate schedule over 100 steps"
        assert labels(plain, "ylabel").keys() == {"rate"}
        m = parse(render_svg(warmup(flat(0.9, steps=80), steps=20, start=0.95), title="momentum <SGD>",
                             axis="momentum", log=True))
        assert m.find("s:title", NS).text == ("momentum <SGD> over 100 steps; warmup of 20 steps before the "
                                              "schedule")
        assert labels(m, "ylabel").keys() == {"momentum (log)"}

    @pytest.mark.parametrize("kwargs, match", [
        ({"title": ""}, r"render_svg: title must be a non-empty line of text of at most 120 characters, got ''"),
        ({"title": None}, r"render_svg: title must be a non-empty line of text"),
        ({"title": "a\nb"}, r"render_svg: title must be a non-empty line"),
        ({"title": "x" * 121}, r"render_svg: title must be .* at most 120 characters"),
        ({"axis": 3}, r"render_svg: axis must be a non-empty line of text of at most 40 characters, got 3"),
    ])
    def test_bad_title_or_axis(self, kwargs, match):
        """A title or axis name that is not one short line of text is refused, naming the parameter."""
        with pytest.raises(ScheduleError, match=match):
            render_svg(cosine(0.1, steps=100), **kwargs)

    def test_not_a_schedule(self):
        """Anything but a Schedule is refused with a hint."""
        with pytest.raises(ScheduleError, match=r"render_svg: s must be a Schedule"):
            render_svg([0.1, 0.2])  # type: ignore[arg-type]

    @settings(max_examples=40, deadline=None)
    @given(peak=st.floats(1e-6, 2.0), frac=st.floats(0.0, 1.0), n=st.integers(2, 10**9),
           at=st.floats(0.01, 0.99), log=st.booleans())
    def test_points_stay_in_frame(self, peak, frac, n, at, log):
        """Every drawn point lies inside the plot frame, for any rate scale and budget."""
        s = warmup(drops(peak, at=(max(1, int(at * n)),), factor=0.5, steps=n), max(1, n // 10)) \
            if n > 20 else one_cycle(peak, steps=max(n, 3), tail=0.2)
        root = parse(render_svg(s * (frac + 0.01), log=log))
        left, right, top, bottom = frame(root)
        for el in role(root, "curve", "polyline"):
            xy = points(el)
            assert np.all((xy[:, 0] >= left - 1e-6) & (xy[:, 0] <= right + 1e-6))
            assert np.all((xy[:, 1] >= top - 1e-6) & (xy[:, 1] <= bottom + 1e-6))
        assert len(points(role(root, "curve", "polyline")[0])) <= len(trace(s, s.length).x)
