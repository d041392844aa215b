"""`stepper check` against a bare msgpack decode, for every named field and extension and each
built-in Fiat-Shamir schedule.

For each field and each schedule (``--schedule``: stepper-sha256/1, stepper-sha256/2, or both, the
default), writes an honest transcript of ``--instances`` (default 10^4) instances x ``--rounds`` (24)
rounds, degree 3, whose challenges the schedule derives (the check re-derives every one, so hashing is
measured too), then measures side by side, in ``--repeat`` interleaved rounds (best of each), in
fresh processes:

* decode: the interpreter, ``import msgpack`` and iterating every msgpack object of the file (a
  field's files have the same layout and size under both schedules: its decode is the best of all);
* check: ``python3 -m stepper check FILE`` (human output to /dev/null);
* hashing floor: in this process, only the SHA-256 calls the schedule makes per round, on bytes
  prepared beforehand: absorb the round; then under stepper-sha256/1, per challenge coefficient and
  per 32-byte block of its sample, copy the state, absorb the squeeze frame, digest; under
  stepper-sha256/2 one digest of the state (and one one-shot hash per further 32-byte block: BN254
  and BLS12-381); then absorb the challenge. No check that re-derives the challenges with hashlib
  from Python can go below it. Under /1 an extension squeezes k samples per challenge and a prime
  above 2^128 two blocks, so this floor alone is about 2x the decode for BabyBear^4 and BN254;
  under /2 every named field but those two needs one digest per challenge;
* process floor: the same hashlib calls in a fresh process that has imported numpy (what the
  check's vectorised pass needs before it reads a byte), against the decode process: the least a
  ``check`` process can cost, before it reads the file, verifies its digest or checks a round.

A transcript declares its schedule and is checked under it: files written with stepper-sha256/1
(every file stepper's provers write by default, and every file written before /2 existed) keep
their /1 figure, because their challenges were derived by /1 and can only be re-derived by /1's k
squeezes per challenge. Only provers that choose /2 get its figure.

It prints check/decode per field and schedule with the target beside it (<= 3x, aim 2x), and the
peak resident memory of the check for a tenth of the instances and for all of them (flat in the
number of instances). Times are CPU seconds (user + system of the child, from ``wait4``): the
machine is shared, and CPU time varies far less than wall time.

The transcripts are written here byte for byte as stepper's TranscriptWriter lays them out (checked
at the start against TranscriptWriter on a small proof; the tenth is the same proof cut after its
first instances and sealed), with each round's bytes packed directly
and its arithmetic in plain integers: g is drawn in coefficient form, c1..c3 at random and c0 so
that g(0) + g(1) is the claim carried in, and the next claim is g(r) by Horner's rule (common
practice, no source). Writing the twenty transcripts takes about half of the default run, which
took 369 s on the shared 2-core machine under a load average of 2 to 4 (about 200 s of it writing).

    python3 bench/check_fields.py                                   # every field, both schedules
    python3 bench/check_fields.py --fields babybear^4,bn254 --schedule stepper-sha256/2 --instances 2000 --repeat 1
"""

from __future__ import annotations

import argparse
import hashlib
import random
import struct
import sys
import tempfile
import time
from pathlib import Path
from typing import Callable, Iterator

import msgpack
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check import _child, decode_process  # noqa: E402  (same measuring helpers as bench/check.py)

from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field  # noqa: E402
from stepper.transcript.model import FieldDecl, InstanceStart, ScheduleDecl  # noqa: E402
from stepper.transcript.payloads import to_payload  # noqa: E402
from stepper.transcript.store import TranscriptWriter  # noqa: E402
from stepper.transcript.store.writer import end_payload, header_bytes  # noqa: E402
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES  # noqa: E402
from stepper.verify.schedules import schedule_for  # noqa: E402
from stepper.verify.packed_runs import layout_of  # noqa: E402

DEGREE = 3
TARGET, AIM = 3.0, 2.0
FIELDS = ("babybear", "koalabear", "mersenne31", "goldilocks", "babybear^4", "koalabear^4", "mersenne31^4",
          "goldilocks^2", "bn254", "bls12-381")
METADATA = {"label": "brackwater-ferries bench", "created": "2026-01-01T00:00:00Z"}


def field_named(name: str) -> Field:
    base, _, k = name.partition("^")
    p = NAMED_PRIMES[base]
    return get_field(p, DEFAULT_IRREDUCIBLES[(base, int(k))]) if k else get_field(p)


