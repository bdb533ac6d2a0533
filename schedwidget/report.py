"""A design report: one self-contained file (HTML or Markdown) to hand a schedule over for review.

It holds the picture (compared designs as grey ghosts), the plain sentence, the numbers, the rates on both
sides of every join, the cautions, the exported code (stdlib Python and the torch snippet), the spec itself
and a fingerprint of the design (``schedwidget.fingerprint``), so a reviewer can tell that the code in a
pull request is the reported design.  No script and no external reference: the HTML prints to one page
for a design of a few stages; the Markdown shows the picture as an embedded (data: URI) image.  Tracks and
per-group designs get every track's picture and sentence, and each group's rate its numbers and join table.

    python -m schedwidget report SPEC.json [--compare OTHER.json ...] -o design.html|design.md
"""

from __future__ import annotations

import argparse
import base64
import html
import json
import re
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

from .export import to_python, to_torch
from .facts import Facts, facts
from .fingerprint import fingerprint
from .schedule import Schedule, ScheduleError, complain
from .spec import Design, check_path, load_design, to_spec, write_atomic
from .svg import default_window, render_svg

__all__ = ["report", "report_main", "FORMS"]

#: What a file name's suffix asks for.
FORMS = {".html": "html", ".htm": "html", ".md": "markdown", ".markdown": "markdown"}
HEADING = "Learning-rate design report"


@dataclass(frozen=True)
class _Parts:
    """Everything a report shows, computed once for both forms."""

    title: str
    what: str
    unit: str
    spe: int | None
    #: each rate's facts: ("", facts) for one design; (group name or index, facts) per group of tracks
    rates: list[tuple[str, Facts]]
    sentence: str
    cautions: list[str]
    print_: str
    svg: str
    python: str
    torch: str
    base_said: str
    spec: str
    mark: str
    compared: list[tuple[str, Schedule, Facts, str]]


def _design(owner: str, name: str, d: Any, tracked: bool = False) -> Design:
    from .tracks import GroupDesigns, Tracks

    if isinstance(d, Schedule):
        return Design(d)
    if isinstance(d, Design) and (d.tracks is None or tracked):
        return d
    if tracked and isinstance(d, (Tracks, GroupDesigns)):
        return Design(d.rate if isinstance(d, Tracks) else d.groups[0].rate, "step", None, d)
    allowed = "a Schedule, tracks(...), per_group(...) or a Design" if tracked else "a Schedule or a Design of one"
    raise complain(owner, name, type(d).__name__, allowed)


def _compared(unit: str, compare: Any) -> list[tuple[str, Schedule]]:
    if isinstance(compare, (Schedule, Design, str)) or not isinstance(compare, Sequence):
        raise complain("report", "compare", type(compare).__name__,
                       "a list of designs or (label, design) pairs")
    out = []
    for i, c in enumerate(compare):
        label, raw = (c if isinstance(c, tuple) and len(c) == 2 else (f"compared {i + 1}", c))
        if not isinstance(label, str) or not label.strip() or len(label) > 60 or "\n" in label:
            raise complain("report", f"compare[{i}]", label, "a label of one line, 1 to 60 characters")
        d = _design("report", f"compare[{i}]", raw)
        if isinstance(raw, Design) and d.unit != unit:
            raise complain("report", f"compare[{i}]", f"a design on a clock of {d.unit}s",
                           f"a design on the report's clock ({unit}s)", "one picture has one clock")
        out.append((label.strip(), d.schedule))
    return out


def _form(path: str | None, form: str | None) -> str:
    if form is not None:
        if form not in ("html", "markdown"):
            raise complain("report", "form", form, "one of 'html', 'markdown' or None (from the path's suffix)")
        return form
    if path is None:
        return "markdown"
    suffix = Path(path).suffix.lower()
    if suffix not in FORMS:
        raise complain("report", "path", path, "a file name ending in .html, .htm, .md or .markdown",
                       "or pass form='html' / form='markdown'")
    return FORMS[suffix]


