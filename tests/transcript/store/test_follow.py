"""Following a growing transcript or event file: each read takes only the appended bytes."""

from __future__ import annotations

import hashlib
import json
import os
import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stepper.errors import InternalError, TranscriptError
from stepper.transcript.store import ReadLimits, TranscriptWriter, append_note, open_events
from stepper.transcript.store.follow import FollowedStream
from stepper.transcript.model import Note

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source (the "Goldilocks" prime 2^64 - 2^32 + 1)


def boarding_payloads(rounds: int = 4) -> list[dict]:
    """Demo data (Brackwater Ferries, invented): one Goldilocks instance, `rounds` rounds."""
    rng = random.Random(740)
    payloads: list[dict] = [
        {"type": "field", "name": "goldilocks"},
        {"type": "instance", "name": "boarding-permutation", "num_vars": rounds, "degree": 3,
         "claim": rng.randrange(GOLDILOCKS)},
    ]
    for _ in range(rounds):
        payloads.append({"type": "round", "evals": [rng.randrange(GOLDILOCKS) for _ in range(4)]})
        payloads.append({"type": "challenge", "value": rng.randrange(GOLDILOCKS)})
    payloads.append({"type": "final", "value": rng.randrange(GOLDILOCKS)})
    return payloads


def finished_transcript(path: Path, rounds: int = 4, notes: int = 1) -> tuple[bytes, list[int]]:
    """A sealed transcript (plus appended notes); its bytes and the offset after each event."""
    writer = TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"})
    ends = [path.stat().st_size]  # the preamble
    for payload in boarding_payloads(rounds):
        writer.write_payload(payload)
        ends.append(path.stat().st_size)
    writer.finish()
    ends.append(path.stat().st_size)
    for k in range(notes):
        append_note(path, Note(f"gate {k + 3} scanner restarted", 0, 1))
        ends.append(path.stat().st_size)
    return path.read_bytes(), ends


def fresh(path: Path) -> tuple[list, str, str]:
    with open_events(path) as stream:
        return list(stream), stream.completeness, stream.digest


def grow(path: Path, data: bytes, cuts: list[int], chunk_bytes: int = 1 << 20) -> tuple[FollowedStream, list[list]]:
    """Write ``data`` to ``path`` in steps ending at ``cuts``; the events each read hands out."""
    path.write_bytes(data[:cuts[0]])
    stream = FollowedStream(path, limits=ReadLimits(chunk_bytes=chunk_bytes))
    batches = [list(stream)]
    for start, stop in zip(cuts, cuts[1:]):
        with path.open("ab") as handle:
            handle.write(data[start:stop])
        batches.append(list(stream.more()))
    return stream, batches


@pytest.mark.parametrize("chunk_bytes", [17, 31, 1 << 20])  # events straddling reads, or one read per step
def test_a_transcript_grown_in_steps_yields_each_event_once_and_ends_verified(tmp_path, chunk_bytes):
    data, ends = finished_transcript(tmp_path / "whole.sumtr")
    cuts = [ends[0], ends[2] + 3, ends[2] + 5, ends[5], ends[-2] - 7, ends[-2], ends[-1]]  # cuts inside events
    stream, batches = grow(tmp_path / "live.sumtr", data, cuts, chunk_bytes)
    records, completeness, digest = fresh(tmp_path / "whole.sumtr")
    assert [len(b) for b in batches] == [0, 2, 0, 3, len(records) - 6, 0, 1]
    assert [r for batch in batches for r in batch] == records
    assert (stream.completeness, stream.digest, stream.truncated_at) == (completeness, digest, None) == (
        "complete", "verified", None)
    assert stream.appended == 1 and stream.bytes_read == len(data)
    stream.close()


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_every_prefix_read_while_following_holds_exactly_the_whole_events_in_it(tmp_path, data):
    whole, ends = finished_transcript(tmp_path / "whole.sumtr", rounds=3, notes=2)
    inner = data.draw(st.lists(st.integers(ends[0], len(whole)), max_size=8).map(sorted))
    cuts = [ends[0], *inner, len(whole)]
    stream, batches = grow(tmp_path / "live.sumtr", whole, cuts)
    seen: list = []
    for cut, batch in zip(cuts, batches):
        seen.extend(batch)
        (tmp_path / "prefix.sumtr").write_bytes(whole[:cut])
        assert seen == fresh(tmp_path / "prefix.sumtr")[0]  # a plain read drops a cut-off last event
    assert (stream.completeness, stream.digest) == ("complete", "verified")
    stream.close()


def test_a_half_written_tail_is_not_an_event_yet_and_not_reported_cut_off(tmp_path):
    data, ends = finished_transcript(tmp_path / "whole.sumtr")
    path = tmp_path / "live.sumtr"
    path.write_bytes(data[:ends[3] + 4])
    with open_events(path) as plain:
        list(plain)
        assert plain.truncated_at == ends[3]  # the reader without following reports the cut
    with FollowedStream(path) as stream:
        assert len(list(stream)) == 3
        assert (stream.completeness, stream.digest, stream.truncated_at) == ("incomplete", "missing", None)
        assert stream.bytes_read == ends[3] + 4


