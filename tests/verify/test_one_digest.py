"""The built-in schedule stepper-sha256/2 matches its written description byte for byte.

Everything expected here comes from a from-scratch implementation written in this file and the framing
helpers of tests/verify/test_fiatshamir.py (hashlib and plain Python integers; nothing of
stepper.verify is used by it) following
transcripts/FIAT-SHAMIR.md, and is also pinned as hex. The framing is /1's (tests/verify/test_fiatshamir.py
pins it); /2 changes the domain and how a challenge is drawn: D0 = SHA-256 of the state, further
blocks SHA-256(D0 || u64(j)), the first L bytes little-endian mod p^k, cut into base-p digits.
Framing, wide reduction and sampling a whole extension element at once are common practice, no
source; SHA-256 is FIPS 180-4. The digits are checked against galois.GF(p) (galois, the reference
library), which refuses any integer outside [0, p).
"""

from __future__ import annotations

import hashlib
import random

import pytest

from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.transcript.model import FieldDecl, InstanceStart, RoundMsg, ScheduleDecl
from stepper.verify.fiatshamir import Sha256Schedule
from stepper.verify.one_digest import OneDigestSchedule
from stepper.verify.schedules import schedule_for
from tests.verify.test_fiatshamir import assert_glue_vectors, el, frame, text, u64  # shared with /1's tests

P = NAMED_PRIMES["babybear"]  # 2^31 - 2^27 + 1, common practice, no source
BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 r, from memory
LABEL = "brackwater-ferries/isle-of-quill-0740"
NAME = "stepper-sha256/2"

# Pinned vectors (also printed in transcripts/FIAT-SHAMIR.md): the /1 worked example under /2.
DIGESTS = {
    "creation": "eeda901d402f07c9dcf31d88ba02f99bdc297f5f045e3f8982da791f938adb4c",
    "field": "cb09416abe0f8b2babf9907d4631dcaf3afe60ed80e3b1baa93a3d3472c946ef",
    "schedule": "c68358534915b6c381c9427910386f806041d90cddad225213e813ab33ea54f9",
    "instance": "e191c0b11d9cb631cf08fa31777316901ee67c9c4b07d2163e9d36eed4d019b8",
    "round 1": "99a3af3d99d70ea54ad4ea93982265f15d7d283eee141012ffb35a38dac2941c",
    "challenge 1": "f4bcce6761346d278367e32e0db12ae0a02d97c2db8e70a6ac24b0b4406c8a0b",
    "round 2": "2a639b16c3e62be0f10aea67f8893a61a41cb1bf016220d48b519e95f52ae7da",
    "challenge 2": "fffbc6ba1bdc7c4baa05380b7db34b00f18f3791cbdc51a7ae2482a3bf2356f0",
}
R1, R2 = 1084678571, 663873169
ROUND1 = (23, 15, P - 33)
ROUND2 = (979755400, 2686438, 1507157054)
FINAL = 844573908  # f~(r1, r2) * h~(r1, r2)
GLUE_DIGESTS = {
    "opening f.at.r": "da5eedc1927da7fdb0d3aea07ed6e17b231a0b476e9f9d71858692eaf665a0ff",
    "opening h.at.r": "d5d5261a24e2151917e80e66f60fc8f4bc4f26c33740899c0f497676e498c880",
    "value tau": "584c8fa09b88ee13781a13a69a6c8004315533d10f63df8855df9856d86cf02f",
    "squeeze beta": "6833ebb3329a954709c1f3f0e3ae79081ca4ea8847fd9dfd68b5b5b55fd74ea6",
    "squeeze w": "606b0063a907cf1e975ea60aed7109237949faac1503ae95e7e8a661f582f075",
}
F_AT_R, H_AT_R = 1735742448, 333828861
BETA, W = 590614945, (460797975, 234867883)
BABYBEAR4_CHALLENGE = (380241737, 1112929487, 1741316206, 1275555924)
BN254_CHALLENGE = 7751006406144474714824080885081675205021942650290360728266529726930573843507


