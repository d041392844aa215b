"""Follow mode: a writer thread appends rounds while the app watches the file."""

from __future__ import annotations

import threading
import time

from proofs import brackwater_payloads

from stepper.app.app import StepperApp
from stepper.store import TranscriptWriter


async def test_rounds_appear_and_are_checked_while_the_prover_writes(tmp_path):
    path = tmp_path / "isle-of-quill-0740.stp"
    payloads = brackwater_payloads(instances=("boarding-permutation", "deck-slots-zero"))
    writer = TranscriptWriter(path, metadata={"sailing": "isle-of-quill-0740"})
    for payload in payloads[:3]:  # field, schedule, first instance: nothing to check yet
        writer.write_payload(payload)
    go = threading.Event()

    def prover() -> None:
        go.wait(5)
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
    path = tmp_path / "isle-of-quill-0740.stp"
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
