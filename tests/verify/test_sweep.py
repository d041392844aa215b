"""stepper.verify.sweep and its use by `stepper check`: the block sweep gives the same answer as
the event-by-event replay, takes the regular honest transcripts, and gives up on everything else.

The independent side is a sumcheck prover written here with plain integers (tests/plain_sumcheck.py
arithmetic): each round polynomial is drawn as coefficients c0..ce with g(0)+g(1) = 2 c0 + c1 + ... + ce
equal to the carried claim, sent in the instance's form, and the next claim is g(r) by Horner's rule
(common practice, no source). Challenges come from the built-in schedule (transcripts/FIAT-SHAMIR.md,
observed record by record as a prover would), or are random when no schedule or a foreign one is declared.
Moduli: Goldilocks 2^64 - 2^32 + 1, BabyBear 2^31 - 2^27 + 1, KoalaBear 2^31 - 2^24 + 1 (common practice,
no source), 65521 and 2^64 - 59 (largest primes below 2^16 and 2^64, from memory; sympy.isprime checks them
in tests/verify/test_roundblock.py), 97, the BN254 scalar field (EIP-197, from memory), the BLS12-381 scalar
field (IETF draft-irtf-cfrg-pairing-friendly-curves, section 4.2.1); the quartic extensions of BabyBear by
X^4 - 11 and KoalaBear by X^4 - 3, the quadratic extension of Goldilocks by X^2 - 7 (from memory) and the
cubic extension of F_97 by X^3 - 5 (5 is not a cube mod 97 since 3 divides 96 and 5^32 != 1 mod 97; stepper's
field constructor checks irreducibility of each).
"""

from __future__ import annotations

import hashlib
import random
import sys
from dataclasses import dataclass, field as dataclass_field
from pathlib import Path
from typing import Any

import msgpack
import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings, strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared plain-integer arithmetic

from plain_sumcheck import BN254, Elem, Plain  # noqa: E402
from stepper.cli.check_text import render  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.verify.fiatshamir import ONE_DIGEST_SCHEDULE_NAME, SCHEDULE_NAME  # noqa: E402
from stepper.verify.schedules import schedule_for  # noqa: E402
import stepper.verify.packed_runs as packed_runs  # noqa: E402
import stepper.verify.sweep as sweep_module  # noqa: E402
import stepper.verify.fiatshamir as fiatshamir_module  # noqa: E402
import stepper.verify.frames as frames_module  # noqa: E402
import stepper.verify.glue_columns as glue_columns_module  # noqa: E402
import stepper.verify.glue_texts as glue_texts_module  # noqa: E402
from stepper.transcript.store import TranscriptWriter, append_note, open_events  # noqa: E402
from stepper.transcript.store.reader import ReadLimits  # noqa: E402
from stepper.verify.glue_columns import GlueColumns  # noqa: E402
from stepper.verify.sweep import sweep  # noqa: E402
from stepper.transcript.store.writer import MAGIC, end_payload  # noqa: E402
from stepper.transcript.model import Note  # noqa: E402
from stepper.verify.replay import Replay, Report  # noqa: E402

REPO = Path(__file__).parents[2]
GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source
KOALABEAR = 2**31 - 2**24 + 1  # common practice, no source
MERSENNE31 = 2**31 - 1  # common practice, no source; its quartic u^4 - 4u^2 + 5 is not a binomial (from memory)
# 2^100 - 15, the largest prime below 2^100 (sympy.prevprime(2**100)); X^3 + X + 5 irreducible over it (galois
# Poly.is_irreducible): both computed once with those libraries, and stepper's field constructor checks the cubic
P100 = 2**100 - 15
BLS12_381 = 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001  # IETF pairing-friendly-curves draft, 4.2.1

# name -> (arithmetic, field event, whether the sweep checks its rounds by the block)
FIELDS = {
    "goldilocks": (Plain(GOLDILOCKS), {"type": "field", "name": "goldilocks"}, True),
    "babybear": (Plain(BABYBEAR), {"type": "field", "name": "babybear"}, True),
    "koalabear": (Plain(KOALABEAR), {"type": "field", "name": "koalabear"}, True),
    "p97": (Plain(97), {"type": "field", "modulus": 97}, True),
    "p65521": (Plain(65521), {"type": "field", "modulus": 65521}, True),
    "p64": (Plain(2**64 - 59), {"type": "field", "modulus": str(2**64 - 59)}, True),
    "babybear^4": (Plain(BABYBEAR, 4, 11), Plain(BABYBEAR, 4, 11).spec(), True),
    "koalabear^4": (Plain(KOALABEAR, 4, 3), {"type": "field", "name": "koalabear", "extension_degree": 4}, True),
    "goldilocks^2": (Plain(GOLDILOCKS, 2, 7), {"type": "field", "name": "goldilocks", "extension_degree": 2}, True),
    "p97^3": (Plain(97, 3, 5), Plain(97, 3, 5).spec(), True),
    "mersenne31": (Plain(MERSENNE31), {"type": "field", "name": "mersenne31"}, True),
    "mersenne31^4": (Plain(MERSENNE31, 4, q=(5, 0, MERSENNE31 - 4, 0, 1)),
                     {"type": "field", "name": "mersenne31", "extension_degree": 4}, True),
    "bn254": (Plain(BN254), {"type": "field", "name": "bn254"}, True),
    "bn254^2": (Plain(BN254, 2, 5), Plain(BN254, 2, 5).spec(), True),  # 5^((p-1)/2) = -1 mod p: X^2 - 5 irreducible
    "bls12-381": (Plain(BLS12_381), {"type": "field", "name": "bls12-381"}, True),
    # a 100-bit prime over a cubic that is not a binomial: under stepper-sha256/2 bits(p^3) = 300, two blocks
    "p100^3": (Plain(P100, 3, q=(5, 1, 0, 1)), Plain(P100, 3, q=(5, 1, 0, 1)).spec(), True),
}
FORMS = ("evals", "evals-no-1", "coeffs", "coeffs-no-linear")
FAULTS = ("eval", "challenge", "final", "claim", "degree", "truncate", "flip", "noncanonical")
FILE_FAULTS = ("truncate", "flip", "noncanonical")
GLUE_FAULTS = ("link", "evaluation", "squeeze")  # a claim off its claim_expr, an opening off, a squeeze not derived
BUILTIN_KNOBS = {"builtin": SCHEDULE_NAME, "builtin2": ONE_DIGEST_SCHEDULE_NAME}  # Knobs.schedule -> the declared name

# final_expr texts (instance i; value w{i} is its point, sent before it) with F, the part without -c{i}:
# c{i} = F - the reduced claim makes the evaluation hold. Several texts, so the sweep groups by template.
EVALUATIONS = (
    ("eq(w{i}) * (a{i}*b{i}) - c{i}", lambda ar, e, w, a, b: ar.mul(e, ar.mul(a, b))),
    ("eq(w{i}, w{i}) * a{i}^2 + 3*b{i} - c{i}",
     lambda ar, e, w, a, b: ar.add(ar.mul(eq_plain(ar, w, w), ar.mul(a, a)), ar.mul(ar.const(3), b))),
    ("a{i} * w{i}[0] - (c{i} - b{i})", lambda ar, e, w, a, b: ar.add(ar.mul(a, w[0]), b)),
    ("-c{i} + eq(w{i})^2 * 7 + a{i} - b{i}",
     lambda ar, e, w, a, b: ar.sub(ar.add(ar.mul(ar.mul(e, e), ar.const(7)), a), b)),
)
# claim_expr texts over the previous instance j's openings and squeeze, with their value
LINKS = (
    ("a{j} + beta{j}*b{j}", lambda ar, a, b, c, beta: ar.add(a, ar.mul(beta, b))),
    ("(1 - beta{j}) * c{j} + beta{j}^2 * a{j}",
     lambda ar, a, b, c, beta: ar.add(ar.mul(ar.sub(ar.const(1), beta), c), ar.mul(ar.mul(beta, beta), a))),
)


def eq_plain(ar: Plain, x: list[Elem], y: list[Elem]) -> Elem:
    """eq(x, y) = prod_j (x_j y_j + (1 - x_j)(1 - y_j)) (common practice, no source)."""
    acc, one = ar.const(1), ar.const(1)
    for a, b in zip(x, y):
        acc = ar.mul(acc, ar.add(ar.mul(a, b), ar.mul(ar.sub(one, a), ar.sub(one, b))))
    return acc


# ----- the independent prover ------------------------------------------------------------


@dataclass
class Knobs:
    """What a generated transcript may contain (each feature hits some instances when on)."""

    field: str = "goldilocks"
    schedule: str = "builtin"  # stepper-sha256/1; or "builtin2" (stepper-sha256/2), "none", "foreign"
    instances: int = 6
    max_vars: int = 6
    max_degree: int = 3
    degrees: tuple[int, ...] = ()  # when given, instance i has degree degrees[i % len(degrees)]
    fewer: bool = False  # rounds with fewer evaluations than degree + 1
    compressed: bool = False  # forms other than evals
    batch: bool = False
    extras: bool = False  # notes and buckets before and between instances
    between_rounds: bool = False  # notes between rounds (the sweep must give up on such a run)
    no_final: bool = False
    ragged: bool = False  # an instance whose rounds carry different numbers of values
    glue: bool = False  # every instance: a point value before it, final_expr, openings and a squeeze after
    # it, and claim_expr over the previous instance's glue (not on batched instances)
    appended: int = 0  # notes appended after the end event
    names: tuple[str, ...] = ()  # when given, instance i is named names[i % len(names)] + its index
    glue_after_only: bool = False  # with glue: only the openings and squeezes after each run (no point
    # value before an instance, no claim_expr or final_expr)
    glue_every: int = 1  # with glue: only instances i with i % glue_every == 0 carry it
    low_first: bool = False  # every instance low-first (no order key: runs of plain instances in a row)
    num_vars: int = 0  # when given, every instance has that many variables (else 1 to max_vars)
    fault: str | None = None
    seed: int = 0


