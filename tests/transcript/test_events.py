"""The Sequencer: payloads to records, the order rules, packed element runs, and the
reader's inline fast path giving exactly what feeding one payload at a time gives."""

from __future__ import annotations

import copy
import io
import itertools
import random
import struct

import msgpack
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from stepper.errors import TranscriptError
from stepper.transcript.events import MAX_VALUES, Sequencer, to_payload
from stepper.field.field import get_field
from stepper.transcript.packed import (
    GlueRun, pack_elements, pair_run, read_glue_columns, read_glue_periods, unpack_elements,
)
from stepper.transcript.model import (
    BatchDecl,
    BucketStats,
    ChallengeMsg,
    FieldDecl,
    FinalValue,
    InstanceStart,
    Note,
    RoundMsg,
    ScheduleDecl,
    UnknownEvent,
)

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
BABYBEAR = 15 * 2**27 + 1  # common practice, no source (= 2^31 - 2^27 + 1)
BN254_R = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 curve order


def started(name: str = "goldilocks", num_vars: int = 3, degree: int = 2) -> Sequencer:
    seq = Sequencer()
    seq.feed({"type": "field", "name": name})
    seq.feed({"type": "instance", "name": "boarding-permutation", "num_vars": num_vars, "degree": degree,
              "claim": 1})
    return seq


def test_packed_run_decodes_like_int_from_bytes_for_every_width():
    rng = random.Random(7)
    for p in (BABYBEAR, GOLDILOCKS, BN254_R):
        field = get_field(p)
        values = [rng.randrange(p) for _ in range(9)]
        blob = pack_elements(field, values)
        width = (p.bit_length() + 7) // 8
        # Reference: Python's own little-endian integer decoding, slice by slice.
        expected = tuple(int.from_bytes(blob[i:i + width], "little") for i in range(0, len(blob), width))
        assert expected == tuple(values)
        assert unpack_elements(field, blob, "test") == expected


def test_packed_run_names_the_first_non_canonical_element():
    field = get_field(GOLDILOCKS)
    blob = struct.pack("<3Q", 1, GOLDILOCKS, 2)
    with pytest.raises(Exception, match="element 1"):
        unpack_elements(field, blob, "round values")
    with pytest.raises(Exception, match="multiple of 8 bytes"):
        unpack_elements(field, blob[:-1], "round values")


def test_round_values_accept_packed_bytes_separate_bytes_and_json_forms_alike():
    forms = [
        struct.pack("<3Q", 5, 6, GOLDILOCKS - 1),
        [struct.pack("<Q", v) for v in (5, 6, GOLDILOCKS - 1)],
        [5, "6", hex(GOLDILOCKS - 1)],
    ]
    got = [started().feed({"type": "round", "evals": raw}) for raw in forms]
    assert got == [RoundMsg(0, 1, (5, 6, GOLDILOCKS - 1))] * 3


@pytest.mark.parametrize(
    ("payloads", "message"),
    [
        ([{"type": "round", "evals": [1]}], "field` event first"),
        ([{"type": "field", "name": "babybear"}, {"type": "field", "name": "babybear"}], "second"),
        ([{"type": "field", "name": "babybear"}, {"type": "challenge", "value": 1}], "`instance` event before"),
        ([{"type": "field", "name": "babybear"}, {"type": "batch", "coefficient": 2, "terms": [1]},
          {"type": "round", "evals": [1]}], "`instance` event right after `batch`"),
    ],
)
def test_order_rules_are_enforced_with_the_event_index(payloads, message):
    seq = Sequencer()
    with pytest.raises(TranscriptError, match=message) as caught:
        for payload in payloads:
            seq.feed(payload)
    assert caught.value.where.event == len(payloads) - 1


def test_rounds_challenges_and_final_must_alternate_and_stop_at_num_vars():
    seq = started(num_vars=1)
    with pytest.raises(TranscriptError, match="round before its challenge"):
        seq.feed({"type": "challenge", "value": 1})
    seq.feed({"type": "round", "evals": [0, 1, 2]})
    with pytest.raises(TranscriptError, match="challenge of round 1 before another round"):
        seq.feed({"type": "round", "evals": [0, 1, 2]})
    with pytest.raises(TranscriptError, match="after all 1 rounds"):
        seq.feed({"type": "final", "value": 3})
    seq.feed({"type": "challenge", "value": 4})
    with pytest.raises(TranscriptError, match="at most num_vars = 1 rounds") as caught:
        seq.feed({"type": "round", "evals": [0, 1, 2]})
    assert caught.value.where.instance == "boarding-permutation" and caught.value.where.round == 2
    assert seq.feed({"type": "final", "value": 3}) == FinalValue(0, 3)


def test_a_round_without_its_values_key_names_the_key_and_the_keys_it_has():
    seq = started()
    with pytest.raises(TranscriptError) as caught:
        seq.feed({"type": "round", "evalz": [0, 1, 2]})
    assert "expected the round's values under 'evals'" in caught.value.message
    assert "'evalz'" in caught.value.message and "None" not in caught.value.message
    assert caught.value.where.round == 1


def test_more_elements_than_the_cap_are_refused():
    seq = started()
    with pytest.raises(TranscriptError, match=f"at most {MAX_VALUES}"):
        seq.feed({"type": "round", "evals": bytes(8 * (MAX_VALUES + 1))})


def test_unknown_types_are_kept_before_and_after_the_field():
    seq = Sequencer()
    assert seq.feed({"type": "gate-log", "gate": 3}) == UnknownEvent("gate-log", {"type": "gate-log", "gate": 3})
    seq.feed({"type": "field", "name": "babybear"})
    assert seq.feed({"type": "weather", "wind": "SW 5"}).kind == "weather"


