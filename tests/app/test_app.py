"""Pilot tests: every key of the proof view, the bucket charts, the key list, notes, exports."""

from __future__ import annotations

from pathlib import Path

from textual.widgets import Input

from proofs import brackwater_payloads, write_transcript

from stepper.app.app import StepperApp
from stepper.app.ask_screen import AskScreen
from stepper.app.buckets_screen import BucketsScreen
from stepper.app.help_screen import HelpScreen
from stepper.app.keymap import KEYS
from stepper.app.proof_screen import MOUSE, ProofScreen, parse_round_target
from stepper.app.round_detail import ReadoutPanel
from stepper.transcript.store import load

SIZE = (140, 44)


def app_for(path: Path, tmp: Path) -> StepperApp:
    return StepperApp.from_file(path, export_dir=tmp)


def detail_text(app: StepperApp) -> str:
    return app.proof_screen.query_one("#detail", ReadoutPanel).plain()


async def test_step_keys_move_one_round_and_instance_keys_hop_to_round_one(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        screen = app.proof_screen
        assert screen.position == (0, 1)
        await pilot.press("r", "r")
        assert screen.position == (0, 3)
        await pilot.press("r", "r")
        assert screen.position == (1, 1)
        await pilot.press("R")
        assert screen.position == (0, 4)
        assert "round: 4 of 4" in detail_text(app)
        await pilot.pause()
        panel = app.proof_screen.query_one("#detail", ReadoutPanel)
        width = panel.content_region.width
        assert panel.content_region.height == panel.get_content_height(panel.size, app.size, width)
        await pilot.press("i", "i", "i")
        assert app.proof_screen.position == (2, 1)  # clamped at the last instance
        await pilot.press("I")
        assert app.proof_screen.position == (1, 1)


async def test_failure_keys_jump_to_the_first_and_then_the_next_failure(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f")
        assert app.proof_screen.position == (1, 2)
        assert "✕ fail (sum)" in detail_text(app)
        await pilot.press("f")
        assert app.proof_screen.position == (1, 3)
        await pilot.press("f")
        assert app.proof_screen.position == (1, 2)  # wrapped


async def test_failure_keys_on_an_honest_proof_say_there_is_none_and_the_table_cursor_moves(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f")
        assert app.proof_screen.last_message == "no failed check so far"
        await pilot.press("f")
        assert app.proof_screen.position == (0, 1)
        await pilot.press("down", "down")  # the arrows step through rounds like r
        await pilot.pause()
        assert app.proof_screen.position == (0, 3)


async def test_go_to_round_takes_n_or_instance_colon_round_and_seek_finds_a_value(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("g")
        assert isinstance(app.screen, AskScreen)
        await pilot.press("3", "enter")
        assert app.proof_screen.position == (0, 3)
        await pilot.press("g", "2", "colon", "4", "enter")
        assert app.proof_screen.position == (2, 4)
        await pilot.press("g", "9", "enter")
        assert app.proof_screen.position == (2, 4)
        assert "expected a round number that exists" in app.proof_screen.last_message
        await pilot.press("g", "escape")
        assert isinstance(app.screen, ProofScreen)
        challenge = app.model.instances[1].challenges[1]

        async def seek(answer: str) -> None:  # filled in at once: a key per digit would only repaint the box
            await pilot.press("s")
            app.screen.query_one(Input).value = answer
            await pilot.press("enter")

        await seek(str(challenge))
        assert app.proof_screen.position == (1, 2)
        await seek("bogus")
        assert "appears in no round" in app.proof_screen.last_message


async def test_a_note_is_saved_in_the_file_and_the_digest_still_verifies(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r", "n", *"gate 3 rescanned", "enter")
        assert "gate 3 rescanned" in detail_text(app)
    transcript = load(honest_file)
    notes = transcript.all_notes()
    assert [(n.text, n.instance, n.round) for n in notes] == [("gate 3 rescanned", 0, 2)]
    assert transcript.digest == "verified"


async def test_the_bucket_key_opens_charts_that_switch_instance(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("i", "b")
        assert isinstance(app.screen, BucketsScreen)
        assert app.screen.instance == 1
        await pilot.press("i")
        assert app.screen.instance == 2
        await pilot.press("k")
        assert isinstance(app.screen, HelpScreen)
        await pilot.press("escape", "escape")
        assert isinstance(app.screen, ProofScreen)


async def test_the_key_list_names_every_binding_of_the_proof_view(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("k")
        assert isinstance(app.screen, HelpScreen)
        described = {d for _, d in app.screen.entries}
        assert described == {k.words for k in KEYS if "proof" in k.screens} | {d for _, d in MOUSE}
        await pilot.press("escape", "f1")
        assert isinstance(app.screen, HelpScreen)
        await pilot.press("f1")
        assert isinstance(app.screen, ProofScreen)


async def test_exports_write_an_svg_and_a_markdown_report(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f", "p", "w")
    svg = tmp_path / "isle-of-quill-0740.i1.r2.svg"
    report = tmp_path / "isle-of-quill-0740.i1.r2.md"
    assert svg.read_text().lstrip().startswith("<svg")
    text = report.read_text()
    assert "Where I was looking: instance #1 (boarding-permutation-grouped), round 2" in text
    assert "evidence about" in text


async def test_live_key_keeps_the_cursor_on_the_newest_round_and_q_quits(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("l")
        assert app.proof_screen.live
        assert app.proof_screen.position == (2, 4)
        await pilot.press("l")
        assert not app.proof_screen.live
        await pilot.press("q")
        await pilot.pause()
    assert not app.is_running


def test_round_targets_parse_as_n_or_instance_colon_round():
    assert parse_round_target("7", 2) == (2, 7)
    assert parse_round_target("1:3", 2) == (1, 3)
    assert parse_round_target("1/3", 0) == (1, 3)
    assert parse_round_target("#1:3", 0) == (1, 3)
    assert parse_round_target("x", 0) is None


async def test_with_a_witness_the_failing_round_shows_its_root_cause(failing_file, tmp_path):
    from proofs import write_witness

    witness = write_witness(tmp_path / "isle-of-quill-0740.witness.json")
    app = StepperApp.from_file(failing_file, witness=witness, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f")
        text = detail_text(app)
        assert "root cause: instance #1, round 2, check honest-poly  (this round)" in text


async def test_compare_opens_the_compare_screen_on_top(honest_file, failing_file, tmp_path):
    from stepper.app.compare_screen import CompareScreen

    app = StepperApp.from_file(honest_file, compare=failing_file, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, CompareScreen)
        await pilot.press("escape")
        assert isinstance(app.screen, ProofScreen)


async def test_clicking_an_instance_line_in_the_strip_opens_that_instance(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.click("#strip", offset=(10, 3))  # the border's top line, then instances 0, 1, 2
        assert app.proof_screen.position == (2, 1)


async def test_annotating_before_any_instance_says_why_nothing_was_saved(tmp_path):
    events = tmp_path / "isle-of-quill-0740.jsonl"
    events.write_text('{"type": "field", "name": "babybear"}\n', encoding="utf-8")
    app = app_for(events, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n")
        assert not isinstance(app.screen, AskScreen)
        assert app.proof_screen.last_message.startswith("no instance to attach a note to yet")
    assert events.read_text(encoding="utf-8") == '{"type": "field", "name": "babybear"}\n'


async def test_a_note_on_a_json_lines_file_is_refused_on_screen_and_the_file_is_untouched(tmp_path):
    events = tmp_path / "isle-of-quill-0740.jsonl"
    text = ('{"type": "field", "name": "babybear"}\n'
            '{"type": "instance", "name": "boarding-permutation", "num_vars": 2, "degree": 2, "claim": 5}\n')
    events.write_text(text, encoding="utf-8")
    app = app_for(events, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("n", *"gate 3", "enter")
        assert app.proof_screen.last_message.startswith("note not saved: ")
    assert events.read_text(encoding="utf-8") == text


def test_table_cells_too_long_for_their_column_are_marked_with_their_length(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    row = app.model.rows(1, 8)[1]  # round 2: g(0)+g(1) = 1953667903 has ten digits
    assert row.sum01 == "19…3[10]"


async def test_copy_puts_the_round_with_every_value_whole_on_the_clipboard(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f", "c")
        assert "1953667903" in app.clipboard and "…" not in app.clipboard
        assert "1953667903" in detail_text(app)
        assert app.proof_screen.last_message.startswith("copied instance #1 'boarding-permutation-grouped', round 2")


async def test_instances_read_as_hash_index_and_rounds_from_one_on_every_panel(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=(160, 48)) as pilot:
        await pilot.press("f")
        where = str(app.proof_screen.query_one("#where-bar").render())
        assert "instance #1 boarding-permutation-grouped" in where and "round 2 of 4" in where
        assert "instance: #1 'boarding-permutation-grouped'" in detail_text(app)
        summary = app.proof_screen.query_one("#summary", ReadoutPanel).plain()
        assert "instance #1 'boarding-permutation-grouped', round 2" in summary
        await pilot.press("g", "#", "0", "colon", "3", "enter")
        assert app.proof_screen.position == (0, 3)


async def test_the_position_line_fits_80_columns(failing_file, tmp_path):
    app = app_for(failing_file, tmp_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f")
        where = str(app.proof_screen.query_one("#where-bar").render())
        assert len(where) <= 80 and "round 2 of 4" in where and "…" in where


def _thaler_file(tmp: Path, tamper: bool = False) -> Path:
    """J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1 (from memory), via tests/plain_sumcheck.py."""
    import sys

    sys.path.insert(0, str(Path(__file__).parents[1]))
    from plain_sumcheck import BABYBEAR, Plain, thaler_payloads

    from stepper.transcript.store import TranscriptWriter

    payloads = thaler_payloads(Plain(BABYBEAR), (5, 7, 11))
    if tamper:
        payloads[4]["evals"][1] += 1  # round 2's g(1): its sum check fails
    path = tmp / ("bad.sumtr" if tamper else "thaler.sumtr")
    with TranscriptWriter(path) as writer:
        for payload in payloads:
            writer.write_payload(payload)
    return path


async def test_every_round_is_checked_by_the_whole_file_pass_before_the_rounds_are_read(tmp_path, monkeypatch):
    import stepper.app.app as app_module

    monkeypatch.setattr(app_module, "READ_SLICE", 1)  # a slow first read, so its progress can be seen
    app = StepperApp.from_file(_thaler_file(tmp_path), progressive=True, export_dir=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        while not app.model.all_checked:
            await pilot.pause(0.01)
        assert app.model.swept is not None  # stepper check's whole-file pass, not the event-by-event read
        assert app.model.verdict() == "accept"
        while app.model.loading:
            await pilot.pause(0.01)
        assert app.model.verdict() == "accept" and app.model.round_count == 3


async def test_a_failing_file_is_checked_event_by_event_as_stepper_check_does(tmp_path):
    from stepper.cli.main import main

    path = _thaler_file(tmp_path, tamper=True)
    app = StepperApp.from_file(path, progressive=True, export_dir=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        while app.model.loading:
            await pilot.pause(0.01)
        assert app.model.swept is None  # the whole-file pass leaves a failing block to the replay that names it
        assert app.model.verdict() == "reject" and app.model.failures[0] == (0, 2)
    assert main(["check", str(path)]) == 1


def test_the_loading_line_says_how_far_the_read_has_come(tmp_path):
    from stepper.app.readout import loading_words
    from stepper.app.source import TranscriptSource

    source = TranscriptSource(_thaler_file(tmp_path))
    model = source.open_start()
    assert loading_words(model).startswith("checking: ")
    swept = source.whole_file_check()
    assert swept is not None
    model.take_whole_file(swept)
    read = model.round_count  # open_start read up to the field and a little beyond
    assert loading_words(model) == f"every round checked; reading rounds for stepping: {read} of 3 ({100 * read // 3}%)"


async def test_closing_the_app_while_the_rounds_are_still_read_ends_cleanly(tmp_path, monkeypatch):
    import stepper.app.app as app_module

    monkeypatch.setattr(app_module, "READ_SLICE", 1)  # one event per slice: the read outlasts the test
    monkeypatch.setattr(app_module, "REPAINT_SECONDS", 0.0)  # and repaints after every slice
    path = write_transcript(tmp_path / "long.sumtr", brackwater_payloads(mu=8))
    app = StepperApp.from_file(path, progressive=True, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        while app.model.round_count == 0:
            await pilot.pause(0.01)
        assert app.model.loading  # the app closes (leaving run_test) in the middle of the read
    # run_test re-raises what a worker raised: nothing did, no repaint of a screen already taken down


async def test_a_step_within_an_instance_repaints_the_round_and_not_the_rest(honest_file, tmp_path):
    app = app_for(honest_file, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()  # the first screen is drawn whole
        screen = app.proof_screen
        drawn: dict[str, int] = {}
        for name in ("#summary", "#statement", "#detail"):
            panel = screen.query_one(name)
            render = panel.render

            def counted(name=name, render=render):  # type: ignore[no-untyped-def]
                drawn[name] = drawn.get(name, 0) + 1  # the panel's text laid out again
                return render()

            panel.render = counted  # type: ignore[method-assign]
        strip_lines: list[int] = []
        strip = screen.query_one("#strip")
        render_line = strip.render_line
        strip.render_line = lambda y: strip_lines.append(y) or render_line(y)  # type: ignore[method-assign]
        await pilot.press("r")
        assert screen.position == (0, 2)
        assert drawn.get("#detail", 0) > 0  # the round under check is drawn again
        assert "#summary" not in drawn and "#statement" not in drawn  # the same proof, the same instance
        assert len(set(strip_lines)) == 1  # the strip redraws the cursor's line only


async def test_a_write_up_asked_for_while_the_rounds_are_read_is_saved_when_the_read_ends(tmp_path, monkeypatch):
    from stepper.app.source import TranscriptSource

    held = [True]
    pump = TranscriptSource.pump

    def held_pump(self, model, limit):  # the first read stops after its first round until released
        return False if held[0] and model.round_count > 0 else pump(self, model, 1)

    monkeypatch.setattr(TranscriptSource, "pump", held_pump)
    path = write_transcript(tmp_path / "long.sumtr", brackwater_payloads(mu=5))
    app = StepperApp.from_file(path, progressive=True, export_dir=tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        while app.model.round_count == 0:
            await pilot.pause(0.01)
        await pilot.press("w")
        assert app.model.loading and not list(tmp_path.glob("*.md"))  # not yet: each verdict is not known
        held[0] = False
        while app.model.loading:
            await pilot.pause(0.01)
        await pilot.pause()
    (written,) = tmp_path.glob("*.md")
    text = written.read_text()
    assert "not replayed" not in text and "pass" in text



async def test_a_tampered_challenge_under_the_second_schedule_is_the_first_failure_the_app_jumps_to(
        tmp_path, capsys):
    import json

    from stepper.cli.main import main

    events = tmp_path / "events.jsonl"
    assert main(["prove", "--kind", "gkr-product", "--num-vars", "3", "--field", "babybear^4",
                 "--schedule", "stepper-sha256/2", "-o", str(events)]) == 0
    lines = events.read_text().splitlines()
    at = [i for i, line in enumerate(lines) if json.loads(line)["type"] == "challenge"][2]
    event = json.loads(lines[at])
    event["value"] = [str((int(event["value"][0]) + 1) % 7)] + event["value"][1:]
    lines[at] = json.dumps(event)
    tampered = tmp_path / "tampered.jsonl"
    tampered.write_text("\n".join(lines) + "\n")
    capsys.readouterr()
    assert main(["check", str(tampered), "--json"]) == 1
    failure = json.loads(capsys.readouterr().out)["first_failure"]
    assert failure["check"] == "challenge"
    app = app_for(tampered, tmp_path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("f")
        assert app.proof_screen.position == (failure["instance"], failure["round"])
        assert "✕ fail (challenge)" in detail_text(app)
