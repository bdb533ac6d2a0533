"""The designer's panels, headless: stages, compare, files and export, driven through their widgets."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleDesigner, ScheduleError, cosine, drops, flat, load, save, stages, warmup
from schedwidget.facts import facts
from schedwidget.widget.designer import demo_design


def stage_boxes(d):
    return [b for b in d.stages.list.children if "sw-stage" in b._dom_classes]


def head(box):
    """Every widget in a stage box's header row (the row and the box inside it)."""
    out, todo = [], list(box.children[0].children)
    while todo:
        w = todo.pop(0)
        out.append(w)
        todo.extend(getattr(w, "children", ()) or ())
    return out


class TestStagesPanel:
    """Stages are added, removed and reordered through the panel's buttons."""

    def test_add_remove_and_move(self):
        """Add a flat stage, move it up, then remove the cosine: the design follows each step and the run keeps
        its length (the longest stage fills the rest)."""
        d = ScheduleDesigner()
        assert len(stage_boxes(d)) == 2  # warmup + cosine
        d.stages.shape.value = "flat"
        d.stages.add.click()
        assert [type(p).__name__ for p in d.schedule.target.parts] == ["Cosine", "Flat"]
        assert len(stage_boxes(d)) == 3 and d.steps == d.schedule.length == 103_500
        assert d.schedule.target.parts[1] == flat(0.1, steps=10_350)  # a tenth of the run, at the peak
        flat_box = stage_boxes(d)[2]
        next(b for b in head(flat_box) if "sw-up" in b._dom_classes).click()
        assert [type(p).__name__ for p in d.schedule.target.parts] == ["Flat", "Cosine"]
        next(b for b in head(stage_boxes(d)[2]) if "sw-remove" in b._dom_classes).click()
        assert d.schedule == warmup(flat(0.1, steps=97_750), steps=5750)
        assert len(stage_boxes(d)) == 2

    def test_remove_the_warmup_and_add_it_back(self):
        """The warmup is a removable first stage; a second one is refused; the run keeps its length throughout."""
        d = ScheduleDesigner()
        next(b for b in head(stage_boxes(d)[0]) if "sw-remove" in b._dom_classes).click()
        assert d.schedule == cosine(0.1, steps=103_500)
        d.stages.shape.value = "warmup"
        d.stages.add.click()
        assert d.schedule.kind == "warmup" and d.schedule.steps == 103_500 // 20
        assert d.schedule.length == 103_500
        d.stages.add.click()
        assert d.error.startswith("designer: a design has at most one warmup")

    def test_removing_the_last_stage_is_refused(self):
        """A design keeps at least one stage."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        next(b for b in head(stage_boxes(d)[0]) if "sw-remove" in b._dom_classes).click()
        assert d.error == "designer: stages must be at least one stage, got 0 (add a shape with 'Add stage')"
        assert d.schedule == cosine(0.1, steps=100)

    def test_repeat_wraps_a_stage_in_restarts(self):
        """The repeat box turns a stage into two warm restarts of it, with its own controls."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        rep = next(w for w in head(stage_boxes(d)[0]) if getattr(w, "description", "") == "repeat")
        rep.value = True
        assert d.schedule.kind == "restarts" and d.schedule.cycles == 2 and d.steps == 100
        assert "200 steps long but the budget is 100" in d.readout.cautions.value  # the run stays; a caution
        d.control(0, "growth").text.value = 2.0
        assert d.schedule.length == 300
        rep.value = False
        assert d.schedule == cosine(0.1, steps=100)

    def test_other_designs_are_drawn_and_said_to_be_edited_in_code(self):
        """A product of schedules is drawn and read out; the panel says in one line how to edit it."""
        s = cosine(0.1, steps=500) * flat(0.5)
        d = ScheduleDesigner(s)
        assert stage_boxes(d) == [] and "can be edited in code" in d.stages.note.value
        assert np.allclose(d.canvas.curve.y, s(np.asarray(d.canvas.curve.x).astype(int)))
        assert "peaks" in d.readout.text.value or "Starts at its peak" in d.readout.text.value

    def test_total_keeps_proportions(self):
        """Doubling the total doubles every stage's ticks (warmup 5 epochs stays 5/90 of the run)."""
        d = ScheduleDesigner()
        d.stages.total.value = 207_000
        assert d.schedule == warmup(cosine(0.1, steps=195_500), steps=11_500) and d.steps == 207_000

    def test_unit_change_converts_the_design(self):
        """With steps per epoch known, switching the clock to epochs converts every tick."""
        d = ScheduleDesigner()
        d.stages.unit.value = "epoch"
        assert d.schedule == warmup(cosine(0.1, steps=85), steps=5)
        assert (d.unit, d.steps) == ("epoch", 90)
        assert d.canvas.x_axis.label == "epoch"

    def test_tick_slider_spans_the_budget(self):
        """A length box reads the whole run; a rate floor of 0 leaves the log slider at its bottom."""
        d = ScheduleDesigner()
        assert d.control(0, "steps").text.value == "97,750"
        assert "85 epochs · 94\u2009% of the run" in d.control(0, "steps").words.value
        floor = d.control(0, "floor")
        assert floor.text.value == "0" and floor.slider.value == pytest.approx(1e-6)


    def test_control_lookup(self):
        """control() finds a parameter's control, and says what exists when asked for something else."""
        d = ScheduleDesigner()
        assert d.control("warmup", "steps").text.value == "5,750"
        with pytest.raises(ScheduleError, match=r"designer: stage must be 0 \.\. 0 or 'warmup' if there is one, got 1"):
            d.control(1, "peak")
        with pytest.raises(ScheduleError, match=r"designer: name must be one of peak, floor, steps, got 'top'"):
            d.control(0, "top")
        with pytest.raises(ScheduleError, match=r"designer: stage must be a stage of an editable design"):
            ScheduleDesigner(cosine(0.1, steps=10) * 0.5).control(0, "peak")