def test_to_payload_inverts_feed_for_every_event_kind_binary_packed_and_json():
    field = get_field(GOLDILOCKS)
    records = [
        FieldDecl(field),
        ScheduleDecl("stepper-sha256/1", "brackwater-ferries", {"rounds": 2}),
        BatchDecl(3, (1, 2), ("ledger", "boarding")),
        InstanceStart(0, "boarding-permutation", 2, 2, 7, "high-first", "evals-no-1",
                      BatchDecl(3, (1, 2), ("ledger", "boarding"))),
        BucketStats(0, 1, 0, 4, (1, 0, 2, 1), 2, 2, {"gate": "B"}),
        RoundMsg(0, 1, (1, GOLDILOCKS - 1)),
        ChallengeMsg(0, 1, 2**63),
        Note("gate B", 0, 1),
        RoundMsg(0, 2, (5, 6)),
        ChallengeMsg(0, 2, 9),
        FinalValue(0, 11),
        UnknownEvent("weather", {"type": "weather", "wind": "SW"}, 0),
    ]
    for binary, packed in ((True, True), (True, False), (False, False)):
        seq = Sequencer()
        current = None
        for record in records:
            payload = to_payload(record, current, binary, packed)
            assert seq.feed(payload) == record
            if isinstance(record, FieldDecl):
                current = record.field


payload_kinds = st.sampled_from(["round", "challenge", "round-bad", "challenge-bad", "note", "final", "list-round"])


@settings(max_examples=80, deadline=None)
@given(kinds=st.lists(payload_kinds, max_size=14), seed=st.integers(0, 2**32))
def test_stream_gives_exactly_what_feeding_one_at_a_time_gives(kinds, seed):
    rng = random.Random(seed)

    def payload(kind: str) -> dict[str, object]:
        if kind == "round":
            return {"type": "round", "evals": struct.pack("<3Q", *(rng.randrange(GOLDILOCKS) for _ in range(3)))}
        if kind == "round-bad":
            return {"type": "round", "evals": struct.pack("<3Q", 0, GOLDILOCKS + rng.randrange(99), 0)}
        if kind == "list-round":
            return {"type": "round", "evals": [1, 2, 3]}
        if kind == "challenge":
            return {"type": "challenge", "value": struct.pack("<Q", rng.randrange(GOLDILOCKS))}
        if kind == "challenge-bad":
            return {"type": "challenge", "value": b"\xff" * 8}
        if kind == "final":
            return {"type": "final", "value": 1}
        return {"type": "note", "text": "scan"}

    payloads = [payload(kind) for kind in kinds]

    def run(use_stream: bool) -> tuple[list[object], str | None, int]:
        seq = started(num_vars=4)
        out: list[object] = []
        try:
            if use_stream:
                out.extend(seq.stream(iter(payloads)))
            else:
                for p in payloads:
                    out.append(seq.feed(p))
        except TranscriptError as err:
            return out, str(err), seq.count
        return out, None, seq.count

    assert run(True) == run(False)


def test_stream_stops_at_the_named_unknown_type_and_keeps_it():
    seq = started()
    payloads = iter([{"type": "round", "evals": [1, 2, 3]}, {"type": "end", "events": 3}, {"type": "note",
                                                                                          "text": "after"}])
    records = list(seq.stream(payloads, until="end"))
    assert records == [RoundMsg(0, 1, (1, 2, 3))]
    assert seq.stopped_at is not None and seq.stopped_at.kind == "end"
    assert next(payloads) == {"type": "note", "text": "after"}


class ChunkedSource:
    """An iterator that runs dry at the end of each chunk until refilled (like an Unpacker fed chunk by chunk)."""

    def __init__(self, chunks: list[list[dict[str, object]]]) -> None:
        self.chunks = list(chunks)
        self.current: list[dict[str, object]] = []
        self.refills = 0

    def __iter__(self) -> ChunkedSource:
        return self

    def __next__(self) -> dict[str, object]:
        if not self.current:
            raise StopIteration
        return self.current.pop(0)

    def refill(self) -> bool:
        if not self.chunks:
            return False
        self.refills += 1
        self.current = self.chunks.pop(0)
        return True


def packed_round(*values: int) -> dict[str, object]:
    return {"type": "round", "evals": struct.pack(f"<{len(values)}Q", *values)}


def packed_challenge(value: int) -> dict[str, object]:
    return {"type": "challenge", "value": struct.pack("<Q", value)}


def test_stream_with_refill_carries_its_state_across_chunk_boundaries():
    payloads = [packed_round(1, 2, 3), packed_challenge(5), packed_round(4, 5, 6), packed_challenge(7),
                {"type": "note", "text": "deck 2 scanned"}, packed_round(7, 8, 9)]
    chunks = [payloads[:1], [], payloads[1:4], payloads[4:]]  # a boundary between a round and its challenge
    source = ChunkedSource(chunks)
    seq = started(num_vars=4)
    streamed = list(seq.stream(source, refill=source.refill))
    fed = started(num_vars=4)
    assert streamed == [fed.feed(p) for p in payloads]
    assert [r.round for r in streamed if isinstance(r, RoundMsg)] == [1, 2, 3]
    assert source.refills == 4 and seq.count == fed.count and seq.awaiting_challenge


def test_stream_without_refill_stops_when_the_source_runs_dry():
    source = ChunkedSource([[packed_round(1, 2, 3)], [packed_challenge(5)]])
    source.refill()
    seq = started(num_vars=4)
    assert len(list(seq.stream(source))) == 1
    assert source.chunks  # the second chunk was never asked for


def test_stream_on_error_replaces_a_transcript_error_after_syncing_the_count():
    seen: list[int] = []

    def on_error(err: Exception) -> Exception:
        seen.append(seq.count)
        return ValueError(f"mapped: {err}")

    seq = started(num_vars=1)
    payloads = [packed_round(1, 2, 3), packed_challenge(5), packed_round(4, 5, 6)]  # a second round of 1 variable
    with pytest.raises(ValueError, match="mapped: .*at most num_vars = 1 rounds"):
        list(seq.stream(iter(payloads), on_error=on_error))
    assert seen == [seq.count] and seq.count == started(num_vars=1).count + 3


def test_stream_on_error_maps_a_failing_source_and_can_leave_an_error_unchanged():
    def failing():
        yield packed_round(1, 2, 3)
        raise OSError("disk gone")

    seq = started(num_vars=4)
    with pytest.raises(TranscriptError, match="source failed: disk gone"):
        list(seq.stream(failing(), on_error=lambda err: TranscriptError(f"source failed: {err}")))
    kept = KeyError("left alone")
    seq = started(num_vars=4)

    def unchanged():
        yield packed_round(1, 2, 3)
        raise kept

    with pytest.raises(KeyError) as info:
        list(seq.stream(unchanged(), on_error=lambda err: err))
    assert info.value is kept


