"""The transcript file: exact bytes, digest, truncation, corruption, caps, JSON lines, notes."""

from __future__ import annotations

import hashlib
import json
import random
import struct
from pathlib import Path

import msgpack
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stepper.errors import TranscriptError
from stepper.transcript.store import MAGIC, ReadLimits, TranscriptWriter, append_note, load, open_events
from stepper.transcript.model import ChallengeMsg, FieldDecl, FinalValue, InstanceStart, Note, RoundMsg

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source (the "Goldilocks" prime 2^64 - 2^32 + 1)

# The worked example of transcripts/FORMAT.md. The bytes were derived by hand from the
# msgpack specification (github.com/msgpack/msgpack, spec.md: fixmap 0x80|n, fixstr 0xa0|n,
# positive fixint, bin 8 = 0xc4 + one length byte); the last 32 bytes are checked against
# hashlib's SHA-256 (FIPS 180-4) below rather than taken from our own writer.
GOLDEN_HEX = (
    "737465707065723a73756d636865636b0a0183a4746f6f6ca773746570706572"
    "ac746f6f6c5f76657273696f6ea5302e312e30a86d657461646174618"
    "2a56c6162656cb2"
    "69736c652d6f662d7175696c6c2d30373430a763726561746564b4"
    "323032362d31312d33305430373a34303a30305a"
    "82a474797065a56669656c64a46e616d65a862616279626561" "72"
    "85a474797065a8696e7374616e6365a46e616d65aa6465636b2d736c6f7473"
    "a86e756d5f7661727301a664656772656501a5636c61696dc40407000000"
    "82a474797065a5726f756e64a56576616c73c4080300000004000000"
    "82a474797065a96368616c6c656e6765a576616c7565c40405000000"
    "82a474797065a566696e616ca576616c7565c40408000000"
    "83a474797065a3656e64a66576656e747305a6736861323536c420"
)
GOLDEN_DIGEST_HEX = "e833d800ba0dba0c5911d04ab3f11fd3af94025afba0a24abf3ee0b90a73c5f8"


def write_golden(path: Path) -> None:
    meta = {"label": "isle-of-quill-0740", "created": "2026-11-30T07:40:00Z"}
    with TranscriptWriter(path, metadata=meta, tool_version="0.1.0") as out:
        out.write_payload({"type": "field", "name": "babybear"})
        out.write_payload({"type": "instance", "name": "deck-slots", "num_vars": 1, "degree": 1, "claim": 7})
        out.write_payload({"type": "round", "evals": [3, 4]})
        out.write_payload({"type": "challenge", "value": 5})
        out.write_payload({"type": "final", "value": 8})


def write_boarding(path: Path, rounds: int = 3, finish: bool = True) -> None:
    """A Goldilocks instance with `rounds` rounds (demo data: Brackwater Ferries)."""
    rng = random.Random(740)
    out = TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"})
    out.write_payload({"type": "field", "name": "goldilocks"})
    out.write_payload({"type": "instance", "name": "boarding-permutation", "num_vars": rounds, "degree": 3,
                       "claim": rng.randrange(GOLDILOCKS)})
    for _ in range(rounds):
        out.write_payload({"type": "round", "evals": [rng.randrange(GOLDILOCKS) for _ in range(4)]})
        out.write_payload({"type": "challenge", "value": rng.randrange(GOLDILOCKS)})
    if finish:
        out.finish()
    else:
        out.close()


def test_writer_produces_the_documented_bytes_exactly(tmp_path):
    path = tmp_path / "golden.sumtr"
    write_golden(path)
    data = path.read_bytes()
    assert data[:-32].hex() == GOLDEN_HEX
    assert data[-32:].hex() == GOLDEN_DIGEST_HEX
    assert len(data) == 341


def test_end_event_digest_is_sha256_of_every_byte_before_it(tmp_path):
    path = tmp_path / "golden.sumtr"
    write_golden(path)
    data = path.read_bytes()
    end_start = data.rindex(b"\x83\xa4type\xa3end")
    # Independent check: hashlib (FIPS 180-4 SHA-256) over the raw prefix.
    assert hashlib.sha256(data[:end_start]).digest() == data[-32:]


