"""stepper.verify.sweep at the edges of what it takes: every input below is a transcript built to break one
assumption the whole-file pass makes about the bytes it reads at fixed offsets (the writer's msgpack forms, the
canonical range of each coefficient, the 64-instance groups it hashes from one buffer, a file cut where a run
or its glue ends). `stepper check` must print, byte for byte, what the event-by-event replay prints, and the
pass must never report on a file the replay refuses or rejects.

The transcripts come from the independent plain-integer prover of tests/verify/test_sweep.py (Knobs and
write_transcript) or its glued proof (write_pointed), then are changed here and sealed again (a SHA-256 over
the changed bytes, transcripts/FORMAT.md), so the digest never explains a refusal. Moduli and irreducibles are
those of tests/verify/test_sweep.py (each named with its source there). The canonical range 0 <= v < p of every
base coefficient is the event stream's contract (transcripts/EVENTS.md); msgpack's forms are the MessagePack
specification's (github.com/msgpack/msgpack/blob/master/spec.md): a bin of n bytes may be written as bin 8,
bin 16 or bin 32, an unsigned integer below 128 as a positive fixint or uint 8, a string below 32 bytes as a
fixstr or str 8, a map of fewer than 16 entries as a fixmap or map 16, and a map's entries in any order.
"""

from __future__ import annotations

import random
from pathlib import Path
from typing import Any, Callable

import msgpack
import pytest

import tests.verify.test_sweep as helpers
from tests.verify.test_sweep import (
    FIELDS, Knobs, Plain, check_both, element, event_spans, horner, resealed, returns_of, round_poly, seal, sent_values,
    swept_report, write_pointed, write_transcript,
)
import stepper.verify.glue_texts as glue_texts
from stepper.transcript.store import TranscriptWriter
from stepper.transcript.store.writer import MAGIC

GLUE = ("value", "squeeze", "opening")


def instance_events(data: bytes) -> list[list[tuple[str, int, int]]]:
    """Per instance, (type, start, end) of its event and every event after it up to the next instance."""
    groups: list[list[tuple[str, int, int]]] = []
    for kind, start, end in event_spans(data):
        if kind == "instance":
            groups.append([])
        if groups and kind != "end":
            groups[-1].append((kind, start, end))
    return groups


def replaced(data: bytes, start: int, end: int, new: bytes) -> bytes:
    """The transcript with the event at ``start:end`` replaced by ``new``, sealed again."""
    return resealed(data[:start] + new + data[end:])


def one_off(data: bytes, instance: int, kind: str, which: int = -1, key: str = "value") -> bytes:
    """A Goldilocks transcript with the element ``key`` of an event of ``kind`` among those of ``instance``
    (``which``: the last by default) one more, mod p (canonical, so only a check can refuse it), sealed again."""
    p = FIELDS["goldilocks"][0].p
    _, start, end = [event for event in instance_events(data)[instance] if event[0] == kind][which]
    payload = msgpack.unpackb(data[start:end], raw=False)
    payload[key] = ((int.from_bytes(payload[key], "little") + 1) % p).to_bytes(8, "little")
    return replaced(data, start, end, msgpack.packb(payload, use_bin_type=True))


# ----- 1. a coefficient at or past p, anywhere -------------------------------------------


def past_p(cell: bytes, coefficient: int, base_bytes: int, p: int) -> bytes:
    """``cell`` (one packed element) with base coefficient ``coefficient`` moved to v + p, its residue
    unchanged, or to p when v + p does not fit the coefficient's bytes."""
    at = coefficient * base_bytes
    value = int.from_bytes(cell[at:at + base_bytes], "little")
    moved = value + p if value + p < 256 ** base_bytes else p
    return cell[:at] + moved.to_bytes(base_bytes, "little") + cell[at + base_bytes:]


NONCANONICAL_FIELDS = ("goldilocks", "babybear", "p64", "bn254", "bls12-381", "babybear^4", "goldilocks^2",
                       "mersenne31^4", "p97^3", "p100^3")
CELLS = ("round", "challenge", "final", "claim", "value", "opening", "squeeze")


@pytest.mark.parametrize("field", NONCANONICAL_FIELDS)
@pytest.mark.parametrize("cell", CELLS)
def test_a_coefficient_at_or_past_p_inside_a_run_of_alike_instances_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, field, cell):
    # instance 6 of 12 laid out alike (one round count, names of one length): its first base coefficient
    # (the constant term of an extension element, which a test of the last coefficient would miss) moved by p.
    # The residue is unchanged, so every congruence the block checks still holds: only a range check refuses it
    ar = FIELDS[field][0]
    glued = cell in GLUE
    knobs = Knobs(field=field, schedule="builtin", instances=12, num_vars=3, degrees=(2,), low_first=True,
                  names=("sailing-",), glue=glued, glue_after_only=cell != "value", seed=17)
    data = write_transcript(tmp_path / "honest.sumtr", knobs).path.read_bytes()
    base_bytes = (ar.p.bit_length() + 7) // 8
    wanted = "instance" if cell == "claim" else cell
    kind, start, end = next(event for event in instance_events(data)[6] if event[0] == wanted)
    payload = msgpack.unpackb(data[start:end], raw=False)
    key = {"round": "evals", "instance": "claim"}.get(kind, "value")
    width = base_bytes * ar.k
    at = width if kind == "round" else 0  # g(1) of the round; the element itself elsewhere
    if isinstance(payload[key], list):  # a point sent as a value: its first coordinate
        payload[key][0] = past_p(payload[key][0], 0, base_bytes, ar.p)
    else:
        payload[key] = payload[key][:at] + past_p(payload[key][at:at + width], 0, base_bytes, ar.p) \
            + payload[key][at + width:]
    new = msgpack.packb(payload, use_bin_type=True)
    assert len(new) == end - start  # the same layout: only the coefficient's bytes differ
    path = tmp_path / "past-p.sumtr"
    path.write_bytes(replaced(data, start, end, new))
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert code == 2 and swept is None and out == "", (code, out, err)


# ----- 2. the same proof in other valid msgpack forms ------------------------------------