@pytest.mark.parametrize("value", [GOLDILOCKS - 1, 2**64 - 2**32, 0xFFFFFFFF, 2**32 * 0xFFFFFFFF - 1])
def test_stream_accepts_canonical_goldilocks_values_whose_bytes_hold_the_ones_run(value):
    # Goldilocks p = 2^64 - 2^32 + 1 (common practice, no source): values in [2^64 - 2^32, p) are
    # canonical yet their four top bytes are 0xff, the byte string the fast canonical check looks for.
    seq = started(num_vars=2)
    assert list(seq.stream(iter([packed_round(1, value, 2)]))) == [RoundMsg(0, 1, (1, value, 2))]


@pytest.mark.parametrize("value", [GOLDILOCKS, 2**64 - 1])
def test_stream_refuses_non_canonical_goldilocks_values_like_feed(value):
    messages = []
    for use_stream in (True, False):
        seq = started(num_vars=2)
        with pytest.raises(TranscriptError) as info:
            list(seq.stream(iter([packed_round(value, 0, 0)]))) if use_stream else seq.feed(packed_round(value, 0, 0))
        messages.append(str(info.value))
    assert messages[0] == messages[1] and "element 0" in messages[0]


@pytest.mark.parametrize("field_event, width", [
    ({"type": "field", "name": "babybear", "extension_degree": 4}, "I"),
    ({"type": "field", "name": "goldilocks", "extension_degree": 2}, "Q"),
])
def test_an_extension_claim_packed_as_bytes_is_its_coefficients_and_a_coefficient_of_p_is_refused(field_event, width):
    # k little-endian coefficients, constant first (transcripts/FORMAT.md); p of each field: see above
    p, k = (BABYBEAR, 4) if width == "I" else (GOLDILOCKS, 2)
    coefficients = tuple(range(p - k, p))  # the largest canonical coefficients
    seq = Sequencer()
    seq.feed(field_event)
    start = seq.feed({"type": "instance", "name": "deck-slots", "num_vars": 1, "degree": 1,
                      "claim": struct.pack(f"<{k}{width}", *coefficients)})
    assert start.claim == coefficients
    for bad in range(k):  # each coefficient in turn equal to p
        seq = Sequencer()
        seq.feed(field_event)
        claim = struct.pack(f"<{k}{width}", *(p if i == bad else 0 for i in range(k)))
        with pytest.raises(TranscriptError, match="claim"):
            seq.feed({"type": "instance", "name": "deck-slots", "num_vars": 1, "degree": 1, "claim": claim})


# ----- packed runs of rounds decoded from the bytes fed (the reader's window) ----------------------------------------
class CountingUnpacker(msgpack.Unpacker):
    """A msgpack Unpacker that counts the bytes the hot loop takes from it without unpacking."""

    taken = 0

    def read_bytes(self, nbytes: int) -> bytes:
        data = super().read_bytes(nbytes)
        self.taken += len(data)
        return data


def stream_bytes(seq: Sequencer, data: bytes, chunk: int, out: list[object]) -> CountingUnpacker:
    """``seq.stream`` over ``data`` fed to a real Unpacker ``chunk`` bytes at a time, with the window
    a reader gives (the bytes last fed and their unpacker offset); the records go to ``out``."""
    unpacker = CountingUnpacker(raw=False)
    fed = [0, (b"", 0)]  # bytes fed so far, the window

    def refill() -> bool:
        if fed[0] >= len(data):
            return False
        piece = data[fed[0]:fed[0] + chunk]
        unpacker.feed(piece)
        fed[1] = (piece, fed[0])
        fed[0] += len(piece)
        return True

    out.extend(seq.stream(unpacker, refill=refill, window=lambda: fed[1]))  # type: ignore[arg-type, return-value]
    return unpacker


def writer_pair(field: str, rng: random.Random, values: int, bad: str | None = None) -> list[dict[str, object]]:
    """A round and its challenge as the writer packs them (packed runs of 4- or 8-byte elements)."""
    p, code = (GOLDILOCKS, "Q") if field == "goldilocks" else (BABYBEAR, "I")
    evals = [rng.randrange(p) for _ in range(values)]
    challenge = rng.randrange(p)
    if bad == "round":
        evals[rng.randrange(values)] = p + rng.randrange(3)
    elif bad == "challenge":
        challenge = p
    return [{"type": "round", "evals": struct.pack(f"<{values}{code}", *evals)},
            {"type": "challenge", "value": struct.pack(f"<{code}", challenge)}]


