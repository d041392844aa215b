"""`stepper note`: a note appended after the recorded part leaves its digest valid and shows
wherever the file is read (check, the app's model, report). Runs from tests/sumcheck_pairs.py.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared test provers

from stepper.app.source import TranscriptSource  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.transcript.store import load  # noqa: E402
from stepper.transcript.model import Note  # noqa: E402
from sumcheck_pairs import brackwater_specs, run_events, save  # noqa: E402

TEXT = "gate 3 scanner read ticket 0740-118 twice"


@pytest.fixture
def run_file(tmp_path: Path) -> Path:
    return save(tmp_path / "isle-of-quill-0740.sumtr", run_events(brackwater_specs()))


def test_a_note_round_trips_and_the_recorded_digest_still_verifies(run_file, capsys):
    before = run_file.read_bytes()
    assert main(["note", str(run_file), "--instance", "deck-slots-zero", "--round", "2", TEXT]) == 0
    assert "recorded digest verified" in capsys.readouterr().out
    assert run_file.read_bytes().startswith(before)  # appended, the recorded bytes untouched
    t = load(run_file)
    assert (t.digest, t.completeness) == ("verified", "complete")
    assert t.all_notes() == [Note(TEXT, 1, 2)]


def test_instance_by_index_and_a_proof_level_note(run_file):
    assert main(["note", str(run_file), "-i", "0", "-k", "1", "first round looks odd"]) == 0
    assert main(["note", str(run_file), "whole sailing re-run on 2 March"]) == 0
    t = load(run_file)
    assert [(n.instance, n.round, n.text) for n in t.all_notes()] == [
        (None, None, "whole sailing re-run on 2 March"), (0, 1, "first round looks odd")]


def test_the_note_shows_in_check(run_file, capsys):
    main(["note", str(run_file), "-i", "deck-slots-zero", "-k", "2", TEXT])
    capsys.readouterr()
    assert main(["check", str(run_file)]) == 0
    assert TEXT in capsys.readouterr().out


def test_the_note_shows_in_info_which_also_says_what_the_file_reveals(run_file, capsys):
    main(["note", str(run_file), "-i", "deck-slots-zero", "-k", "2", TEXT])
    capsys.readouterr()
    assert main(["info", str(run_file)]) == 0
    out = capsys.readouterr().out
    assert TEXT in out
    assert "never contains the witness" in out


def test_the_note_shows_in_the_apps_model(run_file):
    main(["note", str(run_file), "-i", "deck-slots-zero", "-k", "2", TEXT])
    model = TranscriptSource(run_file).open(strict=True)
    assert [n.text for n in model.notes_at((1, 2))] == [TEXT]


def test_an_event_file_cannot_take_a_note(tmp_path, capsys):
    events = tmp_path / "events.jsonl"
    events.write_text('{"type": "field", "name": "babybear"}\n', encoding="utf-8")
    assert main(["note", str(events), "about nothing"]) == 2
    assert "stepper import" in capsys.readouterr().err


@pytest.mark.parametrize("argv, message", [
    (["-k", "2", TEXT], "expected --instance with --round"),
    (["-i", "ferry-manifest", "-k", "1", TEXT], "expected --instance to name an instance"),
    (["-i", "0", "-k", "9", TEXT], "expected a note's round among 0..3"),
    (["-i", "0", "   "], "expected a non-empty note TEXT"),
    (["-i", "0", "-k", "-1", TEXT], "expected --round to be 0 (the claim) or a round number"),
])
def test_bad_notes_are_refused_with_one_line_and_exit_2(run_file, capsys, argv, message):
    before = run_file.read_bytes()
    assert main(["note", str(run_file), *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1
    assert run_file.read_bytes() == before
