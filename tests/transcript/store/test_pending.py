"""Concurrent use of one transcript file: a writer holds it, notes made meanwhile wait beside it
and are folded in when the recording ends; two note commands take turns; a second writer is
refused; nothing is lost in any of these. Honest rounds come from tests/plain_sumcheck.py
(the worked example of J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1, from
memory); locking semantics are POSIX flock(2) (common practice, no source)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[2]))  # the shared plain-integer prover

from plain_sumcheck import BABYBEAR, Plain, thaler_payloads  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.errors import TranscriptError  # noqa: E402
from stepper.transcript.model import Note  # noqa: E402
from stepper.transcript.store import TranscriptWriter, append_note, load  # noqa: E402
from stepper.transcript.store.output import OutputExists  # noqa: E402
from stepper.transcript.store.pending import pending_path, read_pending  # noqa: E402

PAYLOADS = thaler_payloads(Plain(BABYBEAR), (5, 7, 11))
ROOT = Path(__file__).parents[3]


def _half_written(path: Path) -> TranscriptWriter:
    """A live writer that has written the field, the instance and round 1 and still holds the file."""
    writer = TranscriptWriter(path)
    for payload in PAYLOADS[:3]:
        writer.write_payload(payload)
    return writer


def test_a_note_made_while_a_writer_holds_the_file_waits_beside_it_and_is_folded_in_at_the_end(
        tmp_path, capsys, monkeypatch):
    # before the lock, the note was appended into the file and the writer's next event overwrote it
    monkeypatch.setitem(append_note.__kwdefaults__, "wait", 0.1)  # `note` waits 0.1 s for the lock, not 2 s
    path = tmp_path / "quill.sumtr"
    writer = _half_written(path)
    assert main(["note", str(path), "gate 3 rescanned ticket 118"]) == 0
    assert "kept in" in capsys.readouterr().out
    assert [n["text"] for n in read_pending(path)] == ["gate 3 rescanned ticket 118"]
    seen = load(path)  # readers show it meanwhile
    assert seen.completeness == "incomplete" and [n.text for n in seen.all_notes()] == ["gate 3 rescanned ticket 118"]
    for payload in PAYLOADS[3:]:
        writer.write_payload(payload)
    writer.finish()
    assert not os.path.exists(pending_path(path))
    done = load(path)
    assert (done.completeness, done.digest) == ("complete", "verified")
    assert [n.text for n in done.all_notes()] == ["gate 3 rescanned ticket 118"]


def test_a_writer_that_closes_unsealed_still_folds_the_waiting_notes(tmp_path):
    path = tmp_path / "quill.sumtr"
    writer = _half_written(path)
    assert append_note(path, Note("prover crashed soon after", None, None), wait=0.1) == pending_path(path)
    writer.close()
    assert not os.path.exists(pending_path(path))
    assert load(path).all_notes() == [Note("prover crashed soon after", None, None)]  # still about the whole proof


def test_a_second_writer_is_refused_and_the_first_recording_is_untouched(tmp_path):
    path = tmp_path / "quill.sumtr"
    writer = _half_written(path)
    before = path.read_bytes()
    with pytest.raises(TranscriptError, match="another writer holds its lock"):
        TranscriptWriter(path)
    assert path.read_bytes() == before
    writer.finish()


def test_a_live_writer_refuses_an_existing_file_unless_asked_to_replace_it(tmp_path):
    path = tmp_path / "quill.sumtr"
    path.write_bytes(b"the user's own file")
    with pytest.raises(OutputExists, match="--force"):
        TranscriptWriter(path, replace=False)
    assert path.read_bytes() == b"the user's own file"


_RECORDER = textwrap.dedent("""
    import sys, time
    sys.path.insert(0, {tests!r})
    from plain_sumcheck import BABYBEAR, Plain, thaler_payloads
    from stepper.transcript.store import TranscriptWriter
    payloads = thaler_payloads(Plain(BABYBEAR), (5, 7, 11))
    writer = TranscriptWriter(sys.argv[1])
    for p in payloads[:3]:
        writer.write_payload(p)
    print("ready", flush=True)
    time.sleep(60)
""")


@pytest.mark.slow
def test_notes_survive_a_recorder_killed_with_sigkill_and_the_next_note_folds_them(tmp_path):
    path = tmp_path / "quill.sumtr"
    child = subprocess.Popen([sys.executable, "-c", _RECORDER.format(tests=str(ROOT / "tests")), str(path)],
                             stdout=subprocess.PIPE, cwd=ROOT, text=True)
    try:
        assert child.stdout.readline().strip() == "ready"
        assert append_note(path, Note("first, while recording", None, None), wait=0.1) == pending_path(path)
    finally:
        child.send_signal(signal.SIGKILL)
        child.wait()
    assert [n.text for n in load(path).all_notes()] == ["first, while recording"]  # still shown
    assert append_note(path, Note("second, after the kill", None, None)) is None  # lock free: folds both
    assert not os.path.exists(pending_path(path))
    assert [n.text for n in load(path).all_notes()] == ["first, while recording", "second, after the kill"]


@pytest.mark.slow
def test_two_processes_adding_notes_at_once_both_land(tmp_path):
    path = tmp_path / "quill.sumtr"
    with TranscriptWriter(path) as writer:
        for payload in PAYLOADS:
            writer.write_payload(payload)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    procs = [subprocess.Popen([sys.executable, "-m", "stepper", "note", str(path), f"note {i} " + "x" * 2000],
                              env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE) for i in range(6)]
    codes = [p.wait(timeout=60) for p in procs]
    assert codes == [0] * 6, [p.stderr.read() for p in procs]
    got = load(path)
    assert got.digest == "verified"
    assert sorted(n.text[:7] for n in got.all_notes()) == [f"note {i} " for i in range(6)]


def test_a_note_waiting_on_a_busy_note_takes_its_turn(tmp_path):
    path = tmp_path / "quill.sumtr"
    with TranscriptWriter(path) as writer:
        for payload in PAYLOADS:
            writer.write_payload(payload)
    import fcntl

    with open(path, "ab") as held:  # another note holding the lock for a moment
        fcntl.flock(held.fileno(), fcntl.LOCK_EX)
        start = time.monotonic()
        assert append_note(path, Note("waited", None, None), wait=0.2) == pending_path(path)
        assert time.monotonic() - start >= 0.2
    assert append_note(path, Note("then went in", None, None)) is None
    assert [n.text for n in load(path).all_notes()] == ["waited", "then went in"]
