"""Pilot tests of the glue in the proof view (stepper/app/proof_screen.py with its round table,
status strip and round panel): jumping to a glue failure, the round-0 link row, and an
eq-factored instance labelled as such. The words are `stepper check`'s (see test_glue_model.py
for the comparison with `check` itself)."""

from __future__ import annotations

from pathlib import Path

from proofs import SHIPPED, glued_events

from stepper.app.app import StepperApp
from stepper.app.round_detail import ReadoutPanel
from stepper.app.round_table import RoundTable
from stepper.app.status_strip import StatusStrip

SIZE = (120, 40)


def app_for(path: Path, tmp: Path) -> StepperApp:
    return StepperApp.from_file(path, export_dir=tmp)


def detail_text(app: StepperApp) -> str:
    return app.proof_screen.query_one("#detail", ReadoutPanel).plain()


async def test_f_lands_on_a_broken_link_at_round_0_and_names_it_as_check_does(tmp_path):
    app = app_for(SHIPPED / "glue-broken-link.sumtr", tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        screen = app.proof_screen
        await pilot.press("f")
        assert screen.position == (1, 0)
        assert screen.last_message == "failure 1 of 2: instance #1 'manifest.layer2', its claim, check link"
        assert "round 0 (link) of 2" in str(screen.query_one("#where-bar").render())
        assert screen.query_one(RoundTable).cursor_row == 0
        assert "✕ fail: the claim against its glue" in detail_text(app)
        strip = screen.query_one(StatusStrip)
        assert strip._draw(1).text.rstrip().endswith("✕⊢✕■┆■⊣■  ✕ its claim, check link")
        await pilot.press("f")
        assert screen.position == (1, 1)  # the sum of round 1 fails against the unlinked claim too
        await pilot.press("F", "up")
        assert screen.position == (0, 1)  # the link row counts as a step: up from it is layer 1's last round
        await pilot.press("down", "down")
        assert screen.position == (1, 1)


async def test_f_lands_on_a_failed_evaluation_at_the_last_round_with_the_openings_in_view(tmp_path):
    app = app_for(SHIPPED / "glue-wrong-opening.sumtr", tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        screen = app.proof_screen
        await pilot.press("f")
        assert screen.position == (1, 5)
        assert screen.last_message == "failure 1 of 1: instance #1 'deck-slots-zero', round 5, check evaluation"
        assert "opening: length = 944107342" in detail_text(app)
        row = screen.query_one(RoundTable).get_row_at(4)
        assert str(row[1]) == "■ pass ⊣✕"  # the round passed; the evaluation after it did not
        await pilot.press("home")
        assert screen.position == (1, 1)  # no link row: the instance starts at round 1


async def test_an_eq_factored_instance_is_labelled_in_the_table_and_the_strip(tmp_path):
    app = app_for(glued_events(tmp_path / "eq.jsonl", "zerocheck-eq"), tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        screen = app.proof_screen
        assert "eq-factored" in str(screen.query_one(RoundTable).border_title)
        assert "(eq)" in screen.query_one(StatusStrip)._draw(0).text
        await pilot.press("g", "0", "enter")  # no claim_expr: no round 0 to go to
        assert screen.position == (0, 1) and "round" in screen.last_message