@dataclass
class Written:
    path: Path
    regular: bool  # every instance is one run the sweep takes (and no file fault)
    sealed: int = 0  # bytes up to the end of the end event
    damaged: int | None = None  # offset of a truncation or flipped byte
    offsets: list[tuple[str, int, int]] = dataclass_field(default_factory=list)  # (kind, start, end) per event


def element(ar: Plain, rng: random.Random) -> Elem:
    return rng.randrange(ar.p) if ar.k == 1 else tuple(rng.randrange(ar.p) for _ in range(ar.k))


def horner(ar: Plain, coeffs: list[Elem], x: Elem) -> Elem:
    acc = ar.const(0)
    for c in reversed(coeffs):
        acc = ar.add(ar.mul(acc, x), c)
    return acc


def round_poly(ar: Plain, rng: random.Random, claim: Elem, e: int) -> list[Elem]:
    """Coefficients c0..ce of a random g with g(0) + g(1) = claim."""
    if e == 0:
        return [ar.mul(claim, ar.const(pow(2, -1, ar.p)))]
    coeffs = [element(ar, rng) for _ in range(e + 1)]
    rest = ar.mul(ar.const(2), coeffs[0])
    for c in coeffs[2:]:
        rest = ar.add(rest, c)
    coeffs[1] = ar.sub(claim, rest)
    return coeffs


def sent_values(ar: Plain, form: str, coeffs: list[Elem]) -> list[Elem]:
    """What a round of this form carries (transcripts/FORMAT.md)."""
    e = len(coeffs) - 1
    if form == "evals":
        return [horner(ar, coeffs, ar.const(x)) for x in range(e + 1)]
    if form == "evals-no-1":
        return [horner(ar, coeffs, ar.const(x)) for x in (0, *range(2, e + 1))]
    if form == "coeffs":
        return list(coeffs)
    return [coeffs[0], *coeffs[2:]]


def bump(ar: Plain, value: Elem) -> Elem:
    return ar.add(value, ar.const(1))


def write_transcript(path: Path, knobs: Knobs) -> Written:
    """Write a transcript per ``knobs`` with TranscriptWriter; returns where each event lies."""
    ar, field_event, block_field = FIELDS[knobs.field]
    rng = random.Random(knobs.seed)
    declared = BUILTIN_KNOBS.get(knobs.schedule)
    schedule = schedule_for(declared) if declared is not None else None
    writer = TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"})
    offsets: list[tuple[str, int, int]] = []
    regular = block_field and knobs.fault not in FILE_FAULTS and knobs.fault != "degree"
    fault_instance = rng.randrange(1 if knobs.fault in GLUE_FAULTS and knobs.instances > 1 else 0, knobs.instances)
    previous: tuple[int, Elem, Elem, Elem, Elem] | None = None  # the last instance's j, a, b, c, beta
    any_ragged = False

    def put(payload: dict) -> None:
        before = path.stat().st_size
        record = writer.write_payload(payload)
        offsets.append((payload["type"], before, path.stat().st_size))
        if schedule is not None:
            schedule.observe(record)

    def extra(where: str) -> None:
        if rng.random() < 0.5:
            put({"type": "note", "text": f"gate scanner note {where}", **({"round": 1} if rng.random() < .3 else {})})
        elif writer.events > 1 and any(kind == "instance" for kind, _, _ in offsets):
            put({"type": "buckets", "round": 1, "chunk": rng.randrange(4), "count": 3, "sizes": [2, 0, 1]})
        else:
            put({"type": "ferry-office-tally", "cars": rng.randrange(90)})  # an unknown event type

    put(field_event)
    if declared is not None:
        put({"type": "schedule", "name": declared, "label": "brackwater-ferries"})
    elif knobs.schedule == "foreign":
        put({"type": "schedule", "name": "ferry-office-transcript/3", "label": "gate"})
    for i in range(knobs.instances):
        faulty = knobs.fault if i == fault_instance else None
        if knobs.extras and rng.random() < 0.3:
            extra(f"before instance {i}")
        num_vars = knobs.num_vars or rng.randint(1, knobs.max_vars)
        degree = knobs.degrees[i % len(knobs.degrees)] if knobs.degrees else rng.randint(1, knobs.max_degree)
        form = rng.choice(FORMS[1:]) if knobs.compressed and rng.random() < 0.4 else "evals"
        e = rng.randint(0 if form in ("evals", "coeffs") else 1, degree) if knobs.fewer else degree
        ragged = knobs.ragged and num_vars > 1 and (rng.random() < 0.3 or not any_ragged)
        any_ragged = any_ragged or ragged
        final = not (knobs.no_final and rng.random() < 0.3) or faulty == "final"
        claim = element(ar, rng)
        batched = knobs.batch and rng.random() < 0.3
        glue_keys: dict[str, str] = {}
        glued = knobs.glue and i % knobs.glue_every == 0
        if glued:
            w = [element(ar, rng) for _ in range(num_vars)]
            if not knobs.glue_after_only:
                put({"type": "value", "name": f"w{i}", "value": [ar.json(x) for x in w]})
            evaluation = rng.choice(EVALUATIONS)
            if not knobs.glue_after_only:
                glue_keys["final_expr"] = evaluation[0].format(i=i)
            if previous is not None and not batched and not knobs.glue_after_only:
                link = rng.choice(LINKS)
                glue_keys["claim_expr"] = link[0].format(j=previous[0])
                claim = link[1](ar, *previous[1:])
                if faulty == "link":
                    claim = bump(ar, claim)
        if batched:
            coefficient, terms = element(ar, rng), [element(ar, rng) for _ in range(rng.randint(1, 3))]
            claim, power = ar.const(0), ar.const(1)
            for term in terms:
                claim, power = ar.add(claim, ar.mul(power, term)), ar.mul(power, coefficient)
            put({"type": "batch", "coefficient": ar.json(coefficient), "terms": [ar.json(t) for t in terms]})
        name = f"{knobs.names[i % len(knobs.names)]}{i}" if knobs.names else f"boarding-permutation-{i}"
        drawn_order = rng.choice(["low-first", "high-first"])  # drawn either way: the same file otherwise
        put({"type": "instance", "name": name, "num_vars": num_vars, "degree": degree,
             "claim": ar.json(bump(ar, claim) if faulty == "claim" else claim), "form": form,
             "order": (order := "low-first" if knobs.low_first else drawn_order), **glue_keys})
        regular = regular and form == "evals" and not batched and final and not ragged
        fault_round = rng.randint(1, num_vars)
        challenges: list[Elem] = []
        for k in range(1, num_vars + 1):
            if knobs.between_rounds and rng.random() < 0.15:
                extra(f"in instance {i} before round {k}")
                regular = False
            size = (degree if k % 2 else int(form not in ("evals", "coeffs"))) if ragged else e
            coeffs = round_poly(ar, rng, claim, size)
            values = sent_values(ar, form, coeffs)
            if faulty == "eval" and k == fault_round:
                j = rng.randrange(len(values))
                values[j] = bump(ar, values[j])
            if faulty == "degree" and k == fault_round:
                values = values + [element(ar, rng)] * (degree + 2 - len(values))
            put({"type": "round", "evals": [ar.json(v) for v in values]})
            r = schedule.challenge() if schedule is not None else element(ar, rng)
            recorded = bump(ar, r) if faulty == "challenge" and k == fault_round else r
            put({"type": "challenge", "value": ar.json(recorded)})
            challenges.append(recorded)
            claim = horner(ar, coeffs, r)
        if final:
            put({"type": "final", "value": ar.json(bump(ar, claim) if faulty == "final" else claim)})
        if glued:  # openings that make final_expr hold at the instance's point, then a squeeze
            point = challenges if order == "low-first" else challenges[::-1]
            a, b = element(ar, rng), element(ar, rng)
            c = ar.sub(evaluation[1](ar, eq_plain(ar, w, point), w, a, b), claim)
            if faulty == "evaluation":
                c = bump(ar, c)
            for name, value in ((f"a{i}", a), (f"b{i}", b), (f"c{i}", c)):
                table = {"table": f"deck.{name}"} if rng.random() < 0.3 else {}  # a table named apart
                put({"type": "opening", "name": name, "value": ar.json(value), **table})
            beta = schedule.squeeze(f"beta{i}") if schedule is not None else element(ar, rng)
            put({"type": "squeeze", "name": f"beta{i}", "value": ar.json(bump(ar, beta) if faulty == "squeeze"
                                                                        else beta)})
            if rng.random() < 0.3:  # a point squeezed as a list
                gamma = schedule.squeeze(f"gamma{i}", 2) if schedule is not None else (element(ar, rng),) * 2
                put({"type": "squeeze", "name": f"gamma{i}", "value": [ar.json(g) for g in gamma]})  # type: ignore[union-attr]
            previous = (i, a, b, c, beta)
    writer.close()
    body = path.read_bytes()
    path.write_bytes(body + seal(body, writer.events))
    sealed, damaged = path.stat().st_size, None
    for n in range(knobs.appended):
        append_note(path, Note(f"dock office remark {n}", rng.randrange(knobs.instances), None))
    if knobs.fault == "noncanonical":  # a value >= p in the sealed part, sealed again over it
        raw = bytearray(body)
        _, _, end = rng.choice([o for o in offsets if o[0] in ("round", "challenge", "final")])
        width = (ar.p.bit_length() + 7) // 8
        cell = int.from_bytes(raw[end - width:end], "little")
        raw[end - width:end] = min(cell + ar.p, 256**width - 1).to_bytes(width, "little")  # same residue if it fits
        path.write_bytes(bytes(raw) + seal(bytes(raw), writer.events) + path.read_bytes()[sealed:])
    if knobs.fault == "truncate":
        data = path.read_bytes()
        damaged = rng.randrange(len(MAGIC), len(data))
        path.write_bytes(data[:damaged])
    elif knobs.fault == "flip":
        data = bytearray(path.read_bytes())
        damaged = rng.randrange(len(data))
        data[damaged] ^= 1 << rng.randrange(8)
        path.write_bytes(bytes(data))
    return Written(path, regular, sealed, damaged, offsets)


def seal(body: bytes, events: int) -> bytes:
    """The end event TranscriptWriter.finish appends (transcripts/FORMAT.md): count and SHA-256."""
    return msgpack.packb(end_payload(events, hashlib.sha256(body).digest()), use_bin_type=True)