class TestComparePanel:
    """Pins are drawn as labelled grey ghosts, compared side by side, and restored."""

    def test_pin_draw_compare_restore(self):
        """Pin the demo, change the design, then compare and restore the pin."""
        d = ScheduleDesigner()
        d.compare.name.value = "warmup + cosine"
        d.compare.pin_button.click()
        g = d.canvas.ghosts[0]
        assert g.visible and g.labels == ["warmup + cosine"]
        legend = d.canvas.legend.value   # names in the legend beside the plot, in drawing order
        assert legend.count("sw-legend-item") == 2 and legend.index(">current<") < legend.index(">warmup + cosine<")
        assert g.colors[0] in ("#9ca3af", "#6b7280", "#a8a29e", "#78716c", "#d1d5db")
        step = drops(0.1, at=(30 * 1150, 60 * 1150, 80 * 1150), factor=0.1, steps=103_500)
        d.propose(step)
        table = d.compare.table.value
        assert "warmup + cosine" in table
        t = np.arange(103_500)
        diff = np.abs(step(t) - demo_design()(t))
        # largest difference read on a grid plus every jump: it is the true maximum here (at the first jump)
        assert f"{diff.max():.4g} at step {int(np.argmax(diff)):,}" in table
        area = facts(demo_design(), 103_500, exact_up_to=2**16).area / facts(step, 103_500, exact_up_to=2**16).area
        assert f"{area:.4g}" in table
        d.compare.choice.value = "warmup + cosine"
        d.compare.restore_button.click()
        assert d.schedule == demo_design()

    def test_at_most_five_pins(self):
        """A sixth pin is refused with a hint; a pin of the same name replaces the old one."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        for i in range(5):
            d.pin(f"p{i}")
        d.pin("p0")
        assert len(d.pins) == 5
        d.compare.name.value = "sixth"
        d.compare.pin_button.click()
        assert d.error == "compare: pins must be at most 5, got 6 (remove a pin in the Compare panel first)"
        d.compare.choice.value = "p3"
        d.compare.remove_button.click()
        assert [p.name for p in d.pins] == ["p0", "p1", "p2", "p4"]
        assert not d.canvas.ghosts[4].visible


class TestFiles:
    """The design survives on disk: save, load, autosave, from_file."""

    def test_save_load_round_trip(self, tmp_path):
        """Saving and loading through the export panel gives the same design and clock back."""
        d = ScheduleDesigner()
        d.export.path.value = str(tmp_path / "demo.json")
        d.export.save_button.click()
        assert "saved to" in d.export.message.value
        assert load(tmp_path / "demo.json") == demo_design()
        e = ScheduleDesigner(cosine(0.5, steps=10))
        e.export.path.value = str(tmp_path / "demo.json")
        e.export.load_button.click()
        assert (e.schedule, e.steps, e.steps_per_epoch) == (demo_design(), 103_500, 1150)

    def test_load_failure_is_clear(self, tmp_path):
        """A missing or broken file leaves the design as it was and says why."""
        d = ScheduleDesigner()
        d.export.path.value = str(tmp_path / "nope.json")
        d.export.load_button.click()
        assert d.error.startswith("load: path must name an existing file")
        assert "load: path must name an existing file" in d.export.message.value
        (tmp_path / "bad.json").write_text('{"version": 1, "schedule": {"kind": "cosine", "peak": -1, "steps": 5}}')
        d.export.path.value = str(tmp_path / "bad.json")
        d.export.load_button.click()
        assert "schedule.peak" in d.error and d.schedule == demo_design()

    def test_save_into_a_missing_folder(self, tmp_path):
        """Saving where no folder exists writes nothing and says so."""
        d = ScheduleDesigner()
        d.export.path.value = str(tmp_path / "no" / "x.json")
        d.export.save_button.click()
        assert d.error.startswith("save: path must be in an existing folder")

    def test_autosave_after_every_valid_change(self, tmp_path):
        """The autosave file holds the last valid design, and from_file restores it."""
        path = tmp_path / "auto.json"
        d = ScheduleDesigner(autosave=path)
        assert load(path) == demo_design()
        d.control(0, "peak").text.value = 0.2
        assert load(path).target.peak == 0.2
        d.control(0, "floor").text.value = 0.5  # invalid: not written
        assert load(path).target == cosine(0.2, 0.0, steps=97_750)
        e = ScheduleDesigner.from_file(path)
        assert (e.schedule, e.steps_per_epoch, e.unit) == (d.schedule, 1150, "step")

    def test_to_spec(self):
        """to_spec carries the unit and steps per epoch."""
        spec = ScheduleDesigner().to_spec()
        assert spec["unit"] == "step" and spec["steps_per_epoch"] == 1150 and spec["schedule"]["kind"] == "warmup"

    def test_existing_file_survives_a_failed_save(self, tmp_path, monkeypatch):
        """If writing fails mid-way, the old file is intact (the save is atomic)."""
        path = tmp_path / "keep.json"
        save(cosine(0.3, steps=10), path)
        d = ScheduleDesigner()
        import os

        def fail(*_a):
            raise OSError("disk full")

        monkeypatch.setattr(os, "fsync", fail)
        d.export.path.value = str(path)
        d.export.save_button.click()
        assert "disk full" in d.error
        assert load(path) == cosine(0.3, steps=10)


class TestExportPanel:
    """The export panel shows generated code that cannot be edited by accident."""

    def test_python_and_torch_code(self):
        """Python code defines lr_at and gives the design's rates; torch code builds a LambdaLR."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        d.tabs.selected_index = 1
        code = d.export.code.value
        assert "sw-export-code" in d.export.code._dom_classes
        ns: dict = {}
        exec(code, ns)
        assert [ns["lr_at"](t) for t in (0, 50, 99)] == pytest.approx([d.schedule(t) for t in (0, 50, 99)])
        d.export.language.value = "torch"
        assert "LambdaLR" in d.export.code.value

    def test_typing_is_put_back(self):
        """The text area returns to the generated code after an edit."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        d.tabs.selected_index = 1
        code = d.export.code.value
        d.export.code.value = "oops"
        assert d.export.code.value == code

    def test_code_follows_the_design_while_shown(self):
        """A change while the panel is shown regenerates the code."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        d.tabs.selected_index = 1
        d.control(0, "peak").text.value = 0.25
        assert "0.25" in d.export.code.value


