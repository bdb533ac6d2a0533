"""Panels listen to the designer: one redraw at most per change, none while hidden, no leaked widgets."""

from __future__ import annotations

import random

import numpy as np
import pytest
from ipywidgets.widgets.widget import _instances  # ipywidgets' registry of open widgets (Widget.widgets is deprecated)

from schedwidget import ScheduleDesigner, cosine, drops, flat, warmup
from schedwidget.widget import codeview


def panels(d: ScheduleDesigner) -> dict:
    return {"curve": d.canvas, "readout": d.readout, "stages": d.stages, "compare": d.compare, "export": d.export}


def changes(d: ScheduleDesigner):
    """A tour of changes from the controls and from code, each one change of the designer."""
    yield lambda: setattr(d.control(0, "peak").slider, "value", 0.05)
    yield lambda: setattr(d.control(0, "peak").text, "value", 0.07)
    yield lambda: d.set_total(50_000)
    yield lambda: setattr(d, "batch", 256)
    yield lambda: d.pin("a")
    yield lambda: setattr(d.control("warmup", "steps").text, "value", 4000)
    yield lambda: d.compare.restore("a")
    yield lambda: d.set_unit("epoch")
    yield lambda: d.stages.add.click()
    yield lambda: setattr(d, "schedule", drops(0.1, at=(10, 20), factor=0.1, steps=30))


class TestOneRedrawPerChange:
    """Each panel redraws at most once per change of the designer, and only when what it shows changed."""

    def test_each_panel_at_most_once(self):
        """Over ten kinds of change, no panel's redraw count goes up by more than one per change."""
        d = ScheduleDesigner()
        d.tabs.selected_index = 1  # Export on screen too (Compare is then hidden: checked below)
        for change in changes(d):
            before = {k: p.redraws for k, p in panels(d).items()}
            change()
            assert d.error == ""
            for k, p in panels(d).items():
                assert p.redraws - before[k] <= 1, (k, change)

    def test_only_what_changed_redraws(self):
        """A new batch redraws the budget row, not the curve; moving a rate rebuilds no stage boxes."""
        d = ScheduleDesigner()
        curve, stages = d.canvas.redraws, d.stages.redraws
        d.batch = 512
        assert d.canvas.redraws == curve and d.stages.redraws == stages + 1 and d.stages.batch.value == "512"
        boxes = d.stages.list.children
        d.control(0, "peak").text.value = 0.2
        assert d.stages.list.children == boxes and d.canvas.redraws == curve + 1

    def test_ghosts_traced_once_per_pin(self):
        """Five pins are traced five times however often the design changes; an axis change remaps, not retraces."""
        d = ScheduleDesigner(warmup(cosine(0.1, steps=9000), 1000))
        for k in range(5):
            d.control(0, "peak").text.value = 0.05 + 0.01 * k
            d.pin(f"p{k}")
        assert d.canvas.ghost_traces == 5
        for k in range(20):
            d.control(0, "peak").text.value = 0.1 + 0.001 * k
        d.canvas.rate_axis.value = "log"
        d.canvas.x_choice.value = "epochs"
        assert d.canvas.ghost_traces == 5 and d.error == ""
        assert all(g.visible for g in d.canvas.ghosts)

    def test_compare_change_path_has_no_unique(self, monkeypatch):
        """With five pins, redrawing the Compare table after a change calls np.unique nowhere."""
        d = ScheduleDesigner(warmup(drops(0.1, at=(30_000, 60_000), factor=0.1, steps=89_000), 1000))
        for k in range(5):
            d.control(0, "peak").text.value = 0.05 + 0.01 * k
            d.pin(f"p{k}")
        calls = []
        real = np.unique
        paint = d.compare.paint

        def counted(*args, **kwargs):
            calls.append(args[0].size if hasattr(args[0], "size") else len(args[0]))
            return real(*args, **kwargs)

        def watched():
            monkeypatch.setattr(np, "unique", counted)
            try:
                paint()
            finally:
                monkeypatch.setattr(np, "unique", real)

        monkeypatch.setattr(d.compare, "paint", watched)
        before = d.compare.redraws
        d.control(0, "peak").text.value = 0.2
        assert d.compare.redraws == before + 1 and d.error == ""
        assert calls == []
        assert "0.2" in d.compare.table.value

    def test_compare_difference_matches_every_tick(self):
        """The table's largest difference equals max |a - b| over every tick for a short budget (exact there)."""
        d = ScheduleDesigner(warmup(drops(0.1, at=(300, 600), factor=0.1, steps=890), 110))
        d.pin("before")
        d.control(0, "peak").text.value = 0.15
        pin = d.pins[0]
        t = np.arange(1000)
        gap = np.abs(pin.schedule(t) - d.schedule(t))
        assert d.compare.difference(pin) == (float(gap.max()), int(np.argmax(gap)))


