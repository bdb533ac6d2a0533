"""The design report (issue 18 item 1): its numbers, table, spec and fingerprint are the design's own."""

from __future__ import annotations

import base64
import html
import json
import os
import re
from pathlib import Path

import pytest

from schedwidget import Design, ScheduleError, cosine, drops, exp_decay, flat, ramp, stages, warmup
from schedwidget.facts import facts
from schedwidget.fingerprint import canonical, fingerprint
from schedwidget.report import report, report_main
from schedwidget.inverse import paths
from schedwidget.spec import from_spec, read_design, save, to_spec
from schedwidget.svg import render_svg

SPE = 1_150  # the invented demo scenario: 90 epochs of 1,150 steps


def three_stage():
    """Warmup ramp, cosine, flat tail: the demo team's 90-epoch design."""
    return stages(ramp(0.0, 0.4, 5 * SPE), cosine(0.4, 0.004, steps=75 * SPE), flat(0.004, steps=10 * SPE))


def other():
    return warmup(cosine(0.4, steps=85 * SPE), steps=5 * SPE)


def read_numbers(text: str, form: str) -> dict[str, tuple[str, str]]:
    """The Numbers table: key or label -> (value, tick) as written."""
    if form == "html":
        rows = re.findall(r'<tr data-fact="(\w+)"><th>[^<]*</th><td class="n">([^<]*)</td><td class="n">([^<]*)</td>',
                          text)
        return {k: (html.unescape(v), t) for k, v, t in rows}
    part = text.split("## Numbers", 1)[1].split("\n## ", 1)[0]
    lines = [x for x in part.splitlines() if x.startswith("| ")][1:]
    return {c[0]: (c[1], c[2]) for c in ([x.strip() for x in line.strip("|").split("|")] for line in lines)}


def read_boundary(text: str, form: str) -> list[tuple[str, int, float]]:
    if form == "html":
        rows = re.findall(r'<tr data-row="\d+"><th>([^<]*)</th><td class="n">([^<]*)</td>.*?<td class="n">([^<]*)'
                          r'</td></tr>', text)
        return [(html.unescape(a), int(b.replace(",", "")), float(c)) for a, b, c in rows]
    part = text.split("## Rates at the joins", 1)[1].split("\n## ", 1)[0]
    lines = [x for x in part.splitlines() if x.startswith("| ")][1:]
    cells = [[x.strip() for x in line.strip("|").split("|")] for line in lines]
    return [(c[0], int(c[1].replace(",", "")), float(c[-1])) for c in cells]


def read_block(text: str, form: str, what: str, lang: str = "") -> str:
    """The text of the spec / python / torch block."""
    if form == "html":
        m = re.search(rf'<pre id="{what}"><code>(.*?)</code></pre>', text, re.S)
        return html.unescape(m.group(1))
    heading = {"spec": "## Spec", "python": "## Python", "torch": "## torch"}[what]
    part = text.split(heading, 1)[1]
    m = re.search(r"\n(`{3,})" + lang + r"\n(.*?)\n\1\n", part, re.S)
    return m.group(2)


FORMS = ("html", "markdown")
LABELS = {"first tick": "first", "peak": "peak", "minimum": "minimum", "last tick": "final",
          "after the run (held)": "after", "mean": "mean", "area (sum of rates)": "area", "jumps": "jumps",
          "first under 10 % of peak": "under_10", "first under 1 % of peak": "under_1"}


@pytest.fixture(scope="module")
def design():
    return Design(three_stage(), "step", SPE)


@pytest.fixture(scope="module", params=FORMS)
def made(request, design):
    form = request.param
    return form, report(design, batch=8_192, compare=[("warmup + cosine", other())], form=form)


