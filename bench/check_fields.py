"""`stepper check` against a bare msgpack decode, for every named field and extension.

For each field, writes an honest transcript of ``--instances`` (default 10^4) instances x
``--rounds`` (24) rounds, degree 3, challenges from the built-in schedule stepper-sha256/1
(the check re-derives every challenge, so hashing is measured too), then measures side by
side, in ``--repeat`` interleaved rounds (best of each), in fresh processes:

* decode: the interpreter, ``import msgpack`` and iterating every msgpack object of the file;
* check: ``python3 -m stepper check FILE`` (human output to /dev/null);
* hashing floor: in this process, only the SHA-256 calls the built-in schedule makes per round
  (absorb the round; per challenge coefficient and per 32-byte block of its sample: copy the
  state, absorb the squeeze frame, digest; absorb the challenge), on bytes prepared beforehand.
  An extension squeezes k samples per challenge and a prime above 2^128 two blocks per sample,
  so this floor alone is about 2x the decode for BabyBear^4 and BN254: no check that re-derives
  the challenges with hashlib from Python can go below it;
* process floor: the same hashlib calls in a fresh process that has imported numpy (what the
  check's vectorised pass needs before it reads a byte), against the decode process: the least a
  ``check`` process can cost, before it reads the file, verifies its digest or checks a round.

It prints check/decode per field with the target beside it (<= 3x, aim 2x), and the peak
resident memory of the check for a tenth of the instances and for all of them (flat in the
number of instances). Times are CPU seconds (user + system of the child, from ``wait4``):
the machine is shared, and CPU time varies far less than wall time. Writing the transcripts
takes most of the run (a Python prover with the schedule: about 10 s per field at 10^4).

    python3 bench/check_fields.py                                   # every field, a few minutes
    python3 bench/check_fields.py --fields babybear^4,bn254 --instances 2000 --repeat 1
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from math import factorial
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check import _child, decode_process  # noqa: E402  (same measuring helpers as bench/check.py)

from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field  # noqa: E402
from stepper.transcript.packed import pack_elements  # noqa: E402
from stepper.transcript.store import TranscriptWriter  # noqa: E402
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule  # noqa: E402

DEGREE = 3
TARGET, AIM = 3.0, 2.0
FIELDS = ("babybear", "koalabear", "mersenne31", "goldilocks", "babybear^4", "koalabear^4", "mersenne31^4",
          "goldilocks^2", "bn254", "bls12-381")


def field_named(name: str) -> Field:
    base, _, k = name.partition("^")
    p = NAMED_PRIMES[base]
    return get_field(p, DEFAULT_IRREDUCIBLES[(base, int(k))]) if k else get_field(p)


def field_event(name: str) -> dict:
    base, _, k = name.partition("^")
    return {"type": "field", "name": base, **({"extension_degree": int(k)} if k else {})}


def newton_at(field: Field, evals: list, r) -> object:
    """g(r) from g(0..3) by Newton's forward differences (scalar field arithmetic)."""
    add, sub, mul = field.add, field.sub, field.mul
    layer, deltas = list(evals), [evals[0]]
    while len(layer) > 1:
        layer = [sub(layer[i + 1], layer[i]) for i in range(len(layer) - 1)]
        deltas.append(layer[0])
    coefficients = [mul(d, field.embed(pow(factorial(k), -1, field.p))) if k > 1 else d for k, d in enumerate(deltas)]
    acc = coefficients[-1]
    for k in range(len(coefficients) - 1, 0, -1):
        acc = add(coefficients[k - 1], mul(acc, sub(r, field.embed(k - 1))))
    return acc


def write_transcript(path: Path, name: str, instances: int, rounds: int, seed: int = 7) -> None:
    """Random consistent rounds (g(0)+g(1) = carried claim), challenges by the schedule."""
    field = field_named(name)
    rng = random.Random(seed)
    sched = Sha256Schedule()
    encode, p, k = field.encode, field.p, field.degree

    def draw():
        return rng.randrange(p) if k == 1 else tuple(rng.randrange(p) for _ in range(k))

    with TranscriptWriter(path, metadata={"label": "brackwater-ferries bench"}) as out:
        sched.observe(out.write_payload(field_event(name)))
        sched.observe(out.write_payload({"type": "schedule", "name": SCHEDULE_NAME, "label": "bench"}))
        for i in range(instances):
            claim = draw()
            sched.observe(out.write_payload({"type": "instance", "name": f"sailing-{i:05d}", "num_vars": rounds,
                                             "degree": DEGREE, "claim": encode(claim)}))
            for _ in range(rounds):
                g0 = draw()
                evals = [g0, field.sub(claim, g0), draw(), draw()]
                sched.observe(out.write_payload({"type": "round", "evals": pack_elements(field, evals)}))
                r = sched.challenge()
                out.write_payload({"type": "challenge", "value": encode(r)})
                claim = newton_at(field, evals, r)
            out.write_payload({"type": "final", "value": encode(claim)})


