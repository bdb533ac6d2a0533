"""The designer as a practitioner uses it (issue 13), in a real JupyterLab and in Notebook 7.

Checks read the page itself: tick labels from the DOM (in order, distinct, at distinct places)
after any sequence of axis toggles, bounding boxes of axis titles against tick labels, the legend
inside the plot panel, the curve's width at 1,000 px, hover without a click, and the task
"3 epochs of linear warmup, cosine to 1 % of the peak over the rest, peak 3e-4; pin it; switch to
exponential decay; compare; export torch code" scripted with its interactions counted.
Screenshots of every tab, linear and log, at 1440x900 and 1000x900 go to tests/browser/screenshots/.
"""

from __future__ import annotations

import re

import pytest

from .conftest import new_page
from .notebooks import _nb
from .pages import (NOTEBOOK7_OWN, open_and_run, shot, wait_active, wait_for_change, wait_for_curve,
                    widget_error_shown)
from .server import jupyter_server

DESIGNER = ".sw-designer"
MAX_INTERACTIONS = 10   # issue 13: the practitioner's task in at most this many clicks and typed entries


def designer_notebook() -> dict:
    return _nb('''\
from schedwidget import ScheduleDesigner
d = ScheduleDesigner()   # the demo scenario: 90 epochs x 1,150 steps, warmup 5 epochs, cosine
d''', title="one designer (demo scenario)")


#: Visible tick labels of the figure's axes: [{horizontal, texts, xs, ys}], one entry per shown axis.
TICKS_JS = """(sel) => {
    const fig = document.querySelector(sel);
    return [...fig.querySelectorAll('g.axis')].map(a => {
        const ticks = [...a.querySelectorAll('.tick')].map(t => [t, t.getBoundingClientRect()])
            .filter(([t, r]) => r.width > 0 && r.height > 0);
        return {texts: ticks.map(([t]) => t.textContent.trim()), xs: ticks.map(([, r]) => r.x + r.width / 2),
                ys: ticks.map(([, r]) => r.y + r.height / 2)};
    }).filter(a => a.texts.length > 0);
}"""

#: Bounding boxes of the tick label texts and of the axis titles (svg axis labels and our HTML title).
BOXES_JS = """(root) => {
    const d = document.querySelector(root);
    const box = (e) => { const r = e.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; };
    const shown = (e) => { const r = e.getBoundingClientRect(); return r.width > 0 && r.height > 0; };
    const fig = d.querySelector('.sw-curve');
    const ticks = [...fig.querySelectorAll('g.axis .tick text')].filter(shown).map(box);
    const labels = [...fig.querySelectorAll('g.axis text.axislabel')].filter(shown).filter(t => t.textContent.trim())
        .map(box);
    const title = d.querySelector('.sw-y-title');
    if (title) labels.push(box(title.querySelector('span') || title));
    const legend = [...d.querySelectorAll('.sw-legend-item')].filter(shown).map(box);
    const panel = box(d.querySelector('.sw-canvas'));
    return {ticks, labels, legend, panel, figure: box(fig)};
}"""


def number(text: str) -> float:
    """A tick label as a number: '20k', '1e-4', '0.02', '1.5'."""
    t = text.replace(",", "").replace("\u2212", "-")
    scale = {"k": 1e3, "M": 1e6, "G": 1e9, "m": 1e-3, "µ": 1e-6, "n": 1e-9}
    if t and t[-1] in scale:
        return float(t[:-1]) * scale[t[-1]]
    return float(t)


def assert_ticks_readable(page, where: str) -> None:
    """Each shown axis: labels distinct, at distinct places, in order along the axis."""
    axes = page.evaluate(TICKS_JS, f"{DESIGNER} .sw-curve")
    assert len(axes) == 2, f"{where}: expected two shown axes, got {axes}"
    for a in axes:
        texts, xs, ys = a["texts"], a["xs"], a["ys"]
        assert len(texts) >= 2 and len(set(texts)) == len(texts), f"{where}: repeated labels {texts}"
        horizontal = max(xs) - min(xs) > max(ys) - min(ys)
        pos = xs if horizontal else [-y for y in ys]  # up the rate axis
        values = [number(t) for t in texts]
        order = sorted(range(len(texts)), key=lambda i: pos[i])
        gaps = [pos[order[i + 1]] - pos[order[i]] for i in range(len(order) - 1)]
        assert min(gaps) > 4, f"{where}: labels piled up {list(zip(texts, pos))}"
        ordered = [values[i] for i in order]
        assert ordered == sorted(ordered) and len(set(ordered)) == len(ordered), \
            f"{where}: labels out of order {list(zip(texts, pos))}"