def packed_map(payload: dict[str, Any], key: str | None = None, value: bytes = b"", head: bytes | None = None,
               order: list[str] | None = None) -> bytes:
    """``payload`` packed as msgpack's shortest forms would pack it but for ``key``, whose value is the
    bytes ``value``, the map's head (``head``) and its keys' order (``order``)."""
    keys = order or list(payload)
    out = head if head is not None else msgpack.packb(dict.fromkeys(keys))[:1]
    for name in keys:
        out += msgpack.packb(name) + (value if name == key else msgpack.packb(payload[name], use_bin_type=True))
    return out


def bin16(blob: bytes) -> bytes:
    return b"\xc5" + len(blob).to_bytes(2, "big") + blob


def bin32(blob: bytes) -> bytes:
    return b"\xc6" + len(blob).to_bytes(4, "big") + blob


def str8(text: str) -> bytes:
    raw = text.encode()
    return b"\xd9" + bytes([len(raw)]) + raw


def decimal(field: str, blob: bytes) -> Any:
    """A packed element as the event stream's decimal text (a list of texts in an extension)."""
    ar = FIELDS[field][0]
    base_bytes = len(blob) // ar.k
    texts = [str(int.from_bytes(blob[i:i + base_bytes], "little")) for i in range(0, len(blob), base_bytes)]
    return texts[0] if ar.k == 1 else texts