def test_seal_gives_a_complete_verified_transcript(tmp_path):
    written = write_transcript(tmp_path / "sealed.sumtr", Knobs(instances=2, appended=1))
    with open_events(written.path) as stream:
        records = list(stream)
    assert (stream.completeness, stream.digest, stream.appended) == ("complete", "verified", 1)
    assert len(records) == len(written.offsets) + 1  # every event written, and the appended note


# ----- running both ways ------------------------------------------------------------------


def returns_of(monkeypatch: pytest.MonkeyPatch, owner: object, name: str) -> list[Any]:
    """What ``owner.name`` (a module's function or a class's method) returns at each call while the test
    runs; the function itself still does its work."""
    seen: list[Any] = []
    real = getattr(owner, name)

    def spy(*args: Any) -> Any:
        seen.append(real(*args))
        return seen[-1]

    monkeypatch.setattr(owner, name, spy)
    return seen


class SweepSpy:
    """Wraps stepper.verify.sweep.sweep (what `stepper check` calls) and keeps what it returned."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.results: list[object] = []

        def spy(*args: object, **kwargs: object) -> object:
            result = sweep(*args, **kwargs)
            self.results.append(result)
            return result

        monkeypatch.setattr(sweep_module, "sweep", spy)


def check_both(capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch, path: Path,
               *flags: str) -> tuple[int, str, str, object]:
    """`stepper check` with the sweep on (for files of any size) and off: asserts identical
    stdout, stderr and exit code; returns them and what the sweep returned."""
    spy = SweepSpy(monkeypatch)
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    code_on = main(["check", str(path), *flags])
    on = capsys.readouterr()
    monkeypatch.setenv("STEPPER_SWEEP", "off")
    code_off = main(["check", str(path), *flags])
    off = capsys.readouterr()
    monkeypatch.delenv("STEPPER_SWEEP")
    assert (code_on, on.out, on.err) == (code_off, off.out, off.err)
    assert code_on in (0, 1, 2, 3) and on.err.count("\n") <= 1
    assert spy.results[-1] is None  # STEPPER_SWEEP=off turns it off
    return code_on, on.out, on.err, spy.results[0] if len(spy.results) == 2 else None


# ----- 2. the shipped transcripts and generated ones: same output, sweep on or off ---------

SHIPPED = sorted((REPO / "transcripts").glob("*/*.sumtr"))


@pytest.mark.parametrize("path", SHIPPED, ids=[p.name for p in SHIPPED])
@pytest.mark.parametrize("rows", ["20", "0", "1", "5"])
def test_shipped_transcripts_check_the_same_with_the_sweep_on_or_off(capsys, monkeypatch, path, rows):
    code, out, _, swept = check_both(capsys, monkeypatch, path, "--rows", rows)
    assert out.startswith(f"stepper check {path}")
    if swept is not None:  # never on an incomplete or corrupt file
        assert code in (0, 1)


HONEST_SHIPPED = [REPO / "transcripts" / "samples" / name for name in
                  ("boarding-jsonl.sumtr", "deck-channel-adapter.sumtr", "sailing-recorder.sumtr")] + [
                  REPO / "transcripts" / "ferries" / name for name in
                  ("ferries-honest.sumtr", "ferries-direct.sumtr", "ferries-compressed.sumtr",
                   "ferries-fingerprint.sumtr")]


@pytest.mark.parametrize("path", HONEST_SHIPPED, ids=[p.name for p in HONEST_SHIPPED])
def test_the_sweep_takes_the_honest_shipped_transcripts_glue_included(capsys, monkeypatch, path):
    # the sailing's proofs carry glue (values, openings, squeezes, claim_expr, final_expr) and a batched or
    # compressed instance, which the sweep hands to the replay while it takes the others as runs
    code, _, _, swept = check_both(capsys, monkeypatch, path)
    assert code == 0 and swept is not None
    assert_same_report(path, 20)


RARE = st.sampled_from([False, False, False, True])  # so that many transcripts stay regular


@settings(max_examples=140, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(knobs=st.builds(
    Knobs,
    field=st.sampled_from(sorted(FIELDS)),
    schedule=st.sampled_from(["builtin", "builtin", "builtin2", "none", "foreign"]),
    instances=st.integers(1, 30), max_vars=st.integers(1, 8), max_degree=st.integers(1, 4),
    fewer=st.booleans(), compressed=RARE, batch=RARE, extras=st.booleans(), between_rounds=RARE, no_final=RARE,
    ragged=RARE, appended=st.integers(0, 2), glue=st.booleans(),
    fault=st.sampled_from((None,) * len(FAULTS) + FAULTS + GLUE_FAULTS), seed=st.integers(0, 2**32)),
    rows=st.sampled_from(["0", "1", "5", "20"]))
def test_generated_transcripts_check_the_same_with_the_sweep_on_or_off(tmp_path, capsys, monkeypatch, knobs, rows):
    written = write_transcript(tmp_path / "generated.sumtr", knobs)
    code, _, _, swept = check_both(capsys, monkeypatch, written.path, "--rows", rows)
    event(f"exit {code}, {'regular' if written.regular else 'irregular'}, {'swept' if swept else 'gave up'}, "
          f"{'glue' if knobs.glue else 'no glue'}")
    if swept is not None:  # it gives up on incomplete and corrupt files, and on failing runs
        assert code in (0, 1)
    if swept is not None and code == 0:  # glue included: the replay's report (a failure around an instance
        assert_same_report(written.path, 20)  # not taken as a run is the replay's own, so code 1 may sweep)
    if knobs.fault == "noncanonical" or (written.damaged is not None and written.damaged < written.sealed):
        assert swept is None  # damage inside the sealed part (appended notes are outside the digest)
    if written.regular:  # every instance one run: taken exactly when the proof passes
        assert (swept is not None) == (code == 0)


# ----- 3. the sweep is not vacuous, and gives up on every fault ---------------------------


def event_by_event(path: Path, keep: int) -> tuple[Report, list[Note]]:
    replay = Replay(keep_instances=keep, emit_passing=False)
    notes: list[Note] = []
    with open_events(path) as stream:
        replay.feed_all(stream, on_other=lambda r: notes.append(r) if isinstance(r, Note) else None)
        completeness = stream.completeness
    return replay.report(completeness), notes


def swept_report(path: Path, keep: int, limits: ReadLimits | None = None) -> tuple[Report, list[Note]] | None:
    replay = Replay(keep_instances=keep, emit_passing=False)
    notes: list[Note] = []
    result = sweep(path, replay, notes.append, limits)
    if result is None:
        return None
    assert (result.completeness, result.digest) == ("complete", "verified")
    return replay.report(result.completeness), notes


def assert_same_report(path: Path, keep: int, limits: ReadLimits | None = None) -> None:
    got = swept_report(path, keep, limits)
    assert got is not None, "the sweep gave up on a regular honest transcript"
    (report, notes), (expected, expected_notes) = got, event_by_event(path, keep)
    assert report.verdict == "accept"
    assert report.to_json() == expected.to_json()
    assert (report.instances, report.counts, report.soundness) == (expected.instances, expected.counts,
                                                                   expected.soundness)
    assert notes == expected_notes
    assert render(report, str(path), notes, len(notes), False, keep) == \
        render(expected, str(path), expected_notes, len(expected_notes), False, keep)


@pytest.mark.parametrize("field", sorted(FIELDS))
@pytest.mark.parametrize("schedule", ["builtin", "builtin2", "none"])
def test_sweep_takes_a_regular_honest_transcript_and_reports_as_the_replay(tmp_path, field, schedule):
    knobs = Knobs(field=field, schedule=schedule, instances=12, max_vars=8, max_degree=4, extras=True, appended=2,
                  seed=11)
    written = write_transcript(tmp_path / "regular.sumtr", knobs)
    assert written.regular
    assert_same_report(written.path, 20)


def test_sweep_takes_rounds_of_fewer_evaluations_and_several_layouts(tmp_path):
    knobs = Knobs(field="koalabear", instances=20, max_degree=4, fewer=True, seed=5)
    written = write_transcript(tmp_path / "fewer.sumtr", knobs)
    assert_same_report(written.path, 20)


def test_sweep_takes_long_rounds_packed_as_bin16_between_short_ones(tmp_path):
    # degree up to 80 over Goldilocks: rounds of more than 255 bytes of values (msgpack bin 16)
    knobs = Knobs(field="goldilocks", instances=12, max_vars=4, max_degree=80, fewer=True, seed=16)
    written = write_transcript(tmp_path / "long.sumtr", knobs)
    sizes = [end - start for kind, start, end in written.offsets if kind == "round"]
    assert max(sizes) > 270 and min(sizes) < 250
    assert_same_report(written.path, 20)


def test_sweep_keeps_the_schedule_state_across_blocks_and_chunks(tmp_path, monkeypatch):
    # blocks of 5 rounds and 97-byte reads: runs split across blocks and across refills
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 5)
    written = write_transcript(tmp_path / "blocks.sumtr", Knobs(instances=15, max_vars=8, extras=True, seed=3))
    assert_same_report(written.path, 20, ReadLimits(chunk_bytes=97))
    assert_same_report(written.path, 3, ReadLimits(chunk_bytes=4096))


def test_fifty_instances_keeping_two_give_the_same_summaries_counts_and_soundness(tmp_path):
    knobs = Knobs(field="goldilocks", instances=50, max_vars=5, max_degree=3, seed=50)
    written = write_transcript(tmp_path / "fifty.sumtr", knobs)
    assert_same_report(written.path, 2)
    report, _ = swept_report(written.path, 2)
    assert len(report.instances) == 2 and report.counts["pass"] == 50


@pytest.mark.parametrize("field", sorted(FIELDS))
@pytest.mark.parametrize("fault", FAULTS)
def test_sweep_gives_up_on_every_fault(tmp_path, capsys, monkeypatch, field, fault):
    for seed in range(3):
        knobs = Knobs(field=field, instances=8, max_vars=6, max_degree=3, fault=fault, seed=seed)
        written = write_transcript(tmp_path / f"{fault}.sumtr", knobs)
        assert swept_report(written.path, 20) is None, (fault, seed)
        code, _, _, swept = check_both(capsys, monkeypatch, written.path)
        assert swept is None and code != 0


def test_sweep_gives_up_on_notes_between_rounds_and_on_missing_finals(tmp_path):
    for name, knobs in [("between", Knobs(instances=6, between_rounds=True, seed=2)),
                        ("nofinal", Knobs(instances=6, no_final=True, seed=4)),
                        ("ragged", Knobs(instances=6, max_degree=4, ragged=True, seed=6))]:
        written = write_transcript(tmp_path / f"{name}.sumtr", knobs)
        assert not written.regular, name
        assert swept_report(written.path, 20) is None, name


def test_an_unfinished_transcript_is_left_to_the_replay(tmp_path):
    written = write_transcript(tmp_path / "open.sumtr", Knobs(instances=3, seed=8))
    data = written.path.read_bytes()
    written.path.write_bytes(data[:len(data) - len(_last_object(data))])  # the end event removed
    assert swept_report(written.path, 20) is None


def _last_object(data: bytes) -> bytes:
    unpacker = msgpack.Unpacker(raw=False)
    unpacker.feed(data[len(MAGIC):])
    return msgpack.packb(list(unpacker)[-1], use_bin_type=True)


def test_sweep_is_off_when_the_environment_says_so(tmp_path, monkeypatch):
    written = write_transcript(tmp_path / "off.sumtr", Knobs(instances=2))
    monkeypatch.setenv("STEPPER_SWEEP", "off")
    assert swept_report(written.path, 20) is None
    monkeypatch.delenv("STEPPER_SWEEP")
    assert swept_report(written.path, 20) is not None


def test_files_below_min_bytes_are_left_to_the_replay_unless_the_environment_says_on(tmp_path, monkeypatch):
    written = write_transcript(tmp_path / "small.sumtr", Knobs(instances=2))
    size = written.path.stat().st_size
    monkeypatch.delenv("STEPPER_SWEEP", raising=False)
    assert sweep(written.path, Replay(keep_instances=20, emit_passing=False), min_bytes=size + 1) is None
    assert sweep(written.path, Replay(keep_instances=20, emit_passing=False), min_bytes=size) is not None
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    assert sweep(written.path, Replay(keep_instances=20, emit_passing=False), min_bytes=size + 1) is not None


def test_instances_alternating_two_degrees_are_checked_in_few_blocks(tmp_path, monkeypatch):
    import stepper.verify.roundblock as roundblock

    calls = []
    real = roundblock.block_passes

    def counting(*args: object) -> bool:
        calls.append(1)
        return real(*args)

    monkeypatch.setattr(roundblock, "block_passes", counting)
    written = write_transcript(tmp_path / "mixed.sumtr", Knobs(instances=100, max_vars=4, degrees=(3, 2), seed=22))
    assert_same_report(written.path, 20)
    assert len(calls) <= 4


@pytest.mark.parametrize("field", ["goldilocks", "bn254", "babybear^4"])
@pytest.mark.parametrize("glue", [False, True])
@pytest.mark.parametrize("chunk", [300, 1 << 20])
def test_instances_found_in_the_chunks_bytes_report_as_the_replay(tmp_path, monkeypatch, field, glue, chunk):
    # names of every kind: short, the longest fixstr, too long for one (str 8), not ASCII, holding the
    # bytes of the keys after a name, holding a newline; high-first instances (an order key) and blocks of 7 rounds between
    found = []
    real = sweep_module.InstanceHead

    class Spy(real):  # type: ignore[misc, valid-type]
        def __call__(self, data: bytes, at: int):  # type: ignore[no-untyped-def]
            head = super().__call__(data, at)
            found.append(head is not None)
            return head

    monkeypatch.setattr(sweep_module, "InstanceHead", Spy)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 7)
    names = ("", "x" * 29, "y" * 33, "gangway-\u00e5-", "\xa8num_vars\x05", "quay\nside")  # a newline: decoded alone
    written = write_transcript(tmp_path / "named.sumtr", Knobs(field=field, instances=40, max_vars=5, names=names,
                                                               glue=glue, glue_after_only=True, seed=40))
    assert_same_report(written.path, 20, ReadLimits(chunk_bytes=chunk))
    assert_same_report(written.path, 3, ReadLimits(chunk_bytes=chunk))
    assert not all(found)  # the names too long for a fixstr and the high-first instances: the usual path
    assert any(found) or chunk < 1000  # from the bytes: those that lie whole in a chunk


def test_a_file_without_glue_is_checked_block_by_block_not_whole(tmp_path, monkeypatch):
    # memory flat in the number of instances: a block is checked once BLOCK_ROUNDS rounds are read,
    # also in a file of the first format version (no glue events can follow a run there)
    import stepper.verify.roundblock as roundblock

    sizes = []
    real = roundblock.block_passes

    def counting(*args: object) -> bool:
        sizes.append(len(args[1]))  # type: ignore[arg-type]
        return real(*args)

    monkeypatch.setattr(roundblock, "block_passes", counting)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 8)
    written = write_transcript(tmp_path / "plain.sumtr", Knobs(instances=40, max_vars=4, degrees=(3,), seed=41))
    assert_same_report(written.path, 20)
    assert len(sizes) >= 5 and max(sizes) < 8 + 4


def test_a_failure_in_an_instance_not_taken_as_a_run_is_judged_by_the_same_replay(tmp_path):
    # Compressed forms and batched claims are fed event by event inside the sweep: a failure there
    # is the replay's own result, so the report must equal the event-by-event one, verdict included.
    for seed in range(4):
        knobs = Knobs(field="goldilocks", instances=8, compressed=True, batch=True, fault="eval", seed=seed)
        written = write_transcript(tmp_path / "compressed.sumtr", knobs)
        expected, expected_notes = event_by_event(written.path, 20)
        got = swept_report(written.path, 20)
        if got is not None:
            report, notes = got
            assert report.to_json() == expected.to_json() and notes == expected_notes
            assert render(report, "f", notes, len(notes), False, 20) == \
                render(expected, "f", expected_notes, len(expected_notes), False, 20)


# ----- 4. hostile files ------------------------------------------------------------------


def event_spans(data: bytes) -> list[tuple[str, int, int]]:
    """(type, start, end) of every event of a well-formed transcript (end event included)."""
    unpacker = msgpack.Unpacker(raw=False)
    unpacker.feed(data[len(MAGIC):])
    unpacker.unpack(), unpacker.unpack()
    spans, start = [], len(MAGIC) + unpacker.tell()
    for payload in unpacker:
        end = len(MAGIC) + unpacker.tell()
        spans.append((payload["type"], start, end))
        start = end
    return spans


def instance_runs(spans: list[tuple[str, int, int]]) -> list[tuple[int, int]]:
    """Byte ranges of each instance with its rounds, challenges and final."""
    runs = []
    for kind, start, end in spans:
        if kind == "instance":
            runs.append([start, end])
        elif kind in ("round", "challenge", "final") and runs:
            runs[-1][1] = end
    return [(a, b) for a, b in runs]


def mutate(rng: random.Random, data: bytes) -> tuple[bytes, bool]:
    """One hostile change; True when the result should be resealed (a valid digest over it)."""
    spans = event_spans(data)
    runs = instance_runs(spans)
    action = rng.choice(["truncate", "flip", "duplicate", "swap", "length", "junk"])
    raw = bytearray(data)
    if action == "truncate":
        return bytes(raw[:rng.randrange(len(raw))]), False
    if action == "flip":
        raw[rng.randrange(len(raw))] ^= rng.randrange(1, 256)
        return bytes(raw), rng.random() < 0.5
    if action == "duplicate":
        a, b = rng.choice(runs)
        return bytes(raw[:b] + raw[a:b] + raw[b:]), True
    if action == "swap":
        (a, b), (c, d) = sorted(rng.sample(runs, 2))
        return bytes(raw[:a] + raw[c:d] + raw[b:c] + raw[a:b] + raw[d:]), True
    if action == "length":
        kind, start, end = rng.choice([s for s in spans if s[0] in ("round", "challenge", "final")])
        at = bytes(raw[start:end]).rfind(b"\xc4")  # bin8 marker: its length byte follows
        raw[start + at + 1] = (raw[start + at + 1] + rng.choice([-8, -1, 1, 8])) % 256
        return bytes(raw), rng.random() < 0.7
    at = rng.choice([s[1] for s in spans])
    junk = rng.choice([rng.randbytes(rng.randint(1, 12)), msgpack.packb({"type": "note", "text": "junk"}),
                       msgpack.packb({"type": "round", "evals": b"\x01" * 8}), b"\xc0"])
    return bytes(raw[:at] + junk + raw[at:]), rng.random() < 0.7


def resealed(data: bytes) -> bytes:
    """The events before the (last) end event, sealed again with a digest over them."""
    spans = event_spans(data)
    if spans[-1][0] == "end":
        body, events = data[:spans[-1][1]], len(spans) - 1
    else:
        body, events = data[:spans[-1][2]], len(spans)
    return body + seal(body, events)


@pytest.mark.parametrize("field", ["goldilocks", "bn254", "bls12-381", "babybear^4"])  # each block kernel's kind
@pytest.mark.parametrize("schedule", ["builtin", "builtin2", "none"])
def test_hostile_mutations_never_crash_and_check_the_same_either_way(tmp_path, capsys, monkeypatch, field, schedule):
    written = write_transcript(tmp_path / "seed.sumtr", Knobs(field=field, schedule=schedule, instances=10,
                                                            max_vars=5, max_degree=3, seed=9))
    base = written.path.read_bytes()
    rng = random.Random(f"hostile-{schedule}" if field == "goldilocks" else f"hostile-{field}-{schedule}")
    path = tmp_path / "hostile.sumtr"
    outcomes: dict[int, int] = {}
    for _ in range(150 if field == "goldilocks" else 70):
        data, reseal = mutate(rng, base)
        if reseal:
            try:
                data = resealed(data)
            except (ValueError, KeyError, TypeError, IndexError, msgpack.UnpackException):
                pass  # not parseable as events any more: keep it as it is
        path.write_bytes(data)
        code, out, err, swept = check_both(capsys, monkeypatch, path)
        if code == 2:
            assert out == "" and err.startswith("stepper check: ") and err.count("\n") == 1
        if swept is not None:
            assert code == 0
        outcomes[code] = outcomes.get(code, 0) + 1
    assert set(outcomes) >= {0, 1, 2, 3} if schedule == "none" else set(outcomes) >= {1, 2, 3}, outcomes


def test_duplicated_and_swapped_runs_without_a_schedule_are_still_swept(tmp_path):
    # with no schedule every instance stands alone: reordered, resealed runs are an honest proof
    written = write_transcript(tmp_path / "seed.sumtr", Knobs(schedule="none", instances=4, seed=12))
    data = written.path.read_bytes()
    (a, b), (c, d) = instance_runs(event_spans(data))[:2]
    path = tmp_path / "reordered.sumtr"
    path.write_bytes(resealed(data[:a] + data[c:d] + data[b:c] + data[a:b] + data[a:b] + data[d:]))
    assert_same_report(path, 20)


def test_sweep_returns_none_on_event_files_directories_and_missing_files(tmp_path, capsys, monkeypatch):
    jsonl = tmp_path / "events.jsonl"
    jsonl.write_text('{"type": "field", "name": "babybear"}\n{"type": "instance", "name": "deck-slots-zero", '
                     '"num_vars": 1, "degree": 1, "claim": 4}\n{"type": "round", "evals": [1, 3]}\n'
                     '{"type": "challenge", "value": 2}\n{"type": "final", "value": 5}\n')
    empty = tmp_path / "empty.sumtr"
    empty.write_bytes(b"")
    for path in (jsonl, tmp_path, tmp_path / "absent.sumtr", empty):
        assert sweep(path, Replay(keep_instances=20, emit_passing=False)) is None
    code, out, _, swept = check_both(capsys, monkeypatch, jsonl)
    assert (code, swept) == (0, None) and "ACCEPTED" in out
    for path in (tmp_path, tmp_path / "absent.sumtr", empty):
        code, out, err, _ = check_both(capsys, monkeypatch, path)
        assert code == 2 and out == "" and err.startswith("stepper check: ")


def test_a_file_without_an_end_event_is_declined_before_it_is_read(tmp_path, monkeypatch):
    # An unfinished transcript (a prover still writing it) would be read in full and then given up;
    # the sweep looks at the file's last megabyte for an end event first.
    written = write_transcript(tmp_path / "whole.sumtr", Knobs(instances=6))
    data = written.path.read_bytes()
    cut = tmp_path / "cut.sumtr"
    cut.write_bytes(data[: len(data) - 80])  # the end event and some of the last final go
    assert end_payload(0, b"")["type"] == "end"

    runs: list[object] = []
    monkeypatch.setattr(sweep_module._Sweeper, "run", lambda self: runs.append(self))  # the sweep swallows errors
    assert sweep(cut, Replay(keep_instances=20, emit_passing=False)) is None
    assert runs == [], "the sweep started reading a file that has no end event"
    monkeypatch.undo()
    assert event_by_event(cut, 20)[0].verdict == "incomplete"
    assert swept_report(written.path, 20) is not None  # the whole file is still taken


@pytest.mark.parametrize("kind", ["none", "opening", "claim_expr"])
def test_sweep_takes_glue_after_runs_and_reports_as_the_replay(tmp_path, monkeypatch, kind):
    # the glue (transcripts/FORMAT.md, "The glue") after an instance taken as a run is checked in the sweep
    path = tmp_path / "glued.sumtr"
    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"}) as out:
        out.write_payload({"type": "field", "name": "goldilocks"})
        if kind != "none":
            out.write_payload({"type": "value", "name": "seed", "value": 3})
        for i in range(3):
            extra = {"claim_expr": "seed"} if kind == "claim_expr" and i == 2 else {}
            out.write_payload({"type": "instance", "name": f"leg.{i}", "num_vars": 1, "degree": 1, "claim": 3,
                               **extra})
            out.write_payload({"type": "round", "evals": [1, 2]})
            out.write_payload({"type": "challenge", "value": 5})
            out.write_payload({"type": "final", "value": 6})
            if kind == "opening":
                out.write_payload({"type": "opening", "name": f"o{i}", "value": 6})
    monkeypatch.delenv("STEPPER_SWEEP", raising=False)
    assert sweep(path, Replay(keep_instances=20, emit_passing=False), min_bytes=0) is not None
    assert_same_report(path, 20)


# ----- 4. the glue: checked in the sweep, the same report as the replay --------------------


@pytest.mark.parametrize("field", sorted(FIELDS))
@pytest.mark.parametrize("schedule", ["builtin", "builtin2", "none"])
def test_sweep_takes_glued_honest_transcripts_and_reports_their_glue_as_the_replay(tmp_path, field, schedule):
    # values, openings, squeezes, claim_expr and final_expr in every instance, in every named field: the
    # per-instance openings, link and evaluation results in --json are the replay's, to the byte
    knobs = Knobs(field=field, schedule=schedule, instances=14, max_vars=6, max_degree=3, extras=True, appended=1,
                  glue=True, seed=23)
    written = write_transcript(tmp_path / "glued.sumtr", knobs)
    assert written.regular
    assert_same_report(written.path, 20)
    assert_same_report(written.path, 3)  # most instances' glue checked by columns only
    report = swept_report(written.path, 20)[0]  # type: ignore[index]
    first = report.to_json()["instances"][1]
    assert first["link"]["status"] == "pass" and first["evaluation"]["status"] == "pass"
    assert [o["name"] for o in first["openings"]] == ["a1", "b1", "c1"]


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "bn254", "p97"])
@pytest.mark.parametrize("fault", GLUE_FAULTS)
def test_sweep_gives_up_on_every_glue_fault_and_check_names_it_as_the_replay(tmp_path, capsys, monkeypatch, field,
                                                                            fault):
    knobs = Knobs(field=field, instances=8, max_vars=4, glue=True, fault=fault, seed=41)
    written = write_transcript(tmp_path / f"{fault}.sumtr", knobs)
    code, out, _, swept = check_both(capsys, monkeypatch, written.path)
    assert swept is None and code == 1
    assert f"check {'squeeze' if fault == 'squeeze' else fault}" in out


NAMED_FIELDS = ("babybear", "koalabear", "mersenne31", "goldilocks", "babybear^4", "koalabear^4", "mersenne31^4",
                "goldilocks^2", "bn254", "bls12-381")


@pytest.mark.parametrize("field", NAMED_FIELDS + ("p64", "p97^3", "bn254^2", "p100^3"))  # custom moduli and cubics
@pytest.mark.parametrize("fault", ["challenge", "squeeze"])
def test_under_stepper_sha256_2_a_corrupted_challenge_or_squeeze_fails_where_the_replay_says(tmp_path, capsys,
                                                                                           monkeypatch, field, fault):
    # one recorded challenge (at a random round of a random instance) or one squeezed value off by one: the sweep
    # gives up and the event-by-event replay names it, the same output with the sweep on and off
    for seed in range(2):
        knobs = Knobs(field=field, schedule="builtin2", instances=8, max_vars=6, glue=fault == "squeeze",
                      fault=fault, seed=seed)
        written = write_transcript(tmp_path / f"{fault}-{seed}.sumtr", knobs)
        assert swept_report(written.path, 20) is None
        code, out, _, swept = check_both(capsys, monkeypatch, written.path)
        assert swept is None and code == 1
        assert f"check {fault}" in out and "the built-in schedule stepper-sha256/2" in out


def test_glue_after_the_run_that_ends_a_block_is_checked_with_it(tmp_path, monkeypatch):
    # a block ends after every run: its openings and squeezes still follow it, and are checked with it
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 1)
    written = write_transcript(tmp_path / "small-blocks.sumtr", Knobs(instances=9, glue=True, seed=3))
    assert_same_report(written.path, 2)



@pytest.mark.parametrize("chunk", [97, 1000, 4096])
def test_glue_cut_by_a_chunks_end_is_read_on_into_the_next_chunk_and_reports_as_the_replay(tmp_path, monkeypatch,
                                                                                         chunk):
    # reads of a few bytes cut the glue after runs: the rest is read from the next chunk into the same blob
    written = write_transcript(tmp_path / "chunks.sumtr", Knobs(instances=30, max_vars=3, glue=True, seed=8))
    from_bytes: list[int] = []
    real = GlueColumns.__init__

    def spy(self: GlueColumns, field: object, trailing: list[list[object]], defined: object, **keys: object) -> None:
        real(self, field, trailing, defined, **keys)  # type: ignore[arg-type]
        from_bytes.append(self.from_bytes)

    monkeypatch.setattr(GlueColumns, "__init__", spy)
    assert_same_report(written.path, 20, ReadLimits(chunk_bytes=chunk))
    cut = sum(from_bytes)
    from_bytes.clear()
    assert_same_report(written.path, 20)  # one chunk holds the whole file
    if chunk >= 1000:  # longer than the glue after a run: two chunks hold it whole, every event read as bytes
        assert cut == sum(from_bytes) > 0


@pytest.mark.parametrize("fault", [None, "link", "evaluation", "squeeze"])
def test_glued_instances_taken_from_the_chunk_with_their_texts_and_glue_report_as_the_replay(tmp_path, monkeypatch,
                                                                                            fault):
    # instances written by the TranscriptWriter with claim_expr and final_expr, each run followed by its openings
    # and a squeeze: the sweep takes them straight from the chunk's bytes (Sequencer.plain_instance with the
    # texts); the report is the replay's, and a broken glue check makes it give up
    from stepper.transcript.events import Sequencer

    path = tmp_path / "glued-writer.sumtr"
    write_pointed(path, fault, pointed=False, seed=31)
    taken: list[str] = []
    real = Sequencer.plain_instance

    def spy(self: Sequencer, name: str, *args: object) -> object:
        taken.append(name)
        return real(self, name, *args)  # type: ignore[arg-type]

    monkeypatch.setattr(Sequencer, "plain_instance", spy)
    real_runs = Sequencer.glued_columns  # glued_runs, which makes every record, takes them through it too

    def runs_spy(self: Sequencer, names: list[str], *args: object) -> object:
        claims = real_runs(self, names, *args)  # type: ignore[arg-type]
        if claims is not None:
            taken.extend(names)
        return claims

    monkeypatch.setattr(Sequencer, "glued_columns", runs_spy)
    from stepper.verify.packed_runs import RunBlock

    together: list[int] = []
    real_glued = RunBlock.absorb_glued

    def glued_spy(self: RunBlock, schedule: object, first: int, names: list[str], *rest: object) -> None:
        together.append(len(names))
        real_glued(self, schedule, first, names, *rest)  # type: ignore[arg-type]

    monkeypatch.setattr(RunBlock, "absorb_glued", glued_spy)
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    if fault is None:
        assert_same_report(path, 20)
        assert len(taken) >= 30  # all but the instances whose glue a chunk's end cut, or that came first (several
        # together, by glued_runs)
        assert sum(together) >= 15  # those after the 20 kept summaries: statements, rows and glue hashed together
        together.clear()
        assert_same_report(path, 3)
        assert sum(together) >= 30
    else:
        assert swept_report(path, 20) is None
        assert event_by_event(path, 20)[0].verdict == "reject"

def test_final_of_the_instance_before_in_a_two_instance_proof_is_read_by_columns(tmp_path, monkeypatch):
    # final(NAME) of an instance of the same pass: the sweep takes the proof, and reports as the replay
    path = tmp_path / "points.sumtr"
    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"}) as out:
        out.write_payload({"type": "field", "name": "goldilocks"})
        out.write_payload({"type": "instance", "name": "leg.0", "num_vars": 1, "degree": 1, "claim": 3})
        out.write_payload({"type": "round", "evals": [1, 2]})
        out.write_payload({"type": "challenge", "value": 5})
        out.write_payload({"type": "final", "value": 6})  # g(5) = 1 + 5 * (2 - 1)
        out.write_payload({"type": "instance", "name": "leg.1", "num_vars": 1, "degree": 1, "claim": 6,
                           "claim_expr": "final(leg.0)"})
        out.write_payload({"type": "round", "evals": [2, 4]})
        out.write_payload({"type": "challenge", "value": 1})
        out.write_payload({"type": "final", "value": 4})
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    assert_same_report(path, 20)


# ----- 4. instances in a row taken as columns ------------------------------------------------


def spy_quiet_settling(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """The instances each call of Replay.settle_quietly settled (the columns' path), in order."""
    settled: list[int] = []
    real = Replay.settle_quietly

    def spy(self: Replay, count: int, rounds_degree: int) -> None:
        settled.append(count)
        real(self, count, rounds_degree)

    monkeypatch.setattr(Replay, "settle_quietly", spy)
    return settled


PLAIN_NAMES = ("", "quay-\u00e5-", "x" * 25, "sailing-")  # of several lengths, empty and not ASCII


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "goldilocks^2", "p97^3", "mersenne31^4", "p64",
                                   "bn254", "bls12-381"])
