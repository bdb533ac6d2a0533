"""Reading and driving the designer on a page (issue 13's browser checks): tick labels, bounding boxes, the axes'
state after a toggle, what is cut or out of line, and small actions (type, pin, show a tab) that each wait for
what they change, never for a fixed time."""

from __future__ import annotations

import re

from .pages import wait_active

DESIGNER = ".sw-designer"


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
    for (const e of root.querySelectorAll('.widget-label, .widget-label-basic, label, button, .widget-html-content, '
                                          + '.sw-legend-item, .sw-legend-item span')) {
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
