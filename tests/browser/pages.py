"""Driving a notebook page in JupyterLab or Notebook 7: open, wait for the kernel, run all, read the curve."""

from __future__ import annotations

import re
import time
from dataclasses import dataclass, field
from pathlib import Path

SCREENSHOTS = Path(__file__).resolve().parent / "screenshots"
TEAL = "#0f766e"
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: A console message is ours (and fails the test) when it mentions the widget stack or our package.
OUR_STACK = re.compile(r"jupyter-widgets|jupyterlab-manager|ipywidgets|widget|bqplot|bqscales|schedwidget|"
                       r"Error displaying|comm|model", re.IGNORECASE)
WIDGET_ERROR_TEXT = "Error displaying widget"


#: Page errors Notebook 7 raises by itself on every load (no stack frame of ours); recorded, not failed.
NOTEBOOK7_OWN = (re.compile(r"^Cannot read properties of undefined \(reading 'schema'\)$"),)


@dataclass
class Watch:
    """Console errors and page errors seen on one page, split into ours and the host application's.

    ``host_page_errors`` lists patterns of page errors the host raises by itself; any other
    page error fails, as does any console error that mentions the widget stack or our package.
    """

    host_page_errors: tuple[re.Pattern, ...] = ()
    ours: list[str] = field(default_factory=list)
    host: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)

    def attach(self, page) -> Watch:
        page.on("console", self._console)
        page.on("pageerror", self._page_error)
        return self

    def _console(self, msg) -> None:
        if msg.type != "error":
            return
        where = (msg.location or {}).get("url", "")
        text = f"{msg.text} [{where}]"
        (self.ours if OUR_STACK.search(text) else self.host).append(text)

    def _page_error(self, err) -> None:
        message, stack = getattr(err, "message", str(err)), getattr(err, "stack", "") or ""
        known = any(p.search(message) for p in self.host_page_errors) and not OUR_STACK.search(stack)
        if known:
            self.host.append(f"page error: {message}")
        else:
            self.page_errors.append(message)

    def problems(self) -> list[str]:
        return [f"page error: {e}" for e in self.page_errors] + [f"console error: {e}" for e in self.ours]


def shot(page, name: str, element=None) -> Path:
    """Save a PNG of ``element`` (or the page's viewport) as tests/browser/screenshots/<name>.png (kept)."""
    SCREENSHOTS.mkdir(exist_ok=True)
    path = SCREENSHOTS / f"{name}.png"
    (element if element is not None else page).screenshot(path=str(path))
    return path


def wait_for_kernel(page, timeout: float = 90.0) -> None:
    """Wait until the kernel name shows the Python kernel and the execution indicator reads idle.

    The indicator can read idle before a kernel is attached, so both must hold, twice in a row
    half a second apart; otherwise "run all" silently runs nothing.
    """
    js = """() => {
        const name = document.querySelector('.jp-KernelName, .jp-Toolbar-kernelName');
        const ind = document.querySelector('.jp-Notebook-ExecutionIndicator');
        const text = name ? name.textContent : '';
        return /Python 3/.test(text) && !!ind && ind.getAttribute('data-status') === 'idle';
    }"""
    deadline = time.monotonic() + timeout
    streak = 0
    while time.monotonic() < deadline:
        streak = streak + 1 if page.evaluate(js) else 0
        if streak >= 2:
            return
        page.wait_for_timeout(500)
    raise AssertionError("the notebook's Python kernel never became idle")


def run_all(page) -> None:
    """Run > Run All Cells from the menu bar (JupyterLab and Notebook 7 share it)."""
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(r"^Run$")).first.click()
    page.locator(".lm-Menu-itemLabel", has_text=re.compile(r"^Run All Cells$")).first.click()


def wait_idle_after_run(page, timeout: float = 120.0) -> None:
    """Wait until no cell is queued or running ([*]) and the kernel is idle again."""
    page.wait_for_function(
        """() => {
            const prompts = [...document.querySelectorAll('.jp-InputPrompt')].map(p => p.textContent);
            const ind = document.querySelector('.jp-Notebook-ExecutionIndicator');
            return prompts.length > 0 && !prompts.some(t => t.includes('*'))
                && prompts.some(t => /\\[\\d+\\]/.test(t))
                && (!ind || ind.getAttribute('data-status') === 'idle');
        }""", timeout=timeout * 1000, polling=250)


