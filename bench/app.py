"""Scale of the terminal app, measured through Textual's Pilot, side by side.

Writes two demo transcripts (Brackwater Ferries, invented data): a small one
(3 instances x 4 rounds) and a large one (default 4000 instances x 25 rounds =
10^5 rounds), then for each: time from creating the app to its first paint,
time until every round is checked and shown (the app checks through `stepper check`'s
whole-file pass while it starts, in a child process where it can, then reads the
rounds for stepping), the time until every round is read for stepping, `stepper
check` on the same file in the same process (the ratios "all checked / check",
from creating the app, and "after paint / check", what checking adds once the
first screen is up: the second is the figure of merit, at most 2), and single
steps: the wall time of one key press as the Pilot delivers it (repaint
included) next to a key bound to nothing (what the Pilot itself costs per press),
the CPU time of a step, and "key to paint", the wall time from posting the key
to the end of the repaint that shows the new round (no Pilot polling in it).
First paint, every round checked and `stepper check` are the best of ``--repeat``
starts, each start followed by a check; the steps are taken on one more start.

The Pilot waits for the app to go idle in slices of 20 ms (textual's
``wait_for_idle``: a slice in which the process spent more than 1 ms of CPU is
followed by another), so a press reads as about 40 ms when it does nothing and
about 60 ms when it repaints anything at all: "step median ms" moves in steps of
20 ms, and "key to paint ms" is the latency a person sees.

"all checked cpu s" is this process's CPU; "check child cpu s" is the CPU of the
forked child that ran the whole-file pass (0 when it ran in a thread).

Then the fresh-process pair, on the large file: a new Python process that opens the
app as `stepper view` does (bench/app_fresh.py: the whole-file check started before
Textual is imported), headless through ``App.run_test``, and stops as soon as every
round is checked and shown, against ``python3 -m stepper check FILE`` in a new
process, interleaved, best of ``--fresh`` runs each, wall and CPU (the child's own
children included: the app's CPU is its process plus the child that checked). Both
run once first, unmeasured, with bytecode caching allowed (PYTHONDONTWRITEBYTECODE
removed for them), so each side starts from cached bytecode as an installed package
does. Beside them, interleaved, the real command: ``python3 -m stepper view FILE`` in a new
pseudo-terminal of 140x44, timed until the screen it writes says every round is checked
("view in a terminal": terminal output included, as a person sees it). The stages of the
fastest headless app run follow ("fresh timeline": wall seconds since the process was
created, and its own CPU seconds).

Prints the figures and the large/small ratios, measured in the same run.

    python bench/app.py [--instances N] [--rounds K] [--steps S] [--repeat N] [--fresh R]
"""

from __future__ import annotations

import argparse
import asyncio
import os
import random
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any, Iterator

P = 2**31 - 2**27 + 1  # BabyBear (common practice, no source)


def payloads(instances: int, rounds: int, seed: int = 740) -> Iterator[dict[str, Any]]:
    """A proof whose sum checks all pass: each g has degree 2, g(1) = claim - g(0),
    and the next claim is g(r) by Lagrange interpolation on 0, 1, 2."""
    rng = random.Random(seed)
    half = pow(2, -1, P)
    yield {"type": "field", "name": "babybear"}
    for i in range(instances):
        claim = rng.randrange(P)
        yield {"type": "instance", "name": f"boarding-permutation-{i}", "num_vars": rounds, "degree": 2,
               "claim": claim}
        for _ in range(rounds):
            g0, g2 = rng.randrange(P), rng.randrange(P)
            g1 = (claim - g0) % P
            yield {"type": "round", "evals": [g0, g1, g2]}
            r = rng.randrange(P)
            yield {"type": "challenge", "value": r}
            claim = (g0 * (r - 1) * (r - 2) * half - g1 * r * (r - 2) + g2 * r * (r - 1) * half) % P
        yield {"type": "final", "value": claim}


def write(path: Path, instances: int, rounds: int) -> Path:
    from stepper.transcript.store import TranscriptWriter

    with TranscriptWriter(path, metadata={"sailing": "isle-of-quill-0740"}) as writer:
        for payload in payloads(instances, rounds):
            writer.write_payload(payload)
    return path


async def until_all_checked(path: Path) -> dict[str, float]:
    """One start of the app on ``path``: first paint and every round checked, wall and CPU,
    from creating the app; the app is closed straight after (the rounds still being read)."""
    from stepper.app.app import StepperApp

    start, start_cpu, start_child = time.perf_counter(), time.process_time(), children_cpu()
    app = StepperApp.from_file(path, progressive=True, export_dir=path.parent)
    out: dict[str, float] = {}
    async with app.run_test(size=(140, 44)) as pilot:
        # run_test hands over once the first screen is mounted and drawn
        out["first paint s"] = time.perf_counter() - start
        out["first paint cpu s"] = time.process_time() - start_cpu
        assert app.proof_screen.query_one("#rounds").row_count > 0
        while not app.model.all_checked:
            await pilot.pause(0.01)
        await app.repainted()  # shown on the screen, not only known to the model
        out["all checked s"] = time.perf_counter() - start
        out["all checked cpu s"] = time.process_time() - start_cpu
        out["check child cpu s"] = children_cpu() - start_child  # reaped before the app hears of it
        out["verdict accept"] = float(app.model.verdict() == "accept")
    return out


