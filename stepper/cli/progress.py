"""Progress on stderr for long recomputations (an I/O edge, used by the CLI).

:func:`terminal_progress` yields a callback ``(done, total) -> None`` for the pure
core (e.g. :func:`stepper.diagnose.rootcause.diagnose`). It draws a bar only when stderr
is a terminal (never into pipes, files or JSON consumers) and only after the work
has run for ``delay`` seconds, so quick runs print nothing. ``rich`` comes with
Textual and is imported lazily, only when a bar is drawn. With ``always`` (a command's
``--progress``) a stderr that is not a terminal gets a plain line every
:data:`LINE_SECONDS` seconds instead. Bar and lines show the throughput (``unit`` per
second, averaged since the work started) and the time left at that rate
(:func:`rate_text`); stdout is never written, so ``--json`` output stays clean.

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

__all__ = ["terminal_progress", "wants_bar", "rate_text", "LINE_SECONDS"]

ProgressCallback = Callable[[int, int], None]
LINE_SECONDS = 5.0


def wants_bar(stream: TextIO | None = None) -> bool:
    """True when ``stream`` (default stderr) is an interactive terminal."""
    stream = sys.stderr if stream is None else stream
    try:
        return bool(stream.isatty()) and os.environ.get("TERM") != "dumb"
    except (AttributeError, ValueError):
        return False


def rate_text(done: int, total: int, seconds: float, unit: str) -> str:
    """``"12.5 M entries/s, about 40 s left"``: the average rate so far and the time left at it."""
    if seconds <= 0 or done <= 0:
        return f"{unit}/s not known yet"
    rate = done / seconds
    scaled = next((f"{rate / size:.1f} {prefix} " for size, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k"))
                   if rate >= size), f"{rate:.0f} ")
    left = max(total - done, 0) / rate
    when = f"{left:.0f} s" if left < 120 else f"{left / 60:.1f} min"
    return f"{scaled}{unit}/s, about {when} left"


@contextmanager
def terminal_progress(label: str, *, delay: float = 0.5, stream: TextIO | None = None, always: bool = False,
                      unit: str = "steps") -> Iterator[ProgressCallback]:
    """A callback drawing ``label`` with a bar on a terminal stderr; with ``always``, plain lines
    on any other stderr; a no-op otherwise. Either way the callback is where a held Ctrl-C is
    raised (see the module docstring)."""
    with _held_interrupt() as check_interrupt:
        if not wants_bar(stream):
            if not always:
                yield lambda done, total: check_interrupt()
                return
            lines = _lines(label, delay, stream, unit)

            def line(done: int, total: int) -> None:
                check_interrupt()
                lines(done, total)

            yield line
            return
        with _bar(label, delay, stream, unit) as draw:

            def update(done: int, total: int) -> None:
                check_interrupt()
                draw(done, total)

            yield update


def _lines(label: str, delay: float, stream: TextIO | None, unit: str) -> ProgressCallback:
    """One line on ``stream`` (default stderr) per :data:`LINE_SECONDS` once ``delay`` has passed."""
    started = time.monotonic()
    last = [started - LINE_SECONDS]

    def update(done: int, total: int) -> None:
        now = time.monotonic()
        if now - started < delay or now - last[0] < LINE_SECONDS or done >= total:
            return
        last[0] = now
        out = stream if stream is not None else sys.stderr
        share = 100 * done / max(total, 1)
        out.write(f"{label}: {share:.0f}% ({done:,} of {total:,} {unit}), "
                  f"{rate_text(done, total, now - started, unit)}\n")
        out.flush()

    return update


@contextmanager
def _bar(label: str, delay: float, stream: TextIO | None, unit: str) -> Iterator[ProgressCallback]:
    started = time.monotonic()
    state: dict[str, Any] = {"bar": None, "task": None}

    def update(done: int, total: int) -> None:
        rate = rate_text(done, total, time.monotonic() - started, unit)
        if state["bar"] is None:
            if time.monotonic() - started < delay or done >= total:
                return
            from rich.console import Console
            from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn

            console = Console(file=stream if stream is not None else sys.stderr)
            bar = Progress(TextColumn("{task.description}"), BarColumn(), TaskProgressColumn(),
                           TextColumn("{task.fields[rate]}"), console=console, transient=True)
            bar.start()
            state["bar"], state["task"] = bar, bar.add_task(label, total=max(total, 1), rate=rate)
        state["bar"].update(state["task"], completed=done, total=max(total, 1), rate=rate)

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
