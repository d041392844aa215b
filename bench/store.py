"""The transcript store, measured side by side in one run (ratios, not absolute times).

1. Reading: ``--rounds`` (default 10^6) rounds of degree 3 over Goldilocks, each
   followed by its challenge, in instances of 64 variables. Best of ``--repeat`` (default 5)
   CPU times of (a) iterating every object with a bare ``msgpack.Unpacker`` over
   the file and (b) iterating every record with ``stepper.transcript.store.open_events``
   (validation, canonical checks, digest). Target: (b) / (a) <= 3.
   The file is built with msgpack directly in the writer's exact layout (the
   writer validates every event and would dominate the set-up time); the reader
   verifying the digest shows the layout is the real one.
2. Recording: a zero-check prover sum_x eq(z, x) * b(x) * (1 - b(x)) over 2^``--log-size``
   (default 20) Goldilocks entries, numpy kernels, low bit first, run with a
   :class:`stepper.transcript.recorder.Recorder` writing every round and challenge and with
   the same calls going to a sink that drops them, alternated. The overhead is
   the median time spent inside the Recorder (opening, every call, sealing) over
   the best prover time (the worst run is printed too); the end-to-end difference
   is printed as well, but on a shared machine it is mostly noise. Target: < 5%.

    python3 bench/store.py                    # about a minute
    python3 bench/store.py --rounds 200000 --log-size 16 --repeat 2
"""

from __future__ import annotations

import argparse
import hashlib
import os
import tempfile
import time
from typing import Any

import msgpack
import numpy as np

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.transcript.recorder import Recorder
from stepper.transcript.store import header_bytes, open_events
from stepper.transcript.store.writer import end_payload

P = NAMED_PRIMES["goldilocks"]
NUM_VARS = 64


def build_transcript(path: str, rounds: int) -> int:
    """Write ``rounds`` rounds (+ challenges) in the writer's layout; returns the event count."""
    rng = np.random.default_rng(740)
    values = rng.integers(0, P, size=(rounds, 5), dtype=np.uint64)  # 4 evals + 1 challenge per round
    raw = values.tobytes()
    packer = msgpack.Packer(use_bin_type=True)
    hasher = hashlib.sha256()
    events = 0
    with open(path, "wb") as out:
        def emit(data: bytes) -> None:
            hasher.update(data)
            out.write(data)

        emit(header_bytes({"label": "bench: isle-of-quill-0740", "created": "2026-12-01T07:40:00Z"}))
        emit(packer.pack({"type": "field", "name": "goldilocks"}))
        events += 1
        for k in range(rounds):
            if k % NUM_VARS == 0:
                emit(packer.pack({"type": "instance", "name": f"boarding-permutation-{k // NUM_VARS}",
                                  "num_vars": NUM_VARS, "degree": 3, "claim": b"\0" * 8}))
                events += 1
            row = raw[40 * k: 40 * k + 40]
            emit(packer.pack({"type": "round", "evals": row[:32]}))
            emit(packer.pack({"type": "challenge", "value": row[32:]}))
            events += 2
        out.write(packer.pack(end_payload(events, hasher.digest())))
    return events


def read_bare(path: str) -> int:
    count = 0
    with open(path, "rb") as handle:
        for _ in msgpack.Unpacker(handle, raw=False):
            count += 1
    return count


def read_store(path: str) -> int:
    count = 0
    with open_events(path) as stream:
        for _ in stream:
            count += 1
        assert stream.digest == "verified", stream.digest
    return count


def cpu(fn: Any, *args: Any) -> float:
    start = time.process_time()
    fn(*args)
    return time.process_time() - start


class TimedRecorder:
    """A Recorder whose every call (opening and sealing included) is timed."""

    def __init__(self, path: str) -> None:
        start = time.perf_counter()
        self.recorder = Recorder(path, field="goldilocks", replace=True)  # the bench's own scratch file
        self.spent = time.perf_counter() - start

    def __getattr__(self, name: str) -> Any:
        method = getattr(self.recorder, name)

        def timed(*args: Any, **kwargs: Any) -> Any:
            start = time.perf_counter()
            try:
                return method(*args, **kwargs)
            finally:
                self.spent += time.perf_counter() - start
        return timed


class DropSink:
    """The Recorder's calls, doing nothing: the baseline prover run."""

    def instance(self, *args: Any, **kwargs: Any) -> None: ...
    def round(self, values: Any) -> None: ...
    def challenge(self, value: Any) -> None: ...
    def final(self, value: Any) -> None: ...