def test_golden_bytes_decode_with_plain_msgpack_to_the_documented_events(tmp_path):
    path = tmp_path / "golden.sumtr"
    write_golden(path)
    data = path.read_bytes()
    assert data.startswith(MAGIC) and MAGIC == b"stepper:sumcheck\n"
    unpacker = msgpack.Unpacker(raw=False)
    unpacker.feed(data[len(MAGIC):])
    objects = list(unpacker)
    assert objects[0] == 1
    assert objects[2] == {"type": "field", "name": "babybear"}
    assert objects[4] == {"type": "round", "evals": struct.pack("<II", 3, 4)}
    assert objects[-1]["type"] == "end" and objects[-1]["events"] == 5


def test_reader_returns_the_records_written_complete_and_verified(tmp_path):
    path = tmp_path / "golden.sumtr"
    write_golden(path)
    with open_events(path) as stream:
        records = list(stream)
        assert stream.completeness == "complete"
        assert stream.digest == "verified"
        assert stream.header.metadata["label"] == "isle-of-quill-0740"
        assert stream.header.tool_version == "0.1.0"
    assert records[1] == InstanceStart(0, "deck-slots", 1, 1, 7)
    assert records[2] == RoundMsg(0, 1, (3, 4))
    assert records[3] == ChallengeMsg(0, 1, 5)
    assert records[4] == FinalValue(0, 8)
    assert isinstance(records[0], FieldDecl) and records[0].field.p == 2**31 - 2**27 + 1


def test_truncation_at_every_byte_gives_a_clean_prefix_or_a_clear_error(tmp_path):
    source = tmp_path / "full.sumtr"
    write_golden(source)
    data = source.read_bytes()
    header_end = data.index(b"\x82\xa4type\xa5field")
    cut = tmp_path / "cut.sumtr"
    for size in range(len(data)):
        cut.write_bytes(data[:size])
        if size < header_end:
            with pytest.raises(TranscriptError) as caught:
                load(cut)
            assert "byte" in str(caught.value) or "empty" in str(caught.value)
            continue
        with open_events(cut) as stream:
            records = list(stream)
            assert stream.completeness == "incomplete"
            assert stream.digest == "missing"
        for got, want in zip(records, list(open_events(source))):
            assert got == want
    with open_events(source) as stream:
        assert len(list(stream)) == 5


def test_a_cut_off_event_is_dropped_and_its_offset_reported(tmp_path):
    source = tmp_path / "full.sumtr"
    write_golden(source)
    data = source.read_bytes()
    round_start = data.index(b"\x82\xa4type\xa5round")
    cut = tmp_path / "cut.sumtr"
    cut.write_bytes(data[: round_start + 7])
    with open_events(cut) as stream:
        records = list(stream)
    assert len(records) == 2
    assert stream.truncated_at == round_start


def test_a_prefix_ending_between_events_is_incomplete_without_a_cut(tmp_path):
    path = tmp_path / "open.sumtr"
    write_boarding(path, rounds=3, finish=False)
    transcript = load(path)
    assert transcript.completeness == "incomplete" and transcript.digest == "missing"
    assert len(transcript.instances[0].rounds) == 3
    with open_events(path) as stream:
        list(stream)
    assert stream.truncated_at is None


def test_a_changed_byte_in_the_recorded_part_is_corrupt(tmp_path):
    path = tmp_path / "t.sumtr"
    write_golden(path)
    data = bytearray(path.read_bytes())
    data[data.index(b"isle")] = ord("j")  # metadata text changes, still valid msgpack
    path.write_bytes(bytes(data))
    with pytest.raises(TranscriptError, match="corrupt") as caught:
        load(path)
    assert f"byte {0x11a}" in str(caught.value)
    relaxed = load(path, best_effort=True)
    assert relaxed.digest == "mismatch"


def test_digest_verifies_when_events_straddle_small_read_chunks(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path, rounds=20)
    for chunk in (17, 18, 19, 31, 64, 100, 333):
        with open_events(path, limits=ReadLimits(chunk_bytes=chunk)) as stream:
            assert len(list(stream)) == 42
            assert stream.digest == "verified"


def test_appended_note_keeps_the_recorded_digest_and_is_reported_apart(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path)
    append_note(path, Note("gate 3 scanner restarted here", 0, 2))
    append_note(path, Note("whole sailing re-run on Tuesday"))
    with open_events(path) as stream:
        records = list(stream)
        assert stream.digest == "verified" and stream.completeness == "complete"
        assert stream.appended == 2
    assert records[-2] == Note("gate 3 scanner restarted here", 0, 2)
    assert records[-1] == Note("whole sailing re-run on Tuesday", None, None)
    transcript = load(path)
    assert transcript.notes == (Note("whole sailing re-run on Tuesday"),)
    assert transcript.instances[0].notes == (Note("gate 3 scanner restarted here", 0, 2),)