# (the event changed, how) -> the changed event's bytes from its payload, in field ``field``
Repack = Callable[[dict[str, Any], str], bytes]
FORMS: dict[str, tuple[str, Repack]] = {
    "round values in a bin 16": ("round", lambda pl, f: packed_map(pl, "evals", bin16(pl["evals"]))),
    "round values as a list of cells": ("round", lambda pl, f: packed_map(pl, "evals", msgpack.packb(
        [pl["evals"][i:i + len(pl["evals"]) // 3] for i in range(0, len(pl["evals"]), len(pl["evals"]) // 3)],
        use_bin_type=True))),
    "round keys in the other order": ("round", lambda pl, f: packed_map(pl, order=["evals", "type"])),
    "a challenge in a bin 32": ("challenge", lambda pl, f: packed_map(pl, "value", bin32(pl["value"]))),
    "a challenge as decimal text": ("challenge", lambda pl, f: packed_map(pl, "value", msgpack.packb(
        decimal(f, pl["value"])))),
    "a final in a bin 16": ("final", lambda pl, f: packed_map(pl, "value", bin16(pl["value"]))),
    "a final as decimal text": ("final", lambda pl, f: packed_map(pl, "value", msgpack.packb(decimal(f, pl["value"])))),
    "a claim in a bin 16": ("instance", lambda pl, f: packed_map(pl, "claim", bin16(pl["claim"]))),
    "num_vars as a uint 8": ("instance", lambda pl, f: packed_map(pl, "num_vars", b"\xcc" + bytes([pl["num_vars"]]))),
    "degree as an int 8": ("instance", lambda pl, f: packed_map(pl, "degree", b"\xd0" + bytes([pl["degree"]]))),
    "a name as a str 8": ("instance", lambda pl, f: packed_map(pl, "name", str8(pl["name"]))),
    "an instance as a map 16": ("instance", lambda pl, f: packed_map(pl, head=b"\xde" + len(pl).to_bytes(2, "big"))),
    "instance keys in another order": ("instance", lambda pl, f: packed_map(
        pl, order=["type", "name", "degree", "num_vars", *list(pl)[4:]])),
    "a glue name as a str 8": ("opening", lambda pl, f: packed_map(pl, "name", str8(pl["name"]))),
    "a glue element in a bin 16": ("squeeze", lambda pl, f: packed_map(pl, "value", bin16(pl["value"]))),
    "a glue event as a map 16": ("value", lambda pl, f: packed_map(pl, head=b"\xde" + len(pl).to_bytes(2, "big"))),
}


@pytest.mark.parametrize("field", ["goldilocks", "bn254", "babybear^4"])
@pytest.mark.parametrize("form", sorted(FORMS))
def test_an_event_of_an_alike_run_packed_in_another_valid_msgpack_form_checks_as_the_replay(
        tmp_path, capsys, monkeypatch, field, form):
    # the sweep reads the runs of instances laid out alike at fixed offsets, as the writer packs them; one event
    # of instance 6 of 12 packed another valid way (the same payload once unpacked, or the same elements as
    # decimal text or a list of cells: the same proof, since the schedule absorbs values, not bytes) must check
    # as the replay checks it, passing; and with a challenge of instance 7 wrong too, failing where it says
    kind, repack = FORMS[form]
    glued = kind in GLUE
    knobs = Knobs(field=field, schedule="builtin", instances=12, num_vars=3, degrees=(2,), low_first=True,
                  names=("sailing-",), glue=glued, glue_after_only=kind != "value", seed=23)
    data = write_transcript(tmp_path / "honest.sumtr", knobs).path.read_bytes()
    events = instance_events(data)[6]
    _, start, end = next(event for event in events if event[0] == kind)
    payload = msgpack.unpackb(data[start:end], raw=False)
    new = repack(payload, field)
    assert new != data[start:end]
    if "text" not in form and "list" not in form:  # those two send the same elements in the stream's other forms
        assert msgpack.unpackb(new, raw=False) == payload
    path = tmp_path / "repacked.sumtr"
    path.write_bytes(replaced(data, start, end, new))
    code, out, err, _ = check_both(capsys, monkeypatch, path)
    assert code == 0, (out, err)
    # a challenge of instance 7 one off as well: rejected at that instance, with the report the replay makes
    ar = FIELDS[field][0]
    changed = path.read_bytes()
    _, c_start, c_end = next(event for event in instance_events(changed)[7] if event[0] == "challenge")
    challenge = msgpack.unpackb(changed[c_start:c_end], raw=False)
    base_bytes = (ar.p.bit_length() + 7) // 8
    value = int.from_bytes(challenge["value"][:base_bytes], "little")
    challenge["value"] = ((value + 1) % ar.p).to_bytes(base_bytes, "little") + challenge["value"][base_bytes:]
    path.write_bytes(replaced(changed, c_start, c_end, msgpack.packb(challenge, use_bin_type=True)))
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert code == 1 and swept is None and "challenge" in out, (out, err)


# ----- 3. the 64-instance groups hashed from one buffer ----------------------------------

# 9 | 10 and 99 | 100: names grow a digit (q9, q10; q99, q100), so a span of instances laid out alike ends; 73 | 74:
# the first group of 64 alike instances ends (they start at 10); 129: the last instance, in the shorter last group
EDGES = (9, 10, 73, 74, 99, 100, 129)


@pytest.fixture(scope="module")
def alike_runs(tmp_path_factory: pytest.TempPathFactory) -> bytes:
    """130 plain instances laid out alike under stepper-sha256/1 (names of one length from instance 10 on: the
    instances 0-9 are taken one by one, the rest in groups of 64 and a shorter last one)."""
    knobs = Knobs(field="goldilocks", schedule="builtin", instances=130, num_vars=2, degrees=(2,), low_first=True,
                  names=("q",), seed=29)
    return write_transcript(tmp_path_factory.mktemp("alike") / "alike.sumtr", knobs).path.read_bytes()


@pytest.mark.parametrize("instance", EDGES)
@pytest.mark.parametrize("kind", ["challenge", "final"])
def test_a_wrong_value_on_either_side_of_a_64_instance_group_is_named_as_the_replay_names_it(
        tmp_path, capsys, monkeypatch, alike_runs, instance, kind):
    path = tmp_path / "alike.sumtr"
    path.write_bytes(alike_runs)
    assert swept_report(path, 3) is not None  # not vacuous: the honest file is taken whole
    path.write_bytes(one_off(alike_runs, instance, kind))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 1 and swept is None and f"instance #{instance} " in out and kind in out, (out, err)


@pytest.fixture(scope="module")
def glued_alike(tmp_path_factory: pytest.TempPathFactory) -> bytes:
    """write_pointed's glued proof of 130 instances without point(NAME): instances 10-99 and 100-129 laid out
    alike (names sailing.10 ... sailing.99, then one digit longer), each run followed by its openings and one
    squeeze."""
    path = tmp_path_factory.mktemp("glued") / "glued.sumtr"
    write_pointed(path, count=130, pointed=False, seed=43)
    return path.read_bytes()


@pytest.mark.parametrize("instance", EDGES)
@pytest.mark.parametrize("kind", ["squeeze", "opening"])
def test_a_wrong_squeeze_or_opening_at_a_group_or_name_length_edge_of_glued_instances_checks_as_the_replay(
        tmp_path, capsys, monkeypatch, glued_alike, instance, kind):
    # the same edges (EDGES): names sailing.9 | sailing.10 and sailing.99 | sailing.100; the glue after the last
    # instance is read after the groups
    path = tmp_path / "glued.sumtr"
    path.write_bytes(glued_alike)
    assert swept_report(path, 3) is not None
    path.write_bytes(one_off(glued_alike, instance, kind))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 1 and swept is None and f"instance #{instance} " in out, (out, err)
    assert ("squeeze" if kind == "squeeze" else "evaluation") in out, out


# ----- 4. a file cut where a run or its glue ends ----------------------------------------


@pytest.mark.parametrize("cut", ["before an instance", "after a final", "after the glue", "inside a glue event",
                                 "inside a run"])
def test_a_transcript_cut_at_a_run_or_glue_boundary_is_left_to_the_replay(tmp_path, capsys, monkeypatch, cut):
    # no end event: the sweep declines before reading, whatever the cut lines up with, and check reports the
    # replay's incomplete (or cut-off) proof
    knobs = Knobs(field="bn254", schedule="builtin2", instances=12, num_vars=3, degrees=(2,), low_first=True,
                  names=("sailing-",), glue=True, glue_after_only=True, seed=31)
    data = write_transcript(tmp_path / "whole.sumtr", knobs).path.read_bytes()
    events = instance_events(data)[6]
    final = next(event for event in events if event[0] == "final")
    glue = [event for event in events if event[0] in GLUE]
    at = {"before an instance": events[0][1], "after a final": final[2], "after the glue": glue[-1][2],
          "inside a glue event": glue[0][1] + 7, "inside a run": final[1] - 3}[cut]
    assert len(MAGIC) < at < len(data)
    path = tmp_path / "cut.sumtr"
    path.write_bytes(data[:at])
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert swept is None and code in (2, 3), (code, out, err)


@pytest.mark.parametrize("field", ["goldilocks", "babybear", "bn254", "bls12-381", "babybear^4", "goldilocks^2",
                                   "p100^3"])
def test_under_stepper_sha256_2_a_challenge_one_multiple_of_p_past_the_derived_one_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, field):
    # stepper-sha256/2 draws a whole element from one digest; over BN254 and BLS12-381 the sweep compares the
    # recorded challenge with the unreduced sample by a congruence, which v + p (the same residue) satisfies:
    # only the range check refuses it, as the replay's reader does (exit 2)
    ar = FIELDS[field][0]
    knobs = Knobs(field=field, schedule="builtin2", instances=12, num_vars=3, degrees=(2,), low_first=True,
                  names=("sailing-",), seed=19)
    data = write_transcript(tmp_path / "honest.sumtr", knobs).path.read_bytes()
    base_bytes = (ar.p.bit_length() + 7) // 8
    _, start, end = [event for event in instance_events(data)[6] if event[0] == "challenge"][1]
    payload = msgpack.unpackb(data[start:end], raw=False)
    payload["value"] = past_p(payload["value"], 0, base_bytes, ar.p)
    path = tmp_path / "past-p.sumtr"
    path.write_bytes(replaced(data, start, end, msgpack.packb(payload, use_bin_type=True)))
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert code == 2 and swept is None and out == "", (code, out, err)


# ----- 5. an event cut by the end of a chunk ---------------------------------------------


@pytest.mark.parametrize("where", [0, 1, "middle", -1])
@pytest.mark.parametrize("kind", ["challenge", "final", "instance"])
def test_a_wrong_value_in_an_event_cut_by_a_chunks_end_is_left_to_the_replay(tmp_path, alike_runs, where, kind):
    # the sweep reads a chunk at a time and finds runs of alike instances in the chunk's bytes: with the chunk
    # ending at the first byte of an event of instance 40, one byte into it, in its middle or before its last
    # byte, the honest file is still taken whole with the replay's report, and a value of that event one off
    # (a challenge, a final, a claim) makes the sweep give up
    from stepper.transcript.store.reader import ReadLimits

    _, start, end = [event for event in instance_events(alike_runs)[40] if event[0] == kind][-1]
    boundary = {0: start, 1: start + 1, "middle": (start + end) // 2, -1: end - 1}[where]
    limits = ReadLimits(chunk_bytes=boundary)  # every read that long: the first chunk ends at the boundary
    honest = tmp_path / "honest.sumtr"
    honest.write_bytes(alike_runs)
    got, expected = swept_report(honest, 3, limits), swept_report(honest, 3)
    assert got is not None and expected is not None and got[0].to_json() == expected[0].to_json()
    broken = tmp_path / "broken.sumtr"
    broken.write_bytes(one_off(alike_runs, 40, kind, key="claim" if kind == "instance" else "value"))
    assert swept_report(broken, 3, limits) is None


# ----- 6. glue read as stretches of blobs alike ------------------------------------------


def renamed(name: str, change: str) -> str:
    """A name of the same length as the opening ``name`` (c<i>, so the blob keeps its layout) that the replay
    refuses: a<i>, the opening sent just before it, or one that starts with a digit."""
    return ("a" if change == "a name sent before" else "9") + name[1:]


@pytest.mark.parametrize("instance", [10, 11, 100, 101])  # each stretch's first blob and the first compared with it
@pytest.mark.parametrize("change", ["an element past p", "a name sent before", "a name that starts with a digit"])
def test_a_glue_event_changed_in_place_in_a_stretch_of_blobs_alike_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, glued_alike, instance, change):
    # the glue after runs 10-99 (names a10 ... beta99) and 100-129 has one length per stretch: the flush reads
    # the first blob of a stretch as any glue and finds every other one to hold its bytes but for names and
    # elements (test_sweep.py changes blobs in the middle and at the end of a stretch; here its first two). An
    # opening of one blob changed without changing that layout (its element moved by p, its name one already
    # sent, or one no name may be) must be refused as the replay refuses it
    p = FIELDS["goldilocks"][0].p
    _, start, end = [event for event in instance_events(glued_alike)[instance] if event[0] == "opening"][-1]
    payload = msgpack.unpackb(glued_alike[start:end], raw=False)
    if change == "an element past p":
        payload["value"] = past_p(payload["value"], 0, 8, p)
    else:
        payload["name"] = renamed(payload["name"], change)
    new = msgpack.packb(payload, use_bin_type=True)
    assert len(new) == end - start
    path = tmp_path / "changed.sumtr"
    path.write_bytes(replaced(glued_alike, start, end, new))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 2 and swept is None, (code, out, err)


@pytest.mark.parametrize("instance", [11, 12, 55, 98, 99, 101, 129])  # after a span's first, inside, its last ones
@pytest.mark.parametrize("key", [b"\xa8num_vars", b"\xa6degree"])
def test_a_key_of_one_glued_instance_respelled_in_place_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, glued_alike, instance, key):
    # instances laid out alike are found by comparing every byte of a period that must be the first's (keys,
    # prefixes, the glue's layout) with the first's at once, up to the first period that differs: a key of one
    # instance's event spelled otherwise (its last letter changed: the same length, so every offset holds) stops
    # the span there, and the replay refuses the event; the sweep must not take it as one of the span
    _, start, end = instance_events(glued_alike)[instance][0]
    event = glued_alike[start:end]
    assert event.count(key) == 1
    new = event.replace(key, key[:-1] + bytes((key[-1] + 1,)))
    path = tmp_path / "respelled.sumtr"
    path.write_bytes(replaced(glued_alike, start, end, new))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 2 and swept is None, (code, out, err)