@pytest.mark.parametrize("schedule", ["builtin", "none"])
def test_plain_instances_in_a_row_are_settled_together_and_report_as_the_replay(tmp_path, monkeypatch, field,
                                                                                 schedule):
    # every instance low-first with no optional key: each chunk's instances are taken as columns, the
    # first summaries kept one by one, the rest settled and hashed together, across blocks and chunks
    settled = spy_quiet_settling(monkeypatch)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 40)
    knobs = Knobs(field=field, schedule=schedule, instances=60, max_vars=5, degrees=(3,), low_first=True,
                  names=PLAIN_NAMES, seed=61)
    written = write_transcript(tmp_path / "plain.sumtr", knobs)
    assert_same_report(written.path, 1000)  # every summary kept: each instance of the columns settled alone
    for keep, chunk in ((20, 1 << 20), (1, 1 << 20), (7, 4096), (0, 1 << 20)):
        settled.clear()
        assert_same_report(written.path, keep, ReadLimits(chunk_bytes=chunk))
        # not vacuous: most instances past the kept ones go in columns (small chunks hold few at a time)
        assert sum(settled) >= ((60 - keep) // 2 if chunk > 4096 else 2) and max(settled) > 1, (keep, chunk, settled)


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "bn254"])
@pytest.mark.parametrize("after_only", [True, False])
def test_plain_instances_between_glued_ones_report_as_the_replay(tmp_path, monkeypatch, field, after_only):
    # glue after every fifth instance (openings and squeezes; with claim_expr and final_expr too when not
    # after_only): the instances in between are taken as columns, the glue after the last of them checked
    # with the run it follows, the glued instances one by one
    settled = spy_quiet_settling(monkeypatch)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 50)
    knobs = Knobs(field=field, instances=60, max_vars=4, degrees=(2,), low_first=True, names=PLAIN_NAMES, glue=True,
                  glue_after_only=after_only, glue_every=5, seed=62)
    written = write_transcript(tmp_path / "between.sumtr", knobs)
    for keep in (20, 3):
        settled.clear()
        assert_same_report(written.path, keep)
        assert sum(settled) > 0


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "bn254", "bls12-381"])
@pytest.mark.parametrize("fault", ["eval", "challenge", "final", "claim", "noncanonical"])
def test_a_fault_among_plain_instances_in_a_row_makes_the_sweep_give_up_and_check_name_it(tmp_path, capsys,
                                                                                        monkeypatch, field, fault):
    for seed, num_vars in ((0, 0), (1, 0), (0, 3)):  # one round count: found by the comparison at once
        knobs = Knobs(field=field, instances=30, max_vars=4, num_vars=num_vars, degrees=(3,), low_first=True,
                      fault=fault, seed=seed)
        written = write_transcript(tmp_path / f"{fault}.sumtr", knobs)
        assert swept_report(written.path, 3) is None, (fault, seed)
        code, _, _, swept = check_both(capsys, monkeypatch, written.path, "--rows", "3")
        assert swept is None and code != 0


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "koalabear^4", "mersenne31^4", "goldilocks^2", "p97^3",
                                   "bn254"])