def test_pair_run_counts_whole_pairs_packed_as_the_writer_packs_them_up_to_most():
    rng = random.Random(740)
    pairs = [payload for _ in range(5) for payload in writer_pair("goldilocks", rng, 4)]
    data = b"".join(msgpack.packb(payload, use_bin_type=True) for payload in pairs)
    count, layout = pair_run(data, 0, 8, 99)
    assert count == 5 and layout.stride * 5 == len(data) and layout.values == 4
    assert pair_run(data, 0, 8, 3)[0] == 3
    assert pair_run(data[:-1], 0, 8, 99)[0] == 4  # the cut pair is left to the unpacker
    assert pair_run(data, 0, 4, 99)[0] == 0  # 8-byte challenges are not the 4-byte layout
    assert pair_run(data, layout.stride // 2, 8, 99) is None  # not the start of a round
    rows = list(layout.pair.iter_unpack(data))
    assert [row[:4] for row in rows] == [struct.unpack("<4Q", payload["evals"]) for payload in pairs[0::2]]
    assert [row[4] for row in rows] == [int.from_bytes(payload["value"], "little") for payload in pairs[1::2]]


def test_glue_run_measures_the_glue_events_packed_as_the_writer_packs_them_and_reads_them_as_msgpack_does():
    rng = random.Random(741)
    glue = [{"type": kind, "name": name, "value": struct.pack("<Q", rng.randrange(GOLDILOCKS))}
            for kind, name in (("opening", "ramp_a"), ("opening", "ramp.b"), ("value", "tide_0"),
                               ("squeeze", "b" * 31))]
    packed = [msgpack.packb(payload, use_bin_type=True) for payload in glue]
    data = b"".join(packed)
    assert GlueRun(8)(data, 0) == len(data)
    rows = GlueRun(8).rows(data + data)  # two runs joined
    assert [{"type": kind.decode(), "name": name.decode(), "value": element} for kind, _, name, element in rows] \
        == [msgpack.unpackb(one, raw=False) for one in packed + packed]
    assert [head[0] - 0xA0 for _, head, _, _ in rows] == [len(payload["name"]) for payload in glue + glue]
    assert GlueRun(8)(data[:-1], 0) == len(data) - len(packed[-1])  # the cut event is left to the unpacker
    assert GlueRun(8)(data, len(packed[0])) == len(data) - len(packed[0])
    assert GlueRun(4)(data, 0) == 0  # 8-byte elements are not the 4-byte layout
    tabled = msgpack.packb({**glue[0], "table": "ramp"}, use_bin_type=True)  # a map of four: left to the unpacker
    long_name = msgpack.packb({**glue[0], "name": "c" * 32}, use_bin_type=True)  # a str 8 name
    assert GlueRun(8)(tabled + data, 0) == 0 and GlueRun(8)(long_name + data, 0) == 0
    assert GlueRun(8)(data + tabled, 0) == len(data)



@settings(max_examples=80, deadline=None)
@given(events=st.lists(st.tuples(st.sampled_from(["value", "squeeze", "opening"]),
                                 st.from_regex(r"[A-Za-z_][A-Za-z0-9_.]{0,30}", fullmatch=True),
                                 st.binary(min_size=8, max_size=8)), min_size=1, max_size=30),
       width=st.sampled_from([4, 8]))
def test_glue_columns_read_by_numpy_are_what_msgpack_unpacks(events, width):
    # the independent side is msgpack itself, unpacking the same bytes event by event
    payloads = [{"type": kind, "name": name, "value": element[:width]} for kind, name, element in events]
    packed = [msgpack.packb(payload, use_bin_type=True) for payload in payloads]
    data = b"".join(packed)
    assert GlueRun(width)(data, 0) == len(data)
    read = read_glue_columns(data, width)
    if any(b"\x83\xa4type" in element for _, _, element in events):
        assume(read is not None)  # an element holding an event's first bytes may make the reading decline
    assert read is not None
    unpacked = [msgpack.unpackb(one, raw=False) for one in packed]
    assert [("value", "squeeze", "opening")[code] for code in read.codes.tolist()] == [u["type"] for u in unpacked]
    assert read.names == [u["name"] for u in unpacked]
    assert [bytes(row) for row in read.elements] == [u["value"] for u in unpacked]
    assert read.ends.tolist() == list(itertools.accumulate(map(len, packed)))
    assert read.spelled[0].tolist() == [len(u["name"]) for u in unpacked]
    assert read.spelled[1] == "".join(u["name"] + "\n" for u in unpacked).encode()


def test_glue_columns_read_by_numpy_decline_what_msgpack_would_read_otherwise():
    one = msgpack.packb({"type": "value", "name": "tide", "value": struct.pack("<Q", 5)}, use_bin_type=True)
    assert read_glue_columns(one, 8) is not None
    short_head = bytearray(one)
    short_head[one.index(b"tide") - 1] = 0xA0 + 3  # msgpack would read the name "tid" and go astray
    assert read_glue_columns(bytes(short_head), 8) is None
    assert read_glue_columns(one[:-1], 8) is None  # cut
    assert read_glue_columns(one + b"\xc0", 8) is None  # something after the events
    digit_first = msgpack.packb({"type": "value", "name": "9tide", "value": struct.pack("<Q", 5)}, use_bin_type=True)
    assert read_glue_columns(one + digit_first, 8) is None  # not a glue name
    bait = msgpack.packb({"type": "opening", "name": "ramp", "value": b"\x83\xa4type\x00\x00"}, use_bin_type=True)
    assert read_glue_columns(bait + one, 8) is None  # an element holding an event's first bytes: declined
    squeeze = msgpack.packb({"type": "squeeze", "name": "beta", "value": struct.pack("<Q", 5)}, use_bin_type=True)
    assert read_glue_columns(one + squeeze, 8) is not None
    for good, bad in ((b"squeeze", b"squeezf"), (b"squeeze", b"opening"[:1] + b"queeze"), (b"\xa4name", b"\xa4nama"),
                      (b"\xa5value", b"\xa5valuf"), (b"\xc4\x08", b"\xc4\x07")):
        # another kind, key or element width, of the same length: msgpack would unpack another map
        assert read_glue_columns(one + squeeze.replace(good, bad, 1), 8) is None, bad


def _glue_after(i: int, name: str = "") -> bytes:
    """The glue after run i as the writer packs it: three openings and a squeeze, numbered by the run."""
    return b"".join(msgpack.packb({"type": kind, "name": name or f"{prefix}{i}", "value": struct.pack("<Q", 7 * i + k)},
                                  use_bin_type=True)
                    for k, (kind, prefix) in enumerate((("opening", "a"), ("opening", "b"), ("value", "c"),
                                                        ("squeeze", "beta"))))


@pytest.mark.parametrize("change", [None, "a name of other bytes in the last blob", "a name with a character no "
                                    "name holds in one blob", "a name starting with a digit in one blob",
                                    "another kind in one blob", "a name of another length in one blob"])
def test_glue_blobs_alike_read_at_once_are_what_msgpack_unpacks_or_declined(change):
    # the independent side is msgpack itself, unpacking the same bytes event by event
    blobs = [_glue_after(i) for i in range(1000, 1006)]
    if change == "a name of other bytes in the last blob":
        blobs[-1] = blobs[-1].replace(b"beta1005", b"gamma_05")
    elif change == "a name with a character no name holds in one blob":
        blobs[3] = blobs[3].replace(b"b1003", b"b1-03")
    elif change == "a name starting with a digit in one blob":
        blobs[2] = blobs[2].replace(b"c1002", b"9c002")
    elif change == "another kind in one blob":
        blobs[4] = blobs[4].replace(b"\xa5value\xa4name", b"\xa5tiles\xa4name", 1)
    elif change == "a name of another length in one blob":
        blobs[1] = blobs[1].replace(b"\xa5a1001", b"\xa4a101").replace(b"\xa5b1001", b"\xa6b10011")  # same bytes in all
    data = b"".join(blobs)
    assert len(data) == 6 * len(blobs[0])
    read = read_glue_periods(data, 8, len(blobs[0]))
    if change in (None, "a name of other bytes in the last blob"):
        assert read is not None
        unpacked = list(msgpack.Unpacker(io.BytesIO(data), raw=False))
        assert [("value", "squeeze", "opening")[code] for code in read.codes.tolist()] == [u["type"] for u in unpacked]
        assert read.names == [u["name"] for u in unpacked]
        assert [bytes(row) for row in read.elements] == [u["value"] for u in unpacked]
        assert read.ends.tolist() == read_glue_columns(data, 8).ends.tolist()
        assert read.spelled[0].tolist() == [len(u["name"]) for u in unpacked]
        assert read.spelled[1] == "".join(u["name"] + "\n" for u in unpacked).encode()
        assert [name for _, rows, lengths in read.periods for name in rows.tobytes().decode()] == list(
            "".join(read.names))  # the names' rows, for templates
    else:
        assert read is None
    assert read_glue_periods(data[:-1], 8, len(blobs[0])) is None  # not whole blobs
    assert read_glue_periods(blobs[0], 8, len(blobs[0])) is None  # one blob: nothing to read at once

@settings(max_examples=60, deadline=None)
@given(field=st.sampled_from(["goldilocks", "babybear"]), seed=st.integers(0, 2**32),
       shape=st.lists(st.sampled_from(["pair", "pair", "pair", "bad-round", "bad-challenge", "note", "list-round",
                                       "three-values", "instance"]), max_size=40),
       chunk=st.sampled_from([7, 64, 333, 1 << 20]))
def test_packed_runs_read_through_the_window_give_exactly_what_feeding_one_at_a_time_gives(field, seed, shape,
                                                                                           chunk):
    rng = random.Random(seed)
    payloads: list[dict[str, object]] = [
        {"type": "field", "name": field},
        {"type": "instance", "name": "boarding-permutation", "num_vars": 12, "degree": 3, "claim": 1}]
    for index, kind in enumerate(shape):
        if kind == "instance":
            payloads.append({"type": "instance", "name": f"deck-{index}", "num_vars": 12, "degree": 3, "claim": 1})
        elif kind == "note":
            payloads.append({"type": "note", "text": "gate closed"})
        elif kind == "list-round":
            payloads += [{"type": "round", "evals": [1, 2, 3, 4]}, {"type": "challenge", "value": 9}]
        else:
            values = 3 if kind == "three-values" else 4
            payloads += writer_pair(field, rng, values, kind[4:] if kind.startswith("bad-") else None)
    data = b"".join(msgpack.packb(payload, use_bin_type=True) for payload in payloads)

    def outcome(records: list[object], seq: Sequencer, error: str | None) -> tuple[object, ...]:
        return records, [type(r) for r in records], error, seq.count, seq.rounds_done, seq.awaiting_challenge

    fed, seq_fed, error_fed = [], Sequencer(), None
    try:
        for payload in payloads:
            fed.append(seq_fed.feed(payload))
    except TranscriptError as err:
        error_fed = str(err)
    seq, records, error = Sequencer(), [], None
    try:
        stream_bytes(seq, data, chunk, records)
    except TranscriptError as err:
        error = str(err)
    assert outcome(records, seq, error) == outcome(fed, seq_fed, error_fed)


def test_a_whole_run_of_rounds_is_taken_from_the_unpacker_as_bytes_not_unpacked_one_by_one():
    rng = random.Random(740)
    payloads = [{"type": "field", "name": "goldilocks"},
                {"type": "instance", "name": "boarding-permutation", "num_vars": 6, "degree": 3, "claim": 1}]
    for _ in range(6):
        payloads += writer_pair("goldilocks", rng, 4)
    payloads.append({"type": "final", "value": struct.pack("<Q", 8)})
    data = b"".join(msgpack.packb(payload, use_bin_type=True) for payload in payloads)
    records: list[object] = []
    unpacker = stream_bytes(Sequencer(), data, 1 << 20, records)
    fed = Sequencer()
    assert records == [fed.feed(payload) for payload in payloads]
    assert unpacker.taken == 6 * pair_run(data, len(msgpack.packb(payloads[0])) + len(
        msgpack.packb(payloads[1], use_bin_type=True)), 8, 6)[1].stride


# ----- the glue: value, squeeze, opening and the instance keys ----------------------------------------------------
def glued(name: str = "goldilocks") -> Sequencer:
    seq = Sequencer()
    seq.feed({"type": "field", "name": name})
    return seq


def test_glue_events_become_records_with_names_lists_and_the_instance_they_follow():
    from stepper.transcript.model import NamedValue, Opening, Squeeze

    seq = glued()
    tau = seq.feed({"type": "value", "name": "tau", "value": [3, "0x5"]})
    assert tau == NamedValue("tau", (3, 5), True, None)
    one = seq.feed({"type": "value", "name": "fare.total", "value": "12"})
    assert one == NamedValue("fare.total", 12, False, None)
    seq.feed({"type": "instance", "name": "zc", "num_vars": 1, "degree": 2, "claim": 0,
              "final_expr": "a * b_at_r"})
    seq.feed({"type": "round", "evals": [0, 0, 0]})
    seq.feed({"type": "challenge", "value": 9})
    a = seq.feed({"type": "opening", "name": "a", "value": 4})
    b = seq.feed({"type": "opening", "name": "b_at_r", "table": "b", "value": 5})
    alpha = seq.feed({"type": "squeeze", "name": "alpha", "value": 7})
    assert a == Opening("a", 4, "a", 0) and b == Opening("b_at_r", 5, "b", 0)
    assert alpha == Squeeze("alpha", 7, False, 0)


def test_an_extension_value_of_k_scalars_is_one_element_and_a_list_of_lists_is_a_point():
    from stepper.field.field import DEFAULT_IRREDUCIBLES

    seq = Sequencer()
    seq.feed({"type": "field", "name": "babybear", "extension_degree": 4})
    one = seq.feed({"type": "value", "name": "c", "value": [1, 2, 3, 4]})
    point = seq.feed({"type": "value", "name": "w", "value": [[1, 2, 3, 4], [0, 0, 0, 1]]})
    assert one.listed is False and one.value == (1, 2, 3, 4)
    assert point.listed is True and point.value == ((1, 2, 3, 4), (0, 0, 0, 1))
    assert DEFAULT_IRREDUCIBLES[("babybear", 4)]  # the field above is the default quartic extension


@pytest.mark.parametrize(("payloads", "message"), [
    ([{"type": "value", "name": "9lives", "value": 1}], "name"),
    ([{"type": "value", "name": "a b", "value": 1}], "name"),
    ([{"type": "value", "name": "x", "value": 1}, {"type": "squeeze", "name": "x", "value": 2}], "unique"),
    ([{"type": "opening", "name": "a", "value": 1}], "instance"),
    ([{"type": "instance", "name": "i", "num_vars": 2, "degree": 1, "claim": 0},
      {"type": "round", "evals": [0, 0]}, {"type": "challenge", "value": 1},
      {"type": "opening", "name": "a", "value": 1}], "after all 2 rounds"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0},
      {"type": "round", "evals": [0, 0]}, {"type": "value", "name": "v", "value": 1}], "challenge of round 1"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0, "claim_expr": "alpha * 2"}],
     "instance 'i': claim_expr names 'alpha'"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0, "claim_expr": "eq(tau)"}],
     "own point"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0, "claim_expr": "final(h)"}],
     "instance 'i': claim_expr names the instance 'h'"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0, "claim_expr": "2 +* 3"}],
     "column 4 of the claim_expr$"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 1, "claim": 0, "final_expr": "a"},
      {"type": "round", "evals": [0, 0]}, {"type": "challenge", "value": 1},
      {"type": "instance", "name": "j", "num_vars": 1, "degree": 1, "claim": 0}],
     "instance 'i': final_expr names 'a', which nothing before the next instance"),
    ([{"type": "instance", "name": "i", "num_vars": 2, "degree": 2, "claim": 0, "form": "eq-factored"}],
     "eq_point"),
    ([{"type": "instance", "name": "i", "num_vars": 2, "degree": 2, "claim": 0, "form": "eq-factored",
       "eq_point": [1]}], "num_vars = 2"),
    ([{"type": "instance", "name": "i", "num_vars": 2, "degree": 2, "claim": 0, "form": "eq-factored",
       "eq_point": "tau"}], "eq_point names 'tau'"),
    ([{"type": "value", "name": "tau", "value": 1},
      {"type": "instance", "name": "i", "num_vars": 1, "degree": 2, "claim": 0, "form": "eq-factored",
       "eq_point": "tau"}], "one element"),
    ([{"type": "instance", "name": "i", "num_vars": 1, "degree": 2, "claim": 0, "eq_point": [1]}],
     "only with form eq-factored"),
])
def test_glue_that_breaks_the_rules_is_refused_with_one_line_naming_it(payloads, message):
    seq = glued()
    with pytest.raises(TranscriptError, match=message) as info:
        for payload in payloads:
            seq.feed(payload)
    assert "\n" not in str(info.value)
    assert str(info.value).count("instance 'i'") <= 1  # the location names the instance; the message does not again