@pytest.mark.parametrize("instance", [11, 55, 99, 128])
@pytest.mark.parametrize("kind, which", [("opening", 0), ("opening", 1), ("opening", 2), ("squeeze", 0)])
def test_each_glue_element_one_off_inside_a_stretch_of_blobs_alike_fails_where_the_replay_fails(
        tmp_path, capsys, monkeypatch, glued_alike, instance, kind, which):
    # every glue event of a stretch's blob after the first is read at its own offset in the blob (the element
    # of each event taken by place): one element one off, whichever event holds it, fails that instance as the
    # replay fails it (an opening: its evaluation; the squeeze: the challenge it should be)
    path = tmp_path / "glued.sumtr"
    path.write_bytes(one_off(glued_alike, instance, kind, which))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 1 and swept is None and f"instance #{instance} " in out, (out, err)


# ----- 7. primes of every limb count -----------------------------------------------------

# the largest primes below 2^65, 2^200, 2^384 and 2^512 (sympy.prevprime, computed once; the test below checks
# each with sympy.isprime): 3, 7, 14 and 18 limbs of 29 bits in the block check, from the fewest a prime above
# 2^64 takes to the most the limb kernel takes
WIDE_PRIMES = {65: 2**65 - 49, 200: 2**200 - 75, 384: 2**384 - 317, 512: 2**512 - 569}


def test_the_wide_test_primes_are_the_largest_below_their_power_of_two():
    sympy = pytest.importorskip("sympy")
    for bits, p in WIDE_PRIMES.items():
        assert sympy.isprime(p) and sympy.prevprime(2**bits) == p


@pytest.mark.parametrize("bits", sorted(WIDE_PRIMES))
@pytest.mark.parametrize("fault", [None, "eval", "challenge", "final", "claim", "noncanonical"])
def test_a_declared_prime_of_every_limb_count_sweeps_honest_runs_and_leaves_every_fault_to_the_replay(
        tmp_path, capsys, monkeypatch, bits, fault):
    # the block check of a prime of 65 to 512 bits runs on rows of 29-bit limbs whose bounds depend on their
    # count (the quotient estimate from the top three limbs, products carried or not past ten limbs): a prime
    # declared by its modulus at each end and between, under both schedules, checks as the replay checks it
    p = WIDE_PRIMES[bits]
    name = f"p{bits}"
    monkeypatch.setitem(helpers.FIELDS, name, (Plain(p), {"type": "field", "modulus": str(p)}, True))
    knobs = Knobs(field=name, schedule="builtin2" if bits % 2 else "builtin", instances=8, max_vars=3,
                  max_degree=3, low_first=True, fault=fault, seed=bits)
    written = write_transcript(tmp_path / f"{name}.sumtr", knobs)
    code, out, err, swept = check_both(capsys, monkeypatch, written.path, "--rows", "3")
    if fault is None:
        assert code == 0 and swept is not None
    else:
        assert code == (2 if fault == "noncanonical" else 1) and swept is None, (code, out, err)