class Plain:
    """The arithmetic the writer needs, in plain Python integers: elements are ints (a prime field)
    or tuples of k coefficients, constant first, multiplied modulo the field's irreducible q (the
    product's coefficients of degree k and up folded back with the rows X^d mod q)."""

    def __init__(self, field: Field) -> None:
        p, k = field.p, field.degree
        self.p, self.k, self.half = p, k, pow(2, -1, p)
        self.fold: list[tuple[int, ...]] = []  # X^d mod q for d = k .. 2k - 2
        if k > 1:
            q = tuple(field.irreducible)
            power = [(-c) % p for c in q[:k]]  # X^k
            for _ in range(k, 2 * k - 1):
                self.fold.append(tuple(power))
                top = power[-1]
                power = [(c - top * qc) % p for c, qc in zip([0, *power[:-1]], q[:k])]

    def draws(self, rng: random.Random, count: int) -> list:
        """``count`` random elements (an extension's as lists of k coefficients)."""
        p, k = self.p, self.k
        if p < 2**63:  # numpy's generator, seeded from ``rng``: one call for a whole instance
            drawn = np.random.default_rng(rng.getrandbits(64)).integers(0, p, size=(count, k), dtype=np.int64)
            return drawn.ravel().tolist() if k == 1 else drawn.tolist()
        if k == 1:
            return [rng.randrange(p) for _ in range(count)]
        return [[rng.randrange(p) for _ in range(k)] for _ in range(count)]

    def round_and_next(self) -> Callable[..., tuple[list, Callable[[object], object]]]:
        """A function of (claim, c1, c2, c3): g(0..3) of g = c0 + c1 X + c2 X^2 + c3 X^3 with
        g(0) + g(1) = claim, and a function giving g(r) by Horner's rule."""
        p, half = self.p, self.half
        if self.k == 1:
            def prime(claim: int, c1: int, c2: int, c3: int) -> tuple[list, Callable[[object], object]]:
                c0 = (claim - c1 - c2 - c3) * half % p  # g(0) + g(1) = 2 c0 + c1 + c2 + c3
                evals = [c0, (claim - c0) % p, (c0 + 2 * c1 + 4 * c2 + 8 * c3) % p, (c0 + 3 * c1 + 9 * c2 + 27 * c3) % p]
                return evals, lambda r: (c0 + r * (c1 + r * (c2 + r * c3 % p) % p)) % p  # type: ignore[operator]
            return prime
        mul = self._multiply()

        def extension(claim: tuple, c1: tuple, c2: tuple, c3: tuple) -> tuple[list, Callable[[object], object]]:
            c0 = tuple((a - b - c - d) * half % p for a, b, c, d in zip(claim, c1, c2, c3))
            evals = [c0, tuple((a - b) % p for a, b in zip(claim, c0)),
                     tuple((a + 2 * b + 4 * c + 8 * d) % p for a, b, c, d in zip(c0, c1, c2, c3)),
                     tuple((a + 3 * b + 9 * c + 27 * d) % p for a, b, c, d in zip(c0, c1, c2, c3))]

            def at(r: object) -> object:
                t = mul(r, c3)
                t = mul(r, tuple(a + b for a, b in zip(c2, t)))
                t = mul(r, tuple(a + b for a, b in zip(c1, t)))
                return tuple((a + b) % p for a, b in zip(c0, t))
            return evals, at
        return extension

    def _multiply(self) -> Callable[[object, object], tuple]:
        p, k, fold = self.p, self.k, self.fold
        if k == 2:
            (w0, w1), = fold

            def mul2(a: object, b: object) -> tuple:
                a0, a1 = a  # type: ignore[misc]
                b0, b1 = b  # type: ignore[misc]
                d2 = a1 * b1
                return (a0 * b0 + d2 * w0) % p, (a0 * b1 + a1 * b0 + d2 * w1) % p
            return mul2
        if k == 4:
            (r40, r41, r42, r43), (r50, r51, r52, r53), (r60, r61, r62, r63) = fold

            def mul4(a: object, b: object) -> tuple:
                a0, a1, a2, a3 = a  # type: ignore[misc]
                b0, b1, b2, b3 = b  # type: ignore[misc]
                d4, d5, d6 = a1 * b3 + a2 * b2 + a3 * b1, a2 * b3 + a3 * b2, a3 * b3
                return ((a0 * b0 + d4 * r40 + d5 * r50 + d6 * r60) % p,
                        (a0 * b1 + a1 * b0 + d4 * r41 + d5 * r51 + d6 * r61) % p,
                        (a0 * b2 + a1 * b1 + a2 * b0 + d4 * r42 + d5 * r52 + d6 * r62) % p,
                        (a0 * b3 + a1 * b2 + a2 * b1 + a3 * b0 + d4 * r43 + d5 * r53 + d6 * r63) % p)
            return mul4

        def schoolbook(a: object, b: object) -> tuple:
            prod = [0] * (2 * k - 1)
            for i, x in enumerate(a):  # type: ignore[arg-type]
                for j, y in enumerate(b):  # type: ignore[arg-type]
                    prod[i + j] += x * y
            return tuple((prod[i] + sum(prod[k + d] * row[i] for d, row in enumerate(fold))) % p for i in range(k))
        return schoolbook


