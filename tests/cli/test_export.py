"""`stepper export -o OUT`: an unusable FILE never costs an existing OUT its contents."""

from __future__ import annotations

import shutil
from pathlib import Path

from stepper.cli.main import main
from json_contracts import conforming_lines

HONEST = Path(__file__).resolve().parents[2] / "transcripts" / "ferries" / "ferries-honest.sumtr"


def test_export_of_random_bytes_leaves_an_existing_output_untouched(tmp_path, capsys):
    junk = tmp_path / "junk.bin"
    junk.write_bytes(bytes(range(7, 250, 3)))
    out = tmp_path / "kept.jsonl"
    out.write_text("a colleague's export\n")
    assert main(["export", str(junk), "-o", str(out)]) == 2
    assert out.read_text() == "a colleague's export\n"
    assert capsys.readouterr().err.count("\n") == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["junk.bin", "kept.jsonl"]  # no partial file left


def test_export_onto_its_own_input_is_refused_and_the_transcript_survives(tmp_path, capsys):
    copy = tmp_path / "run.sumtr"
    shutil.copyfile(HONEST, copy)
    assert main(["export", str(copy), "-o", str(copy)]) == 2
    assert "different files" in capsys.readouterr().err
    assert copy.read_bytes() == HONEST.read_bytes()


def test_export_to_a_file_round_trips_through_import(tmp_path, capsys):
    out = tmp_path / "events.jsonl"
    assert main(["export", str(HONEST), "-o", str(out)]) == 0
    assert conforming_lines(out.read_text())[0]["type"] == "header"
    back = tmp_path / "back.sumtr"
    assert main(["import", str(out), "-o", str(back)]) == 0
    assert main(["export", str(back)]) == 0
    capsys.readouterr()
    assert main(["check", str(back)]) == 0