@pytest.mark.parametrize("block_rounds", [20, 200])  # blocks of 10 or 100 instances: names grow a digit at 10, 100
@pytest.mark.parametrize("instance", [None, 9, 10, 99, 100])
def test_names_that_grow_a_digit_where_a_block_ends_check_as_the_replay(tmp_path, capsys, monkeypatch, alike_runs,
                                                                       block_rounds, instance):
    # q9 | q10 and q99 | q100 fall on the boundary of blocks of 20 or 200 rounds (2 rounds an instance): the
    # span of instances laid out alike ends where the block does. Honest, the file is taken whole with the
    # replay's report; a challenge one off at either side of a boundary is left to the replay, which names it
    import stepper.verify.sweep as sweep_module

    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", block_rounds)
    path = tmp_path / "blocks.sumtr"
    path.write_bytes(alike_runs if instance is None else one_off(alike_runs, instance, "challenge", which=0))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    if instance is None:
        assert code == 0 and swept is not None
        got, expected = swept_report(path, 3), helpers.event_by_event(path, 3)
        assert got is not None and got[0].to_json() == expected[0].to_json()
    else:
        assert code == 1 and swept is None and f"instance #{instance} " in out, (out, err)


# ----- 8. glue texts at the parser's length limit ----------------------------------------


@pytest.fixture(scope="module")
def glued_forty(tmp_path_factory: pytest.TempPathFactory) -> bytes:
    """write_pointed's glued proof of 40 instances without point(NAME) (claim_expr and final_expr each)."""
    path = tmp_path_factory.mktemp("forty") / "glued.sumtr"
    write_pointed(path, count=40, pointed=False)
    return path.read_bytes()


@pytest.mark.parametrize("key", ["claim_expr", "final_expr"])
@pytest.mark.parametrize("instance", [25, 39, None])  # among instances laid out alike; the last; every instance
@pytest.mark.parametrize("length", [4096, 4097])  # stepper.field.expr_syntax.MAX_EXPR_LENGTH, and one past it
def test_a_glue_text_past_the_parsers_length_limit_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, glued_forty, key, instance, length):
    # the replay parses each claim_expr and final_expr and refuses one longer than 4096 characters (exit 2);
    # the sweep defers the texts and reads them by template, which must refuse the same ones. Spaces pad the
    # text: the same expression, and the schedule absorbs no text, so only the length changes. (Found here:
    # the template path had no length limit, and the sweep accepted a proof the replay refuses.)
    from stepper.field.expr_syntax import MAX_EXPR_LENGTH

    data = glued_forty
    for group in instance_events(glued_forty)[::-1] if instance is None else [instance_events(data)[instance]]:
        _, start, end = group[0]  # from the last: the offsets before it stay put
        payload = msgpack.unpackb(data[start:end], raw=False)
        if key in payload:  # every instance but the first has both texts (still laid out alike when all are padded)
            payload[key] = payload[key].ljust(length)
            data = data[:start] + msgpack.packb(payload, use_bin_type=True) + data[end:]
    path = tmp_path / "padded.sumtr"
    path.write_bytes(resealed(data))
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    if length <= MAX_EXPR_LENGTH:
        assert code == 0 and swept is not None, (out, err)
    else:
        assert code == 2 and swept is None and f"at most {MAX_EXPR_LENGTH} characters" in err, (out, err)


# ----- 9. point(NAME) and final(NAME) of an instance read one by one, across runs -----------


def write_loose_around_runs(path: Path, runs: int, text: str) -> None:
    """A proof of the independent prover (no schedule, Goldilocks): instance x.0 in the coeffs form (read
    event by event by both paths), then ``runs`` instances m.<i> of 3 rounds in the evals form (the sweep
    settles them in bulk), then l.0 in the coeffs form whose claim_expr is ``text`` (final(x.0)) and whose
    claim is x.0's final value, so its link holds wherever x.0's final is still known."""
    ar, field_event, _ = FIELDS["goldilocks"]
    rng = random.Random(runs)
    writer = TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"})
    writer.write_payload(field_event)

    def instance(name: str, num_vars: int, claim: Any, form: str, **keys: str) -> Any:
        writer.write_payload({"type": "instance", "name": name, "num_vars": num_vars, "degree": 1,
                              "claim": claim, **({} if form == "evals" else {"form": form}), **keys})
        for _ in range(num_vars):
            coeffs = round_poly(ar, rng, claim, 1)
            writer.write_payload({"type": "round", "evals": sent_values(ar, form, coeffs)})
            r = element(ar, rng)
            writer.write_payload({"type": "challenge", "value": r})
            claim = horner(ar, coeffs, r)
        writer.write_payload({"type": "final", "value": claim})
        return claim

    final = instance("x.0", 1, element(ar, rng), "coeffs")
    for i in range(runs):
        instance(f"m.{i}", 3, element(ar, rng), "evals")
    instance("l.0", 1, final, "coeffs", claim_expr=text)
    writer.close()
    body = path.read_bytes()
    path.write_bytes(body + seal(body, writer.events))


@pytest.mark.parametrize("runs", [5, 20])  # 15 or 60 challenge elements closed after x.0: below or past the limit
def test_a_final_of_an_instance_read_one_by_one_that_runs_in_between_push_out_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, runs):
    # the replay keeps the points and finals of the last instances closed, MAX_POINT_ELEMENTS challenge elements
    # of them (65536; 30 here, so that a small file passes it): past that, final(x.0) cannot be evaluated (exit
    # 2). The instances the sweep settles in bulk keep no point, so its replay used to keep x.0's final whatever
    # came between and accepted the proof (found with a 4.5 MB file: 1100 runs of 60 rounds between x.0 and l.0,
    # exit 0 by default, exit 2 with STEPPER_SWEEP=off). Now it forgets them after each block of runs, and gives
    # up on an expression that reads one
    import stepper.verify.glue as glue_module

    monkeypatch.setattr(glue_module, "MAX_POINT_ELEMENTS", 30)
    path = tmp_path / "across.sumtr"
    write_loose_around_runs(path, runs, "final(x.0)")
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    if runs * 3 <= 30:
        assert code == 0, (out, err)
    else:
        assert code == 2 and swept is None and "x.0" in err, (code, out, err)


# ----- 10. every text of a stretch changed alike ------------------------------------------