def test_final_expr_may_wait_for_openings_after_its_rounds_and_an_eq_point_may_name_a_squeeze():
    seq = glued()
    seq.feed({"type": "squeeze", "name": "w", "value": [1, 2]})
    start = seq.feed({"type": "instance", "name": "zc", "num_vars": 2, "degree": 2, "claim": 0,
                      "form": "eq-factored", "eq_point": "w", "final_expr": "eq(w) * a^2"})
    assert start.eq_point == "w" and start.final_expr == "eq(w) * a^2"
    for r in (1, 2):
        seq.feed({"type": "round", "evals": [0, 0]})
        seq.feed({"type": "challenge", "value": r})
    assert seq.finish_glue() == "instance 'zc': final_expr names 'a', never sent"
    seq.feed({"type": "opening", "name": "a", "value": 3})
    assert seq.finish_glue() is None
    nxt = seq.feed({"type": "instance", "name": "next", "num_vars": 1, "degree": 1, "claim": 0,
                    "claim_expr": "a + eq(point(zc), w) * final(zc)"})
    assert nxt.claim_expr == "a + eq(point(zc), w) * final(zc)"


def test_glue_types_are_unknown_events_in_a_version_1_file():
    seq = glued()
    seq.glue = False
    record = seq.feed({"type": "value", "name": "tau", "value": 1})
    assert isinstance(record, UnknownEvent) and record.kind == "value"
    with pytest.raises(TranscriptError, match="form"):
        seq.feed({"type": "instance", "name": "i", "num_vars": 1, "degree": 2, "claim": 0, "form": "eq-factored",
                  "eq_point": [1]})