def overlaps(a, b) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


#: Whether the curve's axes show a state: the rate axis log or linear (log tick labels are powers of ten written
#: with an exponent), the x axis titled with the clock's unit, and the button just pressed is the active one.
AXES_STATE_JS = """([sel, log, x]) => {
    const fig = document.querySelector(sel + ' .sw-curve');
    if (!fig) return false;
    const axes = [...fig.querySelectorAll('g.axis')].map(a => {
        const ticks = [...a.querySelectorAll('.tick')].filter(t => {
            const r = t.getBoundingClientRect(); return r.width > 0 && r.height > 0; });
        const rs = ticks.map(t => t.getBoundingClientRect());
        const label = a.querySelector('text.axislabel');
        return {texts: ticks.map(t => t.textContent.trim()), label: label ? label.textContent.trim() : '',
                wide: rs.length > 1 && Math.max(...rs.map(r => r.x)) - Math.min(...rs.map(r => r.x)) >
                      Math.max(...rs.map(r => r.y)) - Math.min(...rs.map(r => r.y))};
    }).filter(a => a.texts.length > 1);
    const xa = axes.find(a => a.wide), ya = axes.find(a => !a.wide);
    if (!xa || !ya || axes.length !== 2) return false;
    const exp = ya.texts.filter(t => /e/.test(t)).length;
    return (log ? exp === ya.texts.length : exp === 0) && xa.label === x;
}"""


class Axes:
    """The state the curve's toggles ask for, and a wait until the page shows it (no fixed sleeps)."""

    def __init__(self, page) -> None:
        self.page, self.log, self.x = page, False, "step"

    def toggle(self, label: str) -> None:
        button = self.page.locator(f"{DESIGNER} .sw-canvas .widget-toggle-button",
                                   has_text=re.compile(rf"^{label}$")).first
        button.click()
        if label in ("log", "linear"):
            self.log = label == "log"
        else:
            self.x = "epoch" if label == "epochs" else "step"
        wait_active(self.page, button)
        self.wait()

    def wait(self, timeout: float = 30.0) -> None:
        self.page.wait_for_function(AXES_STATE_JS, arg=[DESIGNER, self.log, self.x], timeout=timeout * 1000,
                                    polling=50)


def toggle(page, label: str) -> None:
    """Press a toggle of the curve and wait until both axes show what it asks for."""
    axes = getattr(page, "_sw_axes", None) or Axes(page)
    page._sw_axes = axes
    axes.toggle(label)


def type_into(page, box, text: str) -> None:
    box.fill(text)
    box.press("Enter")


def stage_box(page, i: int):
    """The i-th box of the stages list (0: the warmup)."""
    return page.locator(f"{DESIGNER} .sw-stage").nth(i)


def field(stage, label: str):
    """The text input of the row labelled ``label`` in a stage box."""
    row = stage.locator(".widget-hbox, .widget-text", has=stage.page.locator(".widget-label",
                                                                              has_text=re.compile(rf"^{label}$")))
    return row.locator("input[type=text]").first


def has_value(page, box, value: str, timeout: float = 30.0) -> None:
    """Wait until the input ``box`` shows ``value``."""
    page.wait_for_function("([e, v]) => e.value === v", arg=[box.element_handle(), value], timeout=timeout * 1000,
                           polling=50)


def pin(page, name: str) -> None:
    """Pin the current design under ``name`` and wait for its name in the legend."""
    d = page.locator(DESIGNER).first
    d.locator(".sw-pin-name input").first.fill(name)
    d.locator("button.sw-pin").first.click()
    d.locator(".sw-legend-item", has_text=name).first.wait_for()


#: Each tab, and what is on screen once its pane has drawn (a hidden pane is 0 px high and invisible).
TAB_READY = {"Compare": ".sw-compare", "Export": ".sw-export-view pre",
             "Replay": ".sw-replay-figure path.line[d*='L']", "Rescale": ".sw-rescale-figure path.line[d*='L']",
             "Numbers": ".sw-readout table"}