@pytest.mark.parametrize("schedule", ["builtin", "builtin2"])
def test_instances_laid_out_alike_are_hashed_from_one_buffer_and_a_changed_challenge_is_left_to_the_replay(
        tmp_path, capsys, monkeypatch, field, schedule):
    # one round count and names of one length: the statements' and rows' frames absorbed from one buffer cut
    # at the same offsets in every instance (a few instances per call, the last call shorter), the report the
    # replay's; a challenge changed anywhere among them makes the re-derived one differ, the sweep give up
    alike: list[int] = []
    real = packed_runs.RunBlock._absorb_alike

    def spy(self: packed_runs.RunBlock, schedule_: object, first: int, rounds: int, statements: bytes,
            said: int) -> None:
        alike.append(len(statements) // said)
        real(self, schedule_, first, rounds, statements, said)  # type: ignore[arg-type]

    monkeypatch.setattr(packed_runs.RunBlock, "_absorb_alike", spy)
    monkeypatch.setattr(packed_runs, "_ABSORB_INSTANCES", 3)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 64)
    knobs = Knobs(field=field, schedule=schedule, instances=50, num_vars=4, degrees=(3,), low_first=True,
                  names=("sailing-",), seed=71)  # instances 10 to 49: names of one length
    written = write_transcript(tmp_path / "alike.sumtr", knobs)
    for keep in (0, 5):
        alike.clear()
        assert_same_report(written.path, keep)
        assert sum(alike) >= 30 and max(alike) > 3, alike  # not vacuous: most instances, several calls each
    for seed in (3, 5):  # the fault at instances 15 and 39
        knobs = Knobs(field=field, schedule=schedule, instances=50, num_vars=4, degrees=(3,), low_first=True,
                      names=("sailing-",), fault="challenge", seed=seed)
        broken = write_transcript(tmp_path / f"broken-{seed}.sumtr", knobs)
        assert swept_report(broken.path, 3) is None
        code, out, _, swept = check_both(capsys, monkeypatch, broken.path, "--rows", "3")
        assert swept is None and code == 1 and "challenge" in out, out