# write_pointed's texts without point(NAME): instance i's final_expr eq(tau) * (a<i>*b<i> - c<i>), its claim_expr
# a<i-1> + beta<i-1>*b<i-1>; each change below rewrites one of them from instance 51 on, alike in every instance
# (given i), so the stretches after it still read by template from their bytes, with a template of their own
ALIKE_CHANGES: dict[str, tuple[str, Callable[[int], str], int]] = {
    "the evaluation off: an opening in place of another": ("final_expr", lambda i: f"eq(tau) * (a{i}*b{i} - a{i})", 1),
    "the evaluation off: the point of the instance before": (
        "final_expr", lambda i: f"eq(point(sailing.{i - 1})) * (a{i}*b{i} - c{i})", 1),
    "the same value written longer": ("final_expr", lambda i: f"eq(tau) * (a{i}*b{i}^1 - tau[0]*0 - c{i})", 0),
    "a claim naming an opening sent after its instance": ("claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i}", 2),
    "a final_expr naming a later run's opening": ("final_expr", lambda i: f"eq(tau) * (a{i}*b{i} - c{i + 1})", 2),
    "an element where a point is wanted": ("final_expr", lambda i: f"eq(a{i}) * (a{i}*b{i} - c{i})", 2),
    "final(NAME) of an opening": ("claim_expr", lambda i: f"final(a{i - 1}) + beta{i - 1}*b{i - 1}", 2),
    "an index into an element": ("claim_expr", lambda i: f"a{i - 1} + beta{i - 1}[0]*b{i - 1}", 2),
    "the evaluation off: eq of the shared point with itself": ("final_expr", lambda i: f"eq(tau, tau) * (a{i}*b{i} - c{i})",
                                                               1),
    "the same value: eq of a point per instance against the shared one, times 0, added": (
        "final_expr", lambda i: f"eq(point(sailing.{i - 1}), tau) * 0 + eq(tau) * (a{i}*b{i} - c{i})", 0),
}


def texts_rewritten(data: bytes, key: str, text: Callable[[int], str], where: Callable[[int], bool]) -> bytes:
    """write_pointed's proof with ``key`` of each instance sailing.<i> for which ``where(i)`` holds set to
    ``text(i)``, sealed again."""
    for group in instance_events(data)[::-1]:  # from the last: the offsets before it stay put
        _, start, end = group[0]
        payload = msgpack.unpackb(data[start:end], raw=False)
        i = int(payload["name"].removeprefix("sailing."))
        if where(i):
            payload[key] = text(i)
            data = data[:start] + msgpack.packb(payload, use_bin_type=True) + data[end:]
    return resealed(data)


@pytest.mark.parametrize("change", list(ALIKE_CHANGES))
def test_texts_changed_alike_in_every_instance_from_the_middle_on_check_as_the_replay(tmp_path, capsys, monkeypatch,
                                                                                    change):
    # the independent side is the event-by-event replay (check_both): its exit code is the one expected here
    # (1: a glue check fails; 2: an expression the rules refuse; 0: the same values), and the sweep's output
    # must be its output byte for byte
    key, text, expected = ALIKE_CHANGES[change]
    path = tmp_path / "texts.sumtr"
    write_pointed(path, count=120, pointed=False, seed=47)
    path.write_bytes(texts_rewritten(path.read_bytes(), key, text, lambda i: i > 50))
    placed = returns_of(monkeypatch, glue_texts, "placed_names")
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert code == expected and (swept is not None) == (expected == 0), (code, out, err)
    assert any(found is not None for found in placed)  # some stretch read by template from its bytes


# ----- 8. glue names held as templates ----------------------------------------------------

Names = Callable[[int], tuple[str, str, str, str]]  # instance i -> the names of its openings a, b, c and its squeeze


def counter_names(i: int) -> tuple[str, str, str, str]:
    return f"a{i}", f"b{i}", f"c{i}", f"beta{i}"


def write_named(path: Path, names: Names = counter_names, count: int = 130, before: tuple[str, ...] = (),
                after: tuple[str, ...] = (), after_lists: tuple[str, ...] = (), seed: int = 53,
                sent_as: dict[str, str] | None = None) -> None:
    """write_pointed's proof without point(NAME) (final_expr eq(tau) * (A*B - C), claim_expr A' + BETA'*B' of
    the instance before) with the names ``names(i)``, single values named ``before`` sent before the first
    instance, and values named ``after`` (one element each) and ``after_lists`` (lists of two) after the last
    instance's glue; every check holds. With ``sent_as`` (name -> another name of the same length) the proof
    has no schedule (challenges and squeezes drawn at random) and those names are then renamed in the bytes
    (renamed_events: the writer refuses a name sent twice); every value is drawn once per name as finally
    sent, so a name sent twice carries the same value both times and only its second sending is wrong. eq(x, y)
    = prod of x_j y_j + (1 - x_j)(1 - y_j) in plain integers (common practice, no source)."""
    from stepper.field.field import NAMED_PRIMES, get_field
    from stepper.field.lagrange import evaluate_round
    from stepper.field.poly import eq_eval
    from stepper.transcript.model import (ChallengeMsg, FieldDecl, FinalValue, InstanceStart, NamedValue, Opening,
                                          RoundMsg, ScheduleDecl, Squeeze)
    from stepper.verify.fiatshamir import SCHEDULE_NAME
    from stepper.verify.schedules import schedule_for

    field = get_field(NAMED_PRIMES["goldilocks"])
    p, rng = field.p, random.Random(seed)
    schedule = schedule_for(SCHEDULE_NAME) if sent_as is None else None
    values: dict[str, int] = {}

    def value_of(name: str) -> int:
        return values.setdefault((sent_as or {}).get(name, name), rng.randrange(p))

    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"}) as out:
        def emit(record: object, absorbed: bool = True) -> None:
            if absorbed and schedule is not None:
                schedule.observe(record)  # type: ignore[arg-type]
            out.write(record)  # type: ignore[arg-type]

        emit(FieldDecl(field))
        if schedule is not None:
            emit(ScheduleDecl(SCHEDULE_NAME, "tests"))
        tau = [rng.randrange(p) for _ in range(3)]
        emit(NamedValue("tau", tuple(tau), True, None))
        for name in before:
            emit(NamedValue(name, value_of(name), False, None))
        claim = rng.randrange(p)
        for i in range(count):
            a_name, b_name, c_name, beta_name = names(i)
            keys = {"final_expr": f"eq(tau) * ({a_name}*{b_name} - {c_name})"}
            if i:
                previous = names(i - 1)
                keys["claim_expr"] = f"{previous[0]} + {previous[3]}*{previous[1]}"
            emit(InstanceStart(i, f"sailing.{i}", 3, 2, claim, **keys))  # type: ignore[arg-type]
            challenges = []
            for k in range(1, 4):
                g0 = rng.randrange(p)
                evals = (g0, (claim - g0) % p, rng.randrange(p))
                emit(RoundMsg(i, k, evals))
                r = schedule.challenge() if schedule is not None else rng.randrange(p)
                emit(ChallengeMsg(i, k, r), absorbed=False)
                challenges.append(r)
                claim = evaluate_round(field, evals, r)
            emit(FinalValue(i, claim), absorbed=False)
            a, b = value_of(a_name), value_of(b_name)
            c = values[c_name] = (a * b - claim * pow(eq_eval(field, tau, challenges), -1, p)) % p  # type: ignore[arg-type]
            for name, value in ((a_name, a), (b_name, b), (c_name, c)):
                emit(Opening(name, value, name, i))
            beta = schedule.squeeze(beta_name) if schedule is not None else value_of(beta_name)
            emit(Squeeze(beta_name, beta, False, i), absorbed=False)
            claim = (a + beta * b) % p  # type: ignore[operator]
        for name in after:
            emit(NamedValue(name, value_of(name), False, count - 1))
        for name in after_lists:
            emit(NamedValue(name, (rng.randrange(p), rng.randrange(p)), True, count - 1))
    if sent_as:
        path.write_bytes(renamed_events(path.read_bytes(), sent_as))