def test_the_digest_equals_sha256_of_the_recorded_bytes_when_the_end_event_arrives_in_pieces(tmp_path):
    data, ends = finished_transcript(tmp_path / "whole.sumtr", notes=0)
    end_start = ends[-2]
    # SHA-256 per FIPS 180-4 through hashlib, independent of the reader's held-back hashing
    recorded = hashlib.sha256(data[:end_start]).digest()
    assert data.endswith(recorded)
    stream, batches = grow(tmp_path / "live.sumtr", data, [end_start - 1, end_start + 10, end_start + 40, len(data)])
    assert stream.digest == "verified" and batches[-1] == []
    stream.close()


def test_a_changed_recorded_byte_is_corrupt_when_the_end_event_arrives(tmp_path):
    data, ends = finished_transcript(tmp_path / "whole.sumtr", notes=0)
    broken = bytearray(data)
    broken[ends[2] - 1] ^= 0x01  # inside the first round's packed evaluations
    path = tmp_path / "live.sumtr"
    path.write_bytes(bytes(broken[:ends[-2]]))
    with FollowedStream(path) as stream:
        list(stream)
        with path.open("ab") as handle:
            handle.write(bytes(broken[ends[-2]:]))
        with pytest.raises(TranscriptError) as caught:
            list(stream.more())
    assert "SHA-256" in str(caught.value) and "corrupt" in str(caught.value)


def test_after_the_end_event_only_appended_notes_arrive(tmp_path):
    data, ends = finished_transcript(tmp_path / "whole.sumtr", notes=0)
    path = tmp_path / "live.sumtr"
    path.write_bytes(data)
    with FollowedStream(path) as stream:
        list(stream)
        assert list(stream.more()) == []
        append_note(path, Note("whole sailing re-run on Tuesday"))
        assert list(stream.more()) == [Note("whole sailing re-run on Tuesday")]
        assert stream.appended == 1 and stream.digest == "verified"
        with path.open("ab") as handle:  # a second end event is not a note
            handle.write(data[ends[-2]:])
        with pytest.raises(TranscriptError) as caught:
            list(stream.more())
    assert "only `note` events after the end event" in str(caught.value)


def test_more_before_the_stream_ran_dry_is_refused(tmp_path):
    data, _ = finished_transcript(tmp_path / "whole.sumtr")
    with FollowedStream(tmp_path / "whole.sumtr") as stream:
        next(iter(stream))
        with pytest.raises(InternalError):
            stream.more()


@pytest.mark.parametrize("chunk_bytes", [7, 1 << 20])  # a line split over several reads, or one read per step
def test_a_json_lines_file_grown_mid_line_yields_whole_lines_only(tmp_path, chunk_bytes):
    lines = [json.dumps(p) + "\n" for p in boarding_payloads(3)]
    text = "".join(lines).encode()
    path = tmp_path / "live.events.jsonl"
    line_ends = [sum(len(x) for x in lines[:k + 1]) for k in range(len(lines))]
    cuts = [line_ends[1] + 9, line_ends[1] + 20, line_ends[3], line_ends[6] - 1, len(text)]
    path.write_bytes(text[:cuts[0]])
    stream = FollowedStream(path, limits=ReadLimits(chunk_bytes=chunk_bytes))
    counts, states = [len(list(stream))], [stream.completeness]
    for start, stop in zip(cuts, cuts[1:]):
        with path.open("ab") as handle:
            handle.write(text[start:stop])
        counts.append(len(list(stream.more())))
        states.append(stream.completeness)
    assert counts == [2, 0, 2, 2, len(lines) - 6]
    assert states == ["incomplete", "incomplete", "complete", "incomplete", "complete"]
    assert stream.truncated_at is None and stream.digest == "not-applicable"
    stream.close()
    (tmp_path / "whole.jsonl").write_bytes(text)
    with FollowedStream(path) as again:
        assert list(again) == fresh(tmp_path / "whole.jsonl")[0]


def test_a_json_lines_file_that_looked_whole_can_grow_further(tmp_path):
    lines = [json.dumps(p) for p in boarding_payloads(2)]
    path = tmp_path / "live.events.jsonl"
    path.write_text(lines[0] + "\n" + lines[1])  # no newline yet: the plain reader keeps the whole line
    with open_events(path) as plain:
        assert len(list(plain)) == 2
    with FollowedStream(path) as stream:
        assert len(list(stream)) == 1 and stream.completeness == "incomplete"
        with path.open("a") as handle:
            handle.write("\n" + "\n".join(lines[2:]) + "\n")
        assert len(list(stream.more())) == len(lines) - 1
        assert stream.completeness == "complete"


def test_continues_is_false_once_the_file_is_replaced_or_shorter_than_read(tmp_path):
    data, ends = finished_transcript(tmp_path / "whole.sumtr")
    path = tmp_path / "live.sumtr"
    path.write_bytes(data[:ends[4]])
    with FollowedStream(path) as stream:
        list(stream)
        assert stream.continues(os.stat(path))
        with path.open("ab") as handle:
            handle.write(data[ends[4]:ends[5]])
        assert stream.continues(os.stat(path))
        with path.open("r+b") as handle:
            handle.truncate(ends[2])
        assert not stream.continues(os.stat(path))
        (tmp_path / "next.sumtr").write_bytes(data)
        os.replace(tmp_path / "next.sumtr", path)
        assert not stream.continues(os.stat(path))