def show_tab(page, name: str) -> None:
    d = page.locator(DESIGNER).first
    button = d.locator(".sw-tabs button", has_text=re.compile(rf"^{name}$")).first
    button.click()
    wait_active(page, button)
    d.locator(TAB_READY[name]).first.wait_for(state="visible")


#: What is cut, duplicated or out of line in the designer as shown now (shown elements only).
LAYOUT_JS = """(sel) => {
    const root = document.querySelector(sel);
    const out = [];
    const shown = (e) => {
        const r = e.getBoundingClientRect();
        if (r.width === 0 || r.height === 0) return false;
        for (let x = e; x && x !== root.parentElement; x = x.parentElement) {
            const cs = getComputedStyle(x);
            if (cs.display === 'none' || cs.visibility === 'hidden') return false;
        }
        return true;
    };
    const name = (e) => (e.textContent || e.value || '').trim().slice(0, 40);
    const canvas = document.createElement('canvas').getContext('2d');
    for (const s of root.querySelectorAll('select')) {
        if (!shown(s) || s.selectedIndex < 0) continue;
        const cs = getComputedStyle(s);
        canvas.font = `${cs.fontWeight} ${cs.fontSize} ${cs.fontFamily}`;
        const text = s.options[s.selectedIndex].text;
        const need = canvas.measureText(text).width + parseFloat(cs.paddingLeft) + 18;  // 18 px: the arrow
        if (need > s.clientWidth + 1) out.push(`menu cut: '${text}' needs ${need.toFixed(0)} px, has ${s.clientWidth}`);
    }
    for (const e of root.querySelectorAll('.widget-label, .widget-label-basic, label, button, .widget-html-content')) {
        if (!shown(e)) continue;
        if (e.scrollWidth > e.clientWidth + 1 && getComputedStyle(e).overflowX !== 'auto')
            out.push(`text cut: '${name(e)}' (${e.scrollWidth} > ${e.clientWidth} px)`);
    }
    for (const e of root.querySelectorAll('.widget-readout')) {
        if (shown(e)) out.push(`slider readout beside an exact box: '${name(e)}'`);
    }
    for (const t of root.querySelectorAll('.widget-toggle-buttons')) {
        const label = t.querySelector(':scope > .widget-label');
        const button = t.querySelector('button');
        if (!label || !shown(label) || !button || !name(label)) continue;
        const a = label.getBoundingClientRect(), b = button.getBoundingClientRect();
        const mid = (a.top + a.bottom) / 2;
        if (mid < b.top || mid > b.bottom) out.push(`toggle label '${name(label)}' not beside its buttons`);
    }
    const right = root.getBoundingClientRect().right;
    for (const e of root.querySelectorAll('input, select, button, table, svg, .widget-label')) {
        if (shown(e) && e.getBoundingClientRect().right > right + 1)
            out.push(`wider than the designer: ${e.tagName} '${name(e)}' ends at ${e.getBoundingClientRect().right.toFixed(0)} > ${right.toFixed(0)}`);
    }
    return out;
}"""

#: Left edges of the exact boxes and of the slider tracks in a rule column.
GRID_JS = """(sel) => {
    const root = document.querySelector(sel);
    const left = (e) => e.getBoundingClientRect().left;
    const boxes = [...root.querySelectorAll('input[type=number], input[type=text]')].filter(e => e.offsetWidth > 0)
        .map(left);
    const tracks = [...root.querySelectorAll('.slider-container, .noUi-target')].filter(e => e.offsetWidth > 0)
        .filter(e => !e.parentElement.closest('.slider-container, .noUi-target')).map(left);
    return {boxes, tracks};
}"""


@pytest.fixture(scope="module")
def server():
    with jupyter_server("lab", {"designer.ipynb": designer_notebook()}) as s:
        yield s


def open_designer(browser, server, width: int, height: int = 900):
    context, page, watch = new_page(browser, width=width, height=height)
    open_and_run(page, server.url("designer.ipynb"))
    wait_for_curve(page, DESIGNER)
    page.locator(DESIGNER).first.scroll_into_view_if_needed()
    page._sw_axes = Axes(page)
    page._sw_axes.wait()  # the first view's axes are drawn (linear rate axis, steps)
    return context, page, watch


def check_clean(page, watch) -> None:
    assert not widget_error_shown(page), "the page shows 'Error displaying widget'"
    assert not watch.problems(), "\n".join(watch.problems())