def test_append_note_refuses_an_instance_that_is_not_there(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path)
    with pytest.raises(TranscriptError, match="instance among 0..0"):
        append_note(path, Note("nope", 3))


def test_only_notes_may_follow_the_end_event(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path)
    with path.open("ab") as handle:
        handle.write(msgpack.packb({"type": "round", "evals": b"\0" * 32}))
    with pytest.raises(TranscriptError, match="only `note` events after the end"):
        load(path)


def test_wrong_magic_is_refused_with_what_was_expected(tmp_path):
    path = tmp_path / "t.bin"
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + b"\0" * 20)
    with pytest.raises(TranscriptError, match="expected a stepper transcript"):
        load(path)


def test_future_version_is_refused_naming_the_version_read(tmp_path):
    path = tmp_path / "t.sumtr"
    write_golden(path)
    data = bytearray(path.read_bytes())
    data[len(MAGIC)] = 3
    path.write_bytes(bytes(data))
    with pytest.raises(TranscriptError, match="expected format version 2 .* found version 3"):
        load(path)


def test_length_field_claiming_a_billion_elements_is_refused_at_its_offset(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path, finish=False)
    offset = path.stat().st_size
    with path.open("ab") as handle:  # a map whose `evals` array header claims 10^9 entries
        handle.write(b"\x82\xa4type\xa5round\xa5evals\xdd" + (10**9).to_bytes(4, "big") + b"\xc0" * 8)
    with pytest.raises(TranscriptError) as caught:
        load(path)
    assert "at most 4194304 entries in a list in one object (a reading limit), found 1000000000" in str(caught.value)
    assert f"byte {offset}" in str(caught.value) and "event 8" in str(caught.value)


def test_bin_claiming_four_gigabytes_costs_no_memory_and_is_refused_or_dropped(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path, finish=False)
    claim = b"\x82\xa4type\xa5round\xa5evals\xc6\xff\xff\xff\xf0"
    with path.open("ab") as handle:
        handle.write(claim)
    with open_events(path) as stream:  # the bytes are not there: a cut-off last event
        assert len(list(stream)) == 8 and stream.completeness == "incomplete"
    with path.open("ab") as handle:
        handle.write(b"\0" * (3 << 16))
    with pytest.raises(TranscriptError, match="events of at most 65536 bytes"):
        load(path, limits=ReadLimits(max_event_bytes=1 << 16, chunk_bytes=1 << 14))


def test_non_canonical_element_is_refused_naming_instance_and_round(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path, rounds=3, finish=False)
    data = path.read_bytes()
    bad = struct.pack("<Q", GOLDILOCKS)  # p itself: not canonical
    last_challenge = data.rindex(b"\xa5value\xc4\x08") + len(b"\xa5value\xc4\x08")
    path.write_bytes(data[:last_challenge] + bad + data[last_challenge + 8:])
    with pytest.raises(TranscriptError) as caught:
        load(path)
    text = str(caught.value)
    assert "canonical" in text and "instance 'boarding-permutation'" in text and "round 3" in text


def test_unknown_field_name_is_refused(tmp_path):
    path = tmp_path / "t.jsonl"
    path.write_text('{"type": "field", "name": "pallas-ish"}\n')
    with pytest.raises(TranscriptError, match="field name among bn254"):
        load(path)


def test_event_over_the_size_cap_is_refused(tmp_path):
    path = tmp_path / "t.sumtr"
    write_boarding(path, finish=False)
    with path.open("ab") as handle:
        handle.write(msgpack.packb({"type": "note", "text": "x" * 5000}))
    with pytest.raises(TranscriptError, match="at most 2048 bytes"):
        load(path, limits=ReadLimits(max_event_bytes=2048, chunk_bytes=512))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_random_byte_flips_and_insertions_give_records_or_one_clear_error(tmp_path, data):
    path = tmp_path / "fuzz.sumtr"
    if not path.exists():
        write_golden(path)
    original = (tmp_path / "fuzz.sumtr").read_bytes()
    mutated = bytearray(original)
    for _ in range(data.draw(st.integers(1, 4))):
        position = data.draw(st.integers(0, len(mutated)))
        if data.draw(st.booleans()) and position < len(mutated):
            mutated[position] ^= data.draw(st.integers(1, 255))
        else:
            mutated[position:position] = bytes([data.draw(st.integers(0, 255))])
    target = tmp_path / "mutated.sumtr"
    target.write_bytes(bytes(mutated))
    try:
        with open_events(target) as stream:
            list(stream)
    except TranscriptError as err:
        assert "\n" not in str(err) and str(target) in str(err)
        return
    # A mutation the reader accepts must be one the digest cannot see (after the end
    # event only notes are allowed) or one that dropped the end event entirely.
    assert stream.digest in ("verified", "missing")


