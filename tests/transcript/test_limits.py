"""Every cap on event streams and transcripts (the table "Limits" in README.md), each met exactly
and then exceeded by one: at the cap the input is read, one past it is one TranscriptError (exit 2)
naming the cap. Caps on bytes are tested at a configured ReadLimits value (their defaults, 64 MiB and
1 TiB, are too large to write in a test); the rest at their real values. The limits themselves are
stepper's own choices (common practice, no source); BabyBear's modulus 2^31 - 2^27 + 1 is common
practice, no source.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from stepper.errors import EXIT_INPUT, TranscriptError, Where
from stepper.transcript.events import MAX_SIZES, MAX_TEXT, MAX_VALUES, Sequencer
from stepper.transcript.payload_rules import MAX_DEGREE, MAX_DEPTH, MAX_NUM_VARS
from stepper.transcript.store import ReadLimits, TranscriptWriter, load
from stepper.transcript.store.pending import MAX_PENDING_BYTES, pending_path


def _fed(*payloads: dict) -> None:
    seq = Sequencer(Where(file="limits.sumtr"))
    seq.feed({"type": "field", "name": "babybear"})
    for payload in payloads:
        seq.feed(payload)


def _instance(num_vars: int = 3, degree: int = 3) -> dict:
    return {"type": "instance", "name": "boarding-permutation", "num_vars": num_vars, "degree": degree, "claim": 0}


def _nested(levels: int) -> dict:
    """An unknown event whose payload nests ``levels`` deep, the event's own map counted."""
    value: object = 1
    for _ in range(levels - 1):
        value = [value]
    return {"type": "harbour-log", "entry": value}


CASES = {  # name -> (value at the cap, payloads built from a value)
    "num_vars": (MAX_NUM_VARS, lambda n: [_instance(num_vars=n)]),
    "degree": (MAX_DEGREE, lambda n: [_instance(degree=n)]),
    "values per event": (MAX_VALUES, lambda n: [_instance(), {"type": "round", "evals": [0] * n}]),
    "characters per text": (MAX_TEXT, lambda n: [{"type": "note", "text": "x" * n}]),
    "nesting of free-form data": (MAX_DEPTH, lambda n: [_nested(n)]),
    "bucket sizes per event": (MAX_SIZES, lambda n: [_instance(), {"type": "buckets", "round": 1, "chunk": 0,
                                                                    "count": 1, "sizes": [0] * n}]),
}


@pytest.mark.parametrize("name", list(CASES))
def test_an_event_at_the_cap_is_read_and_one_past_it_is_refused(name):
    cap, build = CASES[name]
    _fed(*build(cap))
    with pytest.raises(TranscriptError, match=f"at most {cap}|in 0..{cap}") as err:
        _fed(*build(cap + 1))
    assert err.value.exit_code == EXIT_INPUT


def _file(tmp_path: Path, extra: bytes) -> Path:
    """A sealed transcript holding one unknown event with a `bin` payload of ``len(extra)`` bytes."""
    path = tmp_path / "quill.sumtr"
    with TranscriptWriter(path) as writer:
        writer.write_payload({"type": "field", "name": "babybear"})
        writer.write_payload({"type": "harbour-log", "blob": extra})
    return path


def test_the_bytes_of_one_event_at_the_cap_and_one_past():
    limits = ReadLimits(max_event_bytes=4096, chunk_bytes=1024)
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        assert load(_file(Path(folder), b"\x01" * 4096), limits=limits).digest == "verified"
    with tempfile.TemporaryDirectory() as folder:
        with pytest.raises(TranscriptError, match="at most 4096 bytes of binary data in one object .*found 4097"):
            load(_file(Path(folder), b"\x01" * 4097), limits=limits)


def test_the_bytes_of_a_file_at_the_cap_and_one_past(tmp_path):
    path = _file(tmp_path, b"\x02" * 3000)
    size = path.stat().st_size
    assert load(path, limits=ReadLimits(max_total_bytes=size, chunk_bytes=512)).digest == "verified"
    with pytest.raises(TranscriptError, match=f"a file of at most {size - 1} bytes"):
        load(path, limits=ReadLimits(max_total_bytes=size - 1, chunk_bytes=512))


def test_the_entries_of_one_msgpack_list_at_the_cap_and_one_past(tmp_path):
    path = tmp_path / "quill.sumtr"
    with TranscriptWriter(path) as writer:
        writer.write_payload({"type": "field", "name": "babybear"})
        writer.write_payload({"type": "harbour-log", "entries": list(range(100))})
    assert load(path, limits=ReadLimits(max_items=100)).digest == "verified"
    with pytest.raises(TranscriptError, match="at most 99 entries in a list in one object .*found 100"):
        load(path, limits=ReadLimits(max_items=99))


def test_the_bytes_of_one_json_line_at_the_cap_and_one_past(tmp_path):
    head = '{"type": "field", "name": "babybear"}\n'
    note = '{"type": "note", "text": "' + "x" * 200 + '"}'
    path = tmp_path / "events.jsonl"
    path.write_text(head + note + "\n")
    assert load(path, limits=ReadLimits(max_event_bytes=len(note))).all_notes()
    with pytest.raises(TranscriptError, match=f"at most {len(note) - 1} bytes"):
        load(path, limits=ReadLimits(max_event_bytes=len(note) - 1))


def test_a_pending_notes_file_at_the_cap_is_read_and_one_byte_past_is_refused(tmp_path):
    path = _file(tmp_path, b"")
    note = b'{"type": "note", "text": "' + b"y" * 1000 + b'"}\n'
    count, rest = divmod(MAX_PENDING_BYTES, len(note))
    body = note * count + b'{"type": "note", "text": "' + b"z" * (rest - 29) + b'"}\n'
    assert len(body) == MAX_PENDING_BYTES
    Path(pending_path(path)).write_bytes(body)
    assert len(load(path).all_notes()) == count + 1
    Path(pending_path(path)).write_bytes(body + b" ")
    with pytest.raises(TranscriptError, match=f"at most {MAX_PENDING_BYTES} bytes"):
        load(path)