class TestContents:
    """Every number, row and block of the report is the design's own."""

    def test_numbers_equal_facts(self, made, design):
        """Each value of the Numbers table reads back to the float (or tick) facts(...) gives."""
        form, text = made
        f = facts(design.schedule, steps_per_epoch=SPE, batch=8_192)
        got = read_numbers(text, form)
        if form == "markdown":
            got = {LABELS[k]: v for k, v in got.items()}
        for key in ("first", "peak", "minimum", "final", "after", "mean", "area"):
            assert float(got[key][0]) == getattr(f, key), key
        assert int(got["jumps"][0]) == len(f.breaks)
        assert int(got["peak"][1].replace(",", "")) == f.peak_at
        assert int(got["minimum"][1].replace(",", "")) == f.minimum_at
        assert int(got["under_10"][1].replace(",", "")) == f.under_10
        assert int(got["under_1"][1].replace(",", "")) == f.under_1

    def test_table_equals_boundary(self, made, design):
        """The rates-at-the-joins table is Facts.boundary row for row (label, tick, exact rate)."""
        form, text = made
        f = facts(design.schedule, steps_per_epoch=SPE)
        rows = read_boundary(text, form)
        assert rows == list(f.boundary)
        assert len(rows) == 7  # first, two joins on both sides, last, held after

    def test_sentence_and_cautions(self, made, design):
        """The plain sentence and every caution appear as facts(...) writes them."""
        form, text = made
        f = facts(design.schedule, steps_per_epoch=SPE, batch=8_192)
        assert (html.escape(f.sentence) if form == "html" else f.sentence) in text
        g = facts(flat(3.5, steps=100), batch=8_192)  # no warmup at batch 8,192 (Goyal et al. 2017) is a caution
        assert g.cautions
        again = report(flat(3.5, steps=100), batch=8_192, form=form)
        for c in g.cautions:
            assert (html.escape(c) if form == "html" else c) in again

    def test_spec_loads_back(self, made, design):
        """The spec block read back is an equal design (schedule, unit, steps per epoch)."""
        form, text = made
        spec = json.loads(read_block(text, form, "spec", "json"))
        assert read_design(spec) == design
        assert spec == to_spec(design.schedule, "step", SPE)

    def test_exports_are_the_exporters(self, made, design):
        """The Python and torch blocks are to_python's and to_torch's text (base rate: the peak, said so)."""
        from schedwidget import to_python, to_torch

        form, text = made
        python = to_python(design.schedule, steps_per_epoch=SPE)
        torch = to_torch(design.schedule, 0.4, steps_per_epoch=SPE)
        assert read_block(text, form, "python", "python").rstrip("\n") == python.rstrip("\n")
        assert read_block(text, form, "torch", "python").rstrip("\n") == torch.rstrip("\n")
        said = "BASE_LR = 0.4: the design's peak (0.4), the default"
        assert (html.escape(said) if form == "html" else said) in text

    def test_ghost_in_picture(self, made, design):
        """The picture is render_svg's with the compared design as a ghost (Markdown: a data: URI image)."""
        form, text = made
        svg = render_svg(design.schedule, steps=facts(design.schedule).steps, steps_per_epoch=SPE,
                         ghosts=[("warmup + cosine", other())])
        if form == "html":
            assert svg in text
        else:
            data = re.search(r"!\[[^\]]*\]\(data:image/svg\+xml;base64,([A-Za-z0-9+/=]+)\)", text).group(1)
            assert base64.b64decode(data).decode("utf-8") == svg
        assert 'data-role="ghost"' in svg and fingerprint(other()) in text


class TestFingerprint:
    """The fingerprint: the SHA-256 of the canonical spec, shown in the report, moved by every parameter."""

    def test_in_report(self, made, design):
        form, text = made
        mark = fingerprint(design)
        assert re.fullmatch(r"[0-9a-f]{12}", mark)
        assert (f'id="fingerprint">{mark}<' if form == "html" else f"Fingerprint `{mark}`") in text

    def test_canonical_text(self, design):
        """Sorted keys, no whitespace, unit always written, steps per epoch left out (it only labels epochs)."""
        text = canonical(design)
        assert " " not in text and '"unit":"step"' in text and "steps_per_epoch" not in text
        assert json.loads(text) == to_spec(design.schedule, "step")
        assert fingerprint(design) == fingerprint(design.schedule) == fingerprint(Design(design.schedule, "step"))
        assert fingerprint(design.schedule, unit="epoch") != fingerprint(design.schedule)

    def test_every_parameter_moves_it(self):
        """Changing any declared parameter of a 3-stage design changes the fingerprint."""
        s = three_stage()
        base = fingerprint(s)
        seen = set()
        found = paths(s)
        assert len(found) == 8  # ramp start, end, steps; cosine peak, floor, steps; flat lr, steps
        for path, p, value in found:
            moved = None
            spec = to_spec(s)
            for new in ([value + 1, value + 2] if isinstance(value, int) else
                        [value * 1.01 + 1e-6, value * 0.99, value + 1e-3]):
                node = spec["schedule"]
                parts = re.findall(r"(\w+)(?:\[(\d+)\])?", path)
                for name, index in parts[:-1]:
                    node = node[name] if not index else node[name][int(index)]
                node[parts[-1][0]] = new
                try:
                    moved = from_spec(spec)
                    break
                except ScheduleError:
                    continue
            assert moved is not None and moved != s, path
            mark = fingerprint(moved)
            assert mark != base, path
            seen.add(mark)
        assert len(seen) == len(found)


    def test_docstring_lines(self, design):
        """The lines for an exported docstring carry the same fingerprint; a design no spec can hold gets none."""
        from schedwidget.fingerprint import docstring_lines
        from schedwidget.spec import MAX_DEPTH

        assert docstring_lines(design.schedule) == ["", f"Fingerprint: {fingerprint(design)} (SHA-256 of the "
                                                    "design's canonical spec, as its design report shows it)."]
        deep = cosine(0.1, steps=10)
        for _ in range(MAX_DEPTH + 2):
            deep = deep * 1.0
        with pytest.raises(ScheduleError, match="to_spec"):
            fingerprint(deep)
        assert docstring_lines(deep) == []