class TestHiddenTabs:
    """A panel in a hidden tab does no work until its tab is shown, then catches up once."""

    def test_export_waits_until_shown(self, monkeypatch):
        """Code is generated only when the Export tab is shown, once, for the latest design."""
        made = []
        real = codeview.code_for
        monkeypatch.setattr(codeview, "code_for", lambda d, *a: made.append(d.schedule) or real(d, *a))
        d = ScheduleDesigner(cosine(0.1, steps=1000))
        assert made == [] and d.export.stale
        for k in range(5):
            d.control(0, "peak").text.value = 0.1 + 0.01 * k
        assert made == [] and d.export.redraws == 0
        d.tabs.bar.value = 1
        assert made == [cosine(0.14, steps=1000)] and d.export.redraws == 1 and not d.export.stale
        assert "0.14" in d.export.code.value

    def test_compare_waits_until_shown(self):
        """With Export on screen the Compare table is stale; shown again, it reads the current design."""
        d = ScheduleDesigner(cosine(0.1, steps=1000))
        d.pin("a")
        d.tabs.selected_index = 1
        before = d.compare.redraws
        d.control(0, "peak").text.value = 0.3
        assert d.compare.redraws == before and d.compare.stale
        d.tabs.selected_index = 0
        assert d.compare.redraws == before + 1 and "0.3" in d.compare.table.value

    def test_replay_and_rescale_wait(self):
        """Replay (following the design) and Rescale redraw only while shown; they catch up when shown."""
        d = ScheduleDesigner(warmup(flat(0.1, steps=85), 5), unit="epoch", batch=128)
        d.tabs.selected_index = 2
        replay = d.tabs.children[2].children[0]
        replay.follow.value = True
        d.tabs.selected_index = 3
        rescale = d.tabs.children[3].children[0]
        d.tabs.selected_index = 0
        r0, s0 = replay.redraws, rescale.redraws
        for k in range(3):
            d.control(0, "lr").text.value = 0.2 + 0.1 * k
        assert (replay.redraws, rescale.redraws) == (r0, s0) and replay.stale and rescale.stale
        d.tabs.selected_index = 3
        assert rescale.redraws == s0 + 1 and float(np.max(rescale.old_line.y)) == pytest.approx(0.4)
        d.tabs.selected_index = 2
        assert replay.redraws == r0 + 1 and replay.message.value == ""


class TestNoLeaks:
    """Replaced widgets are closed: the live widget count stays bounded."""

    def test_count_bounded_over_200_random_operations(self):
        """200 seeded add/remove/move/replace/pin/unpin operations leave the widget count within a small
        constant of its value after the first 10."""
        rng = random.Random(12)
        d = ScheduleDesigner(warmup(cosine(0.1, steps=9000), 1000))
        kinds = [k for _words, k in d.stages.shape.options if k != "warmup"]

        def operate() -> None:
            op = rng.choice(["add", "remove", "move", "replace", "pin", "unpin", "repeat"])
            form = d.stages.form
            n = len(form.stages) if form is not None else 0
            if op == "add" or n <= 1:
                d.stages.shape.value = rng.choice(kinds)
                d.stages.add.click()
            elif op == "remove" and n > 1:
                d.guarded(d.stages._remove)(str(rng.randrange(n)))  # may be refused: the run is full
            elif op == "move" and n > 1:
                d.stages._move(str(rng.randrange(n)), rng.choice([-1, 1]))
            elif op == "replace":
                d.schedule = rng.choice([warmup(cosine(0.1, steps=9000), 1000),
                                         drops(0.1, at=(3000, 6000), factor=0.1, steps=10_000)])
            elif op == "pin":
                if len(d.pins) >= 5:
                    d.compare.unpin(d.pins[0].name)
                d.pin(f"p{rng.randrange(8)}")
            elif op == "unpin" and d.pins:
                d.compare.unpin(rng.choice(d.pins).name)
            elif op == "repeat" and n:
                d.guarded(d.stages._repeat)(str(rng.randrange(n)), rng.random() < 0.5)
            while len(d.stages.form.stages) > 6 if d.stages.form is not None else False:
                d.guarded(d.stages._remove)("0")

        base = d.schedule

        def settled() -> int:
            """The widget count with the same design and no pins (so only leaks can differ)."""
            for p in d.pins:
                d.compare.unpin(p.name)
            d.schedule = base
            return len(_instances)

        for _ in range(10):
            operate()
        after_10 = settled()
        most = after_10
        for _ in range(190):
            operate()
            most = max(most, len(_instances))
        after_200 = settled()
        print(f"widgets after 10 operations: {after_10}, after 200: {after_200}, most on the way: {most}")
        assert d.error == ""
        assert abs(after_200 - after_10) <= 10, (after_10, after_200)
        assert most - after_10 <= 400  # six stages at most, each with ~40 widgets (controls, layouts, styles)
