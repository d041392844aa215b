"""Damaged and hostile input: the app opens with a clear message, the CLI exits 2 in one line."""

from __future__ import annotations

import json
import subprocess

from proofs import brackwater_payloads, write_transcript

from stepper.app.app import StepperApp
from stepper.app.round_detail import ReadoutPanel


def summary_text(app: StepperApp) -> str:
    return app.proof_screen.query_one("#summary", ReadoutPanel).plain()


def write_lines(path, payloads) -> None:
    path.write_text("".join(json.dumps(p) + "\n" for p in payloads))


async def test_a_hostile_field_opens_with_the_reason_instead_of_crashing(tmp_path):
    path = tmp_path / "hostile.jsonl"
    # 2^64 + 1 = 274177 * 67280421310721 is composite (Landry, 1880): not a field.
    write_lines(path, [{"type": "field", "modulus": str(2**64 + 1)}, {"type": "instance", "name": "x"}])
    app = StepperApp.from_file(path, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)) as pilot:
        await pilot.press("r", "f", "b", "escape")
        text = summary_text(app)
        assert "stopped reading" in text and "prime" in text
        assert app.model.instances == []


async def test_a_truncated_tail_shows_every_whole_event_and_says_incomplete(tmp_path):
    path = write_transcript(tmp_path / "cut.sumtr", brackwater_payloads(instances=("boarding-permutation",)))
    data = path.read_bytes()
    path.write_bytes(data[: len(data) - 60])  # the end event and part of the final are gone
    app = StepperApp.from_file(path, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)):
        assert app.model.completeness == "incomplete"
        assert app.model.verdict() == "incomplete"
        assert app.model.round_count == 4
        assert "incomplete" in summary_text(app)


async def test_a_bad_event_part_way_keeps_what_came_before_and_names_the_line(tmp_path):
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    payloads[5] = {"type": "round", "evals": [2**40, 1, 2]}  # above the BabyBear modulus
    path = tmp_path / "bad-round.jsonl"
    write_lines(path, payloads)
    app = StepperApp.from_file(path, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)):
        text = summary_text(app)
        assert "line 6" in text
        assert app.model.round_count == 1


def run_view(*args: str) -> subprocess.CompletedProcess[str]:
    """`stepper view ARGS` in this process with its output captured (so not a terminal), as a
    finished process: the command's own error handling is what runs (no interpreter to start)."""
    import contextlib
    import io

    from stepper.cli.main import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["view", *args])
    return subprocess.CompletedProcess(["stepper", "view", *args], code, out.getvalue(), err.getvalue())


def test_view_of_an_unreadable_file_exits_2_with_one_line(tmp_path):
    proc = run_view(str(tmp_path / "missing.sumtr"))
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "missing.sumtr" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_view_of_a_hostile_field_exits_2_with_one_line(tmp_path):
    path = tmp_path / "hostile.jsonl"
    write_lines(path, [{"type": "field", "modulus": "4"}])
    proc = run_view(str(path))
    assert proc.returncode == 2
    assert proc.stderr.startswith("stepper view: ") and proc.stderr.count("\n") == 1


async def test_names_that_look_like_markup_are_shown_literally(tmp_path):
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    payloads[2] = {**payloads[2], "name": "[bold]quill[/] [link=x]"}
    path = tmp_path / "markup.jsonl"
    write_lines(path, payloads[:3])  # no rounds: the name is all there is to show
    app = StepperApp.from_file(path, export_dir=tmp_path)
    async with app.run_test(size=(140, 44)) as pilot:
        await pilot.press("r", "i")
        assert "[bold]quill[/] [link=x]" in str(app.proof_screen.query_one("#where-bar").render())


def test_view_with_an_unreadable_witness_exits_2_with_one_line(tmp_path):
    path = write_transcript(tmp_path / "isle-of-quill-0740.sumtr", brackwater_payloads(instances=("deck-slots-zero",)))
    witness = tmp_path / "witness.json"
    witness.write_text("{not json")
    proc = run_view(str(path), "--witness", str(witness))
    assert proc.returncode == 2
    assert proc.stderr.startswith("stepper view: ") and proc.stderr.count("\n") == 1
    assert "witness.json" in proc.stderr


def test_view_off_a_terminal_exits_2_with_one_line_instead_of_drawing_into_a_pipe(tmp_path):
    path = write_transcript(tmp_path / "isle-of-quill-0740.sumtr", brackwater_payloads(instances=("deck-slots-zero",)))
    proc = run_view(str(path))  # captured output: not a terminal
    assert proc.returncode == 2
    assert proc.stderr.startswith("stepper view: expected a terminal") and proc.stderr.count("\n") == 1