@pytest.mark.parametrize("binary", [False, True])
def test_to_payload_inverts_feed_for_the_glue(binary):
    field_ext = None
    for name, degree in (("goldilocks", 1), ("babybear", 4)):
        spec = {"type": "field", "name": name, **({"extension_degree": degree} if degree > 1 else {})}
        src = Sequencer()
        decl = src.feed(spec)
        field_ext = decl.field
        one = field_ext.embed(3) if degree > 1 else 3
        payloads = [
            {"type": "value", "name": "tau", "value": [field_ext.to_json(one), field_ext.to_json(field_ext.one)]},
            {"type": "squeeze", "name": "alpha", "value": field_ext.to_json(one)},
            {"type": "squeeze", "name": "pt", "value": [field_ext.to_json(one)]},
            {"type": "instance", "name": "zc", "num_vars": 1, "degree": 2, "claim": 0, "form": "eq-factored",
             "eq_point": [field_ext.to_json(one)], "claim_expr": "alpha - alpha", "final_expr": "eq(tau) * a"},
            {"type": "round", "evals": [0, 0]}, {"type": "challenge", "value": 1},
            {"type": "opening", "name": "a", "table": "fares", "value": 5},
        ]
        records = [src.feed(p) for p in payloads]
        again = Sequencer()
        again.feed(spec)
        for record in records:
            assert again.feed(to_payload(record, field_ext, binary=binary, packed=binary)) == record


