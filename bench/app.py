"""Scale of the terminal app, measured through Textual's Pilot, side by side.

Writes two demo transcripts (Brackwater Ferries, invented data): a small one
(3 instances x 4 rounds) and a large one (default 4000 instances x 25 rounds =
10^5 rounds), then for each: time from creating the app to its first paint,
time until every round is checked (the app checks through `stepper check`'s
whole-file pass while it starts, then reads the rounds for stepping), the time
until every round is read for stepping, `stepper check` on the same file in the
same process (the ratios "all checked / check", from creating the app, and
"after paint / check", what checking adds once the first screen is up: the
second is the figure of merit, at most 2),
and the wall time of single steps (one key
press each, as the Pilot delivers it, repaint included) and instance hops,
next to a key bound to nothing (what the Pilot itself costs per press).
Prints the figures and the large/small ratios, measured in the same run.

    python bench/app.py [--instances N] [--rounds K] [--steps S]
"""

from __future__ import annotations

import argparse
import asyncio
import random
import statistics
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


async def measure(path: Path, steps: int) -> dict[str, float]:
    from stepper.app.app import StepperApp

    start, start_cpu = time.perf_counter(), time.process_time()
    app = StepperApp.from_file(path, progressive=True, export_dir=path.parent)
    out: dict[str, float] = {}
    async with app.run_test(size=(140, 44)) as pilot:
        # run_test hands over once the first screen is mounted and drawn
        out["first paint s"] = time.perf_counter() - start
        out["first paint cpu s"] = time.process_time() - start_cpu
        assert app.proof_screen.query_one("#rounds").row_count > 0
        while not app.model.all_checked:
            await pilot.pause(0.01)
        out["all checked s"] = time.perf_counter() - start
        out["all checked cpu s"] = time.process_time() - start_cpu
        while app.model.loading:
            await pilot.pause(0.02)
        out["all read s"] = time.perf_counter() - start
        times, cpu = [], []
        for i in range(steps):  # ten rounds forward, ten back: every press moves
            t, c = time.perf_counter(), time.process_time()
            await pilot.press("r" if (i // 10) % 2 == 0 else "R")
            times.append(time.perf_counter() - t)
            cpu.append(time.process_time() - c)
        idle = []
        for _ in range(max(10, steps // 3)):  # a key bound to nothing: the Pilot's own cost
            t = time.perf_counter()
            await pilot.press("z")
            idle.append(time.perf_counter() - t)
        hops = []
        for i in range(max(4, steps // 10)):
            t = time.perf_counter()
            await pilot.press("i" if i % 2 == 0 else "I")
            hops.append(time.perf_counter() - t)
        out["step median ms"] = 1000 * statistics.median(times)
        out["step max ms"] = 1000 * max(times)
        out["step cpu median ms"] = 1000 * statistics.median(cpu)
        out["unbound key median ms"] = 1000 * statistics.median(idle)
        out["step - unbound ms"] = out["step median ms"] - out["unbound key median ms"]
        out["hop median ms"] = 1000 * statistics.median(hops)
        out["rounds"] = app.model.round_count
        out["verdict accept"] = float(app.model.verdict() == "accept")
    out["check s"] = check_seconds(path)
    out["all checked / check"] = out["all checked s"] / out["check s"]
    # the app must paint before it can show anything; what the checking itself adds after that:
    out["checked after paint s"] = max(0.0, out["all checked s"] - out["first paint s"])
    out["after paint / check"] = out["checked after paint s"] / out["check s"]
    return out


def check_seconds(path: Path) -> float:
    """`stepper check PATH` in this process (its output discarded), wall seconds."""
    import contextlib
    import io

    from stepper.cli.main import main as stepper_main

    start = time.perf_counter()
    with contextlib.redirect_stdout(io.StringIO()):
        stepper_main(["check", str(path)])
    return time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--instances", type=int, default=4000)
    parser.add_argument("--rounds", type=int, default=25)
    parser.add_argument("--steps", type=int, default=60)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        small = write(Path(tmp) / "small.sumtr", 3, 4)
        large = write(Path(tmp) / "large.sumtr", args.instances, args.rounds)
        print(f"wrote the transcripts in {time.perf_counter() - t:.1f} s "
              f"({large.stat().st_size / 1e6:.1f} MB for {args.instances * args.rounds} rounds)")
        results = {"small": asyncio.run(measure(small, args.steps)),
                   "large": asyncio.run(measure(large, args.steps))}
    keys = list(results["small"])
    print(f"{'':24}{'small':>12}{'large':>12}{'large/small':>14}")
    for key in keys:
        a, b = results["small"][key], results["large"][key]
        ratio = f"{b / a:.2f}" if a else "-"
        print(f"{key:24}{a:12.2f}{b:12.2f}{ratio:>14}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
