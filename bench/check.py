"""`stepper check` against a bare msgpack decode of the same transcript, and its memory.

Writes a transcript of ``--instances`` (default 10^4) instances x ``--rounds`` (24)
rounds over Goldilocks, degree 3, challenges from the built-in schedule
stepper-sha256/1 (so the check re-derives every challenge: hashing is measured
too). Then, side by side in one run, best of ``--repeat``:

* decode: iterate every msgpack object of the file with ``msgpack.Unpacker``;
* reading: iterate the records with ``stepper.store.open_events`` (validation included);
* hashing: only the SHA-256 calls the schedule makes per round (absorb the round,
  copy, squeeze, digest, absorb the challenge) on bytes prepared beforehand: the
  floor of re-deriving challenges with hashlib from Python;
* replay: ``open_events`` + ``Replay.feed_all`` in this process: the event-by-event
  replay, which ``check`` falls back to when the sweep gives up (a failing check);
* sweep: ``stepper.store.sweep`` in this process (what ``check`` does between start-up
  and printing when the file passes);
* check:  the whole ``stepper check FILE`` command in a fresh process (reading,
  replay, re-derivation, human output to /dev/null), start-up measured apart.

It prints the ratio check/decode (target <= 3x) and the peak resident memory of
the check process for a tenth of the instances and for all of them: in the
default (human) output it must not grow with the number of instances. Times are
CPU seconds (user + system; a child's from ``wait4``), which a shared machine
disturbs far less than wall time; the check's wall time is printed beside it.

    python3 bench/check.py                       # about a minute
    python3 bench/check.py --instances 2000 --repeat 1
"""

from __future__ import annotations

import argparse
import hashlib
import os
import random
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import msgpack

from stepper.field import NAMED_PRIMES, get_field
from stepper.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.lagrange import evaluate_round
from stepper.store import TranscriptWriter, open_events
from stepper.store.writer import MAGIC
from stepper.packed import pack_elements

DEGREE = 3


def write_transcript(path: Path, instances: int, rounds: int, seed: int = 7) -> None:
    """Random consistent rounds (g(0)+g(1) = carried claim), challenges by the schedule."""
    field = get_field(NAMED_PRIMES["goldilocks"])
    p = field.p
    rng = random.Random(seed)
    sched = Sha256Schedule()
    encode = field.encode
    with TranscriptWriter(path, metadata={"label": "brackwater-ferries bench"}) as out:
        sched.observe(out.write_payload({"type": "field", "name": "goldilocks"}))
        sched.observe(out.write_payload({"type": "schedule", "name": SCHEDULE_NAME, "label": "bench"}))
        for i in range(instances):
            claim = rng.randrange(p)
            sched.observe(out.write_payload({"type": "instance", "name": f"sailing-{i:05d}", "num_vars": rounds,
                                             "degree": DEGREE, "claim": encode(claim)}))
            for k in range(1, rounds + 1):
                g0 = rng.randrange(p)
                evals = (g0, (claim - g0) % p, rng.randrange(p), rng.randrange(p))
                sched.observe(out.write_payload({"type": "round", "evals": pack_elements(field, evals)}))
                r = sched.challenge()
                out.write_payload({"type": "challenge", "value": encode(r)})
                claim = evaluate_round(field, evals, r)
            out.write_payload({"type": "final", "value": encode(claim)})


def bare_decode(path: Path) -> int:
    with open(path, "rb") as f:
        f.seek(len(MAGIC))
        return sum(1 for _ in msgpack.Unpacker(f, raw=False))


