"""A progress bar on stderr for long recomputations (an I/O edge, used by the CLI).

:func:`terminal_progress` yields a callback ``(done, total) -> None`` for the pure
core (e.g. :func:`stepper.rootcause.diagnose`). It draws a bar only when stderr
is a terminal (never into pipes, files or JSON consumers) and only after the work
has run for ``delay`` seconds, so quick runs print nothing. ``rich`` comes with
Textual and is imported lazily, only when a bar is drawn. Ctrl-C is not caught
here: KeyboardInterrupt leaves the ``with`` block (the bar is removed) and reaches
the CLI entry point, which prints one line and exits 130.
"""

from __future__ import annotations

import os
import sys
import time
from contextlib import contextmanager
from typing import Any, Callable, Iterator, TextIO

__all__ = ["terminal_progress", "wants_bar"]

ProgressCallback = Callable[[int, int], None]


def wants_bar(stream: TextIO | None = None) -> bool:
    """True when ``stream`` (default stderr) is an interactive terminal."""
    stream = sys.stderr if stream is None else stream
    try:
        return bool(stream.isatty()) and os.environ.get("TERM") != "dumb"
    except (AttributeError, ValueError):
        return False


@contextmanager
def terminal_progress(label: str, *, delay: float = 0.5, stream: TextIO | None = None) -> Iterator[ProgressCallback]:
    """A callback drawing ``label`` with a bar on a terminal stderr; a no-op elsewhere."""
    if not wants_bar(stream):
        yield _ignore
        return
    started = time.monotonic()
    state: dict[str, Any] = {"bar": None, "task": None}

    def update(done: int, total: int) -> None:
        if state["bar"] is None:
            if time.monotonic() - started < delay or done >= total:
                return
            from rich.console import Console
            from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeRemainingColumn

            console = Console(file=stream if stream is not None else sys.stderr)
            bar = Progress(TextColumn("{task.description}"), BarColumn(), TaskProgressColumn(),
                           TimeRemainingColumn(), console=console, transient=True)
            bar.start()
            state["bar"], state["task"] = bar, bar.add_task(label, total=max(total, 1))
        state["bar"].update(state["task"], completed=done, total=max(total, 1))

    try:
        yield update
    finally:
        if state["bar"] is not None:
            state["bar"].stop()


def _ignore(done: int, total: int) -> None:
    """The callback when no bar is drawn."""