def _parts(design, steps, steps_per_epoch, batch, compare, unit, base_lr, title, log, name) -> _Parts:
    d = _design("report", "design", design, tracked=True)
    if unit is not None and unit != d.unit and isinstance(design, Design):
        raise complain("report", "unit", unit, f"None or the design's own unit {d.unit!r}")
    unit = unit if unit is not None else d.unit
    spe = steps_per_epoch if steps_per_epoch is not None else d.steps_per_epoch
    spe = spe if unit == "step" else None
    head = HEADING if title is None else title
    if not isinstance(head, str) or not head.strip() or len(head) > 120 or "\n" in head:
        raise complain("report", "title", title, "one line of text, 1 to 120 characters")
    if d.tracks is not None:
        return _tracked(d, head.strip(), steps, spe, batch, compare, unit, base_lr, name)
    s = d.schedule
    n = steps if steps is not None else (s.length if s.length is not None else default_window(s))
    f = facts(s, steps=n, steps_per_epoch=spe, unit=unit, batch=batch)
    ghosts = _compared(unit, compare)
    svg = render_svg(s, steps=f.steps, log=log, unit=unit, steps_per_epoch=spe, ghosts=ghosts)
    if base_lr is None:
        if not f.peak > 0:
            raise complain("report", "base_lr", None, "a rate > 0 when the design's peak is 0",
                           "the torch snippet needs the optimizer's lr to divide by")
        base, said = f.peak, f"BASE_LR = {f.peak!r}: the design's peak ({f.peak!r}), the default"
    else:
        base, said = base_lr, f"BASE_LR = {base_lr!r}: as given"
    python = to_python(s, name=name, unit=unit, steps_per_epoch=spe)
    torch = to_torch(s, base, unit=unit, name=name, steps_per_epoch=spe)
    spec = json.dumps(to_spec(s, unit, spe), indent=2)
    compared = [(label, g, facts(g, steps=f.steps, steps_per_epoch=spe, unit=unit), fingerprint(g, unit))
                for label, g in ghosts]
    return _Parts(head.strip(), s.kind, unit, spe, [("", f)], f.sentence, list(f.cautions),
                  _budget_words(s.length, f.steps, unit, spe), svg, python, torch, said, spec, fingerprint(s, unit),
                  compared)


def _tracked(d: Design, head, steps, spe, batch, compare, unit, base_lr, name) -> _Parts:
    """The parts of a report of tracks or per-group designs: each group's rate read alone, every track drawn."""
    from .track_readouts import tracks_sentence, tracks_svg
    from .tracks import as_groups

    if not isinstance(compare, Sequence) or len(compare):
        raise complain("report", "compare", type(compare).__name__, "no compared designs with tracks or "
                       "per-group designs", "compare the rates alone: report(d.schedule, compare=...)")
    if base_lr is not None:
        raise complain("report", "base_lr", base_lr, "None with tracks or per-group designs",
                       "their rates are absolute: the snippet sets each group's lr directly")
    g = as_groups("report", d.tracks)
    sizes = [t.length if t.length is not None else default_window(t.rate) for t in g.groups]
    open_ended = any(t.length is None for t in g.groups)
    n = steps if steps is not None else (max(sizes) if open_ended else None)
    single = len(g) == 1 and g.names is None
    rates = [("" if single else str(g.names[i] if g.names else i),
              facts(t.rate, steps=n if n is not None else sizes[i], steps_per_epoch=spe, unit=unit, batch=batch))
             for i, t in enumerate(g.groups)]
    names = ", ".join(k.replace("_", " ") for k, _ in g.groups[0].items())
    what = f"tracks ({names})" if single else f"{len(g)} param groups"
    size = max(f.steps for _, f in rates)
    cautions = [(f"{k}: " if k else "") + c for k, f in rates for c in f.cautions]
    return _Parts(head, what, unit, spe, rates, tracks_sentence(d.tracks, n, spe, unit), cautions,
                  _budget_words(None if open_ended else size, size, unit, spe),
                  tracks_svg(d.tracks, n, unit=unit, steps_per_epoch=spe),
                  to_python(d.tracks, name=name, unit=unit, steps_per_epoch=spe),
                  to_torch(d.tracks, None, unit=unit, name=name, steps_per_epoch=spe),
                  "no BASE_LR: the snippet sets each group's lr and tracked values directly",
                  json.dumps(to_spec(d.tracks, unit, spe), indent=2), fingerprint(d.tracks, unit), [])