def test_json_lines_file_is_detected_by_content(tmp_path):
    path = tmp_path / "events.txt"
    lines = [
        {"type": "field", "name": "goldilocks"},
        {"type": "instance", "name": "boarding-permutation", "num_vars": 1, "degree": 2, "claim": "0x10"},
        {"type": "round", "evals": [7, 9, "12"]},
        {"type": "challenge", "value": 3},
    ]
    path.write_text("  \n" + "\n".join(json.dumps(line) for line in lines) + "\n")
    with open_events(path) as stream:
        records = list(stream)
        assert stream.kind == "events" and stream.digest == "not-applicable"
        assert stream.completeness == "complete"
    assert records[2] == RoundMsg(0, 1, (7, 9, 12))
    assert records[1].claim == 16


def test_json_line_that_is_not_json_names_its_line(tmp_path):
    path = tmp_path / "events.jsonl"
    path.write_text('{"type": "field", "name": "babybear"}\n'
                    '{"type": "instance", "name": "a", "num_vars": 1, "degree": 1, "claim": 1}\n'
                    'round 1: 3 4\n'
                    '{"type": "round", "evals": [0, 1]}\n')
    with pytest.raises(TranscriptError) as caught:
        load(path)
    assert "line 3" in str(caught.value) and "invalid JSON" in str(caught.value)


def test_partial_last_json_line_is_dropped_and_marks_incomplete(tmp_path):
    path = tmp_path / "events.jsonl"
    path.write_text('{"type": "field", "name": "babybear"}\n'
                    '{"type": "instance", "name": "a", "num_vars": 2, "degree": 1, "claim": 1}\n'
                    '{"type": "round", "evals": [0, 1]}\n'
                    '{"type": "challenge", "val')
    with open_events(path) as stream:
        records = list(stream)
        assert stream.completeness == "incomplete" and stream.truncated_at == 4
    assert len(records) == 3


def test_last_json_line_without_newline_but_whole_is_kept(tmp_path):
    path = tmp_path / "events.jsonl"
    path.write_text('{"type": "field", "name": "babybear"}\n{"type": "note", "text": "last"}')
    with open_events(path) as stream:
        records = list(stream)
        assert stream.completeness == "complete"
    assert records[-1] == Note("last")


def test_missing_file_is_one_clear_error(tmp_path):
    with pytest.raises(TranscriptError, match="could not open the file"):
        load(tmp_path / "nope.sumtr")


def test_deeply_nested_input_is_refused_not_a_crash(tmp_path):
    jsonl = tmp_path / "deep.jsonl"
    jsonl.write_text('{"type": "field", "name": "babybear"}\n{"type": "note", "text": ' + "[" * 50_000
                     + "]" * 50_000 + "}\n")
    with pytest.raises(TranscriptError, match="line 2: expected JSON nested"):
        load(jsonl)
    packed = tmp_path / "deep.sumtr"
    write_boarding(packed, finish=False)
    with packed.open("ab") as handle:  # 5000 nested one-element arrays inside an unknown event
        handle.write(b"\x82\xa4type\xa4gate\xa1v" + b"\x91" * 5000 + b"\xc0")
    with pytest.raises(TranscriptError, match="malformed bytes|nesting"):
        load(packed)


def test_bare_msgpack_ends_silently_on_a_cut_but_the_reader_reports_it(tmp_path):
    path = tmp_path / "t.sumtr"
    write_golden(path)
    data = path.read_bytes()
    cut = data[: data.index(b"\x82\xa4type\xa9challenge") + 5]
    # The library behaviour that makes our own detection necessary: no error, and
    # tell() points into the half-read event (msgpack-python 1.x, measured).
    event_start = len(cut) - 5
    bare = msgpack.Unpacker(raw=False)
    bare.feed(cut[len(MAGIC):])
    assert len(list(bare)) == 5 and len(MAGIC) + bare.tell() > event_start
    (tmp_path / "cut.sumtr").write_bytes(cut)
    with open_events(tmp_path / "cut.sumtr") as stream:
        assert len(list(stream)) == 3
    assert stream.truncated_at == event_start