# ----- the independent implementation ----------------------------------------------------------------

def draw(state: "hashlib._Hash", p: int, k: int = 1) -> int | tuple[int, ...]:
    """The /2 challenge the state gives: one sample of L bytes mod p^k, its base-p digits."""
    first = state.copy().digest()
    wide = ((p ** k).bit_length() + 128 + 7) // 8
    stream = first + b"".join(hashlib.sha256(first + u64(j)).digest() for j in range(1, -(-wide // 32)))
    value = int.from_bytes(stream[:wide], "little") % p ** k
    return value if k == 1 else tuple(value // p ** i % p for i in range(k))


def honest_round(f: list[int], h: list[int]) -> tuple[int, ...]:
    """g(0), g(1), g(2) of the sum over the other variables of f~ * h~ (x_1 the low index bit)."""
    return tuple(sum((f[2 * i] + x * (f[2 * i + 1] - f[2 * i])) * (h[2 * i] + x * (h[2 * i + 1] - h[2 * i]))
                     for i in range(len(f) // 2)) % P for x in range(3))


def fold(table: list[int], r: int) -> list[int]:
    return [(table[2 * i] + r * (table[2 * i + 1] - table[2 * i])) % P for i in range(len(table) // 2)]


def worked_example() -> "hashlib._Hash":
    """The hand-built state of the worked example after its two rounds, every step checked."""
    state = hashlib.sha256(frame(b"domain", NAME.encode()))
    assert state.hexdigest() == DIGESTS["creation"]
    state.update(frame(b"field", u64(4) + el(P) + u64(1)))
    assert state.hexdigest() == DIGESTS["field"]
    state.update(frame(b"schedule", text(NAME) + text(LABEL)))
    assert state.hexdigest() == DIGESTS["schedule"]
    state.update(frame(b"instance", text("boarding-permutation") + u64(2) + u64(2) + text("low-first")
                       + text("evals") + el(38)))
    assert state.hexdigest() == DIGESTS["instance"]
    f, h = [3, 1, 4, 1], [5, 9, 2, 6]
    for k, (values, r) in enumerate([(ROUND1, R1), (ROUND2, R2)], start=1):
        assert honest_round(f, h) == values
        state.update(frame(b"round", u64(3) + b"".join(el(v) for v in values)))
        assert state.hexdigest() == DIGESTS[f"round {k}"]
        assert draw(state, P) == r
        state.update(frame(b"challenge", el(r)))
        assert state.hexdigest() == DIGESTS[f"challenge {k}"]
        f, h = fold(f, r), fold(h, r)
    assert (f[0], h[0], f[0] * h[0] % P) == (F_AT_R, H_AT_R, FINAL)
    return state


def one_round_state(p: int, width: int, irreducible: tuple[int, ...], label: str) -> "hashlib._Hash":
    """Hand-built: field, schedule, instance deck-slots-zero (1 variable, degree 1, claim 0), one round of two zeros."""
    k = max(len(irreducible) - 1, 1)
    state = hashlib.sha256(frame(b"domain", NAME.encode()))
    state.update(frame(b"field", u64(width) + el(p, width) + u64(k) + b"".join(el(c, width) for c in irreducible)))
    state.update(frame(b"schedule", text(NAME) + text(label)))
    state.update(frame(b"instance", text("deck-slots-zero") + u64(1) + u64(1) + text("low-first") + text("evals")
                       + bytes(k * width)))
    state.update(frame(b"round", u64(2) + bytes(2 * k * width)))
    return state


# ----- the hand-built bytes against the pinned vectors ------------------------------------------------

def test_hand_built_bytes_give_the_documented_digests_and_challenges():
    worked_example()


def test_hand_built_glue_bytes_give_the_documented_digests_and_squeezes():
    state = worked_example()
    state.update(frame(b"opening", text("f.at.r") + text("f") + el(F_AT_R)))
    assert state.hexdigest() == GLUE_DIGESTS["opening f.at.r"]
    state.update(frame(b"opening", text("h.at.r") + text("h") + el(H_AT_R)))
    assert state.hexdigest() == GLUE_DIGESTS["opening h.at.r"]
    state.update(frame(b"value", text("tau") + u64(1) + u64(2) + el(3) + el(5)))
    assert state.hexdigest() == GLUE_DIGESTS["value tau"]
    state.update(frame(b"draw", text("beta") + u64(0) + u64(1)))
    assert draw(state, P) == BETA
    state.update(frame(b"challenge", el(BETA)))
    assert state.hexdigest() == GLUE_DIGESTS["squeeze beta"]
    state.update(frame(b"draw", text("w") + u64(1) + u64(2)))
    for w in W:
        assert draw(state, P) == w
        state.update(frame(b"challenge", el(w)))
    assert state.hexdigest() == GLUE_DIGESTS["squeeze w"]


def test_hand_built_extension_and_two_block_challenges_give_the_documented_values():
    # BabyBear^4 over X^4 - 11: L = ceil((124 + 128) / 8) = 32, one block; BN254: L = 48, two blocks
    assert ((P ** 4).bit_length(), (BN254.bit_length() + 128 + 7) // 8) == (124, 48)
    assert draw(one_round_state(P, 4, (P - 11, 0, 0, 0, 1), "x"), P, 4) == BABYBEAR4_CHALLENGE
    assert draw(one_round_state(BN254, 32, (), ""), BN254) == BN254_CHALLENGE


# ----- the schedule object against them --------------------------------------------------------------

def _worked_schedule() -> Sha256Schedule:
    s = schedule_for(NAME)
    assert isinstance(s, OneDigestSchedule) and s.state_digest().hex() == DIGESTS["creation"]
    s.observe(FieldDecl(get_field(P)))
    s.observe(ScheduleDecl(NAME, LABEL))
    s.observe(InstanceStart(0, "boarding-permutation", 2, 2, 38))
    assert s.state_digest().hex() == DIGESTS["instance"]
    return s


def test_schedule_object_reproduces_the_pinned_vectors_by_observe_and_by_the_fused_step():
    s = _worked_schedule()
    s.observe(RoundMsg(0, 1, ROUND1))
    assert s.state_digest().hex() == DIGESTS["round 1"]
    assert s.challenge() == R1 and s.state_digest().hex() == DIGESTS["challenge 1"]
    s.observe(RoundMsg(0, 2, ROUND2))
    assert s.challenge() == R2 and s.state_digest().hex() == DIGESTS["challenge 2"]
    fused = _worked_schedule()
    assert fused.round_challenge(ROUND1) == R1 and fused.round_challenge(ROUND2) == R2
    assert fused.state_digest().hex() == DIGESTS["challenge 2"]


def test_schedule_object_reproduces_the_glue_vectors():
    s = _worked_schedule()
    for k, values in ((1, ROUND1), (2, ROUND2)):
        s.observe(RoundMsg(0, k, values))
        s.challenge()
    assert_glue_vectors(s, (F_AT_R, H_AT_R), BETA, W, GLUE_DIGESTS)


def test_schedule_object_reproduces_the_extension_and_two_block_challenges():
    for field, label, expected in ((get_field(P, (P - 11, 0, 0, 0, 1)), "x", BABYBEAR4_CHALLENGE),
                                   (get_field(BN254), "", BN254_CHALLENGE)):
        s = OneDigestSchedule()
        s.observe(FieldDecl(field))
        s.observe(ScheduleDecl(NAME, label))
        s.observe(InstanceStart(0, "deck-slots-zero", 1, 1, field.zero))
        assert s.round_challenge((field.zero, field.zero)) == expected


@pytest.mark.parametrize("name", ["babybear^4", "koalabear^4", "mersenne31^4", "goldilocks^2"])
def test_an_extension_challenge_is_the_base_p_digits_of_one_sample_and_lies_in_the_field(name):
    import galois  # the reference library: GF(p) refuses an integer outside [0, p)

    base, _, degree = name.partition("^")
    p, k = NAMED_PRIMES[base], int(degree)
    field = get_field(p, DEFAULT_IRREDUCIBLES[(base, k)])
    gf = galois.GF(p, compile="python-calculate")  # no JIT: seconds saved
    rng = random.Random(18)
    s = OneDigestSchedule()
    s.observe(FieldDecl(field))
    state = hashlib.sha256(frame(b"domain", NAME.encode()))
    state.update(frame(b"field", u64(field.base_bytes) + el(p, field.base_bytes) + u64(k)
                       + b"".join(el(c, field.base_bytes) for c in DEFAULT_IRREDUCIBLES[(base, k)])))
    assert s.state_digest() == state.digest()
    wide = ((p ** k).bit_length() + 128 + 7) // 8
    assert wide == 32  # one digest per challenge for every named extension
    for _ in range(40):
        values = tuple(tuple(rng.randrange(p) for _ in range(k)) for _ in range(rng.randint(1, 4)))
        s.observe(RoundMsg(0, 1, values))
        state.update(frame(b"round", u64(len(values)) + b"".join(el(c, field.base_bytes) for v in values for c in v)))
        sample = int.from_bytes(state.copy().digest()[:wide], "little")
        challenge = s.challenge()
        assert challenge == draw(state, p, k)
        assert sum(c * p ** i for i, c in enumerate(challenge)) == sample % p ** k  # base-p digits, constant first
        assert [int(c) for c in gf(list(challenge))] == list(challenge)
        state.update(frame(b"challenge", b"".join(el(c, field.base_bytes) for c in challenge)))
        assert s.state_digest() == state.digest()


@pytest.mark.parametrize("spec", [("goldilocks", 1), ("bn254", 1), ("bls12-381", 1), ("babybear", 4),
                                  ("mersenne31", 4), ("goldilocks", 2)])
def test_the_fused_step_and_the_sweep_s_digests_give_what_observe_then_challenge_gives(spec):
    # round_stepper (event-by-event replay, provers), and absorb_pieces + squeezed_rows + rederive (the sweep)
    import numpy as np

    from stepper.field.kernels import kernel_for
    from stepper.verify.packed_runs import rederive
    from stepper.verify.roundblock import block_kernel

    name, k = spec
    p = NAMED_PRIMES[name]
    field = get_field(p, DEFAULT_IRREDUCIBLES[(name, k)]) if k > 1 else get_field(p)
    one, fused, swept = OneDigestSchedule(), OneDigestSchedule(), OneDigestSchedule()
    for s in (one, fused, swept):
        s.observe(FieldDecl(field))
        s.observe(ScheduleDecl(NAME, "isle-of-quill-0740"))
        s.observe(InstanceStart(0, "deck-slots-zero", 3, 2, field.zero))
    head, challenge_head = swept.row_heads(3)
    rng = random.Random(7)
    pieces, expected = [], []
    for _ in range(6):
        values = tuple(field.embed(rng.randrange(p)) if k == 1 else tuple(rng.randrange(p) for _ in range(k))
                       for _ in range(3))
        one.observe(RoundMsg(0, 1, values))
        r = one.challenge()
        assert fused.round_challenge(values) == r and fused.state_digest() == one.state_digest()
        expected.append(r)
        packed = b"".join(field.encode(v) for v in values)
        pieces.append(head + packed if not pieces else challenge_head + field.encode(expected[-2]) + head + packed)
    pieces.append(challenge_head + field.encode(expected[-1]))
    digests = bytearray()
    swept.absorb_pieces(pieces, digests)
    blocks = -(-swept.wide_bytes // 32)  # B = ceil(L / 32): D0, then D1 .. D(B-1) from it
    assert swept.state_digest() == one.state_digest() and len(digests) == 6 * 32 * blocks
    assert swept.squeezes_per_challenge == blocks == (2 if name in ("bn254", "bls12-381") else 1)
    kernel = block_kernel(field) if k == 1 else kernel_for(field, 1 << 62)
    rows = swept.squeezed_rows(digests, 6)
    assert rows.shape[0] == 6 and rows.shape[1] >= swept.wide_bytes
    if p.bit_length() > 64:  # rows of limbs: the sweep compares the unreduced samples by a congruence
        from stepper.field.kernels.limb_rounds import wide_congruent

        samples = np.ascontiguousarray(rows[:, :swept.wide_bytes])
        assert [int.from_bytes(bytes(row), "little") % p for row in samples] == expected
        recorded = kernel.from_bytes(np.frombuffer(b"".join(field.encode(r) for r in expected),
                                                   dtype=np.uint8).reshape(6, -1))
        assert wide_congruent(kernel, samples, recorded).all()
        assert not wide_congruent(kernel, samples, recorded[::-1]).any()
        return
    got = rederive(kernel, swept, digests, 6, (6, k) if k > 1 else (6,))
    assert np.array_equal(got, np.array(expected, dtype=np.uint64))


# 2^100 - 15 (sympy.prevprime(2**100)) over X^3 + X + 5 (irreducible by galois Poly.is_irreducible): bits(p^3) = 300,
# L = 54, B = 2; BN254 over X^2 - 5 (5 a non-residue mod r, from memory; stepper's constructor checks it): bits 508,
# L = 80, B = 3; F_97 over X^3 - 5 (5 not a cube mod 97): L = 19, B = 1, one byte per coefficient
CUSTOM = (((2**100 - 15), (5, 1, 0, 1), 2), (BN254, (BN254 - 5, 0, 1), 3), (97, (92, 0, 0, 1), 1))


@pytest.mark.parametrize("p, irreducible, blocks", CUSTOM)
def test_custom_moduli_and_irreducibles_draw_whole_elements_as_written_over_b_blocks(p, irreducible, blocks):
    # the schedule object, by observe + challenge and by the fused step, against the hand-built state and draw()
    k = len(irreducible) - 1
    field = get_field(p, irreducible)
    wide = ((p ** k).bit_length() + 128 + 7) // 8
    assert -(-wide // 32) == blocks
    rng = random.Random(p % 1000)
    for label in ("x", LABEL):
        expected_state = one_round_state(p, field.base_bytes, irreducible, label)
        one, fused = OneDigestSchedule(), OneDigestSchedule()
        for s in (one, fused):
            s.observe(FieldDecl(field))
            s.observe(ScheduleDecl(NAME, label))
            s.observe(InstanceStart(0, "deck-slots-zero", 1, 1, field.zero))
        one.observe(RoundMsg(0, 1, (field.zero, field.zero)))
        assert one.state_digest() == expected_state.digest() and one.wide_bytes == wide
        expected = draw(expected_state, p, k)
        assert one.challenge() == expected == fused.round_challenge((field.zero, field.zero))
        assert one.squeezes_per_challenge == blocks
        for _ in range(5):  # later challenges: each drawn from the state after the previous one is absorbed
            expected_state.update(frame(b"challenge", b"".join(el(c, field.base_bytes) for c in expected)))
            values = tuple(tuple(rng.randrange(p) for _ in range(k)) for _ in range(2))
            expected_state.update(frame(b"round", u64(2) + b"".join(el(c, field.base_bytes) for v in values
                                                                    for c in v)))
            expected = draw(expected_state, p, k)
            one.observe(RoundMsg(0, 1, values))
            assert one.challenge() == expected == fused.round_challenge(values)