def _budget_words(length: int | None, n: int, unit: str, spe: int | None) -> str:
    out = f"{n:,} {unit}s" + (f" ({n / spe:g} epochs of {spe:,} steps)" if spe else "")
    return out if length is not None else f"open-ended, read over {out}"


def _epoch(t: int | None, spe: int | None) -> str:
    return "" if t is None or not spe else f"{t / spe:.3f}".rstrip("0").rstrip(".")


def _fact_rows(f: Facts, u: str) -> list[tuple[str, str, str, int | None]]:
    """(key, what, value, tick): the numbers of ``facts``, values written exactly (repr)."""
    rows = [("first", "first tick", repr(f.first), 0), ("peak", "peak", repr(f.peak), f.peak_at),
            ("minimum", "minimum", repr(f.minimum), f.minimum_at), ("final", "last tick", repr(f.final), f.steps - 1),
            ("after", "after the run (held)", repr(f.after), f.steps), ("mean", "mean", repr(f.mean), None),
            ("area", "area (sum of rates)", repr(f.area), None), ("jumps", "jumps", str(len(f.breaks)), None),
            ("under_10", "first under 10 % of peak", "" if f.under_10 is not None else "never", f.under_10),
            ("under_1", "first under 1 % of peak", "" if f.under_1 is not None else "never", f.under_1)]
    if f.half_life is not None:
        rows.append(("half_life", f"half-life ({u}s)", repr(f.half_life), None))
    return rows


# ----------------------------------------------------------------------------------------------- HTML
_CSS = """
:root { color: #1f2937; font-family: system-ui, sans-serif; }
body { margin: 0 auto; max-width: 1180px; padding: 18px 24px; font-size: 14px; line-height: 1.4; }
h1 { font-size: 22px; margin: 0 0 4px; } h2 { font-size: 15px; margin: 14px 0 6px; color: #0f766e; }
.meta { color: #475569; margin: 0 0 10px; } code, pre { font-family: ui-monospace, monospace; }
.mark { background: #ecfdf5; border: 1px solid #99f6e4; padding: 1px 6px; border-radius: 4px; font-weight: 600; }
.top, .tables { display: grid; grid-template-columns: 1.15fr 1fr; gap: 18px; align-items: start; }
figure { margin: 0; } figure svg { width: 100%; height: auto; display: block; }
.sentence { font-size: 15px; margin: 0 0 8px; } .cautions li { color: #b45309; } .cautions li.none { color: #64748b; }
table { border-collapse: collapse; width: 100%; font-size: 13px; }
th, td { text-align: left; padding: 2px 8px 2px 0; border-bottom: 1px solid #e5e7eb; vertical-align: top; }
td.n { text-align: right; font-variant-numeric: tabular-nums; font-family: ui-monospace, monospace; }
.code { display: grid; grid-template-columns: 1fr 1fr; gap: 18px; }
pre { background: #f8fafc; border: 1px solid #e5e7eb; padding: 8px; font-size: 12px; overflow-x: auto;
      white-space: pre-wrap; overflow-wrap: anywhere; margin: 0; }
footer { color: #64748b; font-size: 12px; margin-top: 12px; }
@page { size: A4; margin: 8mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 7.5pt; line-height: 1.25; }
  h1 { font-size: 12pt; } h2 { font-size: 8pt; margin: 5px 0 2px; } .sentence { font-size: 8pt; }
  .top, .tables { gap: 10px; } table { font-size: 6pt; line-height: 1.15; } th, td { padding: 0 5px 0 0; }
  figure svg { max-height: 56mm; }
  .code { display: block; column-count: 3; column-gap: 8px; }
  .code > div { break-inside: auto; } .code h2 { break-after: avoid; break-inside: avoid; }
  pre { font-size: 4.7pt; line-height: 1.1; padding: 3px; border: none; background: none; overflow: visible; }
  footer { font-size: 6pt; margin-top: 4px; }
}
"""