async def measure(path: Path, steps: int, repeat: int) -> dict[str, float]:
    from stepper.app.app import StepperApp

    out: dict[str, float] = {}
    for _ in range(repeat):  # the app's start and `stepper check` interleaved, best of each
        sample = await until_all_checked(path)
        sample["check s"], sample["check cpu s"] = check_seconds(path)
        sample["checked after paint s"] = max(0.0, sample["all checked s"] - sample["first paint s"])
        for key, value in sample.items():
            out[key] = min(out.get(key, value), value)
    start = time.perf_counter()
    app = StepperApp.from_file(path, progressive=True, export_dir=path.parent)
    async with app.run_test(size=(140, 44)) as pilot:
        while app.model.loading:
            await pilot.pause(0.02)
        out["all read s"] = time.perf_counter() - start
        times, cpu = [], []
        for i in range(steps):  # ten rounds forward, ten back: every press moves
            t, c = time.perf_counter(), time.process_time()
            await pilot.press("r" if (i // 10) % 2 == 0 else "R")
            times.append(time.perf_counter() - t)
            cpu.append(time.process_time() - c)
        idle, idle_cpu = [], []
        for _ in range(max(10, steps // 3)):  # a key bound to nothing: the Pilot's own cost
            t, c = time.perf_counter(), time.process_time()
            await pilot.press("z")
            idle.append(time.perf_counter() - t)
            idle_cpu.append(time.process_time() - c)
        paints = [await key_to_paint(app, "r" if (i // 10) % 2 == 0 else "R") for i in range(steps)]
        hops = []
        for i in range(max(4, steps // 10)):
            t = time.perf_counter()
            await pilot.press("i" if i % 2 == 0 else "I")
            hops.append(time.perf_counter() - t)
        out["step median ms"] = 1000 * statistics.median(times)
        out["step max ms"] = 1000 * max(times)
        out["step cpu median ms"] = 1000 * statistics.median(cpu)
        out["unbound cpu median ms"] = 1000 * statistics.median(idle_cpu)
        out["key to paint median ms"] = 1000 * statistics.median(paints)
        out["key to paint max ms"] = 1000 * max(paints)
        out["unbound key median ms"] = 1000 * statistics.median(idle)
        out["step - unbound ms"] = out["step median ms"] - out["unbound key median ms"]
        out["hop median ms"] = 1000 * statistics.median(hops)
        out["rounds"] = app.model.round_count
    out["all checked / check"] = out["all checked s"] / out["check s"]
    # the app must paint before it can show anything; what the checking itself adds after that:
    out["after paint / check"] = out["checked after paint s"] / out["check s"]
    return out


async def key_to_paint(app: Any, key: str) -> float:
    """Wall seconds from posting ``key`` to the end of the repaint that shows the round it
    moved to (textual's ``call_after_refresh``, asked once the position has changed)."""
    from textual import events

    screen = app.proof_screen
    before = screen.position
    painted = asyncio.get_running_loop().create_future()
    start = time.perf_counter()
    app.post_message(events.Key(key, key))
    while screen.position == before:
        await asyncio.sleep(0)
    screen.call_after_refresh(lambda: painted.done() or painted.set_result(None))
    await painted
    return time.perf_counter() - start


def children_cpu() -> float:
    """CPU seconds of this process's children that have ended and been waited for."""
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def check_seconds(path: Path) -> tuple[float, float]:
    """`stepper check PATH` in this process (its output discarded): wall and CPU seconds."""
    import contextlib
    import io

    from stepper.cli.main import main as stepper_main

    start, start_cpu = time.perf_counter(), time.process_time()
    with contextlib.redirect_stdout(io.StringIO()):
        stepper_main(["check", str(path)])
    return time.perf_counter() - start, time.process_time() - start_cpu


# What the app draws once every round is checked while it still reads the rounds for stepping
# (the where-bar's progress and the summary's loading line); a fresh `stepper view` in a
# pseudo-terminal is timed until one of them reaches the terminal.
CHECKED_ON_SCREEN = (b"all checked", b"every round checked")


def in_terminal(path: Path, env: dict[str, str], size: tuple[int, int] = (140, 44),
                limit: float = 60.0) -> tuple[float, float]:
    """Wall and CPU seconds (with its child) of ``python3 -m stepper view PATH`` in a new
    pseudo-terminal of ``size`` until its output says every round is checked; then it is killed
    (SIGKILL: the measure ends there, its tear-down is not in it)."""
    import fcntl
    import pty
    import select
    import signal
    import struct
    import termios

    cpu, start = children_cpu(), time.perf_counter()
    pid, terminal = pty.fork()
    if pid == 0:  # the new process, on the pseudo-terminal
        os.execvpe(sys.executable, [sys.executable, "-m", "stepper", "view", str(path), "--exports",
                                    str(path.parent)], env)
    fcntl.ioctl(terminal, termios.TIOCSWINSZ, struct.pack("HHHH", size[1], size[0], 0, 0))
    seen, tail = None, b""
    while seen is None and time.perf_counter() - start < limit:
        if select.select([terminal], [], [], 0.05)[0]:
            try:
                chunk = os.read(terminal, 1 << 16)
            except OSError:  # the app ended before saying so
                break
            tail = tail[-64:] + chunk  # a phrase may straddle two reads
            if any(phrase in tail for phrase in CHECKED_ON_SCREEN):
                seen = time.perf_counter() - start
    os.kill(pid, signal.SIGKILL)
    os.waitpid(pid, 0)
    os.close(terminal)
    if seen is None:
        raise SystemExit(f"stepper view {path} never said every round was checked within {limit} s")
    return seen, children_cpu() - cpu


def fresh_pair(path: Path, repeat: int) -> tuple[dict[str, float], str]:
    """Best-of-``repeat`` wall and CPU of the app until every round is checked and shown
    (headless, and as `stepper view` in a pseudo-terminal), and of `stepper check`, each in a new
    process, the three interleaved; and the stages of the fastest headless app run."""
    sides = {"app": [sys.executable, str(Path(__file__).with_name("app_fresh.py")), str(path), "--timeline"],
             "check": [sys.executable, "-m", "stepper", "check", str(path)]}
    env = {name: value for name, value in os.environ.items() if name != "PYTHONDONTWRITEBYTECODE"}
    env.setdefault("TERM", "xterm-256color")
    for command in sides.values():  # unmeasured: bytecode cached, the file in the page cache
        subprocess.run(command, capture_output=True, env=env)
    best: dict[str, float] = {}
    timeline = ""
    for _ in range(repeat):
        for side, command in sides.items():
            cpu, start = children_cpu(), time.perf_counter()
            done = subprocess.run(command, capture_output=True, text=True, env=env)
            wall, cpu = time.perf_counter() - start, children_cpu() - cpu
            if done.returncode != 0:
                raise SystemExit(f"{' '.join(command)} exited {done.returncode}: {done.stderr.strip()}")
            if side == "app" and wall < best.get("app wall s", float("inf")):
                timeline = done.stderr
            best[f"{side} wall s"] = min(best.get(f"{side} wall s", wall), wall)
            best[f"{side} cpu s"] = min(best.get(f"{side} cpu s", cpu), cpu)
        wall, cpu = in_terminal(path, env)
        best["view in a terminal wall s"] = min(best.get("view in a terminal wall s", wall), wall)
        best["view in a terminal cpu s"] = min(best.get("view in a terminal cpu s", cpu), cpu)
    best["app / check wall"] = best["app wall s"] / best["check wall s"]
    best["app / check cpu"] = best["app cpu s"] / best["check cpu s"]
    best["view / check wall"] = best["view in a terminal wall s"] / best["check wall s"]
    best["view / check cpu"] = best["view in a terminal cpu s"] / best["check cpu s"]
    return best, timeline


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--instances", type=int, default=4000)
    parser.add_argument("--rounds", type=int, default=25)
    parser.add_argument("--steps", type=int, default=60)
    parser.add_argument("--repeat", type=int, default=3,
                        help="starts of the app, each beside a `stepper check`, best of each (in process)")
    parser.add_argument("--fresh", type=int, default=5, help="runs of each side of the fresh-process pair")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        small = write(Path(tmp) / "small.sumtr", 3, 4)
        large = write(Path(tmp) / "large.sumtr", args.instances, args.rounds)
        print(f"wrote the transcripts in {time.perf_counter() - t:.1f} s "
              f"({large.stat().st_size / 1e6:.1f} MB for {args.instances * args.rounds} rounds)")
        results = {"small": asyncio.run(measure(small, args.steps, args.repeat)),
                   "large": asyncio.run(measure(large, args.steps, args.repeat))}
        fresh, timeline = fresh_pair(large, args.fresh) if args.fresh > 0 else ({}, "")
    keys = list(results["small"])
    print(f"{'':24}{'small':>12}{'large':>12}{'large/small':>14}")
    for key in keys:
        a, b = results["small"][key], results["large"][key]
        ratio = f"{b / a:.2f}" if a else "-"
        print(f"{key:24}{a:12.2f}{b:12.2f}{ratio:>14}")
    if fresh:
        print(f"\nfresh processes on the large file, best of {args.fresh} each, interleaved "
              "(app: until every round is checked and shown)")
        for key, value in fresh.items():
            print(f"fresh {key:28}{value:12.2f}")
        print("the fastest app run, stage by stage (wall since the process was created; its own CPU, "
              "the child's not included):")
        for stage in timeline.splitlines():
            print(f"fresh timeline  {stage}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
