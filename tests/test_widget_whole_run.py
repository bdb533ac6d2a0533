"""Whole-run designs in the designer (issue 14): where the warmup goes, shares of the run, inverse questions."""

from __future__ import annotations

import pytest

from schedwidget import ScheduleDesigner, cosine, drops, exp_decay, flat, restarts, stages, warmup
from schedwidget.budget import Budget
from schedwidget.facts import OVER_HINT, facts
from schedwidget.lengths import ROUNDING
from schedwidget.inverse import paths, solve
from schedwidget.widget.entries import CHOICE_WORDS
from schedwidget.widget.form import Form, Warm, fit_run, read_form, stage_span
from schedwidget.widget.solve_row import path_words
from schedwidget.widget.theme import ERROR_RED, tidy_html

SPE = 1150


def goyal(place: str):
    """Goyal et al. 2017: 5 epochs of gradual warmup from 0.1 to 3.2, x0.1 at epochs 30, 60 and 80 of 90
    (batch 8,192: 0.1 x 32), on an epoch clock."""
    at = (30, 60, 80) if place == "over" else (25, 55, 75)
    return warmup(drops(3.2, at=at, steps=90 if place == "over" else 85), 5, start=0.1, place=place)


class TestWhereTheWarmupGoes:
    """The warmup stage offers both places in words, and a design with either is edited in the panel."""

    def test_over_is_editable(self):
        """A warmup laid over the first ticks reads into the form and builds back to the same design."""
        s = goyal("over")
        f = read_form(s)
        assert f.warm == Warm(steps=5, start=0.1, curve="linear", place="over")
        assert f.build() == s
        assert stage_span(f, 0) == (0, 90)  # the stages start at the run's first tick: the ramp lies over them
        assert stage_span(read_form(goyal("before")), 0) == (5, 85)

    def test_over_adds_no_ticks_to_the_run(self):
        """The stage that fills the run takes the whole run when the warmup is laid over it."""
        f = Form((drops(3.2, at=(30,), steps=50),), Warm(5, place="over"))
        assert fit_run(f, 90).build().length == 90
        assert fit_run(Form(f.stages, Warm(5)), 90).build().length == 90
        assert fit_run(Form(f.stages, Warm(5)), 90).stages[0].steps == 85

    def test_menu_in_words(self):
        """The warmup's 'goes' menu says where in plain words, and holds the design's place."""
        d = ScheduleDesigner(goyal("over"), unit="epoch")
        c = d.stages.control("warmup", "place")
        assert c.text.options == (("before the decay", "before"), ("laid over the decay's first ticks", "over"))
        assert c.text.value == "over" and c.text.description == "goes"
        assert set(CHOICE_WORDS["place"]) == {"before", "over"}
        assert d.stages.list.children[1].children[0].children[0].value.startswith("stage 0 · epochs 0–90")
        assert d.readout.solver.parameter.value == "target.peak"  # the menu is never empty
        assert d.stages.note.value == ""  # editable: no 'edit it in code' note

    def test_switching_keeps_positions_of_the_run(self):
        """Choosing the other place keeps the drops where the panel shows them (epochs 30, 60, 80 of the run) and
        the design the run's length; the readout's sentence names the place the design uses."""
        d = ScheduleDesigner(goyal("over"), unit="epoch")
        assert "warmup laid over the schedule&#x27;s first 5 epochs" in d.readout.sentence.value
        d.stages.control("warmup", "place").text.value = "before"
        assert d.error == ""
        assert d.schedule == goyal("before")
        assert d.stages.control(0, "at").text.value == "30; 60; 80"
        assert "warmup of 5 epochs before the schedule" in d.readout.sentence.value
        d.stages.control("warmup", "place").text.value = "over"
        assert d.schedule == goyal("over")

    def test_goyal_through_the_panel(self):
        """Goyal et al. 2017 on a step clock: 0.1 at t = 0, 3.2 at epoch 5, 0.32 at epoch 30, 0.0032 at epoch 80.
        The panel shows the drops at epochs 30, 60, 80 of the run with either place; choosing 'laid over' gives the
        recipe as written (the drops on the decay's own clock are then the run's)."""
        s = warmup(drops(3.2, at=(25 * SPE, 55 * SPE, 75 * SPE), steps=85 * SPE), 5 * SPE, start=0.1)
        d = ScheduleDesigner(s, steps_per_epoch=SPE, batch=8192)
        assert d.stages.control(0, "at").text.value == "30 ep; 60 ep; 80 ep"
        d.stages.control("warmup", "place").text.value = "over"
        got = d.schedule
        assert got == warmup(drops(3.2, at=(30 * SPE, 60 * SPE, 80 * SPE), steps=90 * SPE), 5 * SPE, start=0.1,
                             place="over")
        assert got.place == "over" and got.length == 90 * SPE
        assert got(0) == 0.1 and got(5 * SPE) == 3.2 and got(30 * SPE - 1) == 3.2  # Goyal et al. 2017, sec. 2.2
        assert got(30 * SPE) == pytest.approx(0.32, rel=1e-12) and got(80 * SPE) == pytest.approx(0.0032, rel=1e-12)
        assert d.stages.control(0, "at").text.value == "30 ep; 60 ep; 80 ep"

    def test_code_caution_left_out_in_the_designer(self):
        """The core's caution names code (place='over'); the designer shows run positions already, so it leaves
        that caution out for an editable design and shows the others."""
        s = goyal("before")
        said = facts(s, unit="epoch").cautions
        assert any(c.endswith(OVER_HINT) for c in said)
        d = ScheduleDesigner(s, unit="epoch")
        assert "place=" not in d.readout.cautions.value
        assert "above 1.0" in d.readout.cautions.value  # the peak caution still shows
        assert d.readout.facts.cautions == said  # the facts themselves are the core's

    def test_code_caution_kept_for_a_design_edited_in_code(self):
        """A design the panel cannot edit is edited in code, so the caution keeps its code."""
        s = warmup(drops(0.1, at=(30, 60), steps=90), 5) * 0.5
        assert read_form(s) is None
        d = ScheduleDesigner(s, unit="epoch")
        assert "place=&#x27;over&#x27;" in d.readout.cautions.value or "place='over'" in d.readout.cautions.value


