"""The file and the proof are two questions with one set of words in every command and the app.

A round counts once its challenge is recorded (the sumcheck verifier samples r_k
only after g_k arrives, so a round is not finished before; common practice, no
source). The cut files here are made by cutting the shipped honest transcript's
event stream, written by the writer, so nothing in them is invented.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stepper.cli.main import main
from stepper.transcript.condition import file_condition, proof_condition, rounds_counted

HONEST = Path(__file__).parents[2] / "transcripts" / "ferries" / "ferries-honest.sumtr"


def test_the_file_words():
    assert file_condition("transcript", "complete", "verified") == "sealed, digest ok"
    assert file_condition("transcript", "complete", "mismatch") == "sealed, digest mismatch"
    assert file_condition("transcript", "incomplete", "missing") == "cut off (no end event, so no digest)"
    assert file_condition("events", "complete", "not-applicable") == "event stream, not sealed (no digest)"


def test_the_proof_words_and_the_round_rule():
    assert rounds_counted(3, 2) == 2  # round 3 sent, its challenge not yet
    assert proof_condition([(0, "a", 6, 6)]) == "every instance has all its rounds"
    assert proof_condition([(0, "a", 6, 6), (1, "b", 2, 6)]) == "stops early: instance #1 'b' has 2 of 6 rounds"


def _cut_stream(tmp_path: Path, capsys, rounds: int) -> Path:
    """The honest file's event stream up to its ``rounds``-th round event, which is left without its challenge."""
    assert main(["export", str(HONEST)]) == 0
    events = capsys.readouterr().out.splitlines()[1:]  # without the header line
    at = [i for i, line in enumerate(events) if json.loads(line)["type"] == "round"][rounds - 1]
    kept = events[: at + 1]
    path = tmp_path / "cut.jsonl"
    path.write_text("\n".join(kept) + "\n")
    return path


@pytest.mark.parametrize("imported", [False, True])
def test_check_and_info_tell_the_same_story_of_a_stream_cut_mid_instance(tmp_path, capsys, imported):
    path = _cut_stream(tmp_path, capsys, 3)  # field, schedule, note, glue, instance, 2 full rounds, round 3 alone
    if imported:
        assert main(["import", str(path), "-o", str(tmp_path / "cut.sumtr")]) == 0
        path = tmp_path / "cut.sumtr"
        file_words = "sealed, digest ok"
    else:
        file_words = "event stream, not sealed (no digest)"
    capsys.readouterr()
    assert main(["check", str(path)]) == 3
    check = capsys.readouterr().out
    assert main(["info", str(path)]) == 0
    info = capsys.readouterr().out
    proof_words = "stops early: instance #0 'boarding-permutation' has 2 of 6 rounds"
    assert f"file: {file_words}; proof: {proof_words}" in check
    assert f"file: {file_words}\n" in info and f"proof: {proof_words}" in info
    assert "rounds 2 of 6" in info and "round 3 sent, no challenge yet" in info
    assert "complete; digest verified" not in info  # the old story


def _corrupt(tmp_path: Path) -> Path:
    data = bytearray(HONEST.read_bytes())
    at = data.index(b"boarding-permutation")
    data[at] = ord("B")  # still valid msgpack; the bytes no longer hash to the recorded digest
    path = tmp_path / "changed.sumtr"
    path.write_bytes(bytes(data))
    return path


def test_a_digest_mismatch_is_the_same_line_and_exit_2_on_check_info_and_view(tmp_path, capsys, monkeypatch):
    from stepper.app.app import StepperApp

    path = _corrupt(tmp_path)
    lines = {}
    for command in ("check", "info"):
        assert main([command, str(path)]) == 2
        captured = capsys.readouterr()
        lines[command] = captured.err.removeprefix(f"stepper {command}: ")
        assert captured.err.count("\n") == 1
    # the app reads to the end, shows what it read, gives no verdict, and view exits 2 with the same line
    monkeypatch.setattr("sys.stdin.isatty", lambda: True, raising=False)
    monkeypatch.setattr("sys.stdout.isatty", lambda: True, raising=False)

    def read_all(self: StepperApp) -> None:
        while not self.source.pump(self.model, 1 << 16):
            pass

    monkeypatch.setattr(StepperApp, "run", read_all)
    assert main(["view", str(path), "--exports", str(tmp_path)]) == 2
    lines["view"] = capsys.readouterr().err.removeprefix("stepper view: ")
    assert lines["check"] == lines["info"] == lines["view"]
    assert "digest mismatch, the file changed after it was written" in lines["check"]


async def test_the_app_shows_a_digest_mismatch_in_the_same_words_and_no_verdict(tmp_path):
    from stepper.app.app import StepperApp
    from stepper.app.round_detail import ReadoutPanel

    app = StepperApp.from_file(_corrupt(tmp_path), export_dir=tmp_path)
    async with app.run_test(size=(120, 40)):
        summary = app.proof_screen.query_one("#summary", ReadoutPanel).plain()
    assert app.model.verdict() == "unusable"
    assert "file: sealed, digest mismatch" in summary
    assert "not judged: " in summary and "digest mismatch, the file changed after it was written" in summary


def test_info_says_declared_for_challenges_nobody_has_re_derived_and_check_gives_the_result(capsys):
    assert main(["info", str(HONEST)]) == 0
    info = capsys.readouterr().out
    assert "challenges: declared to come from the stepper-sha256/1 schedule" in info
    assert "derived by the" not in info  # the old wording claimed a derivation nobody had checked
    assert main(["check", str(HONEST)]) == 0
    assert "challenges re-derived by the built-in schedule stepper-sha256/1" in capsys.readouterr().out


async def test_the_app_says_declared_while_reading_and_re_derived_once_checked(tmp_path):
    from stepper.app.readout import summary_lines
    from stepper.app.source import TranscriptSource

    source = TranscriptSource(HONEST)
    model = source.open_start()
    assert model.loading
    words = {line.label: line.value for line in summary_lines(model)}
    assert words["challenges"].startswith("declared to come from stepper-sha256/1; not re-derived yet")
    while not source.pump(model, 64):
        pass
    words = {line.label: line.value for line in summary_lines(model)}
    assert words["challenges"].startswith("re-derived by the built-in schedule")


def test_a_note_half_appended_after_a_sealed_file_is_named_alike_by_check_and_info(tmp_path, capsys):
    import os
    import shutil

    path = tmp_path / "noted.sumtr"
    shutil.copy(HONEST, path)
    assert main(["note", str(path), "gate 2 scanner swapped at noon"]) == 0
    os.truncate(path, os.path.getsize(path) - 5)  # the note's last bytes never reached the disk
    capsys.readouterr()
    assert main(["check", str(path)]) == 0  # the proof is whole: the cut note is not part of it
    check_lines = capsys.readouterr().out.splitlines()
    assert main(["info", str(path)]) == 0
    info_line = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("file: "))
    assert info_line.startswith("file: sealed, digest ok; a cut-off last event at byte ")
    assert f"  {info_line}; proof: every instance has all its rounds" in check_lines  # the same words
