"""The built-in schedule stepper-sha256/1 matches its written description byte for byte
(stepper-sha256/2: tests/verify/test_one_digest.py).

The bytes below are built by hand from transcripts/FIAT-SHAMIR.md and hashed with
hashlib directly, so the test checks the document, not the module against itself.
Framing and wide reduction are common practice, no source; SHA-256 is FIPS 180-4.
"""

from __future__ import annotations

import hashlib

import pytest

from stepper.errors import InputError
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, SCHEDULE_NAME, Sha256Schedule
from stepper.verify.schedules import schedule_for
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.transcript.model import ChallengeMsg, FieldDecl, InstanceStart, Note, RoundMsg, ScheduleDecl

P = NAMED_PRIMES["babybear"]  # 2^31 - 2^27 + 1, common practice, no source
LABEL = "brackwater-ferries/isle-of-quill-0740"

# Pinned vectors (also printed in transcripts/FIAT-SHAMIR.md).
DIGESTS = {
    "creation": "4357b4a4788d0a51bb7153c0310113c0d1ad76db4a142afe1435c3b248c39f28",
    "field": "361805b9d4b44754e1d82547f54e791d2e39bc6de4e41e9f6bb64b97f613a598",
    "schedule": "4b5b4ca81f60cdcc3c28ae2cbe680fa9940b8e92f5810ddd01bf22f7482a967a",
    "instance": "42a241d0bb6f284f822ac8977775128ead0b268349a080b068341b5c43baca22",
    "round 1": "af92cc581b736cf9ea1b16275802072b8c6de4a63892709a835be6be9d41c4aa",
    "challenge 1": "8b71f5ec12e0da4575334a33533d5bdc3ef44510577c0a4456ab5a8e9206b510",
    "round 2": "118a6dd05552af8ba96311f087905df3b5685b4a836ac1b94df2329ee059900c",
    "challenge 2": "44cc77cbc299ec9a8ed44e0a06679f60d1338953528a158d6ccc01cb6b82e512",
}
R1, R2 = 1351902924, 772119923
ROUND1 = (23, 15, P - 33)
ROUND2 = (147755819, 1631890498, 1161113110)


def frame(tag: bytes, body: bytes) -> bytes:
    return bytes([len(tag)]) + tag + len(body).to_bytes(8, "little") + body


def u64(n: int) -> bytes:
    return n.to_bytes(8, "little")


def text(s: str) -> bytes:
    return u64(len(s.encode())) + s.encode()


def el(v: int, width: int = 4) -> bytes:
    return v.to_bytes(width, "little")