def renamed_events(data: bytes, sent_as: dict[str, str]) -> bytes:
    """The transcript with each glue event named a key of ``sent_as`` named its value (of the same length)
    instead, and each expression naming it naming the value, sealed again."""
    import re

    def renamed(text: str) -> str:
        return re.sub(r"[A-Za-z_][A-Za-z0-9_.]*", lambda found: sent_as.get(found.group(), found.group()), text)

    for kind, start, end in event_spans(data)[::-1]:  # from the last: the offsets before it stay put
        payload = msgpack.unpackb(data[start:end], raw=False)
        if kind == "instance":
            changed = {key: renamed(payload[key]) for key in ("claim_expr", "final_expr") if key in payload}
        elif kind in GLUE:
            changed = {"name": sent_as.get(payload["name"], payload["name"])}
        else:
            continue
        new = msgpack.packb({**payload, **changed}, use_bin_type=True)
        assert len(new) == end - start
        data = data[:start] + new + data[end:]
    return resealed(data)


def padded_names(i: int) -> tuple[str, str, str, str]:
    # two fields of one name length that never meet: v<i>_077 and w050_<i> (w, not v)
    return f"v{i:03d}_077", f"w050_{i:03d}", f"c{i:03d}", f"beta{i:03d}"


def fields_that_meet(i: int) -> tuple[str, str, str, str]:
    # v<i>_077 at i = 50 is v050_<i> at i = 77 (x050_077, then sent as v050_077): one name, two templates of one
    # length
    return f"v{i:03d}_077", "x050_077" if i == 77 else f"v050_{i:03d}", f"c{i:03d}", f"beta{i:03d}"


def counter_repeats(i: int) -> tuple[str, str, str, str]:
    return ("q40" if i == 40 else f"a{i}"), f"b{i}", f"c{i}", f"beta{i}"  # q40 then sent as a39


def counter_restarts(i: int) -> tuple[str, str, str, str]:
    # from instance 100 on (instance names one digit longer: a stretch of its own), z<i - 70>, then sent as
    # a<i - 70>: a30 ... a59 again, counting by one
    return f"a{i}" if i < 100 else f"z{i - 70}", f"b{i}", f"c{i}", f"beta{i}"


HONEST_NAMES = {"counters": counter_names, "zero-padded counters in two fields": padded_names}


@pytest.mark.parametrize("block_rounds", [1 << 14, 30])
@pytest.mark.parametrize("scheme", list(HONEST_NAMES))
def test_names_that_count_are_held_as_templates_and_the_proof_reports_as_the_replay(tmp_path, monkeypatch, scheme,
                                                                                     block_rounds):
    # blocks of 30 rounds: ten instances a flush, so templates of later flushes meet those of earlier ones
    from stepper.transcript.glue_names import GlueNames

    monkeypatch.setattr(helpers.sweep_module, "BLOCK_ROUNDS", block_rounds)
    path = tmp_path / "named.sumtr"
    # near misses held apart: another width (c0099), past a range (b9999, w050_999), a prefix of its own (a10x)
    write_named(path, HONEST_NAMES[scheme], before=("b9999", "c0099"), after=("a10x", "w050_999"))
    added = returns_of(monkeypatch, GlueNames, "add_counted")
    helpers.assert_same_report(path, 3)
    assert added and all(added)  # not vacuous: columns of names were held as templates, every one accepted


# (what write_named writes, each name then sent as another of the same length: its sent_as)
NAME_FAULTS: dict[str, tuple[dict[str, Any], dict[str, str]]] = {
    "a counter that repeats within a stretch": ({"names": counter_repeats}, {"q40": "a39"}),
    "a counter that starts again in a later stretch": ({"names": counter_restarts},
                                                       {f"z{i}": f"a{i}" for i in range(30, 60)}),
    "two fields of one length that meet": ({"names": fields_that_meet}, {"x050_077": "v050_077"}),
    "a value sent before the instances with a template's name": ({"before": ("q45",)}, {"q45": "b45"}),
    "a value sent before with a name a padded template holds": ({"names": padded_names, "before": ("q050_066",)},
                                                                {"q050_066": "w050_066"}),
    "a value after the instances with a template's name": ({"after": ("q70",)}, {"q70": "c70"}),
    "a list after the instances with a template's name": ({"after_lists": ("qeta101",)}, {"qeta101": "beta101"}),
}