def _h(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _html(p: _Parts) -> str:
    spe, u = p.spe, p.unit
    ep = "<th>epoch</th>" if spe else ""

    def cells(t: int | None) -> str:
        tick = "" if t is None else f"{t:,}"
        return f'<td class="n">{tick}</td>' + (f'<td class="n">{_epoch(t, spe)}</td>' if spe else "")

    tables = []
    for key, f in p.rates:
        group, of = (f' data-group="{_h(key)}"', f" ({_h(key)} rate)") if key else ("", "")
        numbers = [f'<tr data-fact="{k}"{group}><th>{_h(w)}</th><td class="n">{_h(v)}</td>{cells(t)}</tr>'
                   for k, w, v, t in _fact_rows(f, u)]
        joins = [f'<tr data-row="{i}"{group}><th>{_h(label)}</th>{cells(t)}<td class="n">{r!r}</td></tr>'
                 for i, (label, t, r) in enumerate(f.boundary)]
        tables += [f'<div><h2>Numbers{of}</h2><table class="facts"><tr><th>what</th><th>value</th><th>{u}</th>{ep}'
                   "</tr>", *numbers, "</table></div>",
                   f'<div><h2>Rates at the joins{of}</h2><table class="boundary"><tr><th>where</th><th>{u}</th>{ep}'
                   "<th>rate</th></tr>", *joins, "</table></div>"]
    cautions = "".join(f"<li>{_h(c)}</li>" for c in p.cautions) or '<li class="none">none</li>'
    sentence = "<br>".join(_h(x) for x in p.sentence.splitlines())
    out = ['<!DOCTYPE html>', '<html lang="en">', '<head>', '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f'<meta name="schedwidget-fingerprint" content="{p.mark}">',
           f"<title>{_h(p.title)} ({p.mark})</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
           f"<header><h1>{_h(p.title)}</h1>",
           f'<p class="meta">fingerprint <span class="mark" id="fingerprint">{p.mark}</span> &middot; '
           f"unit {u} &middot; {_h(p.print_)} &middot; {_h(p.what)}</p></header>",
           '<section class="top">', f'<figure class="picture">{p.svg}</figure>',
           f'<div><p class="sentence" id="sentence">{sentence}</p>',
           f'<h2>Cautions</h2><ul class="cautions">{cautions}</ul>']
    if p.compared:
        out.append('<h2>Compared designs (grey)</h2><table class="compared"><tr><th>design</th>'
                   '<th>fingerprint</th><th>peak</th><th>last tick</th><th>area</th></tr>')
        out += [f'<tr><th>{_h(label)}</th><td><code>{m}</code></td><td class="n">{g.peak:.6g}</td>'
                f'<td class="n">{g.final:.6g}</td><td class="n">{g.area:.6g}</td></tr>'
                for label, _, g, m in p.compared]
        out.append("</table>")
    out += ["</div>", "</section>", '<section class="tables">', *tables, "</section>", '<section class="code">',
            f'<div><h2>Python (stdlib only)</h2><pre id="python"><code>{_h(p.python)}</code></pre></div>',
            f'<div><h2>Spec (load with schedwidget.load)</h2><pre id="spec"><code>{_h(p.spec)}</code></pre></div>',
            f"<div><h2>torch ({_h(p.base_said)})</h2>"
            f'<pre id="torch"><code>{_h(p.torch)}</code></pre></div>',
            "</section>", f"<footer>{_h(_footer(p))}</footer>", "</body>", "</html>"]
    return "\n".join(out) + "\n"


def _footer(p: _Parts) -> str:
    return (f"Fingerprint {p.mark}: the first 12 hex digits of the SHA-256 of the canonical spec (the spec above "
            f"with unit '{p.unit}' and without steps_per_epoch, sorted keys, no whitespace); "
            "schedwidget.fingerprint.fingerprint(schedwidget.load(path)) gives it. Rates are written exactly "
            "(Python's repr of the float).")


# ------------------------------------------------------------------------------------------- Markdown
def _cell(text: Any) -> str:
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def _fence(text: str, lang: str) -> list[str]:
    run = max([len(m) for m in re.findall(r"`+", text)] + [2]) + 1
    return ["`" * run + lang, text.rstrip("\n"), "`" * run]


def _markdown(p: _Parts) -> str:
    spe, u = p.spe, p.unit
    ep, bar = (" epoch |", "---:|") if spe else ("", "")

    def cells(t: int | None) -> str:
        return f" {'' if t is None else f'{t:,}'} |" + (f" {_epoch(t, spe)} |" if spe else "")

    data = base64.b64encode(p.svg.encode("utf-8")).decode("ascii")
    size = max(f.steps for _, f in p.rates)
    out = [f"# {_cell(p.title)}", "",
           f"Fingerprint `{p.mark}` · unit {u} · {p.print_} · {p.what}", "",
           f"![{_cell(p.what)} over {size:,} {u}s](data:image/svg+xml;base64,{data})", "",
           *[f"> {x}  " for x in p.sentence.splitlines()], "", "## Cautions", ""]
    out += [f"- {c}" for c in p.cautions] or ["- none"]
    if p.compared:
        out += ["", "## Compared designs (grey)", "", "| design | fingerprint | peak | last tick | area |",
                "|---|---|---:|---:|---:|"]
        out += [f"| {_cell(label)} | `{m}` | {g.peak:.6g} | {g.final:.6g} | {g.area:.6g} |"
                for label, _, g, m in p.compared]
    for key, f in p.rates:
        of = f": {_cell(key)} rate" if key else ""
        out += ["", f"## Numbers{of}", "", f"| what | value | {u} |{ep}", f"|---|---:|---:|{bar}"]
        out += [f"| {_cell(w)} | {v} |{cells(t)}" for _, w, v, t in _fact_rows(f, u)]
        out += ["", f"## Rates at the joins{of}", "", f"| where | {u} |{ep} rate |", f"|---|---:|{bar}---:|"]
        out += [f"| {_cell(label)} |{cells(t)} {r!r} |" for label, t, r in f.boundary]
    out += ["", "## Python (stdlib only)", "", *_fence(p.python, "python"), "",
            f"## torch ({p.base_said})", "", *_fence(p.torch, "python"), "",
            "## Spec (load with schedwidget.load)", "", *_fence(p.spec, "json"), "", _footer(p)]
    return "\n".join(out) + "\n"


def report(design: Schedule | Design, steps: int | None = None, steps_per_epoch: int | None = None,
           batch: int | None = None, compare: Sequence[Any] = (), path: str | Path | None = None,
           form: str | None = None, unit: str | None = None, base_lr: float | None = None,
           title: str | None = None, log: bool = False, name: str = "lr_at") -> str:
    """The design report as text; with ``path``, also written there atomically (temporary file, then rename).

    Parameters
    ----------
    design : a Schedule, ``tracks(...)``, ``per_group(...)``, or a Design (``load_design``), whose unit and
        steps per epoch are used.
    steps : the budget in ticks (default: the design's length, or the picture's window when open-ended).
    steps_per_epoch : epochs beside steps in the tables (unit "step"; default the Design's).
    batch : batch size per update, for the cautions (the linear scaling rule, warmup at large batch).
    compare : designs drawn as grey ghosts and listed with their fingerprints: Schedules or Designs, or
        ``(label, design)`` pairs.
    path : where to write; ``.html``/``.htm`` gives HTML, ``.md``/``.markdown`` Markdown.
    form : ``"html"`` or ``"markdown"``, instead of the suffix (default without a path: Markdown).
    unit : "step" or "epoch" for a Schedule (a Design brings its own).
    base_lr : the torch snippet's BASE_LR, the optimizer's lr (default: the design's peak, said in the report;
        none for tracks or per-group designs, whose snippet sets each group's lr directly).
    title : the report's heading.  log : a log rate axis.  name : the exported function's name.

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> text = report(warmup(cosine(0.1, steps=900), steps=100), form="markdown")
    >>> text.startswith("# Learning-rate design report")
    True
    """
    target = None if path is None else check_path("report", path)
    kind = _form(target, form)
    if target is not None:
        where = Path(target)
        if not where.parent.is_dir() or where.is_dir():
            raise complain("report", "path", target, "a file in an existing folder")
    text = (_html if kind == "html" else _markdown)(
        _parts(design, steps, steps_per_epoch, batch, compare, unit, base_lr, title, log, name))
    if target is not None:
        write_atomic(Path(target), text, owner="report", name="path")
    return text


# ------------------------------------------------------------------------------------------ command line
PROG = "python -m schedwidget report"


class _Usage(Exception):
    """A command-line mistake, reported in one line."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str):  # type: ignore[override]
        raise _Usage(f"{message} (see {self.prog} --help)")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog=PROG, description="Write a design report (HTML or Markdown, one self-contained file): the "
                "picture, the sentence, the numbers, the rates at the joins, the cautions, the exported Python "
                "and torch code, the spec and its fingerprint.",
                epilog="Exit code 0 on success, 1 on bad input (with one line on stderr).")
    p.add_argument("spec", metavar="SPEC.json")
    p.add_argument("--compare", action="extend", nargs="+", default=[], metavar="OTHER.json",
                   help="spec files drawn as grey ghosts (labelled by file name)")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="the report: .html/.htm or .md/.markdown (written atomically)")
    p.add_argument("--form", choices=("html", "markdown"), default=None, help="instead of the suffix")
    p.add_argument("--steps", type=int, default=None, metavar="N", help="budget in ticks (open-ended designs)")
    p.add_argument("--batch", type=int, default=None, metavar="B", help="batch size per update, for the cautions")
    p.add_argument("--base-lr", type=float, default=None, metavar="X",
                   help="the torch snippet's BASE_LR (default: the design's peak)")
    p.add_argument("--title", default=None, help="the report's heading")
    p.add_argument("--log", action="store_true", help="log rate axis in the picture")
    return p


def report_main(argv: Sequence[str] | None = None) -> int:
    """``python -m schedwidget report ...`` (``argv`` without the word ``report``); the exit code."""
    try:
        args = _parser().parse_args(argv)
        design = load_design(args.spec)
        others = [(Path(o).stem[:60] or f"compared {i + 1}", load_design(o)) for i, o in enumerate(args.compare)]
        report(design, steps=args.steps, batch=args.batch, compare=others, path=args.output, form=args.form,
               base_lr=args.base_lr, title=args.title, log=args.log)
        sys.stdout.write(f"wrote {args.output} (fingerprint {fingerprint(design)})\n")
        sys.stdout.flush()
        return 0
    except SystemExit as exc:  # --help prints and exits 0
        return exc.code if isinstance(exc.code, int) else 0
    except KeyboardInterrupt:
        return 130
    except (_Usage, ScheduleError, OSError) as exc:
        text = (f"{exc.strerror or type(exc).__name__}: {exc.filename!r}"
                if isinstance(exc, OSError) and exc.filename is not None else " ".join(str(exc).split()))
        sys.stderr.write(f"schedwidget: error: {text}\n")
        return 1