def test_a_note_names_an_instance_far_back_and_the_last_of_a_repeated_name():
    # Reference: the instance order itself (a note on a name means its last instance so far);
    # common practice, no source. 3000 instances push the early names out of the book's recent window.
    seq = Sequencer()
    seq.feed({"type": "field", "name": "goldilocks"})
    for i in range(3000):
        name = "harbour-pilot" if i in (5, 40) else f"sailing-{i}"
        seq.feed({"type": "instance", "name": name, "num_vars": 0, "degree": 1, "claim": 0})
        seq.feed({"type": "final", "value": 0})
    assert seq.instance_count == 3000 and seq.current is not None and seq.current.index == 2999
    assert seq.feed({"type": "note", "text": "late", "instance": "sailing-7"}).instance == 7
    assert seq.feed({"type": "note", "text": "pilot", "instance": "harbour-pilot"}).instance == 40
    with pytest.raises(TranscriptError, match="seen so far"):
        seq.feed({"type": "note", "text": "none", "instance": "sailing-3000"})


def _instance_state(seq: Sequencer) -> tuple[object, ...]:
    cur = seq.current
    return (seq.count, len(seq.names), cur, seq.names.last(cur.name) if cur else None, seq.rounds_done,
            seq.awaiting_challenge, seq.final_seen, seq.pending_batch)


@pytest.mark.parametrize("case", ["plain", "bn254", "babybear^4", "num_vars past the cap", "degree past the cap",
                                  "claim equal to p", "claim of another width", "name past the cap", "after a batch",
                                  "an instance still open", "glue texts", "glue texts, version 1",
                                  "glue texts not deferred", "final_expr past the cap"])