@pytest.mark.parametrize("block_rounds", [1 << 14, 30])
@pytest.mark.parametrize("fault", list(NAME_FAULTS))
def test_a_glue_name_sent_twice_among_names_held_as_templates_is_refused_as_the_replay_refuses_it(
        tmp_path, capsys, monkeypatch, fault, block_rounds):
    # the event-by-event replay (check_both's other side) refuses the second sending with exit 2; the sweep must
    # give up rather than take a proof whose names repeat, wherever the two sendings stand (one stretch, two
    # stretches or flushes, before or after every template, one by one through the Sequencer)
    monkeypatch.setattr(helpers.sweep_module, "BLOCK_ROUNDS", block_rounds)
    path = tmp_path / "twice.sumtr"
    written, sent_as = NAME_FAULTS[fault]
    write_named(path, **written, sent_as=sent_as)
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 2 and swept is None and "unique" in err, (code, out, err)


# ----- 9. instances laid out alike read on across chunks ----------------------------------

WIDENED_FAULTS = {
    None: None,
    "an opening one off in the middle": ("opening", 57),
    "a squeeze one off in the middle": ("squeeze", 91),
    "an opening one off in the last instance": ("opening", 129),
}


def stretches_taken(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """The number of instances of each stretch laid out alike the Sequencer takes together while the test runs."""
    from stepper.transcript.events import Sequencer

    counts: list[int] = [0]
    real = Sequencer.glued_columns

    def spy(self: Sequencer, names: Any, *args: Any) -> Any:
        counts.append(len(names))
        return real(self, names, *args)

    monkeypatch.setattr(Sequencer, "glued_columns", spy)
    return counts


@pytest.mark.parametrize("chunk", [700, 4096])
@pytest.mark.parametrize("fault", list(WIDENED_FAULTS))
def test_glued_instances_read_on_across_small_chunks_check_as_the_replay(tmp_path, capsys, monkeypatch, chunk, fault):
    # where a chunk's end would cut a stretch of glued instances laid out alike, the sweep reads the next bytes
    # first and takes the stretch whole (_widen); with chunks of a few periods that happens at every stretch, so
    # any fault falls inside a window read on: the output is the replay's, byte for byte (exit 1 and given up on
    # for a fault, exit 0 and taken for the honest proof)
    from stepper.transcript.store.reader import ReadLimits

    monkeypatch.setattr(helpers.sweep_module, "ReadLimits", lambda: ReadLimits(chunk_bytes=chunk))
    path = tmp_path / "widened.sumtr"
    write_named(path)
    if WIDENED_FAULTS[fault] is not None:
        kind, instance = WIDENED_FAULTS[fault]  # type: ignore[misc]
        path.write_bytes(one_off(path.read_bytes(), instance, kind))
    taken = stretches_taken(monkeypatch)
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    # not vacuous: some stretch was read on into the next chunk and taken at once, longer than a chunk holds
    assert max(taken) * (len(path.read_bytes()) // 130) > chunk, taken
    assert (code, swept is None) == ((0, False) if fault is None else (1, True)), (code, out, err)
    if fault is not None:
        assert f"instance #{WIDENED_FAULTS[fault][1]} " in out, out  # type: ignore[index]


@pytest.mark.parametrize("fault", list(NAME_FAULTS)[:3])
def test_a_glue_name_sent_twice_in_a_window_read_on_is_refused_as_the_replay_refuses_it(tmp_path, capsys, monkeypatch,
                                                                                       fault):
    from stepper.transcript.store.reader import ReadLimits

    monkeypatch.setattr(helpers.sweep_module, "ReadLimits", lambda: ReadLimits(chunk_bytes=4096))
    path = tmp_path / "twice.sumtr"
    written, sent_as = NAME_FAULTS[fault]
    write_named(path, **written, sent_as=sent_as)
    code, out, err, swept = check_both(capsys, monkeypatch, path, "--rows", "3")
    assert code == 2 and swept is None and "unique" in err, (code, out, err)


# ----- 10. expressions across flushes: the names of the flush before, the rows by count ------------------

FLUSH_CHANGES: dict[str, tuple[str, Callable[[int], str], int, Callable[[int], bool]]] = {
    "none": ("claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i - 1}", 0, lambda i: False),
    "the evaluation off at each flush's first instance": (
        "final_expr", lambda i: f"eq(tau) * (a{i}*b{i} - a{i})", 1, lambda i: i % 20 == 0 and i > 0),
    "the evaluation off at each flush's last instance": (
        "final_expr", lambda i: f"eq(tau) * (a{i}*b{i} - a{i})", 1, lambda i: i % 20 == 19),
    "a claim reading the point as an element at a flush's first instance": (
        "claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*tau", 2, lambda i: i == 60),
    "a claim reading an opening sent after it at a flush's first instance": (
        "claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i}", 2, lambda i: i == 60),
    "claims reading an opening of the flush before": (
        "claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i - 1} + a{i - 25}*0", 0, lambda i: i >= 25),
    "claims reading an opening of the flush before, off": (
        "claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i - 1} + a{i - 25}", 1, lambda i: i >= 45),
    "claims reading a point of the flush before as an element": (
        "claim_expr", lambda i: f"a{i - 1} + beta{i - 1}*b{i - 1} + tau*0", 2, lambda i: i >= 45),
}


@pytest.mark.parametrize("change", list(FLUSH_CHANGES))
def test_expressions_reading_across_flushes_of_twenty_instances_check_as_the_replay(tmp_path, capsys, monkeypatch,
                                                                                  change):
    # blocks of 60 rounds: a flush holds 20 instances of 3 rounds, so a claim_expr at each flush's first instance reads
    # names the flush before sent (looked up beside the flush's own), and every run holds four glue events (rows by
    # their count); the independent side is the event-by-event replay (check_both), whose exit code is the one
    # expected here and whose output the sweep's must be byte for byte
    import stepper.verify.glue_block as glue_block
    import stepper.verify.sweep as sweep_module

    key, text, expected, where = FLUSH_CHANGES[change]
    path = tmp_path / "flushes.sumtr"
    write_pointed(path, count=120, pointed=False, seed=53)
    path.write_bytes(texts_rewritten(path.read_bytes(), key, text, where))
    monkeypatch.setattr(sweep_module, "BLOCK_ROUNDS", 60)
    flushes = returns_of(monkeypatch, glue_block.GlueChecks, "check")
    code, out, err, swept = check_both(capsys, monkeypatch, path)
    assert code == expected and (swept is not None) == (expected == 0), (code, out, err)
    if expected == 0:
        assert len(flushes) >= 5 and all(flushes)  # checked by the block, flush by flush
