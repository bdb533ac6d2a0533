"""Positions on the run's clock and the widget's one number format, headless (issue 13)."""

from __future__ import annotations

import html
import re

import ipywidgets as W
import pytest

from schedwidget import ScheduleDesigner, ScheduleError, cosine, drops, warmup
from schedwidget.widget.positions import parse_positions, positions_text, split_items
from schedwidget.widget.theme import THIN, number, pct, rate, rate_html, share, tidy_html

SPE = 1150  # the demo scenario: 90 epochs of 1,150 steps (DESIGN.md section 5)


def stage_widgets(d, i: int) -> list:
    """Every widget in the box of stage ``i`` (0 = the warmup when there is one)."""
    out, todo = [], [d.stages.list.children[i]]
    while todo:
        w = todo.pop(0)
        out.append(w)
        todo.extend(getattr(w, "children", ()) or ())
    return out


def as_drops(d, stage: int = 0) -> None:
    """Change stage ``stage`` (after the warmup) into step drops with its shape menu, as a person does."""
    menu = next(w for w in stage_widgets(d, stage + 1) if "sw-stage-shape" in getattr(w, "_dom_classes", ()))
    menu.value = "drops"


class TestRunClockPositions:
    """A drops stage's 'drops at' box reads positions of the run and shows where they are in the stage."""

    def test_thirty_epochs_after_a_five_epoch_warmup(self):
        """'30 ep' after a 5-epoch warmup: the drop is at epoch 30 of the run, 25 epochs into the stage."""
        d = ScheduleDesigner()          # 5 epochs of warmup, then the main stage (demo scenario)
        as_drops(d)
        box = d.control(0, "at")
        box.text.value = "30 ep"
        assert d.error == ""
        stage = d.schedule.target
        assert stage.at == (25 * SPE,)
        assert d.schedule.steps + stage.at[0] == 30 * SPE  # on the run's clock
        assert box.text.value == "30 ep"
        assert "= 25 ep into this stage" in box.words.value
        assert "counted from the start of the run" in box.words.value
        # the rate really drops at run step 34,500 and not a step earlier
        assert d.schedule(30 * SPE) == pytest.approx(d.schedule(30 * SPE - 1) * stage.factor)

    def test_stage_relative_entry_and_shares(self):
        """'+25 ep' counts from the stage's start; '50 %' is half of the run; several positions in one box."""
        d = ScheduleDesigner()
        as_drops(d)
        box = d.control(0, "at")
        box.text.value = "+25 ep"
        assert d.schedule.target.at == (25 * SPE,) and d.error == ""
        box.text.value = "50 %"
        assert d.schedule.target.at == (103_500 // 2 - 5 * SPE,)
        box.text.value = "30 ep, 60 ep; 80 ep"
        assert d.schedule.target.at == (25 * SPE, 55 * SPE, 75 * SPE)
        assert box.text.value == "30 ep; 60 ep; 80 ep"
        box.text.value = "34,600; 69,000"  # thousands separators are not item separators
        assert d.schedule.target.at == (34_600 - 5 * SPE, 69_000 - 5 * SPE)
        assert box.text.value == "34,600; 69,000"  # not every position is a whole epoch: shown in steps

    def test_positions_outside_the_stage_are_refused(self):
        """Before the stage's start or after its end: a message naming the box, where the stage is, and the forms;
        the design stays as it was."""
        d = ScheduleDesigner()
        as_drops(d)
        before = d.schedule
        d.control(0, "at").text.value = "3 ep"
        assert d.schedule == before
        assert d.error.startswith("drops: drops at item 1 must be inside this stage, after step 5,750 (epoch 5) "
                                  "and before step 103,500 (epoch 90) of the run, written as a position of the "
                                  "run: 34500, '30 ep' (epoch 30 of the run), '33 %' of the run, or '+25 ep' from "
                                  "this stage's start")
        assert d.error.endswith("got '3 ep' (it is step 3,450 (epoch 3) of the run, at or before the stage's start)")
        d.control(0, "at").text.value = "30 ep, 95 ep"
        assert "drops at item 2" in d.error and "at or after the stage's end" in d.error and d.schedule == before
        d.control(0, "at").text.value = "5 ep"  # the stage's first tick: a drop there is no drop within the stage
        assert "at or before the stage's start" in d.error and d.schedule == before
        d.control(0, "at").text.value = "soon"
        assert d.error.startswith("drops: drops at item 1 must be a position of the run") and d.schedule == before
        assert d.control(0, "at").text.value == positions_text(before.target.at, 5 * SPE, "step", SPE)

    def test_positions_stay_on_the_run_when_the_warmup_changes(self):
        """A shorter warmup leaves the drop typed at epoch 30 at epoch 30 of the run."""
        d = ScheduleDesigner()
        as_drops(d)
        d.control(0, "at").text.value = "30 ep"
        d.control("warmup", "steps").text.value = "3 ep"
        assert d.error == "" and d.schedule.steps == 3 * SPE
        assert d.schedule.steps + d.schedule.target.at[0] == 30 * SPE
        assert d.control(0, "at").text.value == "30 ep"
        assert "= 27 ep into this stage" in d.control(0, "at").words.value

    def test_epoch_clock_and_a_first_stage(self):
        """On an epoch clock a bare number is an epoch of the run; a first stage starts with the run."""
        d = ScheduleDesigner(drops(0.1, at=(30, 60), steps=90), unit="epoch")
        box = d.control(0, "at")
        assert box.text.value == "30; 60" and "where this stage starts" in box.words.value
        box.text.value = "20, 70"
        assert d.schedule.at == (20, 70)

    def test_parse_positions_directly(self):
        """The pure reader: run positions in, stage ticks out; items split on ';' or on a comma that is not a
        thousands separator."""
        assert split_items("34,500, 69,000") == ["34,500", "69,000"]
        assert parse_positions("34,500", "step", SPE, 103_500, 5750, 97_750) == (28_750,)
        with pytest.raises(ScheduleError, match=r"drops: drops at item 2 must be a position after item 1"):
            parse_positions("60 ep, 30 ep", "step", SPE, 103_500, 5750, 97_750)
        with pytest.raises(ScheduleError, match=r"at least one position"):
            parse_positions(" , ", "step", SPE, 103_500, 5750, 97_750)


# ------------------------------------------------------------------------------------------ number formats
TAG = re.compile(r"<[^>]*>")
PERCENT_WITHOUT_THIN = re.compile(r"\d(?:[ \u00a0\u202f])?%")
EXPONENT = re.compile(r"(?<![\w.])-?\d+(?:\.\d+)?[eE][-+]?\d+(?![\w.])")


def walk(root) -> list:
    out, todo, seen = [], [root], set()
    while todo:
        w = todo.pop()
        if not isinstance(w, W.Widget) or id(w) in seen:
            continue
        seen.add(id(w))
        out.append(w)
        todo.extend(getattr(w, "children", ()) or ())
    return out


def visible_texts(root) -> list[tuple[str, str]]:
    """(where, text) for every text a person reads: HTML and labels (tags and their attributes removed, so a
    hover title may hold an exact value), descriptions, button words and menu entries; typed boxes and the
    exported code excluded."""
    out = []
    for w in walk(root):
        kind = type(w).__name__
        if "sw-export-view" in getattr(w, "_dom_classes", ()):
            continue  # generated code, exact by design (not a label or a readout)
        if isinstance(w, (W.HTML, W.HTMLMath, W.Label)):
            out.append((f"{kind} {w._dom_classes}", html.unescape(TAG.sub(" ", w.value))))
        desc = getattr(w, "description", "")
        if isinstance(desc, str) and desc:
            out.append((f"{kind}.description", desc))
        labels = getattr(w, "_options_labels", None)
        if labels:
            out.extend((f"{kind} option", str(x)) for x in labels)
    return out


def format_problems(root) -> list[str]:
    problems = []
    for where, text in visible_texts(root):
        for m in PERCENT_WITHOUT_THIN.finditer(text):
            problems.append(f"{where}: '%' without a thin space in {text!r} at {m.start()}")
        for m in EXPONENT.finditer(text):
            v = float(m.group(0))
            if (v != 0 and abs(v) < 1e-9) or abs(v) >= 1e4:
                problems.append(f"{where}: raw exponent {m.group(0)!r} in {text!r}")
            elif re.search(r"e[-+]0\d", m.group(0)):  # 3e-5 as the log axis writes it, never 3e-05
                problems.append(f"{where}: exponent with a leading zero {m.group(0)!r} in {text!r}")
    return problems


class TestOneNumberFormat:
    """Every label and readout of every pane uses one format: thin-spaced %, ~0 for tiny values, no raw
    exponents for tiny or large numbers."""

    def test_helpers(self):
        """The theme's formatters: rates to 3 significant digits, ~0 with the exact value on hover."""
        assert rate(0.099982) == "0.1" and rate(3e-5) == "3e-5" and rate(2.58e-11) == "~0"
        assert rate_html(2.58e-11) == '<span title="exactly 2.58e-11">~0</span>'
        assert share(0.033) == f"3.3{THIN}%" and pct("10% and 6 %") == f"10{THIN}% and 6{THIN}%"
        assert number(51_750.3) == "51,750" and number(2e-12) == "~0"
        assert tidy_html("ends at ~0 (5.16e-11), half-life 1.554e+04 steps") == \
            'ends at <span title="exactly 5.16e-11">~0</span>, half-life 15,540 steps'

    def test_walk_finds_a_stray_format(self):
        """The walker itself fails on '10%', '10 %', a raw 2.58e-11 and 1.554e+04 (it can fail)."""
        box = W.VBox([W.HTML("under 10% of the peak"), W.Label("6 % of the run"), W.HTML("ends at 2.58e-11"),
                       W.HTML("half-life 1.554e+04 steps"), W.HTML("(2.97e-06)"), W.HTML(f"fine: 10{THIN}% and 3e-4")])
        assert len(format_problems(box)) == 5

    def test_every_pane(self):
        """The demo design (a cosine to 0 ends at a tiny rate), a drops stage, a pin, a refused length with the
        forms in its message, and every tab opened (Compare, Export with torch, Replay, Rescale, Numbers)."""
        d = ScheduleDesigner()
        d.pin("first look")
        d.stages.shape.value = "drops"
        d.stages.add.click()
        d.control(1, "at").text.value = "95 ep"  # inside the added stage; a valid change
        for i in range(len(d.tabs.titles)):
            d.tabs.selected_index = i
        d.export.language.value = "torch"
        d.canvas.rate_axis.value = "log"
        d.control("warmup", "steps").text.value = "three epochs"  # refused: the message lists '6 %'
        assert "('6 %')" in d.error  # the core's words ...
        assert f"('6{THIN}%')" in html.unescape(d.error_line.value)  # ... on screen in the widget's format
        problems = format_problems(d)
        assert not problems, "\n".join(problems)
        assert 'title="exactly' in d.compare.table.value  # the pin's final rate (cosine to 0) is ~0
        plain = ScheduleDesigner()
        plain.canvas.hover_at(float(plain.steps - 1))  # the hover line at the last step reads a tiny rate
        assert "~0" in plain.readout.text.value and 'title="exactly' in plain.readout.text.value
        assert plain.canvas.hover_label.value.endswith("rate ~0")
        assert plain.canvas.hover_label.tooltip.startswith("rate exactly")
        assert not format_problems(plain)

    def test_replay_and_rescale_words(self):
        """Replay's what-if strip and caution say what the numbers do, in the widget's format."""
        d = ScheduleDesigner(cosine(0.1, steps=90), unit="epoch")
        d.tabs.selected_index = 2
        p = d.tabs.children[2].children[0]
        p.controls["floor"].text.value = 0.0
        p.controls["patience"].text.value = 1
        assert "evaluations to wait" in p.whatif.value and "patience" not in p.whatif.value
        assert "factor" not in p.whatif.value and "floor" not in p.whatif.value
        assert not format_problems(p)
        d.tabs.selected_index = 3
        assert not format_problems(d.tabs.children[3])
        assert not format_problems(ScheduleDesigner(warmup(cosine(3e-4, 3e-6, steps=9000), 1000)))
        from schedwidget import exp_decay  # its sentence names a small rate: 2.97e-6, not 2.97e-06
        d = ScheduleDesigner(warmup(exp_decay(3e-4, 0.95, every=1111, steps=100_050), 3450), steps_per_epoch=1150)
        assert not format_problems(d)


class TestRepeatedStagePositions:
    """A repeated drops stage reads its positions in its first cycle and says every cycle repeats them."""

    def test_first_cycle(self):
        """After a 10-epoch warmup, epoch 30 of the run is 20 epochs into each cycle; the first cycle's end bounds
        what is accepted."""
        from schedwidget import restarts

        d = ScheduleDesigner(warmup(restarts(drops(0.1, at=(10,), steps=40), cycles=2), 10), unit="epoch")
        box = d.control(0, "at")
        box.text.value = "30"
        assert d.error == "" and d.schedule.target.target.at == (20,)
        assert "= 20 epochs into each cycle of this stage" in box.words.value
        box.text.value = "60"
        assert d.error.startswith("drops: drops at item 1 must be inside the first cycle of this stage, after epoch 10 "
                                  "and before epoch 50 of the run")
        assert d.schedule.target.target.at == (20,)
