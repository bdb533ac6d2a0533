"""Where no kernel runs: an executed notebook exported to HTML still shows the curve as inline SVG."""

from __future__ import annotations

import base64
import html as htmllib
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import nbformat
import pytest
from nbconvert import HTMLExporter
from nbconvert.preprocessors import ExecutePreprocessor
from nbformat.v4 import new_code_cell, new_notebook

TOUR = Path(__file__).resolve().parents[1] / "notebooks" / "tour.ipynb"
TEAL = "#0f766e"
SVG = re.compile(r"<svg\b.*?</svg>", re.DOTALL)
DATA_URI = re.compile(r'src="data:image/svg\+xml;base64,([^"]+)"')


def execute(nb: nbformat.NotebookNode, where: Path) -> nbformat.NotebookNode:
    """Run every cell in a fresh kernel, as a notebook saved without widget state.

    JupyterLab does not save widget state by default, and a repository's web view
    renders no widgets; in both the HTML export falls back to the static picture.
    """
    ep = ExecutePreprocessor(timeout=180, kernel_name="python3", store_widget_state=False)
    ep.preprocess(nb, {"metadata": {"path": str(where)}})
    return nb


def to_html(nb: nbformat.NotebookNode) -> str:
    body, _ = HTMLExporter(template_name="lab").from_notebook_node(nb)
    return body


def svg_documents(html: str) -> list[str]:
    """SVG documents in the page: inline ones and those the lab template embeds as base64 images."""
    embedded = [base64.b64decode(htmllib.unescape(m)).decode("utf-8") for m in DATA_URI.findall(html)]
    return SVG.findall(html) + embedded


def teal_curves(html: str) -> list[ET.Element]:
    """Every SVG document in the page that holds a teal polyline with more than a few points."""
    found = []
    for chunk in svg_documents(html):
        if TEAL not in chunk:
            continue
        root = ET.fromstring(chunk)
        for el in root.iter():
            if el.tag.endswith("polyline") and el.get("stroke") == TEAL and len(el.get("points", "").split()) > 3:
                found.append(root)
                break
    return found


class TestScheduleInHtml:
    """A bare schedule shown in a cell exports as its SVG picture."""

    def test_schedule_cell_exports_svg(self, tmp_path):
        """The demo schedule (90 epochs x 1,150 steps, DESIGN.md section 5) appears as an inline SVG."""
        nb = new_notebook(cells=[new_code_cell(
            "from schedwidget import cosine, warmup\n"
            "warmup(cosine(0.1, floor=0.0005, steps=85 * 1150), 5 * 1150)")])
        html = to_html(execute(nb, tmp_path))
        out = nb.cells[0].outputs[0]
        assert "image/svg+xml" in out["data"] and "text/plain" in out["data"]
        curves = teal_curves(html)
        assert len(curves) == 1
        assert curves[0].get("data-steps") == str(90 * 1150)


class TestTourInHtml:
    """The executed tour notebook exported to HTML shows the designer's curve without a kernel."""

    def test_tour_exports_designer_svg(self, tmp_path):
        """Each designer output carries image/svg+xml and text/plain, and the page holds the teal SVG."""
        assert TOUR.exists(), f"the tour notebook is missing: {TOUR}"
        nb = nbformat.read(TOUR, as_version=4)
        html = to_html(execute(nb, tmp_path))
        bundles = [o["data"] for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
                   if o.get("output_type") in ("display_data", "execute_result")]
        designers = [b for b in bundles if "application/vnd.jupyter.widget-view+json" in b
                     and "image/svg+xml" in b]
        assert designers, "no widget output in the tour carries an image/svg+xml fallback"
        for b in designers:
            assert "text/plain" in b and b["text/plain"].strip()
        assert len(teal_curves(html)) >= len(designers)
        assert "Error displaying widget" not in html