class TestShares:
    """Lengths typed as a share of the run follow the core's rule, and the rule on screen is the core's."""

    def test_rule_on_screen_is_the_cores(self):
        """The words under the budget row and a length box's tooltip quote lengths.ROUNDING."""
        d = ScheduleDesigner(cosine(0.1, steps=1404))
        assert tidy_html(ROUNDING) in d.stages.rule.value
        assert ROUNDING in d.stages.control(0, "steps").text.tooltip

    def test_six_percent_of_the_run(self):
        """'6 %' of a 1,404-update run is Budget.share(0.06): 85 updates (84.24 rounded up), the rest fills."""
        b = Budget(samples=14_976, batch=32, epochs=3)
        assert b.steps == 1404
        d = ScheduleDesigner(warmup(cosine(2e-5, steps=1304), 100))
        d.stages.control("warmup", "steps").text.value = "6 %"
        assert d.error == ""
        assert d.schedule.steps == b.share(0.06) == 85
        assert d.schedule.length == 1404
        d.stages.control("warmup", "steps").text.value = "7 %"
        assert d.schedule.steps == b.share(0.07) == 99  # 98.28 rounded up

    def test_share_of_a_stage_over_the_decay(self):
        """A warmup laid over the decay takes its share of the run the same way; the decay keeps the run."""
        d = ScheduleDesigner(warmup(cosine(2e-5, steps=1404), 100, place="over"))
        d.stages.control("warmup", "steps").text.value = "6 %"
        assert d.schedule.steps == 85 and d.schedule.length == 1404 and d.schedule.place == "over"


def per_epoch_decay():
    """x0.9 per epoch for 200 epochs from 0.1."""
    return exp_decay(0.1, 0.9, every=1, steps=200)


