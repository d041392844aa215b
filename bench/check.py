"""`stepper check` against a bare msgpack decode of the same transcript, and its memory.

Writes a transcript of ``--instances`` (default 10^4) instances x ``--rounds`` (24)
rounds over Goldilocks, degree 3, challenges from the built-in schedule
stepper-sha256/1 (so the check re-derives every challenge: hashing is measured
too). Then, side by side in one run, in ``--repeat`` interleaved rounds (best of each):

* decode: iterate every msgpack object of the file with ``msgpack.Unpacker``, in
  this process, and in a fresh process (interpreter, ``import msgpack``, decode);
* reading: iterate the records with ``stepper.transcript.store.open_events`` (validation included);
* hashing: only the SHA-256 calls the schedule makes per round (absorb the round,
  copy, squeeze, digest, absorb the challenge) on bytes prepared beforehand: the
  floor of re-deriving challenges with hashlib from Python;
* replay: ``open_events`` + ``Replay.feed_all`` in this process: the event-by-event
  replay, which ``check`` falls back to when the sweep gives up (a failing check);
* sweep: ``stepper.verify.sweep`` in this process (what ``check`` does between start-up
  and printing when the file passes);
* check: the whole ``stepper check FILE`` command in a fresh process (reading,
  replay, re-derivation, human output to /dev/null), start-up measured apart.

It prints the ratio check/decode, process to process (target <= 3x), beside the
harsher ratio to the in-process decode, and the peak resident memory of the check
process for a tenth of the instances and for all of them: in the default (human)
output it must not grow with the number of instances. Times are CPU seconds
(user + system; a child's from ``wait4``), which a shared machine disturbs far less
than wall time; the check's wall time is printed beside it. Children run with
bytecode caching on, as in a normal install.

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

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.field.lagrange import evaluate_round
from stepper.transcript.store import TranscriptWriter, open_events
from stepper.transcript.store.writer import MAGIC
from stepper.transcript.packed import pack_elements

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


def _child_env() -> dict[str, str]:
    """The environment of the measured children: OPENBLAS_NUM_THREADS=1 as the `stepper` entry
    point sets it, and bytecode caching on as in a normal install (a sandbox that sets
    PYTHONDONTWRITEBYTECODE makes every start compile stepper's sources again: ~50 ms)."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


# `python -m stepper` that writes its own peak resident memory (VmHWM, kibibytes) to stderr at exit.
# A child's ru_maxrss is not used for stepper's peak: Python starts children with vfork, and Linux
# then counts the parent's high-water mark (this script's, e.g. while it wrote the transcripts) as
# the child's.
PEAK_SELF = ("import atexit, os, runpy, sys\n"
             "def peak():\n"
             "    with open('/proc/self/status') as status:\n"
             "        kib = next(line.split()[1] for line in status if line.startswith('VmHWM:'))\n"
             "    os.write(2, f'peak-kib {kib}\\n'.encode())\n"
             "atexit.register(peak)\n"
             "sys.argv = ['stepper', *sys.argv[1:]]\n"
             "runpy.run_module('stepper', run_name='__main__', alter_sys=True)\n")


def _child(argv: list[str], extra_env: dict[str, str] | None = None) -> tuple[float, float, float, int]:
    """Wall seconds, CPU seconds (user + system), peak resident MB and exit code of a child process
    (its environment :func:`_child_env` plus ``extra_env``). For ``python -m stepper ...`` the peak is
    the child's own (VmHWM, through :data:`PEAK_SELF`); for anything else it is the child's ru_maxrss."""
    own_peak = argv[1:3] == ["-m", "stepper"]
    if own_peak:
        argv = [argv[0], "-c", PEAK_SELF, *argv[3:]]
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE if own_peak else None,
                            env={**_child_env(), **(extra_env or {})})
    err = proc.stderr.read().decode(errors="replace") if proc.stderr is not None else ""
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    code = os.waitstatus_to_exitcode(status)
    rss = usage.ru_maxrss / 1024
    if own_peak:
        text, _, peak = err.rpartition("peak-kib ")
        if text:
            sys.stderr.write(text)  # whatever the child said besides its peak
        if peak:
            rss = int(peak.split()[0]) / 1024
    return wall, usage.ru_utime + usage.ru_stime, rss, code


def run_check(path: Path) -> tuple[float, float, float]:
    """CPU seconds, wall seconds and peak resident memory (MB) of `stepper check FILE` in a fresh process."""
    wall, cpu, rss, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"the bench transcript should be accepted, check exited {code}"
    return cpu, wall, rss