def hashing_floor(name: str, rounds: int) -> float:
    """CPU seconds of the schedule's hashlib calls alone for ``rounds`` rounds of degree 3."""
    t0 = time.process_time()
    _floor_calls(*_floor_sizes(name), rounds)
    return time.process_time() - t0


def floor_process(name: str, rounds: int) -> float:
    """CPU seconds of a fresh process that imports numpy and makes the hashlib calls of
    :func:`hashing_floor` for ``rounds`` rounds (its source, run with ``-c``)."""
    import inspect

    squeezes, round_bytes, challenge_bytes = _floor_sizes(name)
    source = "\n".join(("import numpy", inspect.getsource(_floor_calls),
                        f"_floor_calls({squeezes}, {round_bytes}, {challenge_bytes}, {rounds})"))
    _, cpu, _, code = _child([sys.executable, "-c", source])
    assert code == 0, "the floor process failed"
    return cpu


def _floor_sizes(name: str) -> tuple[int, int, int]:
    """Digests squeezed per challenge (SHA-256 blocks per base sample times the degree), and the
    bytes of a degree-3 round's frame and of a challenge's frame, in the field ``name``."""
    field = field_named(name)
    blocks = -(-((field.p.bit_length() + 128 + 7) // 8) // 32)
    return field.degree * blocks, 22 + (DEGREE + 1) * field.elem_bytes, 18 + field.elem_bytes


def _floor_calls(squeezes: int, round_bytes: int, challenge_bytes: int, rounds: int) -> None:
    """The schedule's hashlib calls per round, on zero bytes of the real lengths (also run in a child)."""
    import hashlib

    frames = [bytes(33 + i) for i in range(squeezes)]
    round_frame, challenge = bytes(round_bytes), bytes(challenge_bytes)
    state = hashlib.sha256(b"stepper-sha256/1")
    update, copy = state.update, state.copy
    for _ in range(rounds):
        update(round_frame)
        for squeeze in frames:
            h = copy()
            h.update(squeeze)
            h.digest()
        update(challenge)


def run_check(path: Path) -> tuple[float, float]:
    """CPU seconds and peak resident MB of `python3 -m stepper check FILE` in a fresh process."""
    _, cpu, rss, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"the bench transcript {path.name} should be accepted, check exited {code}"
    return cpu, rss


def measure(names: list[str], instances: int, rounds: int, repeat: int, tmp: Path) -> list[dict]:
    rows = []
    for name in names:
        large, small = tmp / f"{name}.sumtr", tmp / f"{name}-tenth.sumtr"
        t0 = time.perf_counter()
        write_transcript(large, name, instances, rounds)
        write_transcript(small, name, max(1, instances // 10), rounds)
        written = time.perf_counter() - t0
        decodes, checks, floors, processes = [], [], [], []
        for _ in range(repeat):  # interleaved: a slow spell of the machine slows both
            decodes.append(decode_process(large))
            checks.append(run_check(large))
            floors.append(hashing_floor(name, instances * rounds))
            processes.append(floor_process(name, instances * rounds))
        decode, check, floor = min(decodes), min(c[0] for c in checks), min(floors)
        rows.append({"field": name, "mb": large.stat().st_size / 1e6, "decode": decode, "check": check,
                     "ratio": check / decode, "floor": floor / decode, "process": min(processes) / decode,
                     "rss_large": min(c[1] for c in checks), "rss_small": run_check(small)[1], "written": written})
        print(f"  {name:13s} {rows[-1]['mb']:6.1f} MB  decode {decode:6.3f} s  check {check:6.3f} s  "
              f"{rows[-1]['ratio']:5.1f}x (target <= {TARGET:.0f}x); hashing alone {rows[-1]['floor']:.1f}x, "
              f"floor process {rows[-1]['process']:.1f}x", flush=True)
    return rows


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--fields", default=",".join(FIELDS), help="comma-separated names (default: all)")
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=24)
    parser.add_argument("--repeat", type=int, default=3)
    return parser.parse_args()


def main() -> None:
    args = parse_args()
    names = [n for n in args.fields.split(",") if n]
    print(f"{args.instances} instances x {args.rounds} rounds, degree {DEGREE}; CPU seconds, fresh processes, "
          f"best of {args.repeat} interleaved")
    with tempfile.TemporaryDirectory() as tmp:
        rows = measure(names, args.instances, args.rounds, args.repeat, Path(tmp))
    print(f"\n| field | file MB | check / decode | target | SHA-256 calls alone / decode | floor process / decode "
          f"| peak MB ({args.instances // 10} -> {args.instances} instances) |")
    print("|---|---|---|---|---|---|---|")
    for row in rows:
        mark = "ok" if row["ratio"] <= TARGET else "MISSED"
        print(f"| {row['field']} | {row['mb']:.1f} | {row['ratio']:.1f}x | <= {TARGET:.0f}x (aim {AIM:.0f}x) {mark} | "
              f"{row['floor']:.1f}x | {row['process']:.1f}x | {row['rss_small']:.0f} -> {row['rss_large']:.0f} |")


if __name__ == "__main__":
    main()