def _child(argv: list[str]) -> tuple[float, float, float, int]:
    """Wall seconds, CPU seconds (user + system), peak resident MB and exit code of a child process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    return wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss / 1024, os.waitstatus_to_exitcode(status)


def run_check(path: Path) -> tuple[float, float, float]:
    """CPU seconds, wall seconds and peak resident memory (MB) of `stepper check FILE` in a fresh process."""
    wall, cpu, rss, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"the bench transcript should be accepted, check exited {code}"
    return cpu, wall, rss


def startup() -> float:
    """CPU seconds of a Python process that only imports what `stepper check` imports."""
    _, cpu, _, code = _child([sys.executable, "-c", "import stepper.cli.main, stepper.store.sweep, stepper.verify, "
                              "stepper.roundblock"])
    assert code == 0
    return cpu


def best(fn, repeat: int) -> float:
    """Least CPU seconds of ``repeat`` runs in this process (CPU time: the machine is shared)."""
    times = []
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        times.append(time.process_time() - t0)
    return min(times)


def stream_only(path: Path) -> None:
    with open_events(path) as stream:
        for _ in stream:
            pass


def replay_in_process(path: Path) -> None:
    from stepper.verify import Replay

    replay = Replay(keep_instances=20, emit_passing=False)
    with open_events(path) as stream:
        replay.feed_all(stream)
        completeness = stream.completeness
    assert replay.report(completeness).verdict == "accept"


def sweep_in_process(path: Path) -> None:
    from stepper.store.sweep import sweep
    from stepper.verify import Replay

    replay = Replay(keep_instances=20, emit_passing=False)
    assert sweep(path, replay) is not None, "the sweep should take the whole bench transcript"
    assert replay.report().verdict == "accept"


def hashing_floor(rounds: int) -> None:
    """The schedule's hashlib calls for ``rounds`` rounds, nothing else."""
    state = hashlib.sha256(b"stepper-sha256/1")
    update, copy = state.update, state.copy
    round_frame, squeeze, challenge = bytes(6 + 8 + 8 + 8 * (DEGREE + 1)), bytes(8 + 16 + 8), bytes(10 + 8 + 8)
    for _ in range(rounds):
        update(round_frame)
        h = copy()
        h.update(squeeze)
        h.digest()
        update(challenge)


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=24)
    parser.add_argument("--repeat", type=int, default=3, help="best of N (fresh-process check: best of N too)")
    return parser.parse_args()


def main_bench() -> None:
    args = parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        small, large = Path(tmp) / "small.stp", Path(tmp) / "large.stp"
        t0 = time.perf_counter()
        write_transcript(large, args.instances, args.rounds)
        write_transcript(small, max(1, args.instances // 10), args.rounds)
        print(f"wrote {args.instances} x {args.rounds} rounds (goldilocks, degree {DEGREE}): "
              f"{large.stat().st_size / 1e6:.1f} MB in {time.perf_counter() - t0:.1f} s")
        objects = bare_decode(large)
        decode = best(lambda: bare_decode(large), args.repeat)
        reading = best(lambda: stream_only(large), args.repeat)
        hashing = best(lambda: hashing_floor(args.instances * args.rounds), args.repeat)
        replay = best(lambda: replay_in_process(large), args.repeat)
        swept = best(lambda: sweep_in_process(large), args.repeat)
        check, wall, rss_large = min(run_check(large) for _ in range(args.repeat))
        rss_small = run_check(small)[2]
        start = min(startup() for _ in range(args.repeat))
        print("CPU seconds (user + system), best of", args.repeat)
        print(f"bare msgpack decode:            {decode:.3f} s ({objects} objects)")
        print(f"stepper.store reading alone:    {reading:.3f} s ({reading / decode:.1f}x decode)")
        print(f"SHA-256 calls alone (floor):    {hashing:.3f} s ({hashing / decode:.1f}x decode)")
        print(f"reading + replay, in process:   {replay:.3f} s ({replay / decode:.1f}x decode; replay itself "
              f"{(replay - reading) / decode:.1f}x)")
        print(f"sweep, in process:              {swept:.3f} s ({swept / decode:.1f}x decode)")
        print(f"stepper check (fresh process):  {check:.3f} s (wall {wall:.3f} s), of which {start:.2f} s "
              f"interpreter + imports")
        print(f"ratio check/decode:             {check / decode:.1f}x; without start-up "
              f"{(check - start) / decode:.1f}x (target <= 3x)")
        print(f"peak resident memory of check:  {rss_small:.1f} MB for {max(1, args.instances // 10)} instances, "
              f"{rss_large:.1f} MB for {args.instances} (ratio {rss_large / rss_small:.2f})")

if __name__ == "__main__":
    main_bench()