def open_and_run(page, url: str) -> None:
    """Open a notebook page, wait for its kernel, run every cell and wait for the run to end."""
    page.goto(url)
    page.wait_for_selector(".jp-Notebook .jp-Cell", timeout=90_000)
    wait_for_kernel(page)
    run_all(page)
    wait_idle_after_run(page)


FIGURE_JS = """(scope) => {
    const root = scope ? document.querySelector(scope) : document;
    const fig = !root ? null : (root.matches && root.matches('.sw-curve') ? root : root.querySelector('.sw-curve'));
    if (!fig) return null;
    const rgb = (p) => {
        const s = (p.style.stroke || p.getAttribute('stroke') || getComputedStyle(p).stroke || '').trim();
        let m = s.match(/^#([0-9a-f]{2})([0-9a-f]{2})([0-9a-f]{2})$/i);
        if (m) return m.slice(1).map(h => parseInt(h, 16));
        m = s.match(/rgb\\((\\d+),\\s*(\\d+),\\s*(\\d+)/);
        return m ? m.slice(1).map(Number) : null;
    };
    const shown = (el) => {
        for (let e = el; e && e !== fig; e = e.parentElement) {
            const cs = getComputedStyle(e);
            if (cs.display === 'none' || cs.visibility === 'hidden' || Number(cs.opacity) === 0) return false;
        }
        return true;
    };
    // marks only: a legend draws little sample lines of its own
    const paths = [...fig.querySelectorAll('path.line')].filter(p => (p.getAttribute('d') || '').length > 0
        && !p.closest('.g_legend') && shown(p));
    const same = (c, r, g, b) => c && c[0] === r && c[1] === g && c[2] === b;
    const curve = paths.filter(p => same(rgb(p), 15, 118, 110)).map(p => p.getAttribute('d'));
    const joins = paths.filter(p => same(rgb(p), 100, 116, 139)
        && /\\d/.test(p.style.strokeDasharray || p.getAttribute('stroke-dasharray') || ''));
    const ghosts = paths.filter(p => {
        const c = rgb(p);
        return c && Math.max(...c) - Math.min(...c) <= 24 && !same(c, 15, 118, 110);
    }).map(p => p.getAttribute('d'));
    const texts = [...fig.querySelectorAll('text')].filter(shown).map(t => t.textContent.trim()).filter(Boolean);
    return {curve: curve.join('|'), joins: joins.length, ghosts: ghosts, texts: texts};
}"""


def figure(page, scope: str | None = None) -> dict | None:
    """What the designer's figure (class sw-curve) shows: the teal path ``d``, join count, grey paths, texts."""
    return page.evaluate(FIGURE_JS, scope)


def curve_d(page, scope: str | None = None) -> str:
    info = figure(page, scope)
    return info["curve"] if info else ""


def wait_for(page, condition: str, scope: str | None, extra=None, timeout: float = 30.0) -> dict:
    """Wait until ``condition`` (a JS expression over ``info`` and ``extra``) holds for the figure."""
    page.wait_for_function(
        f"([scope, extra]) => {{ const info = ({FIGURE_JS})(scope); return !!info && ({condition}); }}",
        arg=[scope, extra], timeout=timeout * 1000, polling=50)
    return figure(page, scope) or {}


def wait_for_curve(page, scope: str | None = None, timeout: float = 90.0) -> str:
    """Wait until the teal path has a non-trivial ``d`` (more than a handful of points)."""
    return wait_for(page, "(info.curve.match(/[ML]/g) || []).length > 5", scope, timeout=timeout)["curve"]


def wait_for_change(page, old: str, scope: str | None = None, timeout: float = 30.0) -> str:
    """Wait until the teal path's ``d`` differs from ``old``."""
    return wait_for(page, "info.curve.length > 0 && info.curve !== extra", scope, old, timeout)["curve"]


def text_of(where, css: str) -> str:
    """Inner text of the first match of ``css`` under a page or locator ('' when absent)."""
    loc = where.locator(css)
    return loc.first.inner_text() if loc.count() else ""


def widget_error_shown(page) -> bool:
    return WIDGET_ERROR_TEXT in page.inner_text("body")


def wait_active(page, button, timeout: float = 30.0) -> None:
    """Wait until a toggle button (a tab of the tab bar, 'log', 'epochs') is the pressed one."""
    button.wait_for()
    page.wait_for_function("(b) => b.classList.contains('mod-active')", arg=button.element_handle(),
                           timeout=timeout * 1000, polling=50)
