"""The code-free page (issue 18 item 2): the designer and the teaching notebook served by voila.

voila runs a notebook and shows its outputs only: no code cells, the same ipywidgets and bqplot front ends.
One voila server for the module, on 127.0.0.1 and a free port, in a fresh root holding copies of
notebooks/designer_page.ipynb and notebooks/teaching.ipynb (the start-and-wait pattern of server.py).
Each page: the curve is drawn, no code is shown, ArrowRight on a slider handle changes the teal path's
``d``, and no page error nor console error from the widget stack appears. Console errors of voila's own
(its template asks a CDN for an icon font, which a machine without a network cannot reach; a JupyterLab
extension installed beside it fails to load into voila's older JupyterLab core) are recorded and printed.
"""

from __future__ import annotations

import contextlib
import importlib.util
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path
from typing import Iterator

import pytest

from .conftest import DEMAND, new_page
from .pages import figure, shot, wait_for_change, wait_for_curve, widget_error_shown
from .server import config_dir, free_port, stop

NOTEBOOKS = Path(__file__).resolve().parents[2] / "notebooks"
PAGES = {"designer": "designer_page.ipynb", "teaching": "teaching.ipynb"}
DESIGNER = ".sw-designer"
START_TIMEOUT = 90.0
#: which slider each page moves: the label of its row (the designer page's stage 0 cosine, the teaching
#: notebook's per-epoch factor, labelled "multiply by")
SLIDER = {"designer": r"^peak rate$", "teaching": r"^multiply by$"}


def _need_voila() -> None:
    if importlib.util.find_spec("voila") is None:
        why = "the voila package is not installed (install the 'page' or 'test' extra)"
        if os.environ.get(DEMAND) == "1":
            pytest.fail(f"browser tests are required here ({DEMAND}=1) but {why}")
        pytest.skip(f"code-free page tests skipped: {why}")


def _tail(log: Path, lines: int = 60) -> str:
    try:
        return "\n".join(log.read_text(errors="replace").splitlines()[-lines:])
    except OSError:
        return "(no server log)"


@contextlib.contextmanager
def voila_server(notebooks: dict[str, Path]) -> Iterator[str]:
    """Start ``voila`` on a root holding copies of ``notebooks``; yield its base URL; stop it whatever happens."""
    tmp = Path(tempfile.mkdtemp(prefix="sw-voila-"))
    root = tmp / "root"
    root.mkdir()
    for name, source in notebooks.items():
        shutil.copy(source, root / name)
    env = dict(os.environ)
    env.update(JUPYTER_CONFIG_DIR=str(config_dir(tmp)), JUPYTER_RUNTIME_DIR=str(tmp / "runtime"),
               IPYTHONDIR=str(tmp / "ipython"), JUPYTER_DATA_DIR=str(tmp / "data"), JUPYTER_PLATFORM_DIRS="1",
               PYTHONUNBUFFERED="1")
    repo = str(Path(__file__).resolve().parents[2])  # the kernel imports schedwidget from this work tree
    env["PYTHONPATH"] = repo + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    port, log = free_port(), tmp / "voila.log"
    base = f"http://127.0.0.1:{port}"
    cmd = [sys.executable, "-m", "voila", "--no-browser", "--Voila.ip=127.0.0.1", f"--port={port}",
           "--Voila.port_retries=0", "--show_tracebacks=True", str(root)]
    with open(log, "wb") as out:
        proc = subprocess.Popen(cmd, cwd=root, env=env, stdout=out, stderr=subprocess.STDOUT,
                                start_new_session=True)
    try:
        deadline = time.monotonic() + START_TIMEOUT
        while True:
            if proc.poll() is not None:
                raise RuntimeError(f"voila exited with code {proc.returncode}:\n{_tail(log)}")
            try:
                with urllib.request.urlopen(base + "/", timeout=2) as reply:
                    if reply.status == 200:
                        break
            except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
                pass
            if time.monotonic() > deadline:
                raise RuntimeError(f"voila did not answer within {START_TIMEOUT:.0f} s:\n{_tail(log)}")
            time.sleep(0.25)
        yield base
    finally:
        stop(proc, tmp)


@pytest.fixture(scope="module")
def voila_base():
    _need_voila()
    for name in PAGES.values():
        if not (NOTEBOOKS / name).exists():
            pytest.fail(f"the notebook is missing: {NOTEBOOKS / name}")
    with voila_server({name: NOTEBOOKS / name for name in PAGES.values()}) as base:
        yield base


def slider_handle(page, label: str):
    """The handle of the first slider in the designer whose row label matches ``label``."""
    row = page.locator(f"{DESIGNER} .widget-slider").filter(
        has=page.locator(".widget-label", has_text=re.compile(label))).first
    row.scroll_into_view_if_needed()
    return row.locator(".noUi-handle").first


@pytest.mark.parametrize("which", list(PAGES))
def test_page_moves_curve(browser, voila_base, which):
    """The page draws the designer with no code shown; a slider key redraws the curve; no widget-stack error."""
    context, page, watch = new_page(browser, width=1440, height=900)
    try:
        page.goto(f"{voila_base}/voila/render/{PAGES[which]}", timeout=120_000)
        before = wait_for_curve(page, DESIGNER, timeout=120.0)
        assert page.locator(".jp-CodeCell .jp-InputArea:visible, .jp-CodeMirrorEditor:visible").count() == 0
        assert "ScheduleDesigner(" not in page.inner_text("body"), "code of the notebook shows on the page"
        shot(page, f"page-{which}-1440")
        handle = slider_handle(page, SLIDER[which])
        handle.focus()
        page.keyboard.press("ArrowRight")
        after = wait_for_change(page, before, DESIGNER)
        assert after != before and len(re.findall(r"[ML]", after)) > 5
        if which == "teaching":  # the two pinned designs stay as grey ghosts
            assert len(figure(page, DESIGNER)["ghosts"]) >= 2
        page.set_viewport_size({"width": 1000, "height": 900})
        page.wait_for_timeout(500)  # the figure follows the width on the next frame; nothing to wait for in JS
        assert figure(page, DESIGNER)["curve"]
        shot(page, f"page-{which}-1000")
        assert not widget_error_shown(page), "the page shows 'Error displaying widget'"
        assert not watch.problems(), "\n".join(watch.problems())
    finally:
        if watch.host:
            print(f"voila's own console errors on the {which} page (recorded, not failed):", *watch.host,
                  sep="\n  ")
        context.close()