class TestTracks:
    """Tracks and per-group designs: each group's rate read alone, the whole value's spec and fingerprint."""

    def test_groups(self, tmp_path):
        from schedwidget import per_group, tracks, tracks_from_spec

        head = tracks(warmup(cosine(0.4, steps=9_000), steps=1_000), momentum=ramp(0.85, 0.95, 10_000))
        backbone = stages(flat(0.0, steps=1_000), warmup(cosine(0.04, steps=8_000), steps=1_000))
        g = per_group({"backbone": backbone, "head": head})
        for form in FORMS:
            text = report(g, steps_per_epoch=1_000, form=form)
            assert fingerprint(g) in text and "2 param groups" in text
            assert tracks_from_spec(json.loads(read_block(text, form, "spec", "json"))) == g
            for name, rate in (("backbone", backbone), ("head", head.rate)):
                f = facts(rate, steps_per_epoch=1_000)
                if form == "html":
                    rows = re.findall(rf'<tr data-row="\d+" data-group="{name}"><th>([^<]*)</th><td class="n">([^<]*)'
                                      r'</td>.*?<td class="n">([^<]*)</td></tr>', text)
                    got = [(html.unescape(a), int(b.replace(",", "")), float(c)) for a, b, c in rows]
                else:
                    part = text.split(f"## Rates at the joins: {name} rate", 1)[1].split("\n## ", 1)[0]
                    cells = [[x.strip() for x in line.strip("|").split("|")]
                             for line in part.splitlines() if line.startswith("| ")][1:]
                    got = [(c[0], int(c[1].replace(",", "")), float(c[-1])) for c in cells]
                assert got == list(f.boundary), name
        assert "no BASE_LR" in text and "TrackClock" in text
        with pytest.raises(ScheduleError, match="report: compare"):
            report(g, compare=[backbone])
        with pytest.raises(ScheduleError, match="report: base_lr"):
            report(g, base_lr=0.1)
        path = tmp_path / "groups.json"
        save(g, path, unit="step", steps_per_epoch=1_000)
        assert report_main([str(path), "-o", str(tmp_path / "groups.md")]) == 0
        assert fingerprint(g) in (tmp_path / "groups.md").read_text(encoding="utf-8")


class TestHtmlSafety:
    """The HTML is one file: no script element, no external reference."""

    def test_no_script_no_external(self, design, tmp_path):
        text = report(design, compare=[other()], path=tmp_path / "r.html")
        assert not re.search(r"<\s*script", text, re.I)
        assert not re.search(r"\bon[a-z]+\s*=", text, re.I)  # no inline event handler either
        assert not re.search(r"""(?:src|href)\s*=\s*["']?\s*(?:https?:)?//""", text, re.I)
        assert not re.search(r"url\(\s*['\"]?\s*(?:https?:)?//", text, re.I)
        assert not re.search(r"<\s*(?:link|iframe|object|embed)\b|@import", text, re.I)
        assert "@page" in text and "@media print" in text


class TestWrite:
    """Written atomically, in the form the suffix asks for; bad input is a ScheduleError."""

    def test_written_text_is_returned_text(self, tmp_path):
        for name, head in (("a.html", "<!DOCTYPE html>"), ("a.md", "# Learning-rate design report"),
                           ("a.HTM", "<!DOCTYPE html>"), ("a.markdown", "# ")):
            text = report(drops(0.1, at=(30, 60), steps=90), unit="epoch", path=tmp_path / name)
            assert text.startswith(head) and (tmp_path / name).read_text(encoding="utf-8") == text
        (tmp_path / "a.txt").write_text("old")
        text = report(exp_decay(0.1, 0.95, steps=200), unit="epoch", path=tmp_path / "a.txt", form="html")
        assert (tmp_path / "a.txt").read_text(encoding="utf-8") == text
        assert sorted(os.listdir(tmp_path)) == ["a.HTM", "a.html", "a.markdown", "a.md", "a.txt"]  # no temp files

    def test_refusals(self, tmp_path):
        s = cosine(0.1, steps=100)
        with pytest.raises(ScheduleError, match=r"report: path .*\.html, \.htm, \.md or \.markdown"):
            report(s, path=tmp_path / "a.pdf")
        with pytest.raises(ScheduleError, match="report: form"):
            report(s, form="pdf")
        with pytest.raises(ScheduleError, match="report: path .*existing folder"):
            report(s, path=tmp_path / "missing" / "a.md")
        with pytest.raises(ScheduleError, match="report: design"):
            report(0.1)
        with pytest.raises(ScheduleError, match="report: compare"):
            report(s, compare=s)
        with pytest.raises(ScheduleError, match=r"report: compare\[0\]"):
            report(s, compare=[Design(cosine(0.1, steps=100), "epoch")])
        with pytest.raises(ScheduleError, match="report: base_lr"):
            report(flat(0.0, steps=10))
        assert "BASE_LR = 0.5: as given" in report(flat(0.0, steps=10), base_lr=0.5)
        assert list(tmp_path.iterdir()) == []