class TestOtherPanels:
    """Replay and Rescale are tabs that start when first opened, installed or not."""

    def test_tabs_start_on_first_opening(self):
        """Four tabs in order; the Replay tab holds one panel (or a note) once it is selected."""
        d = ScheduleDesigner()
        assert d.tabs.titles == ("Compare", "Export", "Replay", "Rescale", "Numbers", "Logs")
        assert d.tabs.children[2].children == ()
        d.tabs.selected_index = 2
        (panel,) = d.tabs.children[2].children
        d.tabs.selected_index = 0
        d.tabs.selected_index = 2
        assert d.tabs.children[2].children == (panel,)
        assert d.error == ""

    def test_a_hidden_pane_keeps_its_size(self):
        """A hidden pane is kept in the layout at zero height and hidden, never emptied or display: none,
        so a figure in it always has its width (bqplot drew -156 px wide plots in display: none tabs)."""
        d = ScheduleDesigner()
        d.tabs.bar.value = 2            # what a click on the "Replay" button sends
        (panel,) = d.tabs.children[2].children
        assert d.tabs.selected_index == 2 and d.tabs.children[2].layout.height is None
        d.tabs.bar.value = 3
        hidden = d.tabs.children[2].layout
        assert (hidden.height, hidden.overflow, hidden.visibility) == ("0px", "hidden", "hidden")
        assert hidden.display is None and d.tabs.children[2].children == (panel,)
        assert panel.figure in panel.figure_box.children
        for i, pane in enumerate(d.tabs.children):
            assert (pane.layout.visibility is None) == (i == 3)