class TestPlotNeverMisleads:

    def test_toggles_leave_ordered_readable_ticks(self, browser, server):
        """log/linear/log/linear, then steps/epochs twice: every state has ordered, distinct, spread labels;
        no console error from the widget stack."""
        context, page, watch = open_designer(browser, server, 1440)
        try:
            assert_ticks_readable(page, "first view")
            for label in ("log", "linear", "log", "linear", "epochs", "steps", "epochs", "steps", "log", "epochs"):
                toggle(page, label)
                assert_ticks_readable(page, f"after {label}")
            check_clean(page, watch)
        finally:
            context.close()

    @pytest.mark.parametrize("peak", ["0.1", "3e-4"])
    def test_axis_titles_clear_of_tick_labels(self, browser, server, peak):
        """Axis titles never overlap tick labels, linear and log, for peaks 0.1 and 3e-4; the legend's names
        lie inside the plot panel and apart."""
        context, page, watch = open_designer(browser, server, 1440)
        try:
            d = page.locator(DESIGNER).first
            before = wait_for_curve(page, DESIGNER)
            type_into(page, field(stage_box(page, 1), "peak rate"), peak)
            if peak != "0.1":
                wait_for_change(page, before, DESIGNER)
            for name in ("first", "second"):
                type_into(page, d.locator(".sw-pin-name input").first, name)
                d.locator("button.sw-pin").first.click()
                page.locator(f"{DESIGNER} .sw-legend-item", has_text=name).first.wait_for()
            for axis in ("linear", "log"):
                toggle(page, axis)
                b = page.evaluate(BOXES_JS, DESIGNER)
                assert b["ticks"] and len(b["labels"]) >= 2, b
                hits = [(lab, t) for lab in b["labels"] for t in b["ticks"] if overlaps(lab, t)]
                assert not hits, f"peak {peak}, {axis}: axis titles overlap tick labels {hits}"
                assert len(b["legend"]) == 3, b["legend"]
                p = b["panel"]
                for item in b["legend"]:
                    assert p[0] <= item[0] and item[2] <= p[2] and p[1] <= item[1] and item[3] <= p[3], (item, p)
                for i, a in enumerate(b["legend"]):
                    for c in b["legend"][i + 1:]:
                        assert not overlaps(a, c), (a, c)
            shot(page, f"practitioner-labels-{peak}", d)
            check_clean(page, watch)
        finally:
            context.close()

    def test_hover_reads_without_a_click(self, browser, server):
        """Moving the pointer over the plot (no click) reads the step, epoch and rate there, and again elsewhere."""
        context, page, watch = open_designer(browser, server, 1440)
        try:
            figure_el = page.locator(f"{DESIGNER} .sw-curve").first
            figure_el.scroll_into_view_if_needed()
            hover = page.locator(f"{DESIGNER} .sw-hover").first
            readings = []
            for share in (0.3, 0.7):
                old = readings[-1] if readings else hover.inner_text()
                fig = figure_el.bounding_box()
                for nudge in range(5):  # pointer moves only (no click); a few pixels apart until one is heard
                    page.mouse.move(fig["x"] + fig["width"] * share + 3 * nudge, fig["y"] + fig["height"] * 0.5,
                                    steps=4)
                    try:
                        page.wait_for_function("([sel, old]) => document.querySelector(sel).innerText !== old",
                                               arg=[f"{DESIGNER} .sw-hover", old], timeout=10_000)
                        break
                    except Exception:
                        if nudge == 4:
                            raise
                readings.append(hover.inner_text())
            assert readings[0] != readings[1]
            for r in readings:
                assert re.match(r"^step [\d,]+ · epoch [\d.,]+ · rate \S+$", r), r
            check_clean(page, watch)
        finally:
            context.close()


