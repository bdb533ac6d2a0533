"""The design report in Chromium (issue 18 item 1): it renders from the file alone and prints to one page.

Two 3-stage designs of the invented demo scenario (1,150 steps per epoch), each with one compared design.
"""

from __future__ import annotations

import re

import pytest

from schedwidget import Design, cosine, drops, flat, ramp, restarts, stages, warmup
from schedwidget.fingerprint import fingerprint
from schedwidget.report import report

from .conftest import new_page
from .pages import shot

SPE = 1_150


def pdf_pages(pdf: bytes) -> int:
    """Page objects in a PDF (Chromium writes each page dictionary as plain text: ``/Type /Page``)."""
    pages = len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))
    counts = [int(c) for c in re.findall(rb"/Type\s*/Pages\b[^>]*?/Count\s+(\d+)", pdf, re.S)]
    counts += [int(c) for c in re.findall(rb"/Count\s+(\d+)[^>]*?/Type\s*/Pages\b", pdf, re.S)]
    assert counts, "no page tree with a /Count in the PDF"
    assert max(counts) == pages, f"the page tree says {counts}, {pages} page objects found"
    return pages


DESIGNS = {
    # warmup, cosine, flat tail: 7 join rows
    "demo": stages(ramp(0.0, 0.4, 5 * SPE), cosine(0.4, 0.004, steps=75 * SPE), flat(0.004, steps=10 * SPE)),
    # warmup, three warm restarts, drops: 15 join rows and the longest generated code of the two
    "restarts": stages(ramp(0.0, 0.4, 5 * SPE), restarts(cosine(0.4, 0.004, steps=10 * SPE), cycles=3, growth=2.0,
                                                         peak_decay=0.5),
                       drops(0.04, at=(5 * SPE, 10 * SPE), factor=0.1, steps=15 * SPE)),
}


@pytest.fixture(scope="module", params=list(DESIGNS))
def report_file(request, tmp_path_factory):
    s = DESIGNS[request.param]
    ghost = warmup(cosine(0.4, steps=s.length - 5 * SPE), steps=5 * SPE)
    path = tmp_path_factory.mktemp("report") / "design.html"
    report(Design(s, "step", SPE), batch=1_024, compare=[("warmup + cosine", ghost)], path=path,
           title="Polymer flake sorter: 90 epochs at batch 1,024")
    return path, fingerprint(s), request.param


class TestReportInChromium:
    """The report file opens with no network, shows its picture and tables, and prints on one A4 page."""

    def test_renders_and_prints_on_one_page(self, browser, report_file):
        path, mark, which = report_file
        context, page, watch = new_page(browser, width=1440, height=900)
        asked: list[str] = []
        page.on("request", lambda r: asked.append(r.url))
        try:
            page.goto(path.as_uri())
            page.wait_for_load_state("load")
            assert page.locator("#fingerprint").inner_text() == mark
            box = page.locator("figure.picture svg").bounding_box()
            assert box and box["width"] > 400 and box["height"] > 150, box
            assert page.locator("figure.picture polyline[data-role=curve]").count() == 1
            assert page.locator("figure.picture polyline[data-role=ghost]").count() == 1
            assert page.locator("table.boundary tr[data-row]").count() == {"demo": 7, "restarts": 15}[which]
            shot(page, "report-1440" if which == "demo" else f"report-{which}-1440")
            outside = [u for u in asked if not u.startswith(("file:", "data:", "about:"))]
            assert not outside, f"the report asked the network for {outside}"
            pdf = page.pdf(prefer_css_page_size=True, print_background=True)
            assert pdf.startswith(b"%PDF")
            assert pdf_pages(pdf) == 1
            assert not watch.problems() and not watch.host, watch.problems() + watch.host
        finally:
            context.close()
