"""`stepper check` against a bare msgpack decode of the same transcript, and its memory.

Writes a transcript of ``--instances`` (default 10^4) instances x ``--rounds`` (24)
rounds over Goldilocks, degree 3, challenges from the built-in schedule
stepper-sha256/1 (so the check re-derives every challenge: hashing is measured
too). Then, side by side in one run, best of ``--repeat``:

* decode: iterate every msgpack object of the file with ``msgpack.Unpacker``;
* check:  the whole ``stepper check FILE`` command in-process (reading, validation,
  replay, re-derivation, human output to /dev/null).

It prints the ratio check/decode (target <= 3x) and the peak traced memory of the
check (tracemalloc) for a tenth of the instances and for all of them: the peak
must not grow with the number of instances in the default (human) output.

    python3 bench/check.py                       # about a minute
    python3 bench/check.py --instances 2000 --repeat 1
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import random
import tempfile
import time
import tracemalloc
from pathlib import Path

import msgpack

from stepper.cli.main import main
from stepper.field import NAMED_PRIMES, get_field
from stepper.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.poly import lagrange_at
from stepper.store import TranscriptWriter
from stepper.store.writer import MAGIC
from stepper.transcript import ChallengeMsg

DEGREE = 3


def write_transcript(path: Path, instances: int, rounds: int, seed: int = 7) -> None:
    """Random consistent rounds (g(0)+g(1) = carried claim), challenges by the schedule."""
    field = get_field(NAMED_PRIMES["goldilocks"])
    p = field.p
    rng = random.Random(seed)
    sched = Sha256Schedule()
    with TranscriptWriter(path, metadata={"label": "brackwater-ferries bench"}) as out:
        sched.observe(out.write_payload({"type": "field", "name": "goldilocks"}))
        sched.observe(out.write_payload({"type": "schedule", "name": SCHEDULE_NAME, "label": "bench"}))
        for i in range(instances):
            claim = rng.randrange(p)
            sched.observe(out.write_payload({"type": "instance", "name": f"sailing-{i:05d}", "num_vars": rounds,
                                             "degree": DEGREE, "claim": claim}))
            for k in range(1, rounds + 1):
                g0 = rng.randrange(p)
                evals = (g0, (claim - g0) % p, rng.randrange(p), rng.randrange(p))
                sched.observe(out.write_payload({"type": "round", "evals": list(evals)}))
                r = sched.challenge()
                out.write(ChallengeMsg(i, k, r))
                claim = lagrange_at(field, evals, r)
            out.write_payload({"type": "final", "value": claim})


def bare_decode(path: Path) -> int:
    with open(path, "rb") as f:
        f.seek(len(MAGIC))
        return sum(1 for _ in msgpack.Unpacker(f, raw=False))


def run_check(path: Path) -> int:
    with open(os.devnull, "w") as sink, contextlib.redirect_stdout(sink):
        return main(["check", str(path)])


def best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def peak_bytes(path: Path) -> int:
    tracemalloc.start()
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(["check", str(path)])
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert code == 0, f"the bench transcript should be accepted, check returned {code}"
    return peak


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=24)
    parser.add_argument("--repeat", type=int, default=2)
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
        assert run_check(large) == 0
        objects = bare_decode(large)
        decode = best(lambda: bare_decode(large), args.repeat)
        check = best(lambda: run_check(large), args.repeat)
        print(f"bare msgpack decode: {decode:.3f} s ({objects} objects)")
        print(f"stepper check:       {check:.3f} s")
        print(f"ratio check/decode:  {check / decode:.2f}x (target <= 3x)")
        peak_small, peak_large = peak_bytes(small), peak_bytes(large)
        print(f"peak traced memory of check: {peak_small / 1e6:.2f} MB for {max(1, args.instances // 10)} "
              f"instances, {peak_large / 1e6:.2f} MB for {args.instances} "
              f"(ratio {peak_large / peak_small:.2f}; flat means it does not grow with instances)")


if __name__ == "__main__":
    main_bench()