class TestCommandLine:
    """report_main: the 'report' command's arguments; 0 and a file, or 1 and one line on stderr."""

    def test_writes_report(self, tmp_path, capsys):
        spec, ghost = tmp_path / "design.json", tmp_path / "warmup_cosine.json"
        save(three_stage(), spec, unit="step", steps_per_epoch=SPE)
        save(other(), ghost, unit="step", steps_per_epoch=SPE)
        out = tmp_path / "design.html"
        assert report_main([str(spec), "--compare", str(ghost), "-o", str(out), "--batch", "1024"]) == 0
        text = out.read_text(encoding="utf-8")
        mark = fingerprint(three_stage())
        assert capsys.readouterr().out == f"wrote {out} (fingerprint {mark})\n"
        assert mark in text and "warmup_cosine" in text and fingerprint(other()) in text
        assert report_main([str(spec), "-o", str(tmp_path / "design.md")]) == 0
        assert (tmp_path / "design.md").read_text(encoding="utf-8").startswith("# Learning-rate design report")

    @pytest.mark.parametrize("argv, words", [
        (["missing.json", "-o", "x.html"], "load: path must name an existing file"),
        (["{spec}", "-o", "x.pdf"], "report: path"),
        (["{spec}"], "the following arguments are required: -o/--output"),
        (["{spec}", "-o", "x.md", "--form", "pdf"], "invalid choice"),
    ])
    def test_bad_input_one_line(self, tmp_path, capsys, monkeypatch, argv, words):
        monkeypatch.chdir(tmp_path)
        save(cosine(0.1, steps=100), tmp_path / "s.json")
        code = report_main([a.replace("{spec}", "s.json") for a in argv])
        err = capsys.readouterr().err
        assert code == 1 and err.startswith("schedwidget: error: ") and words in err and err.count("\n") == 1
        assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json"]

    def test_help(self, capsys):
        assert report_main(["--help"]) == 0
        assert "--compare" in capsys.readouterr().out


def test_exported_code_carries_the_reports_fingerprint(tmp_path):
    """The mark a reviewer compares: the report's fingerprint is in the docstring of every export of the design
    (Python, torch, numpy, JAX, Keras text), and a changed parameter changes it in both."""
    from schedwidget import cosine, to_python, to_torch, warmup
    from schedwidget.export_jax import to_jax
    from schedwidget.export_keras import to_keras
    from schedwidget.fingerprint import fingerprint
    from schedwidget.report import report

    s = warmup(cosine(0.1, 0.001, steps=9000), 1000)
    mark = fingerprint(s)
    text = report(s, path=tmp_path / "r.md")
    assert mark in text
    for code in (to_python(s), to_torch(s, 0.1), to_python(s, array=True), to_jax(s), to_keras(s)):
        assert f"Fingerprint: {mark}" in code
    other = warmup(cosine(0.1, 0.002, steps=9000), 1000)
    assert fingerprint(other) != mark and f"Fingerprint: {fingerprint(other)}" in to_python(other)


def test_report_through_the_command_line(tmp_path):
    """python -m schedwidget report SPEC -o FILE writes the report (one line on stdout, exit 0)."""
    import subprocess
    import sys

    from schedwidget import cosine, save, warmup

    spec = tmp_path / "d.json"
    save(warmup(cosine(0.1, 0.001, steps=9000), 1000), spec)
    out = subprocess.run([sys.executable, "-m", "schedwidget", "report", str(spec), "-o", str(tmp_path / "d.html")],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 0 and out.stdout.count("\n") == 1, out.stderr
    assert (tmp_path / "d.html").read_text().lstrip().lower().startswith("<!doctype html")
