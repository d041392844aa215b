"""The compare screen: A and B side by side, the first divergence marked, driven with Pilot.

Runs are the app tests' demo proofs (tests/app/proofs.py: plain-integer honest
prover, built-in schedule); B differs from A by one evaluation.
"""

from __future__ import annotations

from pathlib import Path

from proofs import brackwater_payloads, bump_g1, glued_events, write_transcript
from stepper.app.app import StepperApp
from stepper.app.compare_screen import CompareScreen, side_rows
from stepper.app.proof_screen import ProofScreen
from stepper.compare.diff import compare
from stepper.transcript.store import load
from textual.app import App
from textual.widgets import DataTable, Static

GROUPED = "boarding-permutation-grouped"


def pair_of_files(tmp_path: Path, tamper=None) -> tuple[Path, Path]:
    a = write_transcript(tmp_path / "monday.sumtr", brackwater_payloads(mu=3))
    b = write_transcript(tmp_path / "tuesday.sumtr", brackwater_payloads(mu=3, tamper=tamper))
    return a, b


def cells(table: DataTable, row: int) -> list[str]:
    return [str(c) for c in table.get_row_at(row)]


async def test_view_with_compare_opens_both_sides_at_the_divergence(tmp_path):
    a, b = pair_of_files(tmp_path, bump_g1(GROUPED, 2))
    app = StepperApp.from_file(a, compare=b)
    async with app.run_test(size=(150, 40)) as pilot:
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, CompareScreen)
        verdict = str(screen.query_one("#compare-verdict", Static).render())
        assert f"prover-arithmetic at instance '{GROUPED}' (A #1, B #1), round 2, g(1)" in verdict
        table_a, table_b = screen.query_one("#table-a", DataTable), screen.query_one("#table-b", DataTable)
        # claim, rounds 1..3, final on each side; round 2 (row 2) carries the divergence mark
        assert table_a.row_count == table_b.row_count == 5
        assert cells(table_a, 2)[0].startswith(">>") and cells(table_b, 2)[0].startswith(">>")
        assert cells(table_a, 1)[0] == ""  # round 1 agrees
        assert table_a.cursor_row == table_b.cursor_row == 2


async def test_keys_move_between_instances_back_to_the_divergence_and_out(tmp_path):
    a, b = pair_of_files(tmp_path, bump_g1(GROUPED, 2))
    app = StepperApp.from_file(a, compare=b)
    async with app.run_test(size=(150, 40)) as pilot:
        await pilot.pause()
        screen = app.screen
        assert screen.pair == 1
        await pilot.press("i")
        assert screen.pair == 2
        assert str(screen.query_one("#side-a").border_title).endswith("deck-slots-zero")
        await pilot.press("d")
        await pilot.pause()
        assert screen.pair == 1 and screen.query_one("#table-a", DataTable).cursor_row == 2
        await pilot.press("down")
        await pilot.pause()
        assert screen.query_one("#table-b", DataTable).cursor_row == 3  # B follows the line A moved to
        await pilot.press("escape")
        assert isinstance(app.screen, ProofScreen)


async def test_identical_runs_say_so_and_mark_nothing(tmp_path):
    a, b = pair_of_files(tmp_path)
    app = StepperApp.from_file(a, compare=b)
    async with app.run_test(size=(150, 40)) as pilot:
        await pilot.pause()
        screen = app.screen
        assert str(screen.query_one("#compare-verdict", Static).render()).startswith("identical")
        table = screen.query_one("#table-a", DataTable)
        assert all(cells(table, k)[0] == "" for k in range(table.row_count))


async def test_an_unreadable_second_file_is_one_line_on_the_screen(tmp_path):
    a, _ = pair_of_files(tmp_path)
    junk = tmp_path / "junk.sumtr"
    junk.write_bytes(b"not a transcript at all")

    class Host(App[None]):
        def on_mount(self) -> None:
            self.push_screen(CompareScreen(a, junk))

    app = Host()
    async with app.run_test(size=(150, 40)) as pilot:
        await pilot.pause()
        head = str(app.screen.query_one("#compare-head", Static).render())
        assert head.startswith(" cannot compare: ") and str(junk) in head


def test_side_rows_mark_rounds_only_one_side_has(tmp_path):
    a = write_transcript(tmp_path / "full.sumtr", brackwater_payloads(mu=3, instances=("boarding-permutation",)))
    b = write_transcript(tmp_path / "cut.sumtr", brackwater_payloads(mu=3, instances=("boarding-permutation",),
                                                                   stop_after=7), finish=False)
    c = compare(load(a), load(b))
    rows_b = side_rows(c, c.pairs[0], "b")
    assert [r[1] for r in rows_b] == ["claim", "round 1", "round 2", "round 3", "final"]
    assert rows_b[3][:3] == (">>-", "round 3", "(not sent)")
    assert rows_b[4][2] == "(none)" and rows_b[4][4] is True


def glued_pair(tmp_path: Path, fault: str, kind: str = "zerocheck", fault_instance: int = 0) -> tuple[Path, Path]:
    """A reference prover's glued run and the same run with one fault (same seed, same statement)."""
    a = glued_events(tmp_path / "honest.jsonl", kind)
    return a, glued_events(tmp_path / "faulty.jsonl", kind, fault=fault, fault_instance=fault_instance)


def test_side_rows_show_the_glue_after_an_instance_and_point_at_the_opening_that_differs(tmp_path):
    a, b = glued_pair(tmp_path, "open-wrong-table")
    c = compare(load(a), load(b))
    assert (c.divergence.element, c.divergence.detail) == ("opening", "a")
    rows = side_rows(c, c.pairs[0], "a")
    marks = {line: mark for mark, line, *_ in rows}
    assert marks["opening a"] == ">>u" and marks["opening b"] == marks["opening c"] == ""
    # the rounds agree: the last round is not where the divergence is, though the opening follows it
    assert all(not mark for mark, line, *_ in rows if line.startswith("round"))
    assert marks["final expr"] == ""  # a link key both sides declare alike


def test_side_rows_mark_glue_and_link_keys_after_a_divergent_claim_without_taking_the_arrow(tmp_path):
    a, b = glued_pair(tmp_path, "stale-coefficient", kind="gkr-product", fault_instance=1)
    c = compare(load(a), load(b))
    rows = side_rows(c, c.pairs[1], "b")
    arrows = [line for mark, line, *_ in rows if mark.startswith(">>")]
    assert arrows == ["claim"]  # one first divergence, on the claim
    assert any(line.startswith("opening ") and mark == "u" for mark, line, *_ in rows)


async def test_the_compare_screen_lands_on_a_glue_divergence_at_80_columns(tmp_path):
    a, b = glued_pair(tmp_path, "open-wrong-table")
    app = StepperApp.from_file(a, compare=b)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        screen = app.screen
        table_a = screen.query_one("#table-a", DataTable)
        row = table_a.cursor_row
        assert cells(table_a, row)[0] == ">>u" and cells(table_a, row)[1] == "opening a"
        assert screen.query_one("#table-b", DataTable).cursor_row == row