def zero_check(sink: Any, log_size: int) -> None:
    """A real degree-3 sumcheck prover over 2^log_size entries (challenges from a hash chain)."""
    f = get_field(P)
    rng = np.random.default_rng(7)
    flags = f.vec(rng.integers(0, 2, size=1 << log_size, dtype=np.uint64))  # well-formed slots: 0 or 1
    eq = _low_first_eq(f, rng, log_size)
    ones = f.vec(np.ones(1 << log_size, dtype=np.uint64))
    sink.instance("deck-slots-zero", log_size, 3, 0)
    state = hashlib.sha256(b"bench")
    for _ in range(log_size):
        e0, e1, b0, b1 = eq[0::2], eq[1::2], flags[0::2], flags[1::2]
        de, db = f.vsub(e1, e0), f.vsub(b1, b0)
        evals = []
        for t in range(4):
            e_t = f.vadd(e0, f.vscale(de, t))
            b_t = f.vadd(b0, f.vscale(db, t))
            evals.append(f.vsum(f.vmul(e_t, f.vmul(b_t, f.vsub(ones[: len(b_t)], b_t)))))
        sink.round(evals)
        state.update(b"".join(int(v).to_bytes(8, "little") for v in evals))
        r = int.from_bytes(state.digest()[:8], "little") % P
        sink.challenge(r)
        eq, flags = f.vadd(e0, f.vscale(de, r)), f.vadd(b0, f.vscale(db, r))
    sink.final(f.mul(int(eq[0]), f.mul(int(flags[0]), f.sub(1, int(flags[0])))))


def _low_first_eq(f: Any, rng: np.random.Generator, log_size: int) -> np.ndarray:
    """eq(z, x) over all x, index bit j = x_(j+1), built by doubling (vectorised)."""
    eq = f.vec(np.ones(1, dtype=np.uint64))
    for z in (int(v) for v in rng.integers(1, P, size=log_size, dtype=np.uint64)):
        eq = np.concatenate([f.vscale(eq, f.sub(1, z)), f.vscale(eq, z)])  # z_(j+1) becomes bit j
    return eq


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rounds", type=int, default=10**6)
    parser.add_argument("--log-size", type=int, default=20)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="stepper-bench-") as scratch:
        path = os.path.join(scratch, "rounds.sumtr")
        events = build_transcript(path, args.rounds)
        size = os.path.getsize(path)
        bare, ours = [], []
        for _ in range(args.repeat):
            bare.append(cpu(read_bare, path))
            ours.append(cpu(read_store, path))
        assert read_store(path) == events
        print(f"read {args.rounds} rounds ({events} events, {size / 2**20:.1f} MiB), best of {args.repeat} CPU times:")
        print(f"  bare msgpack.Unpacker   {min(bare):7.3f} s")
        print(f"  stepper open_events     {min(ours):7.3f} s")
        paired = sorted(o / b for o, b in zip(ours, bare))
        print(f"  ratio                   {min(ours) / min(bare):7.2f}x   (target <= 3x; median of the "
              f"{args.repeat} side-by-side pairs {paired[len(paired) // 2]:.2f}x)")

        zero_check(DropSink(), 10)  # warm up the kernels (compilation, caches)
        plain, recorded, inside = [], [], []
        for k in range(args.repeat):
            start = time.perf_counter()
            zero_check(DropSink(), args.log_size)
            plain.append(time.perf_counter() - start)
            start = time.perf_counter()
            timed = TimedRecorder(os.path.join(scratch, f"zero-{k}.sumtr"))
            zero_check(timed, args.log_size)
            timed.finish()
            recorded.append(time.perf_counter() - start)
            inside.append(timed.spent)
        print(f"prover at 2^{args.log_size} (degree-3 zero-check, {args.log_size} rounds), best of {args.repeat}:")
        print(f"  without recording       {min(plain):7.3f} s")
        print(f"  with Recorder           {min(recorded):7.3f} s   (end to end: "
              f"{(min(recorded) / min(plain) - 1) * 100:+.1f}%, within the machine's noise)")
        typical = sorted(inside)[len(inside) // 2]
        print(f"  time inside Recorder    {typical:7.4f} s   (median of {args.repeat}: open, every call, seal; "
              f"worst {max(inside):.4f} s)")
        print(f"  overhead                {typical / min(plain) * 100:7.2f}%   (target < 5%; worst run "
              f"{max(inside) / min(plain) * 100:.2f}%)")

if __name__ == "__main__":
    main()