@pytest.mark.parametrize("fixed_count", [6, 40, 150])  # few fixed bytes (gathered) or most of a period (masked)
def test_periods_alike_stop_at_the_first_fixed_byte_that_differs_and_ignore_the_others(fixed_count):
    from stepper.verify.packed_runs import layout_of

    rng = random.Random(fixed_count)
    period, count, degree_at = 160, 12, 3
    layout = layout_of(4, 4)  # four values a round: a degree of 3 or more allows it
    fixed = np.array(sorted(rng.sample([i for i in range(period) if i != degree_at], fixed_count)))
    free = [i for i in range(period) if i not in set(fixed.tolist()) and i != degree_at]
    one = bytearray(rng.randbytes(period))
    one[degree_at] = 3
    for changed_at, where in ((5, int(fixed[len(fixed) // 2])), (None, free[0]), (None, free[-1])):
        periods = [bytearray(one) for _ in range(count)]
        for row in periods[1:]:  # every free byte may differ from one period to the next
            for i in free:
                row[i] = rng.randrange(256)
        target = periods[changed_at if changed_at is not None else 7]
        target[where] ^= 0x10
        u8 = np.frombuffer(bytes(9) + b"".join(periods), dtype=np.uint8)
        starts, degrees = sweep_module._alike(u8, 9, period, count, fixed, degree_at, layout)
        expected = changed_at if changed_at is not None else count
        assert starts.tolist() == [9 + period * j for j in range(expected)] and degrees.tolist() == [3] * expected
    periods = [bytearray(one) for _ in range(count)]
    periods[4][degree_at] = 2  # a degree below the round's size stops the run there too
    u8 = np.frombuffer(b"".join(periods), dtype=np.uint8)
    assert len(sweep_module._alike(u8, 0, period, count, fixed, degree_at, layout)[0]) == 4


@pytest.mark.parametrize("field", ["bn254", "bls12-381"])
@pytest.mark.parametrize("schedule", ["builtin", "builtin2"])
def test_limb_fields_under_both_schedules_sweep_honest_runs_and_leave_every_fault_to_the_replay(
        tmp_path, capsys, monkeypatch, field, schedule):
    # the rows of 29-bit limbs (Montgomery form by folding, congruences on unreduced values, the 48-byte samples
    # of stepper-sha256/1 and /2 against the recorded challenges) against the event-by-event replay in plain
    # Python integers: honest instances in a row report as the replay; one fault of each kind makes the sweep
    # give up and check print what the replay prints, with the sweep on and off
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 40)
    honest = write_transcript(tmp_path / "honest.sumtr", Knobs(field=field, schedule=schedule, instances=30,
                                                               max_vars=5, degrees=(3,), low_first=True, seed=64))
    assert_same_report(honest.path, 3)
    for fault in ("eval", "challenge", "final", "claim", "noncanonical"):
        knobs = Knobs(field=field, schedule=schedule, instances=30, max_vars=5, degrees=(3,), low_first=True,
                      fault=fault, seed=65)
        written = write_transcript(tmp_path / f"{fault}.sumtr", knobs)
        assert swept_report(written.path, 3) is None, fault
        code, _, _, swept = check_both(capsys, monkeypatch, written.path, "--rows", "3")
        assert swept is None and code != 0, fault


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "bn254"])
def test_a_claim_past_p_among_plain_instances_is_left_to_the_replay_which_names_it(tmp_path, capsys, monkeypatch,
                                                                                 field):
    # one claim in the middle made p itself (its packed bytes; for an extension its first coefficient),
    # sealed again: the Sequencer takes the instances one by one, the sweep gives up, and check names the
    # claim as the replay does
    knobs = Knobs(field=field, instances=30, num_vars=3, degrees=(2,), low_first=True, seed=63)
    written = write_transcript(tmp_path / "claim.sumtr", knobs)
    ar = FIELDS[field][0]
    width = (ar.p.bit_length() + 7) // 8
    body = bytearray(written.path.read_bytes()[:written.offsets[-1][2]])  # up to the end event
    _, _, end = [o for o in written.offsets if o[0] == "instance"][15]
    at = end - width * ar.k  # the claim's packed bytes end the instance event
    body[at:at + width] = ar.p.to_bytes(width, "little")
    written.path.write_bytes(bytes(body) + seal(bytes(body), len(written.offsets)))
    assert swept_report(written.path, 3) is None
    code, _, err, swept = check_both(capsys, monkeypatch, written.path)
    assert swept is None and code == 2 and "claim: expected a canonical element below p" in err, err


@pytest.mark.parametrize("field", ["goldilocks", "babybear^4", "bn254", "bls12-381"])
@pytest.mark.parametrize("names", [("sailing-",), ("quay-\u00e5-",), ("",)])
def test_instances_laid_out_alike_are_compared_at_once_and_report_as_the_replay(tmp_path, monkeypatch, field, names):
    # names of one length (the index's digits change it twice), one round count, a degree that changes
    # every seventh instance (another layout: the comparison stops there): runs of instances found by
    # numpy in one go, across blocks and chunks, each report as the replay's
    taken: list[int] = []
    real = sweep_module._Sweeper._take_uniform

    def spy(self: object) -> bool:
        before = len(self.seq.names)  # type: ignore[attr-defined]
        took = real(self)  # type: ignore[arg-type]
        taken.append(len(self.seq.names) - before if took else 0)  # type: ignore[attr-defined]
        return took

    monkeypatch.setattr(sweep_module._Sweeper, "_take_uniform", spy)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 64)
    monkeypatch.setattr(packed_runs, "_ABSORB_INSTANCES", 4)  # a run's statements absorbed a few at a time
    knobs = Knobs(field=field, instances=150, num_vars=3, degrees=(3,) * 6 + (2,), low_first=True, names=names,
                  seed=64)
    written = write_transcript(tmp_path / "alike.sumtr", knobs)
    for keep, chunk in ((20, 1 << 20), (0, 1 << 20), (5, 4096)):
        taken.clear()
        assert_same_report(written.path, keep, ReadLimits(chunk_bytes=chunk))
        assert sum(taken) >= (60 if chunk > 4096 else 10) and max(taken) >= (5 if chunk > 4096 else 2), (keep, chunk, taken)