def packer_for(field: Field) -> Callable[[list], bytes]:
    """Elements to their canonical bytes, concatenated (the packed form of a round)."""
    w, k = field.base_bytes, field.degree
    if w in (4, 8):
        code = "I" if w == 4 else "Q"
        packs: dict[int, Callable[..., bytes]] = {}

        def pack(values: list) -> bytes:
            flat = values if k == 1 else [c for v in values for c in v]
            fn = packs.get(len(flat)) or packs.setdefault(len(flat), struct.Struct(f"<{len(flat)}{code}").pack)
            return fn(*flat)
        return pack
    return lambda values: b"".join(c.to_bytes(w, "little") for v in values for c in ((v,) if k == 1 else v))


def proof_events(name: str, instances: int, rounds: int, schedule: str, seed: int = 7) -> Iterator[tuple[str, object]]:
    """The events of the bench proof: ("record", record) for the field, schedule and instance events,
    ("round", packed values), ("challenge", packed element), ("final", packed element)."""
    field = field_named(name)
    plain, pack, rng = Plain(field), packer_for(field), random.Random(seed)
    sched = schedule_for(schedule)
    for record in (FieldDecl(field), ScheduleDecl(schedule, "bench")):
        sched.observe(record)
        yield "record", record
    round_head, _ = sched.row_heads(DEGREE + 1)
    absorb, challenge, round_and_next = sched.absorb_frames, sched.challenge, plain.round_and_next()
    for i in range(instances):
        claim = plain.draws(rng, 1)[0]
        claim = claim if field.degree == 1 else tuple(claim)
        start = InstanceStart(i, f"sailing-{i:05d}", rounds, DEGREE, claim)
        sched.observe(start)
        yield "record", start
        drawn = plain.draws(rng, 3 * rounds)
        for at in range(0, 3 * rounds, 3):
            evals, g_at = round_and_next(claim, *drawn[at:at + 3])
            packed = pack(evals)
            yield "round", packed
            absorb(round_head + packed)  # the round's frame, as observe(round) absorbs it
            r = challenge()
            yield "challenge", pack([r])
            claim = g_at(r)
        yield "final", pack([claim])


def write_transcript(path: Path, name: str, instances: int, rounds: int, schedule: str,
                     first: tuple[Path, int] | None = None) -> None:
    """The bench proof's bytes, laid out as TranscriptWriter lays them out, written at once; with
    ``first`` = (path, n), also the proof of its first n instances (the same events up to the n-th
    final: every challenge depends only on what came before it), sealed on its own."""
    field = field_named(name)
    layout = layout_of(DEGREE + 1, field.elem_bytes)
    prefix = {"round": layout.round_prefix, "challenge": layout.challenge_prefix, "final": layout.final_prefix}
    packer = msgpack.Packer(use_bin_type=True)
    parts, events, finals = [header_bytes(METADATA)], 0, 0

    def seal(target: Path) -> None:
        body = b"".join(parts)
        target.write_bytes(body + packer.pack(end_payload(events, hashlib.sha256(body).digest())))

    for kind, item in proof_events(name, instances, rounds, schedule):
        events += 1
        if kind == "record":
            parts.append(packer.pack(to_payload(item, field, binary=True, packed=True)))  # type: ignore[arg-type]
            continue
        parts.append(prefix[kind])
        parts.append(item)  # type: ignore[arg-type]
        if kind == "final":
            finals += 1
            if first is not None and finals == first[1]:
                seal(first[0])
    seal(path)