class TestLayout:

    def test_stacks_and_keeps_a_wide_curve_at_1000_px(self, browser, server):
        """At 1,000 px the columns stack and the curve is at least 500 px wide."""
        context, page, watch = open_designer(browser, server, 1000)
        try:
            fig = page.locator(f"{DESIGNER} .sw-curve").first.bounding_box()
            left = page.locator(f"{DESIGNER} .sw-left").first.bounding_box()
            print(f"at 1000 px: curve figure {fig['width']:.0f} px wide")
            assert fig["width"] >= 500, fig
            assert fig["y"] > left["y"] + left["height"] - 1 or fig["x"] > left["x"] + left["width"] - 1
            check_clean(page, watch)
        finally:
            context.close()

    @pytest.mark.parametrize("width", [1440, 1000])
    def test_screenshots_every_tab_linear_and_log(self, browser, server, width):
        """Pictures to look at (kept in tests/browser/screenshots); the controls, the curve and the tab bar are
        on screen together at 1440x900."""
        context, page, watch = open_designer(browser, server, width)
        try:
            d = page.locator(DESIGNER).first
            if width == 1440:
                bar = page.locator(f"{DESIGNER} .sw-tabs").first.bounding_box()
                fig = page.locator(f"{DESIGNER} .sw-curve").first.bounding_box()
                stage = stage_box(page, 1).bounding_box()
                assert bar["y"] + bar["height"] <= 900 and fig["y"] >= 0 and stage["y"] + 30 <= 900, (bar, fig)
            pin(page, "first look")
            for axis in ("linear", "log"):
                toggle(page, axis)
                page.evaluate("(sel) => document.querySelector(sel).scrollIntoView({block: 'start'})", DESIGNER)
                shot(page, f"practitioner-{width}-{axis}")
                for name in TAB_READY:
                    show_tab(page, name)
                    page.evaluate("(sel) => document.querySelector(sel).scrollIntoView({block: 'start'})",
                                  f"{DESIGNER} .sw-tabs")
                    shot(page, f"practitioner-{width}-{axis}-tab-{name.lower()}")
            check_clean(page, watch)
        finally:
            context.close()

    @pytest.mark.parametrize("width", [1440, 1000])
    def test_nothing_cut_duplicated_or_out_of_line(self, browser, server, width):
        """Every tab at 1440 and 1000 px: no label, button or menu entry cut, no slider readout beside an exact box,
        every toggle's label beside its buttons, nothing wider than the designer, and Replay's rule on one grid
        (its exact boxes and its slider tracks each in one column)."""
        context, page, watch = open_designer(browser, server, width)
        try:
            pin(page, "first look")
            problems = []
            for name in TAB_READY:
                show_tab(page, name)
                found = page.evaluate(LAYOUT_JS, DESIGNER)
                problems += [f"{width} px, {name}: {p}" for p in found]
            show_tab(page, "Replay")
            grid = page.evaluate(GRID_JS, f"{DESIGNER} .sw-replay-rule")
            assert len(grid["boxes"]) == 6 and len(grid["tracks"]) == 5, grid
            for what in ("boxes", "tracks"):
                if max(grid[what]) - min(grid[what]) > 1.5:
                    problems.append(f"{width} px, Replay: {what} not in one column: {grid[what]}")
            assert not problems, "\n".join(problems)
            # the check itself can fail: squeeze a menu and a label (in the page only) and it reports both
            squeeze = """([sel, on]) => {
                const root = document.querySelector(sel);
                const s = root.querySelector('.sw-stage-shape select');
                const l = [...root.querySelectorAll('.sw-stage .widget-label')].find(e => e.offsetWidth > 0
                    && e.textContent.trim() === 'length');
                s.style.flex = on ? '0 0 40px' : ''; l.style.width = on ? '12px' : '';
            }"""
            page.evaluate(squeeze, [DESIGNER, True])
            found = page.evaluate(LAYOUT_JS, DESIGNER)
            assert any(p.startswith("menu cut") for p in found) and any(p.startswith("text cut") for p in found), found
            page.evaluate(squeeze, [DESIGNER, False])
            check_clean(page, watch)
        finally:
            context.close()


class TestRunClockPositions:

    def test_drop_typed_on_the_run_clock(self, browser, server):
        """A drops stage after the 5-epoch warmup: '30 ep' reads 'counted from the start of the run = 25 ep into
        this stage'; '3 ep' is refused with a message naming the box and the forms."""
        context, page, watch = open_designer(browser, server, 1440)
        try:
            d = page.locator(DESIGNER).first
            stage_box(page, 1).locator(".sw-stage-shape select").first.select_option(label="step drops")
            box = field(stage_box(page, 1), "drops at")
            type_into(page, box, "30 ep")
            words = stage_box(page, 1).locator(".sw-positions-words").first
            words.filter(has_text="= 25 ep into this stage").wait_for()
            assert "counted from the start of the run" in words.inner_text()
            assert box.input_value() == "30 ep"
            type_into(page, box, "3 ep")
            error = d.locator(".sw-error").first
            error.filter(has_text="drops at item 1").wait_for()
            assert "before the stage's start" in error.inner_text() and "'30 ep'" in error.inner_text()
            shot(page, "practitioner-run-clock-drops", d)
            check_clean(page, watch)
        finally:
            context.close()