def write_pointed(path: Path, fault: str | None = None, count: int = 40, rounds: int = 3,
                  reads: dict[int, int] | None = None, pointed: bool = True, seed: int = 37,
                  squeeze_at: int = 23) -> None:
    """A glued proof whose expressions read earlier instances, written by the TranscriptWriter: instance i
    (every fifth high-first) has final_expr eq(point(sailing.<i-1>)) * (a_i*b_i - c_i) (eq(tau) for the first)
    and claim_expr final(sailing.<i-1>) * a_<i-1> + beta_<i-1>*b_<i-1>, each run followed by the three
    openings and the squeeze; the values are computed in plain integers (eq(x, y) = prod of x_j y_j +
    (1 - x_j)(1 - y_j), common practice, no source). ``fault`` breaks one check at instance 17 (or 23 for
    the squeeze, or ``squeeze_at``; 16 for the link): the link, the evaluation, the squeeze; or, in the written bytes
    (resealed: the writer refuses to write them), an opening's name (c17 sent as d17, which final_expr
    never names) or instance 17's point(NAME) of a later instance. ``reads`` maps an instance to the
    earlier one its final_expr's point(NAME) reads instead of the one before it. Without ``pointed`` every
    final_expr is eq(tau) * (a_i*b_i - c_i), every claim_expr a_<i-1> + beta_<i-1>*b_<i-1>, every instance
    low-first, and the link breaks at instance 29."""
    from stepper.field.field import NAMED_PRIMES, get_field
    from stepper.field.lagrange import evaluate_round
    from stepper.field.poly import eq_eval
    from stepper.transcript.model import (ChallengeMsg, FieldDecl, FinalValue, InstanceStart, NamedValue, Opening,
                                          RoundMsg, ScheduleDecl, Squeeze)

    field = get_field(NAMED_PRIMES["goldilocks"])
    p, rng, schedule = field.p, random.Random(seed), schedule_for(SCHEDULE_NAME)
    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"}) as out:
        def emit(record: object, absorbed: bool = True) -> None:
            if absorbed:
                schedule.observe(record)  # type: ignore[arg-type]
            out.write(record)  # type: ignore[arg-type]

        emit(FieldDecl(field))
        emit(ScheduleDecl(SCHEDULE_NAME, "tests"))
        tau = [rng.randrange(p) for _ in range(rounds)]
        emit(NamedValue("tau", tuple(tau), True, None))
        claim = rng.randrange(p)
        points: list[list[int]] = []  # each instance's point, in variable order
        for i in range(count):
            read = (reads or {}).get(i, i - 1)
            keys = {"final_expr": f"eq(point(sailing.{read})) * (a{i}*b{i} - c{i})" if i and pointed
                    else f"eq(tau) * (a{i}*b{i} - c{i})"}
            before = points[read] if i and pointed else tau
            if i:
                keys["claim_expr"] = (f"final(sailing.{i - 1}) * a{i - 1} + beta{i - 1}*b{i - 1}" if pointed
                                      else f"a{i - 1} + beta{i - 1}*b{i - 1}")
            order = "high-first" if i % 5 == 4 and pointed else "low-first"
            emit(InstanceStart(i, f"sailing.{i}", rounds, 2, claim, order=order, **keys))  # type: ignore[arg-type]
            challenges = []
            for k in range(1, rounds + 1):
                g0 = rng.randrange(p)
                evals = (g0, (claim - g0) % p, rng.randrange(p))
                emit(RoundMsg(i, k, evals))
                r = schedule.challenge()
                emit(ChallengeMsg(i, k, r), absorbed=False)
                challenges.append(r)
                claim = evaluate_round(field, evals, r)
            final = claim
            emit(FinalValue(i, final), absorbed=False)
            own = challenges if order == "low-first" else challenges[::-1]
            a, b = rng.randrange(p), rng.randrange(p)
            c = (a * b - final * pow(eq_eval(field, before, own), -1, p)) % p  # type: ignore[arg-type]
            if fault == "evaluation" and i == 17:
                c = (c + 1) % p
            for name, value in ((f"a{i}", a), (f"b{i}", b), (f"c{i}", c)):
                emit(Opening(name, value, name, i))
            beta = schedule.squeeze(f"beta{i}")
            emit(Squeeze(f"beta{i}", (beta + 1) % p if fault == "squeeze" and i == squeeze_at else beta, False, i),
                 absorbed=False)
            claim = ((final * a if pointed else a) + beta * b) % p  # type: ignore[operator]
            if fault == "link" and i == (16 if pointed else 29):
                claim = (claim + 1) % p
            points.append(own)
    if fault in ("opening-name", "point-later"):
        old, new = {"opening-name": (b"\xa4name\xa3c17", b"\xa4name\xa3d17"),
                    "point-later": (b"eq(point(sailing.16)) * (a17", b"eq(point(sailing.18)) * (a17")}[fault]
        data = path.read_bytes()
        assert data.count(old) == 1
        path.write_bytes(resealed(data.replace(old, new)))


@pytest.mark.parametrize("block_rounds", [7, 1 << 14])
def test_point_and_final_of_earlier_instances_are_read_by_columns_and_report_as_the_replay(tmp_path, monkeypatch,
                                                                                          block_rounds):
    # every instance's final_expr reads the point of the instance before it, its claim_expr that instance's
    # final: the sweep takes the whole proof (also where the two are checked in different flushes: blocks
    # of 7 rounds, three instances each) and its report is the replay's
    import stepper.verify.glue_block as glue_block

    path = tmp_path / "pointed.sumtr"
    write_pointed(path)
    read: list[int] = []
    real = glue_block._Columns.earlier

    def spy(self: object, name: str) -> object:
        positions = real(self, name)  # type: ignore[arg-type]
        read.append(len(positions))
        return positions

    monkeypatch.setattr(glue_block._Columns, "earlier", spy)
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", block_rounds)
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    assert_same_report(path, 20)
    assert_same_report(path, 3)
    assert sum(read) >= 2 * 39  # point() and final() of every instance after the first, by columns


