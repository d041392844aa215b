"""Follow mode: a writer thread appends rounds while the app watches the file."""

from __future__ import annotations

import threading
import time
from pathlib import Path

from proofs import brackwater_payloads, write_transcript

from stepper.app.app import StepperApp
from stepper.transcript.store import TranscriptWriter


async def test_rounds_appear_and_are_checked_while_the_prover_writes(tmp_path):
    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation", "deck-slots-zero"))
    writer = TranscriptWriter(path, metadata={"sailing": "isle-of-quill-0740"})
    for payload in payloads[:3]:  # field, schedule, first instance: nothing to check yet
        writer.write_payload(payload)
    go = threading.Event()

    def prover() -> None:
        go.wait()  # until the app is up and has looked (set in finally too, so never forever)
        for payload in payloads[3:]:
            writer.write_payload(payload)
            time.sleep(0.01)
        writer.finish()

    thread = threading.Thread(target=prover)
    thread.start()
    app = StepperApp.from_file(path, follow=True, poll_seconds=0.05, export_dir=tmp_path)
    try:
        async with app.run_test(size=(140, 44)) as pilot:
            assert app.model.round_count == 0
            assert app.model.verdict() == "incomplete"
            go.set()
            deadline = time.monotonic() + 60  # generous: the test machine is shared
            while app.model.completeness != "complete" and time.monotonic() < deadline:
                await pilot.pause(0.05)
            assert app.model.round_count == 8
            assert [app.model.strip_line(i) for i in range(2)] == ["■■■■┆■", "■■■■┆■"]
            assert app.model.verdict() == "accept"
            assert app.model.digest == "verified"
            assert "verdict accept" in str(app.proof_screen.query_one("#where-bar").render())
    finally:
        go.set()
        thread.join(5)


async def test_live_mode_follows_the_newest_round_as_it_arrives(tmp_path):
    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    writer = TranscriptWriter(path)
    for payload in payloads[:5]:
        writer.write_payload(payload)
    app = StepperApp.from_file(path, follow=True, poll_seconds=0.05, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)) as pilot:
        await pilot.press("l")
        assert app.proof_screen.position == (0, 1)
        for payload in payloads[5:9]:  # rounds 2 and 3 with their challenges
            writer.write_payload(payload)
        deadline = time.monotonic() + 60
        while app.proof_screen.position != (0, 3) and time.monotonic() < deadline:
            await pilot.pause(0.05)
        assert app.proof_screen.position == (0, 3)
    writer.close()


async def test_a_json_lines_event_file_can_be_followed_past_a_moment_it_looked_whole(tmp_path):
    import json

    path = tmp_path / "isle-of-quill-0740.events.jsonl"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    lines = [json.dumps(p) + "\n" for p in payloads]
    path.write_text("".join(lines[:5]))  # whole lines only: the reader calls it complete
    app = StepperApp.from_file(path, follow=True, poll_seconds=0.05, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)) as pilot:
        assert app.model.verdict() == "incomplete"  # the instance still lacks rounds
        with path.open("a") as handle:
            handle.write("".join(lines[5:]))
        deadline = time.monotonic() + 60
        while app.model.round_count < 4 and time.monotonic() < deadline:
            await pilot.pause(0.05)
        await pilot.pause(0.1)
        assert app.model.strip_line(0) == "■■■■┆■"
        assert app.model.verdict() == "accept"
        assert app.proof_screen.stepper.problem is None


def _counting_reads(monkeypatch) -> dict[str, int]:
    """Count the bytes followed streams read and how many streams are opened."""
    from stepper.transcript.store.follow import FollowedStream
    from stepper.transcript.store.reader import EventStream

    counts = {"bytes": 0, "opened": 0}

    def read(stream: FollowedStream) -> bytes:
        chunk = EventStream._read(stream)
        counts["bytes"] += len(chunk)
        return chunk

    def opened(stream: FollowedStream, *args, **kwargs) -> None:
        counts["opened"] += 1
        original_init(stream, *args, **kwargs)

    original_init = FollowedStream.__init__
    monkeypatch.setattr(FollowedStream, "_read", read)
    monkeypatch.setattr(FollowedStream, "__init__", opened)
    return counts


def _fresh_model(path):
    from stepper.app.source import TranscriptSource

    return TranscriptSource(path).open()


def test_each_look_reads_only_the_bytes_appended_since_the_last_one(tmp_path, monkeypatch):
    from stepper.app.source import TranscriptSource

    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation", "deck-slots-zero"))
    writer = TranscriptWriter(path, metadata={"sailing": "isle-of-quill-0740"})
    for payload in payloads[:4]:
        writer.write_payload(payload)
    counts = _counting_reads(monkeypatch)
    source = TranscriptSource(path, follow=True)
    model = source.open()
    assert counts == {"bytes": path.stat().st_size, "opened": 1}
    steps = [payloads[4:7], payloads[7:12], payloads[12:]]
    for step in steps:
        size = path.stat().st_size
        for payload in step:
            writer.write_payload(payload)
        counts["bytes"] = 0
        assert source.refresh(model) == len(step)
        assert counts == {"bytes": path.stat().st_size - size, "opened": 1}
        assert model.completeness == "incomplete" and not model.final
    size = path.stat().st_size
    writer.finish()
    counts["bytes"] = 0
    assert source.refresh(model) == 0  # the end event is not a record
    assert counts["bytes"] == path.stat().st_size - size
    assert source.refresh(model) == 0 and counts["bytes"] == path.stat().st_size - size  # unchanged: no read
    whole = _fresh_model(path)
    assert (model.completeness, model.digest, model.final) == ("complete", "verified", True)
    assert model.round_count == whole.round_count == 8
    assert model.verdict() == whole.verdict() == "accept"
    assert source.problem is None
    source.close()


