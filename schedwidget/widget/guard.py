"""The widget package's one error guard, and how a panel listens to the designer.

``quietly`` wraps every callback: no exception reaches the notebook, a problem becomes
words on a message line.  ``Panel`` is what every panel that shows the design is: it
observes the designer's ``revision`` (bumped once per accepted change, after the design,
its budget and its facts hold their new values), redraws only when what it shows
(``shows()``) is different from what it drew (then ``paint()``), and while it is not on screen it only
marks itself stale and catches up when its tab is shown.  Nothing calls a panel to
refresh.
"""

from __future__ import annotations

import functools
from typing import TYPE_CHECKING, Any, Callable, Hashable

import ipywidgets as W

from ..schedule import ScheduleError

if TYPE_CHECKING:  # pragma: no cover
    from .designer import ScheduleDesigner

__all__ = ["explain", "quietly", "Panel", "close_tree"]


def explain(exc: BaseException, kept: str) -> str:
    """The words shown for a failed callback: the core's message, or the exception's type and text."""
    if isinstance(exc, ScheduleError):
        return str(exc)
    if isinstance(exc, OSError):
        return f"{type(exc).__name__}: {exc}"
    return f"{type(exc).__name__}: {exc} (this is a bug in schedwidget; {kept})"


def quietly(fn: Callable, say: Callable[[str], None], kept: str) -> Callable:
    """``fn`` wrapped so that no exception leaves it; ``say`` gets the words (``explain``)."""
    @functools.wraps(fn)
    def run(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except Exception as exc:  # never into the notebook
            say(explain(exc, kept))
        return None
    return run


def close_tree(widget: Any) -> int:
    """Close ``widget``, everything inside it, and their layouts and styles; the number closed.

    A replaced widget that is not closed stays in ipywidgets' registry (and in the front end) for
    the rest of the session.
    """
    closed = 0
    todo = [widget]
    while todo:
        w = todo.pop()
        if not isinstance(w, W.Widget) or w.comm is None:  # not a widget, or closed already
            continue
        todo.extend(getattr(w, "children", ()) or ())
        for part in ("layout", "style"):
            sub = getattr(w, part, None)
            if isinstance(sub, W.Widget):
                todo.append(sub)
        w.close()
        closed += 1
    return closed


class Panel:
    """Mixin for a panel that shows something of the designer's (call ``listen`` at the end of ``__init__``).

    Subclasses define ``shows()`` (a value equal to the last one when nothing it shows changed)
    and ``paint()``; ``redraws`` counts the draws; ``stale`` is True while a change waits for the
    panel's tab to be shown.
    """

    d: ScheduleDesigner
    redraws: int = 0
    stale: bool = False
    tab: int | None = None
    _painted: Any = None

    def listen(self, designer: ScheduleDesigner, tab: int | None = None, now: bool = False) -> None:
        """Start observing the designer (and the tab bar when the panel lives in tab ``tab``); ``now``: draw now
        (a panel started after the designer; the others draw at the designer's first revision)."""
        self.d, self.tab, self.redraws, self.stale, self._painted = designer, tab, 0, False, object()
        designer.observe(self.heard, names="revision")
        if tab is not None:
            designer.tabs.observe(designer.guarded(self.heard), names="selected_index")
        if now:
            self.heard()

    @property
    def on_screen(self) -> bool:
        """Whether the panel can be seen now (its tab is selected, or it is not in a tab)."""
        return self.tab is None or self.d.tabs.selected_index == self.tab

    def shows(self) -> Hashable:  # pragma: no cover - every panel defines it
        raise NotImplementedError

    def paint(self) -> None:  # pragma: no cover - every panel defines it
        raise NotImplementedError

    def heard(self, _change: dict | None = None) -> None:
        """Redraw if what the panel shows changed, now if on screen, else when its tab is shown."""
        if not self.on_screen:
            self.stale = True
            return
        key = self.shows()
        self.stale = False
        if key == self._painted:
            return
        self.paint()
        self._painted = key
        self.redraws += 1

    def redraw(self) -> None:
        """Draw again even if nothing the designer holds changed (the panel's own inputs did)."""
        self._painted = object()
        self.heard()
