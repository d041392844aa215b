"""The app side of bench/app.py's fresh-process pair: what `stepper view FILE` does, headless.

A new process with the `stepper` command's own settings (``stepper.cli.main.PROCESS_SETTINGS``)
opens the app through :func:`stepper.app.launch.open_app`, as `stepper view` does (the
whole-file check started before Textual is imported), runs it headless through
``App.run_test`` and leaves, printing the verdict, as soon as every round is checked and the screen shows it.
It imports only what that path needs, so its time is the app's and not this script's.

    python bench/app_fresh.py FILE [--timeline]

``--timeline`` prints, to standard error, when each stage was reached: wall seconds since
this process was created (from /proc) and this process's CPU seconds.
"""

from __future__ import annotations

import asyncio
import os
import sys
import time


def since_start() -> float:
    """Wall seconds since this process was created (Linux: /proc; elsewhere since this line)."""
    try:
        with open("/proc/self/stat") as stat, open("/proc/uptime") as uptime:
            started = int(stat.read().rsplit(")", 1)[1].split()[19]) / os.sysconf("SC_CLK_TCK")
            return float(uptime.read().split()[0]) - started
    except (OSError, ValueError, IndexError):
        return 0.0


def main(argv: list[str]) -> int:
    path, timeline = argv[0], "--timeline" in argv[1:]
    marks: list[tuple[str, float, float]] = []

    def mark(stage: str) -> None:
        if timeline:
            marks.append((stage, since_start(), time.process_time()))

    mark("script running")
    from stepper.cli.main import PROCESS_SETTINGS

    for name, value in PROCESS_SETTINGS.items():
        os.environ.setdefault(name, value)
    from stepper.app.launch import open_app

    async def run() -> None:
        app = open_app(path, export_dir=os.path.dirname(os.path.abspath(path)))
        mark("app made (Textual imported, check forked)")
        async with app.run_test(size=(140, 44)) as pilot:
            mark("first paint")
            while not app.model.all_checked:
                await pilot.pause(0.005)
            await app.repainted()  # the outcome on the screen, not only in the model
            mark("every round checked, shown")
            print(app.model.verdict(), flush=True)
            for stage, wall, cpu in marks:
                print(f"{stage:44}{wall:8.3f} s wall{cpu:8.3f} s cpu", file=sys.stderr)
            sys.stderr.flush()
            os._exit(0)  # without the app's tear-down: the figure is the time until every round is checked

    asyncio.run(run())
    return 1  # never reached: the app closed before every round was checked


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