def test_a_transcript_rewritten_from_scratch_is_read_again_from_byte_0(tmp_path, monkeypatch):
    from stepper.app.source import TranscriptSource

    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    writer = TranscriptWriter(path)
    for payload in payloads[:7]:
        writer.write_payload(payload)
    source = TranscriptSource(path, follow=True)
    model = source.open()
    counts = _counting_reads(monkeypatch)
    writer.close()
    writer = TranscriptWriter(path)  # the prover restarts: the same file, truncated and written again
    for payload in payloads[:3]:
        writer.write_payload(payload)
    assert source.refresh(model) == 0  # shorter than what was read: read again, nothing new yet
    assert counts == {"bytes": path.stat().st_size, "opened": 1}
    for payload in payloads[3:]:
        writer.write_payload(payload)
    writer.finish()
    counts["bytes"] = 0
    assert source.refresh(model) == len(payloads) - 7
    assert counts["opened"] == 1 and counts["bytes"] < path.stat().st_size
    assert (model.verdict(), model.digest, source.problem) == ("accept", "verified", None)
    source.close()


def test_a_note_saved_while_following_is_shown_once_and_notes_from_elsewhere_arrive(tmp_path):
    from stepper.app.source import TranscriptSource
    from stepper.transcript.store import append_note
    from stepper.transcript.model import Note

    path = write_transcript(tmp_path / "isle-of-quill-0740.sumtr",
                            brackwater_payloads(instances=("boarding-permutation",)))
    source = TranscriptSource(path, follow=True)
    model = source.open()
    source.save_note(model, Note("gate 3 scanner restarted here", 0, 2))
    append_note(path, Note("whole sailing re-run on Tuesday"))
    assert source.refresh(model) == 1
    assert model.instances[0].notes == [Note("gate 3 scanner restarted here", 0, 2)]
    assert model.proof_notes == [Note("whole sailing re-run on Tuesday")]
    assert model.digest == "verified"
    source.close()


def test_a_followed_file_that_breaks_says_where_and_recovers_when_rewritten(tmp_path):
    import msgpack

    from stepper.app.source import TranscriptSource

    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    writer = TranscriptWriter(path)
    for payload in payloads[:5]:
        writer.write_payload(payload)
    source = TranscriptSource(path, follow=True)
    model = source.open()
    with path.open("ab") as handle:  # a challenge where a round is due
        handle.write(msgpack.packb({"type": "challenge", "value": b"\x01\x00\x00\x00"}))
    assert source.refresh(model) == 0
    assert source.problem is not None and "event 5" in source.problem and str(path) in source.problem
    writer.close()
    write_transcript(path, payloads)
    assert source.refresh(model) == len(payloads) - 5
    assert (source.problem, model.verdict(), model.digest) == (None, "accept", "verified")
    source.close()


def test_a_followed_file_rotated_away_is_left_whole_and_the_new_file_at_its_name_is_read(tmp_path):
    # rotation: the recording is renamed (path.1) and a new one starts at the path; the reader takes no lock,
    # so neither writer waits for it, and both files stay whole
    from stepper.app.source import TranscriptSource
    from stepper.transcript.store import load

    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    writer = TranscriptWriter(path)
    for payload in payloads[:7]:
        writer.write_payload(payload)
    source = TranscriptSource(path, follow=True)
    model = source.open()
    rotated = tmp_path / "isle-of-quill-0740.sumtr.1"
    path.rename(rotated)
    for payload in payloads[7:]:  # the old writer finishes into the rotated file
        writer.write_payload(payload)
    writer.finish()
    write_transcript(path, payloads)  # a new recording at the followed name
    source.refresh(model)
    rounds = sum(len(inst.rounds) for inst in load(path).instances)
    assert (source.problem, model.verdict(), model.digest, model.round_count) == (None, "accept", "verified", rounds)
    assert load(rotated).digest == "verified"
    source.close()


def test_a_note_typed_while_the_prover_records_waits_beside_the_file_and_is_shown_once(tmp_path):
    # it used to be appended into the file the recorder was writing, and overwritten by the next round
    from stepper.app.source import TranscriptSource
    from stepper.transcript.model import Note
    from stepper.transcript.store import load
    from stepper.transcript.store.pending import pending_path

    path = tmp_path / "isle-of-quill-0740.sumtr"
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    writer = TranscriptWriter(path)
    for payload in payloads[:5]:
        writer.write_payload(payload)
    source = TranscriptSource(path, follow=True)
    model = source.open()
    source.save_note(model, Note("gate 3 scanner restarted here", 0, 1))
    assert (tmp_path / Path(pending_path(path)).name).exists()
    for payload in payloads[5:]:
        writer.write_payload(payload)
    writer.finish()
    source.refresh(model)
    assert model.instances[0].notes == [Note("gate 3 scanner restarted here", 0, 1)]
    assert (model.digest, load(path).all_notes()) == ("verified", [Note("gate 3 scanner restarted here", 0, 1)])
    source.close()