class TestStageWords:
    """Stage headers use the index that designer.control takes; unknown budget facts are blank."""

    def test_stage_numbers_match_control(self):
        """The first stage after the warmup is labelled 'stage 0', as in designer.control(0, ...)."""
        d = ScheduleDesigner()
        titles = [box.children[0].children[0].value for box in d.stages.list.children]
        assert titles[0].startswith("warmup") and titles[1].startswith("stage 0 · steps 5,750–103,500")
        shape = next(w for w in head(d.stages.list.children[1]) if "sw-stage-shape" in w._dom_classes)
        assert shape.value == "cosine" and shape.label == "cosine annealing"
        assert d.control(0, "floor").owner == "cosine"

    def test_unknown_steps_per_epoch_and_batch_are_blank(self):
        """An epoch design with no steps per epoch or batch shows blank boxes, and blank stays unknown."""
        d = ScheduleDesigner(cosine(0.1, steps=90), unit="epoch")
        assert d.stages.spe.value == "" and d.stages.batch.value == ""
        d.stages.batch.value = "256"
        assert d.batch == 256
        d.stages.batch.value = ""
        assert d.batch is None
        d.stages.spe.value = "abc"
        assert "designer: steps/epoch must be a whole number >= 1, or blank for unknown, got 'abc'" in d.error


class TestExportReady:
    """Export is usable at once (issue 13): base rate, param-group multipliers, highlighted code, a file written."""

    def test_torch_with_base_rate_and_groups_written_to_a_file(self, tmp_path):
        d = ScheduleDesigner()
        d.tabs.selected_index = 1
        e = d.export
        e.language.value = "torch"
        e.base.value = "3e-4"
        e.groups.value = "1, 0.1"
        assert "BASE_LR = 0.0003 " in e.code.value and "GROUP_MULTIPLIERS = (1.0, 0.1) " in e.code.value
        assert 'style="' in e.view.value and "<span" in e.view.value  # coloured by pygments
        target = tmp_path / "sched.py"
        e.code_path.value = str(target)
        e.write_button.click()
        assert target.read_text("utf-8") == e.code.value and "code written to" in e.message.value
        compile(target.read_text("utf-8"), str(target), "exec")

    def test_bad_group_text_names_the_box(self):
        d = ScheduleDesigner()
        d.tabs.selected_index = 1
        d.export.language.value = "torch"
        d.export.groups.value = "1, fast"
        assert "export: param group multipliers[1] must be a number > 0, got 'fast'" in d.error

    def test_export_cautions_a_design_that_does_not_fit_the_run(self):
        d = ScheduleDesigner()
        d.tabs.selected_index = 1
        d.control(0, "steps").text.value = "80 ep"     # the filling stage itself: the run stays 103,500
        assert d.steps == 103_500 and d.schedule.length == 5750 + 92_000
        assert "5,750 fewer than the run of 103,500" in d.export.caution.value
        assert "97,750 steps long but the budget is 103,500" in d.readout.cautions.value


class TestCompareAgreesWithReadout:
    """Compare reads pins with the readout's own facts and converts to the designer's clock (issue 13)."""

    @pytest.mark.parametrize("n", [103_500, 300_000])
    def test_identical_pin_identical_row(self, n):
        d = ScheduleDesigner(warmup(cosine(0.1, steps=n - 5750), 5750), steps_per_epoch=1150)
        d.pin("same")
        d.tabs.selected_index = 0
        assert d.compare._facts_of(d.pins[0]) == d.facts
        table = d.compare.table.value
        rows = [r for r in table.split("<tr>")[2:]]
        for r in rows[:6]:  # peak .. run length: the pin's cell equals the current design's
            tds = [t.split("</td>")[0] for t in r.split("<td")[1:]]
            assert len(tds) == 2 and tds[0] == tds[1], r

    def test_pin_in_epochs_read_on_the_step_clock(self):
        d = ScheduleDesigner(warmup(cosine(0.1, steps=85), 5), unit="epoch", steps_per_epoch=1150)
        d.pin("epochs")
        d.set_unit("step")
        table = d.compare.table.value
        assert "epoch" not in table.split("run length")[1].split("</tr>")[0]
        assert "103,500 steps" in table and "step 5,750" in table