def startup() -> float:
    """CPU seconds of a Python process that only imports what `stepper check` imports."""
    _, cpu, _, code = _child([sys.executable, "-c", "import stepper.cli.main, stepper.verify.sweep, stepper.verify.replay, "
                              "stepper.verify.roundblock"])
    assert code == 0
    return cpu


def cpu_of(fn) -> float:
    """CPU seconds of one call in this process (CPU time: the machine is shared)."""
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def stream_only(path: Path) -> None:
    with open_events(path) as stream:
        for _ in stream:
            pass


def replay_in_process(path: Path) -> None:
    from stepper.verify.replay import Replay

    replay = Replay(keep_instances=20, emit_passing=False)
    with open_events(path) as stream:
        replay.feed_all(stream)
        completeness = stream.completeness
    assert replay.report(completeness).verdict == "accept"


def sweep_in_process(path: Path) -> None:
    from stepper.verify.sweep import sweep
    from stepper.verify.replay import Replay

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


def decode_process(path: Path) -> float:
    """CPU seconds of a fresh process that imports msgpack and decodes the file (no stepper)."""
    code = (f"import msgpack\nwith open({str(path)!r}, 'rb') as f:\n    f.seek({len(MAGIC)})\n"
            "    sum(1 for _ in msgpack.Unpacker(f, raw=False))")
    _, cpu, _, status = _child([sys.executable, "-c", code])
    assert status == 0
    return cpu


def main_bench() -> None:
    args = parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        small, large = Path(tmp) / "small.sumtr", Path(tmp) / "large.sumtr"
        t0 = time.perf_counter()
        write_transcript(large, args.instances, args.rounds)
        write_transcript(small, max(1, args.instances // 10), args.rounds)
        print(f"wrote {args.instances} x {args.rounds} rounds (goldilocks, degree {DEGREE}): "
              f"{large.stat().st_size / 1e6:.1f} MB in {time.perf_counter() - t0:.1f} s")
        objects = bare_decode(large)
        startup()  # writes the bytecode caches the measured children then use
        checks: list[tuple[float, float, float]] = []
        # interleaved rounds, best of each: a machine that slows down for a while slows every measure
        measures = {
            "decode": lambda: cpu_of(lambda: bare_decode(large)),
            "reading": lambda: cpu_of(lambda: stream_only(large)),
            "hashing": lambda: cpu_of(lambda: hashing_floor(args.instances * args.rounds)),
            "replay": lambda: cpu_of(lambda: replay_in_process(large)),
            "sweep": lambda: cpu_of(lambda: sweep_in_process(large)),
            "check": lambda: checks.append(run_check(large)) or checks[-1][0],
            "decode process": lambda: decode_process(large),
            "start": startup,
        }
        found: dict[str, list[float]] = {name: [] for name in measures}
        for _ in range(args.repeat):
            for name, measure in measures.items():
                found[name].append(measure())
        t = {name: min(values) for name, values in found.items()}
        decode, check = t["decode"], t["check"]
        wall = min(c[1] for c in checks)
        rss_large = min(c[2] for c in checks)
        rss_small = run_check(small)[2]
        print(f"CPU seconds (user + system), best of {args.repeat} interleaved rounds")
        print(f"bare msgpack decode:            {decode:.3f} s ({objects} objects)")
        print(f"stepper.transcript.store reading alone:    {t['reading']:.3f} s ({t['reading'] / decode:.1f}x decode)")
        print(f"SHA-256 calls alone (floor):    {t['hashing']:.3f} s ({t['hashing'] / decode:.1f}x decode)")
        print(f"event-by-event replay:          {t['replay']:.3f} s ({t['replay'] / decode:.1f}x decode; what check "
              "does when the sweep gives up)")
        print(f"sweep, in process:              {t['sweep']:.3f} s ({t['sweep'] / decode:.1f}x decode)")
        print(f"stepper check (fresh process):  {check:.3f} s (wall {wall:.3f} s), of which {t['start']:.2f} s "
              f"interpreter + imports")
        print(f"decode (fresh process):         {t['decode process']:.3f} s")
        print(f"ratio check/decode:             {check / t['decode process']:.1f}x process to process (target <= 3x); "
              f"{check / decode:.1f}x to the in-process decode; {(check - t['start']) / decode:.1f}x without start-up")
        print(f"peak resident memory of check:  {rss_small:.1f} MB for {max(1, args.instances // 10)} instances, "
              f"{rss_large:.1f} MB for {args.instances} (ratio {rss_large / rss_small:.2f})")


if __name__ == "__main__":
    main_bench()