class TestSolveInTheReadout:
    """'Make this number X by moving that parameter', through the readout's row."""

    def ask(self, d, what, value, parameter, at=""):
        r = d.readout.solver
        r.target.value = what
        r.at.value = at
        r.value.value = value
        r.parameter.value = parameter
        r.button.click()
        return r

    def test_per_epoch_factor(self):
        """The per-epoch factor that reaches 1 % of the peak by epoch 200 is 0.01 ** (1 / 200), asked as the rate
        at the end, as the rate at epoch 200 and as a share of the peak."""
        for what, value, at in (("final", "0.001", ""), ("rate", "1 %", "200"), ("final", "1 % of the peak", "")):
            d = ScheduleDesigner(per_epoch_decay(), unit="epoch")
            r = self.ask(d, what, value, "factor", at)
            assert d.schedule.factor == 0.01 ** (1 / 200), what
            assert d.error == ""
            assert "multiply by" in r.message.value and "0.9" in r.message.value
            assert ERROR_RED not in r.message.value

    def test_the_design_is_solves_answer(self):
        """The design after the click is exactly what the core's solve returns, and the controls show it."""
        s = warmup(stages(flat(0.1, steps=50), drops(0.1, at=(30,), steps=100)), 10)
        d = ScheduleDesigner(s)
        r = self.ask(d, "area", "12", "target.parts[0].steps")
        assert d.schedule == solve(s, "target.parts[0].steps", area=12.0)
        assert "stage 0 · length" in r.message.value

    def test_under_a_share(self):
        """The first tick under 10 % of the peak, moved onto tick 120 by a cosine's length."""
        d = ScheduleDesigner(cosine(0.1, steps=200), steps=400)
        self.ask(d, "under", "10 %", "steps", at="120")
        assert d.schedule == solve(cosine(0.1, steps=200), "steps", under=(0.1, 120))
        assert facts(d.schedule, 400).under_10 == 120

    def test_refusal_in_the_message_line(self):
        """A target out of reach: the core's ScheduleError text in the row's message line, the design stays."""
        s = per_epoch_decay()
        d = ScheduleDesigner(s, unit="epoch")
        r = self.ask(d, "final", "0.5", "factor")
        with pytest.raises(Exception) as exc:
            solve(s, "factor", final=0.5)
        assert d.schedule == s and d.error == ""
        assert ERROR_RED in r.message.value
        assert tidy_html(str(exc.value))[:60] in r.message.value

    def test_unreadable_box(self):
        """A value that does not read is refused naming the box, in the row's message line."""
        d = ScheduleDesigner(per_epoch_decay(), unit="epoch")
        r = self.ask(d, "final", "lots", "factor")
        assert d.schedule == per_epoch_decay() and d.error == ""
        assert "equal to" in r.message.value and "lots" in r.message.value

    def test_menu_follows_the_design(self):
        """The parameter menu lists solve.paths of the current design in words, and follows edits."""
        s = warmup(stages(restarts(cosine(0.1, steps=10), cycles=3), drops(0.1, at=(3,), steps=9)), 4)
        d = ScheduleDesigner(s)
        r = d.readout.solver
        assert [p for _w, p in r.parameter.options] == [p for p, _d, _v in paths(s)]
        words = dict((p, w) for w, p in r.parameter.options)
        assert words["target.parts[0].target.peak"] == "stage 0 · peak rate"
        assert words["target.parts[0].cycles"] == "stage 0 · cycles"
        assert words["target.parts[1].factor"] == "stage 1 · multiply by"
        assert words["steps"] == "warmup · length"
        d.schedule = cosine(0.1, steps=100)
        assert [p for _w, p in r.parameter.options] == ["peak", "floor", "steps"]
        assert path_words(cosine(0.1, steps=100), "floor") == "end rate"

    def test_message_clears_after_another_edit(self):
        """What moved is said until the design changes again."""
        d = ScheduleDesigner(per_epoch_decay(), unit="epoch")
        r = self.ask(d, "final", "0.001", "factor")
        assert r.message.value
        d.control(0, "peak").text.value = 0.2
        assert r.message.value == ""

    def test_at_box_only_for_targets_at_a_tick(self):
        """The 'at' box is live for the rate at a tick and the first tick under a share, greyed out otherwise."""
        r = ScheduleDesigner(per_epoch_decay(), unit="epoch").readout.solver
        for what, off in (("rate", False), ("under", False), ("area", True), ("final", True)):
            r.target.value = what
            assert r.at.disabled is off
        r.target.value = "under"
        assert r.value.description == "share"