@pytest.mark.parametrize("fault", ["link", "evaluation", "squeeze", "opening-name", "point-later"])
def test_a_broken_check_beside_point_and_final_makes_the_sweep_give_up_and_check_say_what_the_replay_says(
        tmp_path, capsys, monkeypatch, fault):
    path = tmp_path / f"pointed-{fault}.sumtr"
    write_pointed(path, fault)
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert swept is None
    if fault in ("opening-name", "point-later"):  # a name the Sequencer refuses: unusable input, named
        assert code == 2 and ("d17" in err or "c17" in err or "sailing.18" in err)
    else:
        assert code == 1 and f"check {fault}" in out


@pytest.mark.parametrize("kept", [20, 29, 30, 10 ** 6])
def test_a_point_the_replay_no_longer_keeps_makes_the_sweep_give_up_as_the_replay_refuses_it(tmp_path, capsys,
                                                                                           monkeypatch, kept):
    # the replay keeps the points of recent instances up to MAX_POINT_ELEMENTS challenge elements: instance 30
    # reads the point of instance 20, ten instances of three rounds back (instances 20-29 hold 30 elements:
    # a cap of 30 keeps it, 29 drops it). Kept, both accept; dropped, the replay refuses the file (exit 2)
    # and the sweep, which reads the same rule, gives up
    import stepper.verify.glue as glue_module

    path = tmp_path / "far.sumtr"
    write_pointed(path, reads={30: 20})
    monkeypatch.setattr(glue_module, "MAX_POINT_ELEMENTS", kept)
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    if kept < 30:
        assert code == 2 and swept is None and "sailing.20" in err
    else:
        assert code == 0 and swept is not None


@pytest.mark.parametrize("change", [None, "a glue name", "a glue kind", "a text"])
def test_glued_instances_laid_out_alike_are_taken_together_and_a_change_among_them_checks_as_the_replay(
        tmp_path, capsys, monkeypatch, change):
    # instances 10-39 of the pointed proof are laid out alike (names, texts and glue names of the same lengths):
    # the sweep compares them at once. A change inside one of them (resealed: the writer refuses it) must
    # still give check's output of the replay: a renamed squeeze that a later claim_expr names, an opening
    # sent as a squeeze (a byte the comparison reads), a text naming another opening of the same length
    path = tmp_path / "alike.sumtr"
    write_pointed(path)
    old, new = {None: (b"", b""), "a glue name": (b"\xa6beta25", b"\xa6beta2x"),
                "a glue kind": (b"\xa7opening\xa4name\xa3c25", b"\xa7squeeze\xa4name\xa3c25"),
                "a text": (b"eq(point(sailing.24)) * (a25*b25 - c25)", b"eq(point(sailing.24)) * (a25*b25 - a25)")}[change]
    if change is not None:
        data = path.read_bytes()
        assert data.count(old) == 1
        path.write_bytes(resealed(data.replace(old, new)))
    alike = returns_of(monkeypatch, sweep_module._Sweeper, "_take_glued_alike")
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert any(alike)
    if change is None:
        assert code == 0 and swept is not None
    else:
        assert swept is None and code in (1, 2)


@pytest.mark.parametrize("part", range(4))
def test_any_byte_changed_in_a_glued_instance_laid_out_like_its_neighbours_checks_as_the_replay(
        tmp_path, capsys, monkeypatch, part):
    # instance 25 of the pointed proof sits among instances the sweep compares at once (masked to the bytes
    # they share): each of its bytes (a quarter per part) flipped in turn and the file resealed, inside the
    # mask or outside it (names, degree, claim, round values, challenges, final, glue names and elements),
    # check says what the replay says, whatever the sweep makes of it
    base = tmp_path / "alike.sumtr"
    write_pointed(base)
    data = base.read_bytes()
    spans = event_spans(data)
    a, b = [start for kind, start, _ in spans if kind == "instance"][25:27]
    body_end, events = spans[-1][1], len(spans) - 1  # the end event's start: the body resealed as it was
    for offset in range(a + part, b, 4):
        raw = bytearray(data[:body_end])
        raw[offset] ^= 0x01
        path = tmp_path / "flipped.sumtr"
        path.write_bytes(bytes(raw) + seal(bytes(raw), events))
        check_both(capsys, monkeypatch, path)


def test_where_names_grow_a_digit_one_instance_is_taken_alone_and_the_rest_together(tmp_path, monkeypatch):
    # sailing.9 -> sailing.10 and a9 -> a10 shift every byte after them: the instance where the lengths
    # change is not laid out like its neighbours, so it is taken one by one, and the comparison starts
    # again right after it (not every instance to the chunk's end one by one); the report is the replay's
    path = tmp_path / "growing.sumtr"
    write_pointed(path, pointed=False, count=120, seed=41)
    alone: list[int] = []
    real = sweep_module._Sweeper._take_found

    def spy(self: object, most: int) -> bool:
        before = len(self.seq.names)  # type: ignore[attr-defined]
        taken = real(self, most)  # type: ignore[arg-type]
        alone.append(len(self.seq.names) - before)  # type: ignore[attr-defined]
        return taken

    monkeypatch.setattr(sweep_module._Sweeper, "_take_found", spy)
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    assert_same_report(path, 3)
    assert 0 < sum(alone) <= 6  # around instances 10 and 100 (and the first ones), not the 110 after them


@pytest.mark.parametrize("change", ["a duplicate name in the last instance only",
                                    "a name no name may be in the middle of a stretch alike",
                                    "a name no name may be that nothing reads, in the last instance",
                                    "a squeeze renamed in the middle of a stretch alike (read later by its old name)",
                                    "a squeeze wrong in one instance in the middle", "a squeeze wrong in the last instance",
                                    "an opening's element past p in one instance"])
def test_one_instance_breaking_the_glue_of_a_stretch_read_at_once_checks_as_the_replay(tmp_path, capsys, monkeypatch,
                                                                                      change):
    # 120 glued instances whose glue is read stretch by stretch of blobs alike (read_glue_periods) and framed as
    # rows of one array (flat_glue_stream with a period): one instance's glue changed (resealed where the writer
    # would refuse it) must make the sweep give up and check say what the replay says: a name sent twice (exit 2),
    # a name outside the pattern (exit 2), a name a later claim_expr reads that never came (exit 2), a squeeze
    # that is not the one derived (exit 1), an element that is not canonical (exit 2)
    path = tmp_path / "stretch.sumtr"
    squeeze_at = {"a squeeze wrong in one instance in the middle": 64, "a squeeze wrong in the last instance": 119}
    write_pointed(path, "squeeze" if change in squeeze_at else None, count=120, pointed=False, seed=43,
                  squeeze_at=squeeze_at.get(change, 23))
    old, new = {"a duplicate name in the last instance only": (b"\xa4name\xa4c119", b"\xa4name\xa4c118"),
                "a name no name may be in the middle of a stretch alike": (b"\xa4name\xa3b64", b"\xa4name\xa3b+4"),
                "a name no name may be that nothing reads, in the last instance": (b"\xa4name\xa4b119",
                                                                                  b"\xa4name\xa49b19"),
                "a squeeze renamed in the middle of a stretch alike (read later by its old name)":
                    (b"\xa4name\xa6beta64", b"\xa4name\xa6gamm64"),
                "an opening's element past p in one instance": (b"\xa4name\xa3a77\xa5value\xc4\x08", b""),
                }.get(change, (b"", b""))
    if old:
        data = path.read_bytes()
        assert data.count(old) == 1
        if change == "an opening's element past p in one instance":
            at = data.index(old) + len(old)
            data = data[:at] + b"\xff" * 8 + data[at + 8:]
        else:
            data = data.replace(old, new)
        path.write_bytes(resealed(data))
    periods: list[int] = []
    real = frames_module.flat_glue_stream

    def spy(*args: object) -> object:
        periods.append(args[5] if len(args) > 5 else 0)  # type: ignore[arg-type]
        return real(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(frames_module, "flat_glue_stream", spy)
    monkeypatch.setattr(fiatshamir_module, "flat_glue_stream", spy)
    read = returns_of(monkeypatch, glue_columns_module, "read_glue_periods")
    code, _, err, swept = check_both(capsys, monkeypatch, path)
    assert swept is None and any(stretch is not None for stretch in read)  # some stretch read at once
    if change in squeeze_at:
        assert code == 1 and any(periods)  # framed as rows before the squeezes were compared
    else:
        assert code == 2 and err


@pytest.mark.parametrize("change", [None, "a name of its own run swapped for the one before's",
                                    "an operator changed between the names", "a claim naming its own run's opening",
                                    "a digit first in a name of the last text"])
def test_texts_read_by_template_from_their_bytes_check_as_the_replay_when_one_breaks_the_pattern(
        tmp_path, capsys, monkeypatch, change):
    # 120 glued instances whose claim_expr and final_expr are read by template from their bytes (glue_texts):
    # one text changed in the middle of a stretch (resealed: the writer would not know) reads otherwise than
    # its neighbours; check must say what the replay says (the sweep gives up or reads that text apart)
    path = tmp_path / "texts.sumtr"
    write_pointed(path, count=120, pointed=False, seed=47)
    old, new = {None: (b"", b""),
                "a name of its own run swapped for the one before's": (b"(a64*b64 - c64)", b"(a64*b64 - c63)"),
                "an operator changed between the names": (b"(a64*b64 - c64)", b"(a64*b64 + c64)"),
                "a claim naming its own run's opening": (b"a63 + beta63*b63", b"a64 + beta63*b63"),
                "a digit first in a name of the last text": (b"(a119*b119 - c119)", b"(a119*b119 - 9119)"),
                }[change]
    if change is not None:
        data = path.read_bytes()
        assert data.count(old) == 1
        path.write_bytes(resealed(data.replace(old, new)))
    placed = returns_of(monkeypatch, glue_texts_module, "placed_names")
    code, _, _, swept = check_both(capsys, monkeypatch, path)
    assert any(found is not None for found in placed)  # the stretches around the change read by template
    if change is None:
        assert code == 0 and swept is not None
    else:
        assert swept is None and code in (1, 2)
