"""The Export panel's code targets (issue 17 item 4) and its report button (issue 18 item 3), headless."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from ipywidgets.widgets.widget import _instances  # ipywidgets' registry of open widgets (Widget.widgets is deprecated)

from schedwidget import ScheduleDesigner, cosine, drops, warmup
from schedwidget.export import to_python, to_torch
from schedwidget.export_jax import to_jax
from schedwidget.export_keras import to_keras
from schedwidget.fingerprint import fingerprint
from schedwidget.report import report
from schedwidget.widget.codeview import DEFAULT_FILES, REPORT_FILES, TARGETS, highlighted, report_label
from schedwidget.widget.guard import close_tree

SPE = 100
VALUES = [value for _, value, _, _ in TARGETS]


def designer() -> ScheduleDesigner:
    """A warmup into drops, read in steps with steps per epoch, Export tab shown."""
    d = ScheduleDesigner(warmup(drops(0.1, at=(300, 600), factor=0.1, steps=890), 110), steps_per_epoch=SPE)
    d.tabs.selected_index = 1
    return d


def expected(d: ScheduleDesigner, value: str) -> str:
    """The export function's own text for the designer's current design."""
    s, unit, spe = d.schedule, d.unit, d.steps_per_epoch
    return {"Python": lambda: to_python(s, name="lr_at", unit=unit, steps_per_epoch=spe),
            "numpy": lambda: to_python(s, name="lr_at", unit=unit, steps_per_epoch=spe, array=True),
            "jax": lambda: to_jax(s, name="lr_at", unit=unit, steps_per_epoch=spe),
            "keras": lambda: to_keras(s, unit=unit, steps_per_epoch=spe),
            "torch": lambda: to_torch(s, base_lr=d.facts.peak, unit=unit, steps_per_epoch=spe)}[value]()


def mark_in(text: str) -> str:
    """The fingerprint a written report carries (HTML meta element, or Markdown's first 'fingerprint' line)."""
    m = (re.search(r'<meta name="schedwidget-fingerprint" content="([0-9a-f]+)">', text)
         or re.search(r"^Fingerprint `([0-9a-f]{12})`", text, re.M))
    assert m, text[:400]
    return m.group(1)


class TestTargets:
    """Each target shows the exporter's text for the current design, coloured, and writes it to a file."""

    def test_plain_words_in_order(self):
        d = designer()
        assert [w for w, _ in d.export.language.options] == [
            "Python (one step)", "numpy (arrays)", "JAX", "Keras", "PyTorch scheduler"]
        assert len(d.export.language.tooltips) == 5

    @pytest.mark.parametrize("value", VALUES)
    def test_shown_source_is_the_exporters(self, value):
        d = designer()
        d.export.language.value = value
        assert d.error == ""
        assert d.export.code.value == expected(d, value)
        assert d.export.view.value == highlighted(expected(d, value))
        assert "<span" in d.export.view.value and 'style="' in d.export.view.value  # coloured by pygments

    @pytest.mark.parametrize("value", VALUES)
    def test_source_follows_the_design(self, value):
        d = designer()
        d.export.language.value = value
        d.control(0, "peak").text.value = 0.25
        assert d.error == "" and "0.25" in d.export.code.value
        assert d.export.code.value == expected(d, value)

    def test_epoch_clock_reaches_every_target(self):
        d = ScheduleDesigner(cosine(0.1, steps=90), unit="epoch")
        d.tabs.selected_index = 1
        for value in VALUES:
            d.export.language.value = value
            assert d.export.code.value == expected(d, value), value

    def test_numpy_source_equals_the_design_at_every_tick(self):
        """The shown numpy text, run, gives the design bit for bit at every tick of the budget and past it."""
        d = designer()
        d.export.language.value = "numpy"
        ns: dict = {}
        exec(d.export.code.value, ns)
        t = np.arange(d.steps + 50)
        assert np.array_equal(ns["lr_at"](t), d.schedule(t))

    def test_no_framework_is_imported(self):
        """Showing every target imports neither jax, keras nor torch (the code is text)."""
        code = ("import sys\n"
                "from schedwidget import ScheduleDesigner\n"
                "d = ScheduleDesigner()\n"
                "d.tabs.selected_index = 1\n"
                "for v in ('Python', 'numpy', 'jax', 'keras', 'torch'):\n"
                "    d.export.language.value = v\n"
                "    assert d.error == '' and d.export.code.value, v\n"
                "print(sorted(m for m in ('jax', 'keras', 'torch', 'tensorflow') if m in sys.modules))\n")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
        assert out.returncode == 0, out.stderr
        assert out.stdout.strip() == "[]"

    def test_default_file_name_follows_the_target_a_typed_one_stays(self):
        d = designer()
        e = d.export
        assert e.code_path.value == "lr_schedule.py"
        for value in VALUES:
            e.language.value = value
            assert e.code_path.value == DEFAULT_FILES[value]
        assert DEFAULT_FILES == {"Python": "lr_schedule.py", "numpy": "lr_schedule_numpy.py",
                                 "jax": "lr_schedule_jax.py", "keras": "lr_schedule_keras.py",
                                 "torch": "lr_schedule.py"}
        e.code_path.value = "mine.py"
        e.language.value = "jax"
        assert e.code_path.value == "mine.py"

    @pytest.mark.parametrize("value", VALUES)
    def test_write_button_writes_the_source(self, value, tmp_path):
        d = designer()
        e = d.export
        e.language.value = value
        target = tmp_path / DEFAULT_FILES[value]
        e.code_path.value = str(target)
        e.write_button.click()
        assert d.error == "" and "code written to" in e.message.value
        assert target.read_text("utf-8") == e.code.value == expected(d, value)
        compile(target.read_text("utf-8"), str(target), "exec")
        assert [p.name for p in tmp_path.iterdir()] == [target.name]  # no temporary file left behind

    def test_write_while_hidden_writes_the_current_design(self, tmp_path):
        """Called from code while the tab is hidden, write_code writes the current design's code, not old text."""
        d = designer()
        d.export.language.value = "jax"
        d.tabs.selected_index = 0
        d.control(0, "peak").text.value = 0.3
        assert d.export.stale
        path = d.export.write_code(tmp_path / "x.py")
        assert Path(path).read_text("utf-8") == expected(d, "jax")

    def test_a_failed_write_keeps_the_file_and_says_why(self, tmp_path):
        d = designer()
        d.export.code_path.value = str(tmp_path / "missing" / "x.py")
        d.export.write_button.click()
        assert "code file" in d.error and "code file" in d.export.message.value
        assert not (tmp_path / "missing").exists()


class TestReportButton:
    """The report button writes the report of the current design with its pins, atomically, and names it."""

    def test_html_report_with_pins_equals_reports_text(self, tmp_path):
        d = designer()
        d.pin("before")
        d.control(0, "peak").text.value = 0.2
        e = d.export
        target = tmp_path / "review.html"
        e.report_path.value = str(target)
        e.report_button.click()
        assert d.error == ""
        text = target.read_text("utf-8")
        same = report(d.schedule, steps=d.steps, steps_per_epoch=SPE, batch=d.batch,
                      compare=[("before", d.pins[0].schedule)], form="html")
        assert text == same
        mark = fingerprint(d.schedule, "step")
        assert mark_in(text) == mark_in(same) == mark
        assert f"<code>{mark}</code>" in e.message.value and str(target) in e.message.value
        assert "before" in e.message.value
        assert f"<code>{fingerprint(d.pins[0].schedule, 'step')}</code>" in text  # the pin, listed and drawn
        assert e.reported == (str(target), mark, ["before"], [])
        assert [p.name for p in tmp_path.iterdir()] == ["review.html"]

    def test_markdown_from_the_toggle(self, tmp_path):
        d = designer()
        e = d.export
        assert e.report_path.value == REPORT_FILES["html"]
        e.report_form.value = "markdown"
        assert e.report_path.value == "design_report.md"
        e.report_path.value = str(tmp_path / "review.html")
        e.report_form.value = "markdown"  # no change: the suffix stays until the form changes
        e.report_form.value = "html"
        e.report_form.value = "markdown"
        assert e.report_path.value == str(tmp_path / "review.md")
        e.report_button.click()
        text = (tmp_path / "review.md").read_text("utf-8")
        assert text == report(d.schedule, steps=d.steps, steps_per_epoch=SPE, batch=d.batch, form="markdown")
        assert text.startswith("# Learning-rate design report")
        assert mark_in(text) == fingerprint(d.schedule, "step")
        assert "no pins to draw" in e.message.value

    def test_fingerprint_moves_with_the_design(self, tmp_path):
        d = designer()
        e = d.export
        e.report_path.value = str(tmp_path / "a.html")
        e.report_button.click()
        first = e.reported[1]
        d.control(0, "peak").text.value = 0.11
        e.report_path.value = str(tmp_path / "b.html")
        e.report_button.click()
        assert e.reported[1] != first
        assert mark_in((tmp_path / "b.html").read_text("utf-8")) == e.reported[1] == fingerprint(d.schedule)

    def test_typed_base_rate_reaches_the_torch_block(self, tmp_path):
        d = designer()
        d.export.language.value = "torch"
        d.export.base.value = "3e-4"
        d.export.report_path.value = str(tmp_path / "r.md")
        d.export.report_form.value = "markdown"
        d.export.report_button.click()
        assert "BASE_LR = 0.0003: as given" in (tmp_path / "r.md").read_text("utf-8")

    def test_pin_on_the_other_clock_is_left_out_and_named(self, tmp_path):
        d = ScheduleDesigner(warmup(cosine(0.1, steps=85), 5), unit="epoch", steps_per_epoch=1150)
        d.tabs.selected_index = 1
        d.pin("in epochs")
        d.set_unit("step")
        d.pin("in steps")
        e = d.export
        e.report_path.value = str(tmp_path / "r.html")
        e.report_button.click()
        assert d.error == ""
        assert e.reported[2:] == (["in steps"], ["in epochs"])
        assert "left out (pinned in epochs, one picture has one clock): in epochs" in e.message.value
        text = (tmp_path / "r.html").read_text("utf-8")
        assert "in steps" in text and "in epochs" not in text

    def test_long_pin_name_becomes_a_label_of_one_line(self, tmp_path):
        assert report_label("lower\n  peak") == "lower peak"
        assert len(report_label("x" * 80)) == 60 and report_label("x" * 60) == "x" * 60
        d = designer()
        d.pin("a rather long name " * 5)
        d.export.report_path.value = str(tmp_path / "r.html")
        d.export.report_button.click()
        assert d.error == "" and len(d.export.reported[2][0]) == 60

    def test_a_failed_report_writes_nothing_and_says_why(self, tmp_path):
        d = designer()
        e = d.export
        e.report_path.value = str(tmp_path / "missing" / "r.html")
        e.report_button.click()
        assert "report: path" in d.error and "report: path" in e.message.value
        assert e.reported is None and not (tmp_path / "missing").exists()
        e.report_path.value = str(tmp_path / "r.txt")
        e.report_button.click()  # the form is chosen by the toggle, so any suffix is written as asked
        assert "report written to" in e.message.value
        assert (tmp_path / "r.txt").read_text("utf-8").startswith("<!DOCTYPE html>")


class TestClosing:
    """Repainting makes no widgets; closed, the panel leaves none of its widgets open."""

    def test_no_widget_made_per_change_and_none_left_after_close(self, tmp_path):
        d = designer()
        e = d.export
        d.pin("p")
        before = len(_instances)
        for k in range(3):
            for value in VALUES:
                e.language.value = value
                d.control(0, "peak").text.value = 0.1 + 0.01 * k
                e.code_path.value = str(tmp_path / f"{value}.py")
                e.write_button.click()
            e.report_form.value = ("html", "markdown")[k % 2]
            e.report_path.value = str(tmp_path / f"r{k}{'.html' if k % 2 == 0 else '.md'}")
            e.report_button.click()
        assert d.error == ""
        assert len(_instances) == before
        mine = []
        todo = [e]
        while todo:
            w = todo.pop()
            mine.append(w)
            todo.extend(getattr(w, "children", ()) or ())
            todo.extend(x for x in (getattr(w, "layout", None), getattr(w, "style", None)) if x is not None)
        ids = {w.model_id for w in mine}
        closed = close_tree(e)
        assert closed == len(ids) > 30
        assert not ids & set(_instances) and len(_instances) == before - closed
