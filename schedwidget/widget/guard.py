"""Callbacks that never raise into the notebook: a problem becomes a message line instead."""

from __future__ import annotations

import functools
from typing import Any, Callable

from ..schedule import ScheduleError

ERROR_RED = "#b91c1c"


def quietly(fn: Callable, say: Callable[[str, str], None], kept: str) -> Callable:
    """``fn`` wrapped so that no exception leaves it.

    A ScheduleError's own text goes to ``say``; anything else is a bug in
    schedwidget and is reported as one, saying what was kept (``kept``).
    """
    @functools.wraps(fn)
    def run(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except ScheduleError as exc:
            say(str(exc), ERROR_RED)
        except Exception as exc:  # a bug: say so rather than raise into the notebook
            say(f"{type(exc).__name__}: {exc} (a bug in schedwidget; {kept})", ERROR_RED)
        return None
    return run
