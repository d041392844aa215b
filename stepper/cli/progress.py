"""A progress bar on stderr for long recomputations (an I/O edge, used by the CLI).

:func:`terminal_progress` yields a callback ``(done, total) -> None`` for the pure
core (e.g. :func:`stepper.diagnose.rootcause.diagnose`). It draws a bar only when stderr
is a terminal (never into pipes, files or JSON consumers) and only after the work
has run for ``delay`` seconds, so quick runs print nothing. ``rich`` comes with
Textual and is imported lazily, only when a bar is drawn.

Ctrl-C is never swallowed. While the block runs in the main thread, a first
Ctrl-C is held until the next callback (between rounds), which raises
KeyboardInterrupt there: an interrupt delivered inside a compiled field kernel
would otherwise surface as a SystemError from the kernel. If no callback comes,
the interrupt is raised when the block ends; a second Ctrl-C interrupts at once.
KeyboardInterrupt leaves the block (the bar is removed) and reaches the CLI entry
point, which prints one line and exits 130.
"""

from __future__ import annotations

import os
import signal
import sys
import threading
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
    """A callback drawing ``label`` with a bar on a terminal stderr; a no-op elsewhere.
    Either way the callback is where a held Ctrl-C is raised (see the module docstring)."""
    with _held_interrupt() as check_interrupt:
        if not wants_bar(stream):
            yield lambda done, total: check_interrupt()
            return
        with _bar(label, delay, stream) as draw:

            def update(done: int, total: int) -> None:
                check_interrupt()
                draw(done, total)

            yield update


@contextmanager
def _bar(label: str, delay: float, stream: TextIO | None) -> Iterator[ProgressCallback]:
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


@contextmanager
def _held_interrupt() -> Iterator[Callable[[], None]]:
    """Hold a first SIGINT until the returned check is called (or the block ends)."""
    if threading.current_thread() is not threading.main_thread() \
            or signal.getsignal(signal.SIGINT) is not signal.default_int_handler:
        yield lambda: None  # not ours to manage: a thread, or a caller with its own handler
        return
    pending: list[bool] = []

    def hold(signum: int, frame: object) -> None:
        if pending:
            raise KeyboardInterrupt  # a second Ctrl-C: the person insists
        pending.append(True)

    def check() -> None:
        if pending:
            raise KeyboardInterrupt

    signal.signal(signal.SIGINT, hold)
    try:
        yield check
    finally:
        signal.signal(signal.SIGINT, signal.default_int_handler)
    check()