class TestRunIsTheFrame:
    """Issue 13's headless checks: the run keeps its length, typed lengths, shapes changed in place."""

    def test_changing_the_warmup_keeps_the_total(self):
        d = ScheduleDesigner()
        d.control("warmup", "steps").text.value = "3 ep"
        assert d.schedule.steps == 3450 and d.schedule.length == d.steps == 103_500
        assert d.schedule.target.steps == 103_500 - 3450 and d.error == ""
        assert "fewer than the run" not in d.stages.total_words.value

    def test_design_longer_or_shorter_than_the_run_shows_the_caution(self):
        d = ScheduleDesigner()
        d.control(0, "steps").text.value = "100 ep"        # the filling stage itself, typed: longer
        assert d.schedule.length == 5750 + 115_000 and d.steps == 103_500
        assert "17,250 more than the run" in d.stages.total_words.value
        assert "budget is 103,500" in d.readout.cautions.value
        d.control(0, "steps").text.value = "50 %"          # shorter
        assert d.schedule.length == 5750 + 51_750
        assert "46,000 fewer than the run" in d.stages.total_words.value

    def test_typed_lengths(self):
        d = ScheduleDesigner()
        box = d.control("warmup", "steps")
        box.text.value = "6 %"
        assert d.schedule.steps == 6210 and box.text.value == "6,210"
        assert "5.4 epochs · 6\u2009% of the run" in box.words.value
        box.text.value = "3 epochs"
        assert d.schedule.steps == 3450
        box.text.value = "three epochs"
        assert d.error.startswith("warmup: steps must be a whole number of ticks (3450), epochs ('3 ep'), steps "
                                  "('3450 steps') or a share of the run ('6 %'), got 'three epochs'")
        assert d.schedule.steps == 3450 and box.text.value == "3,450"  # the box goes back; nothing coerced
        box.text.value = "0.06"
        assert "got '0.06'" in d.error and d.schedule.steps == 3450

    def test_end_rate_as_share_of_the_peak(self):
        d = ScheduleDesigner()
        d.control(0, "peak").text.value = "3e-4"
        d.control(0, "floor").text.value = "1 %"
        assert d.schedule.target.floor == pytest.approx(3e-6, rel=1e-12)

    def test_replacing_a_stage_shape_keeps_its_span_and_start(self):
        d = ScheduleDesigner()
        shape = next(w for w in head(d.stages.list.children[1]) if "sw-stage-shape" in w._dom_classes)
        shape.value = "exp_decay"
        s = d.schedule.target
        assert s.kind == "exp_decay" and s.length == 97_750 and s(0) == 0.1 and d.schedule.length == 103_500
        assert d.schedule.steps == 5750

    def test_insert_between_takes_defaults_from_neighbours(self):
        d = ScheduleDesigner(warmup(stages(flat(0.1, steps=50_000), cosine(0.05, steps=47_750)), 5750),
                             steps_per_epoch=1150)
        d.stages.shape.value = "flat"
        ins = next(w for w in head(d.stages.list.children[1]) if "sw-insert" in w._dom_classes)
        ins.click()
        parts = d.schedule.target.parts
        assert [p.kind for p in parts] == ["flat", "flat", "cosine"]
        assert parts[1].lr == 0.1 and parts[1].steps == 10_350      # the rate where stage 0 ends, a tenth of the run
        assert d.schedule.length == 103_500 and parts[0].steps == 50_000 - 10_350  # the longest stage made room

    def test_choose_the_stage_that_fills(self):
        d = ScheduleDesigner(warmup(stages(flat(0.1, steps=50_000), cosine(0.05, steps=47_750)), 5750))
        fills = [next(w for w in head(box) if "sw-fills" in w._dom_classes)
                 for box in d.stages.list.children[1:]]
        assert [f.value for f in fills] == [True, False]
        fills[1].value = True
        d.control("warmup", "steps").text.value = 1000
        assert d.schedule.target.parts[0].steps == 50_000 and d.schedule.target.parts[1].steps == 52_500