def squeeze(state: "hashlib._Hash", p: int, sample: int = 0) -> int:
    wide = (p.bit_length() + 128 + 7) // 8
    stream = b""
    for j in range(-(-wide // 32)):
        h = state.copy()
        h.update(frame(b"squeeze", u64(sample) + u64(j)))
        stream += h.digest()
    return int.from_bytes(stream[:wide], "little") % p


def test_hand_built_bytes_give_the_documented_digests_and_challenges():
    state = hashlib.sha256(frame(b"domain", b"stepper-sha256/1"))
    assert state.copy().hexdigest() == DIGESTS["creation"]
    state.update(frame(b"field", u64(4) + el(P) + u64(1)))
    assert state.copy().hexdigest() == DIGESTS["field"]
    state.update(frame(b"schedule", text(SCHEDULE_NAME) + text(LABEL)))
    assert state.copy().hexdigest() == DIGESTS["schedule"]
    state.update(frame(b"instance", text("boarding-permutation") + u64(2) + u64(2) + text("low-first")
                       + text("evals") + el(38)))
    assert state.copy().hexdigest() == DIGESTS["instance"]
    for k, (values, r) in enumerate([(ROUND1, R1), (ROUND2, R2)], start=1):
        state.update(frame(b"round", u64(3) + b"".join(el(v) for v in values)))
        assert state.copy().hexdigest() == DIGESTS[f"round {k}"]
        assert squeeze(state, P) == r
        state.update(frame(b"challenge", el(r)))
        assert state.copy().hexdigest() == DIGESTS[f"challenge {k}"]


def test_schedule_object_reproduces_the_pinned_vectors():
    field = get_field(P)
    s = Sha256Schedule()
    assert s.state_digest().hex() == DIGESTS["creation"]
    s.observe(FieldDecl(field))
    s.observe(ScheduleDecl(SCHEDULE_NAME, LABEL))
    s.observe(InstanceStart(0, "boarding-permutation", 2, 2, 38))
    assert s.state_digest().hex() == DIGESTS["instance"]
    s.observe(RoundMsg(0, 1, ROUND1))
    assert s.challenge() == R1
    s.observe(ChallengeMsg(0, 1, R1))  # observing a challenge absorbs nothing
    s.observe(Note("kept out of the hash"))
    assert s.state_digest().hex() == DIGESTS["challenge 1"]
    s.observe(RoundMsg(0, 2, ROUND2))
    assert s.challenge() == R2
    assert s.state_digest().hex() == DIGESTS["challenge 2"]


def test_pinned_rounds_are_the_honest_rounds_of_the_documented_tables():
    # g(X) = sum over the other variable of f~ * h~, tables f = [3,1,4,1], h = [5,9,2,6] (our example).
    f, h = [3, 1, 4, 1], [5, 9, 2, 6]
    assert sum(a * b for a, b in zip(f, h)) == 38
    for values, r in [(ROUND1, R1), (ROUND2, R2)]:
        evals = []
        for x in range(3):
            evals.append(sum((f[2 * i] + x * (f[2 * i + 1] - f[2 * i])) * (h[2 * i] + x * (h[2 * i + 1] - h[2 * i]))
                             for i in range(len(f) // 2)) % P)
        assert tuple(evals) == values
        f = [(f[2 * i] + r * (f[2 * i + 1] - f[2 * i])) % P for i in range(len(f) // 2)]
        h = [(h[2 * i] + r * (h[2 * i + 1] - h[2 * i])) % P for i in range(len(h) // 2)]
    assert f[0] * h[0] % P == 360423787


def _one_round(field, label: str, claim) -> Sha256Schedule:
    s = Sha256Schedule()
    s.observe(FieldDecl(field))
    s.observe(ScheduleDecl(SCHEDULE_NAME, label))
    s.observe(InstanceStart(0, "deck-slots-zero", 1, 1, claim))
    s.observe(RoundMsg(0, 1, (field.zero, field.zero)))
    return s


def test_extension_challenge_is_four_independent_base_samples():
    ext = get_field(P, (P - 11, 0, 0, 0, 1))
    s = _one_round(ext, "x", ext.zero)
    state = s._state.copy()
    expected = tuple(squeeze(state, P, sample) for sample in range(4))
    assert expected == (1064097139, 1867985932, 1796095574, 1294121639)
    assert s.challenge() == expected


def test_bn254_challenge_uses_two_hash_blocks():
    bn = get_field(NAMED_PRIMES["bn254"])
    s = _one_round(bn, "", 0)
    assert (bn.p.bit_length() + 128 + 7) // 8 == 48
    assert s.challenge() == 1014743571561303838409839392032128321833661795442976132419882476512372186109


def test_claim_label_and_values_all_change_the_challenge():
    field = get_field(P)
    base = _one_round(field, "a", 0).challenge()
    assert _one_round(field, "b", 0).challenge() != base
    assert _one_round(field, "a", 1).challenge() != base
    s = Sha256Schedule()
    s.observe(FieldDecl(field))
    s.observe(ScheduleDecl(SCHEDULE_NAME, "a"))
    s.observe(InstanceStart(0, "deck-slots-zero", 1, 1, 0))
    s.observe(RoundMsg(0, 1, (0, 1)))
    assert s.challenge() != base


def test_foreign_schedule_declaration_and_missing_field_are_refused():
    s = Sha256Schedule()
    with pytest.raises(InputError):
        s.observe(RoundMsg(0, 1, (0, 0)))
    s.observe(FieldDecl(get_field(P)))
    with pytest.raises(InputError):
        s.observe(ScheduleDecl("someone-elses/2"))


def test_fused_round_challenge_reproduces_the_pinned_vectors():
    # The same hand-built vectors as above, reached through the one-step hot path.
    s = Sha256Schedule()
    s.observe(FieldDecl(get_field(P)))
    s.observe(ScheduleDecl(SCHEDULE_NAME, LABEL))
    s.observe(InstanceStart(0, "boarding-permutation", 2, 2, 38))
    assert s.round_challenge(ROUND1) == R1
    assert s.state_digest().hex() == DIGESTS["challenge 1"]
    assert s.round_challenge(ROUND2) == R2
    assert s.state_digest().hex() == DIGESTS["challenge 2"]


@pytest.mark.parametrize("spec", [("goldilocks", None), ("bn254", None), ("babybear", 4), ("mersenne31", None)])
def test_fused_round_challenge_equals_observe_then_challenge(spec):
    name, ext_degree = spec
    p = NAMED_PRIMES[name]
    field = get_field(p, (p - 11, 0, 0, 0, 1)) if ext_degree else get_field(p)
    two, one = Sha256Schedule(), Sha256Schedule()
    for s in (two, one):
        s.observe(FieldDecl(field))
        s.observe(ScheduleDecl(SCHEDULE_NAME, "isle-of-quill-0740"))
        s.observe(InstanceStart(0, "deck-slots-zero", 3, 2, field.zero))
    values = (field.embed(5), field.embed(p - 5), field.embed(12345))
    for _ in range(3):
        two.observe(RoundMsg(0, 1, values))
        r = two.challenge()
        assert one.round_challenge(values) == r
        assert one.state_digest() == two.state_digest()
        values = (field.embed(7), r, field.embed(1)) if not ext_degree else (field.embed(7), r, r)


# ----- the glue: openings and values absorbed, squeezes derived (transcripts/FIAT-SHAMIR.md, "The glue") -----------
GLUE_DIGESTS = {
    "opening f.at.r": "c18d10f3ae73ef9a76b5fdde442b79fb0f421bcae3d1b01660fe66f5385f6edf",
    "opening h.at.r": "31e6e042b5788eb10be0f30c38c3d56c7dc832fb8c97d2a11b7f30bdf4cb9e4f",
    "value tau": "813086a110a1c9dc2e81db38953d169a2e47cfbb613472f331ed6024a9514a1a",
    "squeeze beta": "a720b2d6cd7c216deb5997fc1c8a417e373e5e0f202398a90868e8865976223f",
    "squeeze w": "53839eb28dd8ee0d69f298d743588c31c3b241570328e2f727db90c31f1b7ef4",
}
F_AT_R, H_AT_R = 1544739144, 1077986011  # f~(r1, r2), h~(r1, r2); their product is the pinned final 360423787
BETA, W = 1769158119, (101890162, 1751199516)


def _pinned_state() -> "hashlib._Hash":
    state = hashlib.sha256(frame(b"domain", b"stepper-sha256/1"))
    state.update(frame(b"field", u64(4) + el(P) + u64(1)))
    state.update(frame(b"schedule", text(SCHEDULE_NAME) + text(LABEL)))
    state.update(frame(b"instance", text("boarding-permutation") + u64(2) + u64(2) + text("low-first")
                       + text("evals") + el(38)))
    for values, r in ((ROUND1, R1), (ROUND2, R2)):
        state.update(frame(b"round", u64(3) + b"".join(el(v) for v in values)))
        assert squeeze(state, P) == r
        state.update(frame(b"challenge", el(r)))
    assert state.copy().hexdigest() == DIGESTS["challenge 2"]
    return state


def test_hand_built_glue_bytes_give_the_documented_digests_and_squeezes():
    state = _pinned_state()
    assert F_AT_R * H_AT_R % P == 360423787
    state.update(frame(b"opening", text("f.at.r") + text("f") + el(F_AT_R)))
    assert state.copy().hexdigest() == GLUE_DIGESTS["opening f.at.r"]
    state.update(frame(b"opening", text("h.at.r") + text("h") + el(H_AT_R)))
    assert state.copy().hexdigest() == GLUE_DIGESTS["opening h.at.r"]
    state.update(frame(b"value", text("tau") + u64(1) + u64(2) + el(3) + el(5)))
    assert state.copy().hexdigest() == GLUE_DIGESTS["value tau"]
    state.update(frame(b"draw", text("beta") + u64(0) + u64(1)))
    assert squeeze(state, P) == BETA
    state.update(frame(b"challenge", el(BETA)))
    assert state.copy().hexdigest() == GLUE_DIGESTS["squeeze beta"]
    state.update(frame(b"draw", text("w") + u64(1) + u64(2)))
    for w in W:
        assert squeeze(state, P) == w
        state.update(frame(b"challenge", el(w)))
    assert state.copy().hexdigest() == GLUE_DIGESTS["squeeze w"]


def _after_the_two_rounds() -> Sha256Schedule:
    """The schedule of the worked example after its two rounds, each challenge checked on the way."""
    s = Sha256Schedule()
    s.observe(FieldDecl(get_field(P)))
    s.observe(ScheduleDecl(SCHEDULE_NAME, LABEL))
    s.observe(InstanceStart(0, "boarding-permutation", 2, 2, 38))
    for k, (values, r) in enumerate(((ROUND1, R1), (ROUND2, R2)), start=1):
        s.observe(RoundMsg(0, k, values))
        assert s.challenge() == r
    return s


def assert_glue_vectors(s: Sha256Schedule, openings: tuple[int, int], beta: int, w: tuple[int, int],
                        digests: dict[str, str]) -> None:
    """The worked example's glue observed by a schedule after its two rounds: the two openings, tau,
    then beta and w squeezed; the state digests and the squeezes as pinned."""
    from stepper.transcript.model import NamedValue, Opening, Squeeze

    s.observe(Opening("f.at.r", openings[0], "f", 0))
    s.observe(Opening("h.at.r", openings[1], "h", 0))
    s.observe(NamedValue("tau", (3, 5), True, 0))
    assert s.state_digest().hex() == digests["value tau"]
    s.observe(Squeeze("beta", 999, False, 0))  # observing a squeeze absorbs nothing: squeeze() does
    assert s.squeeze("beta") == beta and s.state_digest().hex() == digests["squeeze beta"]
    assert s.squeeze("w", 2) == w and s.state_digest().hex() == digests["squeeze w"]


def test_schedule_object_reproduces_the_glue_vectors():
    assert_glue_vectors(_after_the_two_rounds(), (F_AT_R, H_AT_R), BETA, W, GLUE_DIGESTS)


def test_one_element_and_a_list_of_one_are_absorbed_apart():
    field = get_field(P)
    from stepper.transcript.model import NamedValue

    digests = []
    for record in (NamedValue("x", 4, False), NamedValue("x", (4,), True)):
        s = Sha256Schedule()
        s.observe(FieldDecl(field))
        s.observe(record)
        digests.append(s.state_digest())
    assert digests[0] != digests[1]


def test_glue_stream_absorbed_by_pieces_reproduces_the_glue_vectors():
    # the whole-file pass frames a run's glue by columns (stepper.verify.glue_columns): the same bytes as
    # the record-by-record schedule above, the sent squeezes standing in for the derived ones
    s = _after_the_two_rounds()
    stream, ends, cuts = s.glue_stream(
        ["opening", "opening", "value", "squeeze", "squeeze"], ["f.at.r", "h.at.r", "tau", "beta", "w"],
        ["f", "h", "", "", ""], [el(F_AT_R), el(H_AT_R), el(3) + el(5), el(BETA), el(W[0]) + el(W[1])],
        [1, 1, 2, 1, 2], [False, False, True, False, True])
    assert len(ends) == 5 and ends[-1] == len(stream) and len(cuts) == 3  # a draw, then w's two challenges
    marks = [0, *cuts, len(stream)]
    digests = bytearray()
    s.absorb_pieces([stream[a:b] for a, b in zip(marks, marks[1:])], digests)
    assert s.state_digest().hex() == GLUE_DIGESTS["squeeze w"]
    assert [int.from_bytes(digests[i:i + s.wide_bytes], "little") % P for i in (0, 32, 64)] == [BETA, *W]


@pytest.mark.parametrize("schedule", BUILTIN_SCHEDULES)
@pytest.mark.parametrize("spec", [("goldilocks", None), ("babybear", 4), ("bn254", None)])
def test_glue_stream_of_single_elements_gives_the_state_of_the_records_observed_one_by_one(spec, schedule):
    # the glue of many runs framed at once (values, openings and squeezes of one element each, names of
    # every length) against the schedule observing each record and squeezing, the squeezed elements sent
    import random

    from stepper.transcript.model import NamedValue, Opening

    name, ext_degree = spec
    p = NAMED_PRIMES[name]
    field = get_field(p, (p - 11, 0, 0, 0, 1)) if ext_degree else get_field(p)
    rng = random.Random(5)
    one, bulk = schedule_for(schedule), schedule_for(schedule)
    for s in (one, bulk):
        s.observe(FieldDecl(field))
        s.observe(InstanceStart(0, "deck-slots-zero", 1, 1, field.zero))
    kinds, names, data, squeezed = [], [], [], []
    for i in range(60):
        kind = rng.choice(["value", "squeeze", "opening"])
        label = "x" * rng.randrange(1, 9) + f".{i}"
        if kind == "squeeze":
            element = one.squeeze(label)
            squeezed.append(element)
        else:
            element = field.embed(rng.randrange(p)) if not ext_degree else tuple(rng.randrange(p) for _ in range(4))
            one.observe(NamedValue(label, element) if kind == "value" else Opening(label, element, label, 0))
        kinds.append(kind)
        names.append(label)
        data.append(field.encode(element))
    stream, ends, cuts = bulk.glue_stream(kinds, names, None, data, [1] * 60, [False] * 60)
    assert ends[-1] == len(stream) and len(cuts) == len(squeezed)
    marks = [0, *cuts, len(stream)]
    digests = bytearray()
    bulk.absorb_pieces([stream[a:b] for a, b in zip(marks, marks[1:])], digests)
    assert bulk.state_digest() == one.state_digest()


def test_instance_frames_reproduce_the_pinned_instance_vector():
    s = Sha256Schedule()
    s.observe(FieldDecl(get_field(P)))
    s.observe(ScheduleDecl(SCHEDULE_NAME, LABEL))
    frames, ends = s.instance_frames(["boarding-permutation"], [2], [2], el(38))
    assert frames == frame(b"instance", text("boarding-permutation") + u64(2) + u64(2) + text("low-first")
                           + text("evals") + el(38)) and ends == [len(frames)]
    s.absorb_frames(frames)
    assert s.state_digest().hex() == DIGESTS["instance"]


@pytest.mark.parametrize("spec", [("goldilocks", None), ("babybear", 4), ("bn254", None), ("bls12-381", None)])
def test_instance_frames_built_together_give_the_state_of_each_statement_observed(spec):
    # the statements of many instances framed at once (names of every length, empty and not ASCII)
    # against the schedule observing each record: the state after every instance, through the ends
    import random

    name, ext_degree = spec
    p = NAMED_PRIMES[name]
    field = get_field(p, (p - 11, 0, 0, 0, 1)) if ext_degree else get_field(p)
    rng = random.Random(6)
    one, bulk = Sha256Schedule(), Sha256Schedule()
    for s in (one, bulk):
        s.observe(FieldDecl(field))
    starts = [InstanceStart(i, rng.choice(["", "sailing-0740", "quay-\u00e5", "x" * rng.randrange(40)]),
                            rng.randint(1, 64), rng.randrange(1 << 12),
                            field.embed(rng.randrange(p)) if not ext_degree else tuple(rng.randrange(p) for _ in range(4)))
              for i in range(30)]
    frames, ends = bulk.instance_frames([s.name for s in starts], [s.num_vars for s in starts],
                                        [s.degree for s in starts], b"".join(field.encode(s.claim) for s in starts))
    assert ends[-1] == len(frames)
    base = bulk.state_digest()
    for start, end in zip(starts, ends):
        one.observe(start)
        again = Sha256Schedule()
        again.observe(FieldDecl(field))
        assert again.state_digest() == base
        again.absorb_frames(frames[:end])
        assert again.state_digest() == one.state_digest()
    with pytest.raises(ValueError):
        bulk.instance_frames(["a", "b"], [1, 1], [1, 1], field.encode(field.zero))
