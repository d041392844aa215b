"""The one key map: every key listed for a screen works on that screen, the keys
panel lists exactly the table, the README's copy is the table, and no key of the
table is one of the stepping keys of a well-known media player (common practice,
no source: the full stop, comma and angle brackets step frames there)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from stepper.app.app import StepperApp
from stepper.app.buckets_screen import BucketsScreen
from stepper.app.compare_screen import CompareScreen
from stepper.app.help_screen import HelpScreen
from stepper.app.keymap import KEYS, SCREENS, footer_hint, main, markdown_table, panel_rows, readme_block
from stepper.app.proof_screen import MOUSE, ProofScreen

README = Path(__file__).parents[2] / "README.md"
SIZE = (120, 40)


def test_the_readme_holds_the_key_map_as_generated_from_the_table():
    # regenerate with: python3 -m stepper.app.keymap README.md
    assert readme_block() in README.read_text(encoding="utf-8")


def test_the_readme_rewriter_writes_the_table_and_refuses_a_bad_readme_in_one_line(tmp_path, capsys):
    readme = tmp_path / "README.md"
    readme.write_text(f"# keys\n{readme_block().replace('| `q` |', '| `x` |')}\nafter\n", encoding="utf-8")
    assert main([str(readme)]) == 0
    assert readme.read_text(encoding="utf-8") == f"# keys\n{readme_block()}\nafter\n"
    assert [p.name for p in tmp_path.iterdir()] == ["README.md"]  # no temporary file left
    capsys.readouterr()
    for bad in (tmp_path / "missing.md", tmp_path):
        assert main([str(bad)]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and str(bad) in err and "Traceback" not in err
    unmarked = tmp_path / "plain.md"
    unmarked.write_text("no table here\n", encoding="utf-8")
    assert main([str(unmarked)]) == 2
    assert "expected the markers" in capsys.readouterr().err
    assert unmarked.read_text(encoding="utf-8") == "no table here\n"


def test_every_entry_names_known_screens_and_no_key_repeats_on_a_screen():
    for screen in SCREENS:
        keys = [name for k in KEYS if screen in k.screens for name in k.keys]
        assert len(keys) == len(set(keys)), f"a key is bound twice on the {screen} screen"
    assert all(set(k.screens) <= set(SCREENS) for k in KEYS)
    banned = {"full_stop", "comma", "less_than_sign", "greater_than_sign", "exclamation_mark"}
    assert not banned & {name for k in KEYS for name in k.keys}


def test_the_markdown_table_has_a_row_per_entry():
    assert len(markdown_table().splitlines()) == len(KEYS) + 2


@pytest.mark.parametrize("screen", ["proof", "buckets", "compare"])
def test_the_key_hint_fits_80_columns(screen):
    assert len(footer_hint(screen, 80)) <= 80
    assert "k keys" in footer_hint(screen, 80)


def _spy(target: Any, action: str, calls: list[str]) -> None:
    """Replace ``action_<name>`` on ``target`` by a recorder (fails if the action does not exist)."""
    name = action.split("(")[0].removeprefix("app.")
    getattr(target, f"action_{name}")  # AttributeError: the key would be dead
    setattr(target, f"action_{name}", lambda *args: calls.append(action))


async def _press_each(pilot: Any, target: Any, screen: str) -> None:
    for entry in KEYS:
        if screen not in entry.screens:
            continue
        for key in entry.keys:
            calls: list[str] = []
            owner = pilot.app if entry.action.startswith("app.") else target
            _spy(owner, entry.action, calls)
            await pilot.press(key)
            await pilot.pause()
            assert calls == [entry.action], f"{key!r} on the {screen} screen did not reach {entry.action}"
            assert pilot.app.screen is target, f"{key!r} on the {screen} screen left the screen"


async def test_every_key_of_the_proof_view_reaches_its_action(failing_file, tmp_path):
    app = StepperApp.from_file(failing_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        assert isinstance(app.screen, ProofScreen)
        await _press_each(pilot, app.screen, "proof")


async def test_every_key_of_the_bucket_charts_reaches_its_action(failing_file, tmp_path):
    app = StepperApp.from_file(failing_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("b")
        assert isinstance(app.screen, BucketsScreen)
        await _press_each(pilot, app.screen, "buckets")


async def test_every_key_of_the_comparison_reaches_its_action(honest_file, tmp_path):
    from proofs import brackwater_payloads, bump_g1, write_transcript

    (tmp_path / "b").mkdir()
    other = write_transcript(tmp_path / "b" / "isle-of-quill-0741.sumtr",
                             brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2)))
    app = StepperApp.from_file(honest_file, compare=other, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, CompareScreen)
        await _press_each(pilot, app.screen, "compare")


async def test_every_key_of_the_keys_panel_closes_it(honest_file, tmp_path):
    app = StepperApp.from_file(honest_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:  # one app: the panel is opened again for each key
        for entry in (k for k in KEYS if "keys" in k.screens):
            for key in entry.keys:
                await pilot.press("k")
                assert isinstance(app.screen, HelpScreen)
                await pilot.press(key)
                await pilot.pause()
                assert isinstance(app.screen, ProofScreen), f"{key!r} did not close the keys panel"


async def test_the_keys_panel_lists_exactly_the_table_for_its_screen(failing_file, tmp_path):
    app = StepperApp.from_file(failing_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("k")
        assert app.screen.entries == panel_rows("proof") + list(MOUSE)
        await pilot.press("escape", "b", "k")
        assert app.screen.entries == panel_rows("buckets")


async def test_the_arrows_and_page_keys_step_rounds_and_instances(honest_file, tmp_path):
    app = StepperApp.from_file(honest_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        screen = app.proof_screen
        await pilot.press("down", "down", "up")
        assert screen.position == (0, 2)
        await pilot.press("end")
        assert screen.position == (0, 4)
        await pilot.press("home", "pagedown")
        assert screen.position == (1, 1)
        await pilot.press("pageup", "R")
        assert screen.position == (0, 1)  # clamped at the first round of the proof
        await pilot.press("i", "o")
        assert screen.position == (1, 4)  # the opening: the instance's last round and final check


async def test_previous_failure_goes_back_and_wraps(failing_file, tmp_path):
    app = StepperApp.from_file(failing_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("F")
        assert app.proof_screen.position == (1, 3)  # wrapped to the last failure
        await pilot.press("F")
        assert app.proof_screen.position == (1, 2)