def write_with_the_writer(path: Path, name: str, instances: int, rounds: int, schedule: str) -> None:
    """The same proof through stepper's TranscriptWriter, event by event (validated)."""
    with TranscriptWriter(path, metadata=METADATA) as out:
        for kind, item in proof_events(name, instances, rounds, schedule):
            if kind == "record":
                out.write(item)  # type: ignore[arg-type]
            else:
                out.write_payload({"type": kind, "evals" if kind == "round" else "value": item})


def assert_written_as_the_writer_would(tmp: Path, names: list[str], schedules: list[str]) -> None:
    for name in names:
        for schedule in schedules:
            fast, slow = tmp / "fast.sumtr", tmp / "slow.sumtr"
            fast_first, slow_first = tmp / "fast-first.sumtr", tmp / "slow-first.sumtr"
            write_transcript(fast, name, 3, 4, schedule, (fast_first, 2))
            write_with_the_writer(slow, name, 3, 4, schedule)
            write_with_the_writer(slow_first, name, 2, 4, schedule)
            for mine, writers in ((fast, slow), (fast_first, slow_first)):
                assert mine.read_bytes() == writers.read_bytes(), f"the bench writes {name} otherwise than TranscriptWriter"


def hashing_floor(name: str, schedule: str, rounds: int) -> float:
    """CPU seconds of the schedule's hashlib calls alone for ``rounds`` rounds of degree 3."""
    t0 = time.process_time()
    _floor_calls(*_floor_sizes(name, schedule), rounds)
    return time.process_time() - t0


def floor_process(name: str, schedule: str, rounds: int) -> float:
    """CPU seconds of a fresh process that imports numpy and makes the hashlib calls of
    :func:`hashing_floor` for ``rounds`` rounds (its source, run with ``-c``)."""
    import inspect

    sizes = ", ".join(map(str, _floor_sizes(name, schedule)))
    source = "\n".join(("import numpy", inspect.getsource(_floor_calls), f"_floor_calls({sizes}, {rounds})"))
    _, cpu, _, code = _child([sys.executable, "-c", source])
    assert code == 0, "the floor process failed"
    return cpu


