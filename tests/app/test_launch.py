"""Opening the app as `stepper view` does (stepper/app/launch.py).

The whole-file check must be under way before Textual (or numpy) is imported, so it
overlaps the app's own start; the collector must be on again once the app exists; the app's process must draw a prime-field proof without
importing numpy; a file that cannot be used must stop the check it started; and the
first screen must be drawn before the event-by-event read takes the event loop.
These start a fresh interpreter where what is imported matters: this one has Textual
loaded already.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from proofs import brackwater_payloads, write_transcript
from stepper.app import launch, whole_file
from stepper.app.app import StepperApp
from stepper.app.whole_file import WholeFileCheck
from stepper.errors import InputError

ROOT = Path(__file__).resolve().parents[2]
WAIT = 60.0  # seconds: a fresh interpreter with Textual on a loaded machine, with room to spare

# The fresh process: records what was imported when the check started, then opens the app
# through open_app, waits until every round is checked, and prints what it saw as JSON.
FRESH = """
import asyncio, json, sys
import stepper.app.whole_file as whole_file

seen = {}
started = whole_file.WholeFileCheck.__init__

def noting(self, *args, **kwargs):
    seen["textual then"] = sorted(m for m in sys.modules if m.split(".")[0] == "textual")
    seen["numpy then"] = "numpy" in sys.modules
    started(self, *args, **kwargs)

whole_file.WholeFileCheck.__init__ = noting
from stepper.app.launch import open_app

async def run():
    import gc

    app = open_app(sys.argv[1], export_dir=sys.argv[2])
    seen["collector on"] = gc.isenabled()
    seen["start-up frozen"] = gc.get_freeze_count() > 0
    async with app.run_test(size=(100, 30)) as pilot:
        while not app.model.all_checked:
            await pilot.pause(0.01)
        seen["swept"] = app.model.swept is not None
        seen["verdict"] = app.model.verdict()
        seen["child"] = app.whole_file_check.pid is not None
        seen["numpy in the app"] = "numpy" in sys.modules

asyncio.run(run())
print(json.dumps(seen))
"""


def taken_file(tmp: Path) -> Path:
    """A BabyBear proof the whole-file pass takes (no bucket events between rounds)."""
    payloads = brackwater_payloads(4, ("boarding-permutation", "deck-slots-zero"))
    return write_transcript(tmp / "taken.sumtr", payloads)


def test_the_check_starts_before_textual_and_numpy_and_the_app_draws_without_numpy(tmp_path):
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    done = subprocess.run([sys.executable, "-c", FRESH, str(taken_file(tmp_path)), str(tmp_path)],
                          capture_output=True, text=True, timeout=WAIT, env=env, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    seen = json.loads(done.stdout.strip().splitlines()[-1])
    assert seen["textual then"] == []  # nothing of Textual yet: the import overlaps the check
    assert seen["numpy then"] is False
    # the start-up ran without collections; what it made is left out of later ones, and the
    # collector is on again for the app's life
    assert seen["collector on"] is True and seen["start-up frozen"] is True
    assert seen["swept"] is True and seen["verdict"] == "accept"  # check's own whole-file pass said so
    assert seen["child"] is (sys.platform.startswith("linux") and hasattr(os, "fork"))
    # the check runs in the child; the app's process replays a prime field in plain integers
    assert seen["numpy in the app"] is False


def test_a_file_that_cannot_be_used_stops_the_check_it_started(tmp_path, monkeypatch):
    started: list[WholeFileCheck] = []
    stopped: list[WholeFileCheck] = []
    real_start = whole_file.start_check

    def start(*args: object, **kwargs: object) -> WholeFileCheck | None:
        check = real_start(*args, **kwargs)  # type: ignore[arg-type]
        if check is not None:
            started.append(check)
            monkeypatch.setattr(check, "stop", lambda: stopped.append(check))
        return check

    monkeypatch.setattr(launch, "start_check", start)
    junk = tmp_path / "junk.sumtr"
    junk.write_bytes(b"not a transcript at all")
    with pytest.raises(InputError):
        launch.open_app(junk, export_dir=tmp_path)
    assert started and stopped == started


def test_a_followed_file_or_a_witness_starts_no_check(tmp_path, honest_file):
    assert whole_file.start_check(honest_file, follow=True) is None
    assert whole_file.start_check(honest_file, witness=tmp_path / "w.json") is None


async def test_the_first_screen_is_drawn_before_the_rounds_are_read_for_stepping(tmp_path, monkeypatch):
    from stepper.app.source import TranscriptSource

    path = taken_file(tmp_path)
    checking = WholeFileCheck(path, child=False)
    assert checking.future.result(timeout=WAIT) is not None  # the outcome waits for the app: no delay at all
    app = StepperApp.from_file(path, progressive=True, export_dir=tmp_path, whole_file_check=checking)
    laid_out: list[bool] = []
    pump = TranscriptSource.pump

    def noting_pump(self: TranscriptSource, model: object, limit: int) -> bool:
        if not laid_out:  # the first slice: has the screen been laid out and drawn yet?
            laid_out.append(app.proof_screen.query_one("#summary").size.width > 0)
        return pump(self, model, limit)  # type: ignore[arg-type]

    monkeypatch.setattr(TranscriptSource, "pump", noting_pump)
    async with app.run_test(size=(100, 30)) as pilot:
        while app.model.loading:
            await pilot.pause(0.01)
    assert laid_out == [True]