def test_a_plain_instance_gives_the_record_state_and_error_that_feeding_its_payload_gives(case):
    field, name, num_vars, degree, p = "goldilocks", "sailing-0740", 3, 2, GOLDILOCKS
    if case == "bn254":
        field, p = "bn254", BN254_R
    claim = (p - 1).to_bytes((p.bit_length() + 7) // 8, "little")
    if case == "babybear^4":
        field, claim = "babybear", b"".join(v.to_bytes(4, "little") for v in (1, 2, 3, BABYBEAR - 1))
    num_vars = 65 if case == "num_vars past the cap" else num_vars  # MAX_NUM_VARS = 64
    degree = (1 << 12) + 1 if case == "degree past the cap" else degree  # MAX_DEGREE = 2^12
    claim = p.to_bytes(8, "little") if case == "claim equal to p" else claim
    claim = claim[:-1] if case == "claim of another width" else claim
    name = "x" * ((1 << 16) + 1) if case == "name past the cap" else name  # MAX_TEXT = 2^16
    texts = {"claim_expr": "a0 + beta0*b0", "final_expr": "eq(tau) * (a1*b1 - c1)"} if "_expr" in case or \
        "glue texts" in case else {}
    if case == "final_expr past the cap":
        texts["final_expr"] = "x" * ((1 << 16) + 1)
    pair = []
    for _ in range(2):
        seq = Sequencer()
        seq.glue = case != "glue texts, version 1"
        seq.defer_glue = case != "glue texts not deferred"
        seq.feed({"type": "field", "name": field, **({"extension_degree": 4} if case == "babybear^4" else {})})
        if texts and case != "glue texts, version 1":
            for name_sent in ("a0", "beta0", "b0", "tau"):
                seq.feed({"type": "value", "name": name_sent, "value": [1] if name_sent == "tau" else 1})
        if case == "after a batch":
            seq.feed({"type": "batch", "coefficient": 3, "terms": [1, 2]})
        if case == "an instance still open":
            seq.feed({"type": "instance", "name": "earlier", "num_vars": 2, "degree": 1, "claim": 0})
        pair.append(seq)
    payload = {"type": "instance", "name": name, "num_vars": num_vars, "degree": degree, "claim": claim, **texts}
    outcomes = []
    for seq, take in zip(pair, (lambda s: s.plain_instance(name, num_vars, degree, claim, texts.get("claim_expr"),
                                                           texts.get("final_expr")),
                                lambda s: s.feed(payload))):
        try:
            outcomes.append(("record", take(seq)))
        except TranscriptError as err:
            outcomes.append(("error", str(err)))
        outcomes.append(("state", _instance_state(seq)))
    assert outcomes[:2] == outcomes[2:]
    assert (outcomes[0][0] == "record") == (case in ("plain", "bn254", "babybear^4", "after a batch",
                                                     "an instance still open", "glue texts",
                                                     "glue texts, version 1", "glue texts not deferred"))


@pytest.mark.parametrize("case", ["goldilocks", "bn254", "babybear^4", "an instance still open", "repeated names",
                                  "claim equal to p", "no rounds", "text past the cap", "not deferred", "version 1"])
def test_glued_runs_give_the_records_and_state_that_taking_each_instance_gives(case):
    # Reference: plain_instance then account_run for each instance (plain_instance is pinned to feed() above);
    # glued_runs must make the same records and leave the same state, or do nothing
    field, p = {"bn254": ("bn254", BN254_R), "babybear^4": ("babybear", BABYBEAR)}.get(case, ("goldilocks", GOLDILOCKS))
    width = (p.bit_length() + 7) // 8
    rng = random.Random(case)
    names = ["sailing.0", "", "quay-\u00e5", "sailing.0" if case == "repeated names" else "x" * 31]
    num_vars = [1, 3, 0 if case == "no rounds" else 2, 4]
    degrees = [1, 2, 3, 0]
    claims = [rng.randrange(p) for _ in names]
    claims[2] = p if case == "claim equal to p" else claims[2]
    claim_exprs = [None, "a0 + beta0*b0", "final(sailing.0) * 2", None]
    final_exprs = ["eq(tau) * c0", None, "q" * (1 << 20) if case == "text past the cap" else "eq(point(quay-)) * c2",
                   "c3"]
    packed = b"".join(claim.to_bytes(width, "little") for claim in claims)
    if case == "babybear^4":  # an extension: four coefficients a claim (taken one at a time)
        packed = b"".join(claim.to_bytes(width, "little") * 4 for claim in claims)

    def fresh() -> Sequencer:
        seq = Sequencer()
        seq.feed({"type": "field", "name": field, **({"extension_degree": 4} if case == "babybear^4" else {})})
        seq.glue, seq.defer_glue = case != "version 1", case != "not deferred"
        if case == "an instance still open":
            seq.feed({"type": "instance", "name": "earlier", "num_vars": 2, "degree": 1, "claim": 0})
        return seq

    bulk, single = fresh(), fresh()
    before = _instance_state(bulk)
    taken = bulk.glued_runs(names, num_vars, degrees, packed, claim_exprs, final_exprs)
    if case not in ("goldilocks", "bn254", "an instance still open", "repeated names"):
        assert taken is None and _instance_state(bulk) == before
        return
    records = []
    for name, rounds, degree, claim, claim_expr, final_expr in zip(names, num_vars, degrees, claims, claim_exprs,
                                                                   final_exprs):
        records.append(single.plain_instance(name, rounds, degree, claim.to_bytes(width, "little"), claim_expr,
                                             final_expr))
        single.account_run(rounds)
    assert taken == records
    assert _instance_state(bulk) == _instance_state(single)
    assert [bulk.names.name_at(i) for i in range(len(bulk.names))] == [single.names.name_at(i)
                                                                        for i in range(len(single.names))]
    note = {"type": "note", "text": "gangway", "instance": "sailing.0"}
    assert bulk.feed(note) == single.feed(note)


@pytest.mark.parametrize("case", ["goldilocks", "bn254", "babybear^4", "an instance still open", "repeated names",
                                  "claim equal to p", "no rounds", "num_vars past the cap", "degree past the cap",
                                  "after a batch", "counts of another length"])
def test_plain_runs_give_the_state_and_claims_that_feeding_every_event_of_the_instances_gives(case):
    # Reference: the same instances fed event by event (instance, each round and challenge, final), which
    # the tests above pin to the event stream's rules; plain_runs must leave the same state or do nothing.
    field, p, k = {"bn254": ("bn254", BN254_R, 1), "babybear^4": ("babybear", BABYBEAR, 4)}.get(case, ("goldilocks",
                                                                                                       GOLDILOCKS, 1))
    width = (p.bit_length() + 7) // 8 if k == 1 else 4
    rng = random.Random(case)
    names = ["sailing-0740", "", "quay-\u00e5", "sailing-0740" if case == "repeated names" else "x" * 31]
    num_vars = [1, 3, 2, 0 if case == "no rounds" else 4]
    num_vars[2] = 65 if case == "num_vars past the cap" else num_vars[2]  # MAX_NUM_VARS = 64
    degrees = [1, 2, (1 << 12) + 1 if case == "degree past the cap" else 3, 0]  # MAX_DEGREE = 2^12
    claims = [[rng.randrange(p) for _ in range(k)] for _ in names]
    claims[1][-1] = p if case == "claim equal to p" else claims[1][-1]
    packed = b"".join(v.to_bytes(width, "little") for claim in claims for v in claim)

    def fresh() -> Sequencer:
        seq = Sequencer()
        seq.feed({"type": "field", "name": field, **({"extension_degree": 4} if k == 4 else {})})
        if case == "after a batch":
            seq.feed({"type": "batch", "coefficient": 3, "terms": [1, 2]})
        if case == "an instance still open":
            seq.feed({"type": "instance", "name": "earlier", "num_vars": 2, "degree": 1, "claim": 0})
        return seq

    bulk, fed = fresh(), fresh()
    before = _instance_state(bulk)
    taken = bulk.plain_runs(names, num_vars[:3] if case == "counts of another length" else num_vars, degrees, packed)
    expected_ok = case in ("goldilocks", "bn254", "babybear^4", "an instance still open", "repeated names")
    if not expected_ok:
        assert taken is None and _instance_state(bulk) == before
        return
    records = []
    for name, rounds, degree, claim in zip(names, num_vars, degrees, claims):
        value = b"".join(v.to_bytes(width, "little") for v in claim)
        records.append(fed.feed({"type": "instance", "name": name, "num_vars": rounds, "degree": degree,
                                 "claim": value}))
        for _ in range(rounds):
            fed.feed({"type": "round", "evals": value})
            fed.feed({"type": "challenge", "value": value})
        fed.feed({"type": "final", "value": value})
    assert taken == tuple(record.claim for record in records)
    assert _instance_state(bulk) == _instance_state(fed)
    assert [bulk.names.name_at(i) for i in range(len(bulk.names))] == [fed.names.name_at(i)
                                                                        for i in range(len(fed.names))]
    assert all(bulk.names.last(name) == fed.names.last(name) for name in names)
    assert [Sequencer.plain_record(r.index, r.name, r.num_vars, r.degree, r.claim) for r in records] == records
    # what follows is judged alike: a note naming an instance, then the next instance
    note = {"type": "note", "text": "gangway", "instance": "sailing-0740"}
    assert bulk.feed(note) == fed.feed(note)


def test_an_error_in_an_instance_event_names_that_instance_not_the_one_before():
    # the location used to carry the previous instance (the current one while the event is read):
    # "instance 'deck': instance 'manifest': claim_expr names 'gamma' ..." named two instances
    seq = Sequencer()
    for payload in ({"type": "field", "name": "babybear"},
                    {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 7,
                     "final_expr": "t"},
                    {"type": "round", "evals": [3, 4]}, {"type": "challenge", "value": 5},
                    {"type": "opening", "name": "t", "value": 8}):
        seq.feed(payload)
    for bad, words in (({"claim_expr": "t + gamma"}, "claim_expr names 'gamma'"),
                       ({"order": "middle-first"}, "`order` among"),
                       ({"claim": "-1"}, "canonical")):
        trial = copy.deepcopy(seq)
        with pytest.raises(TranscriptError, match=words) as caught:
            trial.feed({"type": "instance", "name": "manifest", "num_vars": 1, "degree": 1, "claim": 8, **bad})
        assert caught.value.where.instance == "manifest" and "'deck'" not in str(caught.value)
        assert str(caught.value).count("'manifest'") == 1  # named once, by the location, not again by the message
    # the previous instance's own final_expr, settled when the next one starts, still names it
    late = Sequencer()
    for payload in ({"type": "field", "name": "babybear"},
                    {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 7,
                     "final_expr": "crates"},
                    {"type": "round", "evals": [3, 4]}, {"type": "challenge", "value": 5}):
        late.feed(payload)
    with pytest.raises(TranscriptError, match="final_expr names 'crates'") as caught:
        late.feed({"type": "instance", "name": "manifest", "num_vars": 1, "degree": 1, "claim": 8})
    assert caught.value.where.instance == "deck" and str(caught.value).count("'deck'") == 1