def test_writer_refuses_an_end_event_and_stops_cleanly_after_an_unstorable_integer(tmp_path):
    # an `end` event copied from elsewhere would make the file read as corrupt; a free-form
    # integer beyond msgpack's range must not leave a wrong event count to be sealed
    from stepper.errors import TranscriptError
    from stepper.transcript.store import TranscriptWriter, open_events

    path = tmp_path / "unstorable.sumtr"
    writer = TranscriptWriter(path)
    writer.write_payload({"type": "field", "name": "babybear"})
    with pytest.raises(TranscriptError, match="`end`"):
        writer.write_payload({"type": "end", "events": 1})
    with pytest.raises(TranscriptError, match="msgpack"):
        writer.write_payload({"type": "harbour-log", "tonnage": 2**70})
    with pytest.raises(TranscriptError, match="could not be stored"):
        writer.write_payload({"type": "note", "text": "after the failure"})
    with pytest.raises(TranscriptError, match="unsealed"):
        writer.finish()
    with open_events(path) as events:
        kinds = [type(e).__name__ for e in events]
    assert kinds == ["FieldDecl"]
    assert events.completeness == "incomplete"


def test_writer_metadata_with_an_oversized_integer_is_an_input_error(tmp_path):
    from stepper.errors import TranscriptError
    from stepper.transcript.store import TranscriptWriter

    with pytest.raises(TranscriptError, match="metadata"):
        TranscriptWriter(tmp_path / "meta.sumtr", metadata={"tickets": 2**70})


@pytest.mark.parametrize("atomic", [False, True])
def test_a_file_without_glue_keeps_version_1_and_the_first_glue_event_turns_it_into_version_2(tmp_path, atomic):
    plain_path, glue_path = tmp_path / "plain.sumtr", tmp_path / "glue.sumtr"
    write_golden(plain_path)
    assert plain_path.read_bytes()[len(MAGIC)] == 1  # the worked example above: version 1, unchanged
    meta = {"label": "isle-of-quill-0740", "created": "2026-11-30T07:40:00Z"}
    with TranscriptWriter(glue_path, metadata=meta, tool_version="0.1.0", atomic=atomic) as out:
        out.write_payload({"type": "field", "name": "babybear"})
        out.write_payload({"type": "instance", "name": "deck-slots", "num_vars": 1, "degree": 1, "claim": 7})
        out.write_payload({"type": "round", "evals": [3, 4]})
        out.write_payload({"type": "challenge", "value": 5})
        out.write_payload({"type": "opening", "name": "slots", "value": 8})
    data = glue_path.read_bytes()
    assert data[len(MAGIC)] == 2
    # the end event's digest covers the rewritten byte: hashlib's SHA-256 (FIPS 180-4) over the bytes before it
    unpacker = msgpack.Unpacker(raw=False)
    unpacker.feed(data[len(MAGIC):])
    end = list(unpacker)[-1]
    end_bytes = msgpack.packb(end, use_bin_type=True)
    assert end["sha256"] == hashlib.sha256(data[:len(data) - len(end_bytes)]).digest()
    t = load(glue_path)
    assert t.header.format_version == 2 and t.digest == "verified"
    assert t.instances[0].openings[0].value == 8


def test_an_end_event_in_a_json_lines_file_is_refused_as_import_refuses_it(tmp_path):
    # `end` is reserved for the transcript writer (transcripts/EVENTS.md); `import` and
    # `record` refuse it, and reading the same lines straight (check, view) used to keep
    # it as an unknown event, so a stream with `end` between a round and its challenge passed
    path = tmp_path / "events.jsonl"
    lines = [
        {"type": "field", "name": "babybear"},
        {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 7},
        {"type": "round", "evals": [3, 4]},
        {"type": "end"},
        {"type": "challenge", "value": 5},
    ]
    path.write_text("\n".join(json.dumps(line) for line in lines) + "\n")
    with pytest.raises(TranscriptError) as caught:
        load(path)
    assert "line 4" in str(caught.value) and "found `end`" in str(caught.value)
    path.write_text(json.dumps(lines[0]) + "\n" + json.dumps({"type": {"end": 1}}) + "\n")  # a type that is no string
    with pytest.raises(TranscriptError) as caught:
        load(path)
    assert "line 2" in str(caught.value) and "string `type`" in str(caught.value)