def _floor_sizes(name: str, schedule: str) -> tuple[int, int, int, int]:
    """Under the schedule in the field ``name``: the squeezes made from a copy of the state per
    challenge (/1: SHA-256 blocks per base sample times the degree; /2: none), the one-shot hashes
    of later blocks (/2: B - 1; /1: none), and the bytes of a degree-3 round's frame and of a
    challenge's frame."""
    field = field_named(name)
    sched = schedule_for(schedule)
    sched.observe(FieldDecl(field))
    blocks = -(-sched.wide_bytes // 32)
    copies, one_shots = (0, blocks - 1) if sched.whole_element else (sched.squeezes_per_challenge, 0)
    return copies, one_shots, 22 + (DEGREE + 1) * field.elem_bytes, 18 + field.elem_bytes


def _floor_calls(copies: int, one_shots: int, round_bytes: int, challenge_bytes: int, rounds: int) -> None:
    """The schedule's hashlib calls per round, on zero bytes of the real lengths (also run in a child)."""
    import hashlib

    frames = [bytes(33 + i) for i in range(copies)]
    tails = [bytes(8)] * one_shots
    round_frame, challenge = bytes(round_bytes), bytes(challenge_bytes)
    state = hashlib.sha256(b"stepper-sha256")
    update, copy, digest, sha256 = state.update, state.copy, state.digest, hashlib.sha256
    for _ in range(rounds):
        update(round_frame)
        if frames:
            for squeeze in frames:
                h = copy()
                h.update(squeeze)
                h.digest()
        else:
            first = digest()
            for tail in tails:
                sha256(first + tail).digest()
        update(challenge)


def run_check(path: Path) -> tuple[float, float]:
    """CPU seconds and peak resident MB of `python3 -m stepper check FILE` in a fresh process."""
    _, cpu, rss, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"the bench transcript {path.name} should be accepted, check exited {code}"
    return cpu, rss


def measure(names: list[str], schedules: list[str], instances: int, rounds: int, repeat: int,
            tmp: Path) -> list[dict]:
    """Per field, the rows of each schedule. The files of one field have the same layout and size
    under either schedule (only the challenges' bytes differ), so a field's decode is the best of
    every decode of its files: one denominator for its rows, less at the mercy of one slow spell."""
    rows = []
    for name in names:
        field_rows = []
        for schedule in schedules:
            tag = schedule.rpartition("/")[2]
            large, small = tmp / f"{name}-{tag}.sumtr", tmp / f"{name}-{tag}-tenth.sumtr"
            t0 = time.perf_counter()
            write_transcript(large, name, instances, rounds, schedule, (small, max(1, instances // 10)))
            written = time.perf_counter() - t0
            decodes, checks, floors, processes = [], [], [], []
            for _ in range(repeat):  # interleaved: a slow spell of the machine slows both
                decodes.append(decode_process(large))
                checks.append(run_check(large))
                floors.append(hashing_floor(name, schedule, instances * rounds))
                processes.append(floor_process(name, schedule, instances * rounds))
            field_rows.append({"field": name, "schedule": schedule, "mb": large.stat().st_size / 1e6,
                               "decode": min(decodes), "check": min(c[0] for c in checks), "floor_s": min(floors),
                               "process_s": min(processes), "rss_large": min(c[1] for c in checks),
                               "rss_small": run_check(small)[1], "written": written})
            large.unlink()
            small.unlink()
        decode = min(row["decode"] for row in field_rows)
        for row in field_rows:
            row.update(decode=decode, ratio=row["check"] / decode, floor=row["floor_s"] / decode,
                       process=row["process_s"] / decode)
            print(f"  {name:13s} {row['schedule']}  {row['mb']:6.1f} MB  decode {decode:6.3f} s  check "
                  f"{row['check']:6.3f} s  {row['ratio']:5.1f}x (target <= {TARGET:.0f}x); hashing alone "
                  f"{row['floor']:.1f}x, floor process {row['process']:.1f}x; written in {row['written']:.1f} s",
                  flush=True)
        rows.extend(field_rows)
    return rows


def chosen_fields(spec: str, script: str) -> list[str]:
    """The field names of a comma-separated ``--fields`` value; exit 2 with one line naming any unknown."""
    names = [n for n in spec.split(",") if n]
    unknown = [n for n in names if n not in FIELDS]
    if unknown:
        print(f"{script}: expected --fields among {', '.join(FIELDS)}, found {', '.join(unknown)}", file=sys.stderr)
        raise SystemExit(2)
    return names


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--fields", default=",".join(FIELDS), help="comma-separated names (default: all)")
    parser.add_argument("--schedule", choices=(*BUILTIN_SCHEDULES, "both"), default="both",
                        help="the built-in schedule the transcripts use (default: both, one row each)")
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=24)
    parser.add_argument("--repeat", type=int, default=3)
    return parser.parse_args()


def main() -> None:
    args = parse_args()
    started = time.perf_counter()
    names = chosen_fields(args.fields, "check_fields.py")
    schedules = list(BUILTIN_SCHEDULES) if args.schedule == "both" else [args.schedule]
    print(f"{args.instances} instances x {args.rounds} rounds, degree {DEGREE}; CPU seconds, fresh processes, "
          f"best of {args.repeat} interleaved")
    with tempfile.TemporaryDirectory() as tmp:
        assert_written_as_the_writer_would(Path(tmp), names, schedules)
        rows = measure(names, schedules, args.instances, args.rounds, args.repeat, Path(tmp))
    print(f"\n| field | schedule | file MB | check / decode | target | SHA-256 calls alone / decode "
          f"| floor process / decode | peak MB ({args.instances // 10} -> {args.instances} instances) |")
    print("|---|---|---|---|---|---|---|---|")
    for row in rows:
        mark = "ok" if row["ratio"] <= TARGET else "MISSED"
        print(f"| {row['field']} | {row['schedule']} | {row['mb']:.1f} | {row['ratio']:.1f}x | <= {TARGET:.0f}x "
              f"(aim {AIM:.0f}x) {mark} | {row['floor']:.1f}x | {row['process']:.1f}x | "
              f"{row['rss_small']:.0f} -> {row['rss_large']:.0f} |")
    if len(schedules) > 1:
        print("\nA file keeps the schedule it was written with: stepper-sha256/1 files (what `stepper prove` writes "
              "by default, and every file from before stepper-sha256/2) stay at their /1 figure, because their "
              "challenges can only be re-derived the /1 way (k squeezes per challenge in a degree-k extension, two "
              "blocks each above 128 bits). Provers that declare stepper-sha256/2 get the /2 figure.")
    print(f"\n(bench/check_fields.py: {time.perf_counter() - started:.0f} s in all)")


if __name__ == "__main__":
    main()