class TestPractitionerTask:

    def test_task_in_at_most_ten_interactions(self, browser, server, tmp_path):
        """3 epochs of linear warmup, cosine to 1 % of the peak over the rest, peak 3e-4; pin it; switch to
        exponential decay; compare; export torch code: typed entries and clicks counted; after each, a wait for
        what it changes on the page (no fixed sleeps)."""
        context, page, watch = open_designer(browser, server, 1440)
        count = 0

        def act(fn, until):
            nonlocal count
            count += 1
            fn()
            until()

        try:
            d = page.locator(DESIGNER).first
            sentence = d.locator(".sw-sentence").first
            warm_length = field(stage_box(page, 0), "length")
            end_rate = field(stage_box(page, 1), "end rate")
            act(lambda: type_into(page, warm_length, "3 ep"), lambda: has_value(page, warm_length, "3,450"))
            act(lambda: type_into(page, field(stage_box(page, 1), "peak rate"), "3e-4"),
                lambda: sentence.filter(has_text="0.0003").wait_for())
            act(lambda: type_into(page, end_rate, "1 %"), lambda: has_value(page, end_rate, "3e-06"))
            assert "3,450" in stage_box(page, 0).inner_text()
            assert "103,500" in stage_box(page, 1).inner_text()           # the cosine fills the rest of the run
            act(lambda: d.locator("button.sw-pin").first.click(),
                lambda: d.locator(".sw-legend-item", has_text="pin 1").first.wait_for())
            act(lambda: stage_box(page, 1).locator(".sw-stage-shape select").first.select_option(
                label="exponential decay"),
                lambda: stage_box(page, 1).locator(".widget-label", has_text=re.compile("^multiply by$")).first
                .wait_for())
            act(lambda: d.locator(".sw-tabs button", has_text="Compare").first.click(),
                lambda: d.locator(".sw-compare", has_text="pin 1").first.wait_for())
            act(lambda: d.locator(".sw-tabs button", has_text="Export").first.click(),
                lambda: d.locator(".sw-export-view").first.wait_for(state="visible"))
            act(lambda: d.locator(".widget-toggle-button", has_text="PyTorch scheduler").first.click(),
                lambda: d.locator(".sw-export-view", has_text="LambdaLR").first.wait_for())
            path = d.locator(".sw-code-path input").first
            assert path.input_value() == "lr_schedule.py"
            act(lambda: d.locator("button.sw-write-code").first.click(),
                lambda: d.locator(".sw-file-message", has_text="code written to").first.wait_for())
            code = d.locator(".sw-export-code textarea").first.input_value()
            base = [line for line in code.splitlines() if line.startswith("BASE_LR =")]
            assert "LambdaLR" in code and base and base[0].startswith("BASE_LR = 0.0003 "), (base, sentence.inner_text())
            shot(page, "practitioner-task-done", d)
            print(f"practitioner task: {count} interactions (clicks and typed entries)")
            assert count <= MAX_INTERACTIONS
            check_clean(page, watch)
        finally:
            context.close()


def test_toggles_in_notebook7(browser):
    """The same toggles in Notebook 7: ordered, distinct labels and no console error from the widget stack."""
    with jupyter_server("notebook", {"designer.ipynb": designer_notebook()}) as s:
        context, page, watch = new_page(browser, width=1440, height=900, host_page_errors=NOTEBOOK7_OWN)
        try:
            open_and_run(page, s.url("designer.ipynb"))
            wait_for_curve(page, DESIGNER)
            page.locator(DESIGNER).first.scroll_into_view_if_needed()
            page._sw_axes = Axes(page)
            page._sw_axes.wait()
            for label in ("log", "linear", "log", "linear", "epochs", "steps", "epochs", "steps"):
                toggle(page, label)
                assert_ticks_readable(page, f"Notebook 7, after {label}")
            shot(page, "practitioner-nb7", page.locator(DESIGNER).first)
            check_clean(page, watch)
        finally:
            context.close()
