"""The package ships no front-end code: no script or style files, no widget model of its own."""

from __future__ import annotations

from pathlib import Path

import ipywidgets as W

import schedwidget
from schedwidget import ScheduleDesigner

#: bqplot 0.13 draws its scales with its companion package bqscales (a dependency of bqplot itself).
OWN_MODULES = ("bqplot", "bqscales")
FRONT_END_SUFFIXES = {".js", ".mjs", ".cjs", ".ts", ".tsx", ".jsx", ".css", ".scss", ".less", ".vue", ".svelte"}


def every_widget(root: W.Widget) -> list[W.Widget]:
    """``root`` and every widget reachable from its traits (children, layout, style, marks, scales, ...)."""
    seen: dict[int, W.Widget] = {}
    todo = [root]
    while todo:
        w = todo.pop()
        if id(w) in seen:
            continue
        seen[id(w)] = w
        for name in w.trait_names():
            v = getattr(w, name, None)
            items = v.values() if isinstance(v, dict) else v if isinstance(v, (list, tuple)) else [v]
            todo.extend(x for x in items if isinstance(x, W.Widget))
    return list(seen.values())


class TestNoFrontEndFiles:
    """No file in the package is front-end source or a style sheet."""

    def test_package_files(self):
        """Every file under schedwidget/ has a suffix other than script and style suffixes."""
        root = Path(schedwidget.__file__).parent
        found = [p.relative_to(root) for p in root.rglob("*") if p.suffix.lower() in FRONT_END_SUFFIXES]
        assert found == []


class TestScheduleDesignerModules:
    """Every widget in a designer is one of ipywidgets' or bqplot's own models and views."""

    def test_model_and_view_modules(self):
        """Walking the whole widget tree finds only '@jupyter-widgets/*', 'bqplot' and 'bqscales' modules."""
        d = ScheduleDesigner()
        d.pin("ghost")
        for tab in range(len(d.tabs.children)):  # panels that start on first opening
            d.tabs.selected_index = tab
        widgets = every_widget(d)
        assert len(widgets) > 100  # the walk really reached the panels, marks and scales
        def allowed(module):
            return module is None or module.startswith("@jupyter-widgets/") or module in OWN_MODULES

        bad = {(type(w).__name__, w._model_module, getattr(w, "_view_module", None)) for w in widgets
               if not allowed(w._model_module) or not allowed(getattr(w, "_view_module", None))}
        assert bad == set()
        names = {type(w).__name__ for w in widgets}
        assert {"Figure", "Lines", "LinearScale", "FloatLogSlider", "ToggleButtons", "Textarea"} <= names
