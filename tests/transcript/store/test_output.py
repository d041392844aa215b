"""Outputs are written whole or not at all, and never over a file the run did not make.

A full disk is injected (the write raises ENOSPC part-way) into import, export, report, the
witness and a note; SIGKILL hits import, export and note at random moments. Afterwards the
destination holds either its old bytes or the complete new file, a note either is there whole
or is absent, and the recorded part of a transcript always verifies. Honest rounds: J. Thaler,
"Proofs, Arguments, and Zero-Knowledge", section 4.1 (from memory), via tests/plain_sumcheck.py;
rename atomicity is POSIX rename(2) (common practice, no source).
"""

from __future__ import annotations

import errno
import os
import random
import signal
import subprocess
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[2]))  # the shared plain-integer prover

from plain_sumcheck import BABYBEAR, Plain, jsonl, thaler_payloads  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.transcript.store import TranscriptWriter, load  # noqa: E402
from stepper.transcript.store import output as output_module  # noqa: E402
from stepper.transcript.store import writer as writer_module  # noqa: E402

ROOT = Path(__file__).parents[3]
OLD = b"yesterday's file, which must survive"


def _events(instances: int) -> list[dict]:
    first = thaler_payloads(Plain(BABYBEAR), (5, 7, 11))
    out = [first[0]]
    for i in range(instances):
        out += [{**p, "name": f"sailing-{i}"} if p["type"] == "instance" else p for p in first[1:]]
    return out


def _transcript(path: Path, instances: int = 3) -> Path:
    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"}) as writer:
        for payload in _events(instances):
            writer.write_payload(payload)
    return path


class _FullDisk:
    """A file whose writes fail with ENOSPC once ``room`` bytes are used (the first failing write
    still puts part of its bytes down, as a real short write on a full disk can)."""

    def __init__(self, real, room: int) -> None:
        self._real = real
        self._room = room

    def write(self, data):
        if len(data) <= self._room:
            self._room -= len(data)
            return self._real.write(data)
        self._real.write(data[: self._room])
        self._room = 0
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    def __getattr__(self, name):
        return getattr(self._real, name)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self._real.close()


def _fill_after(monkeypatch, room: int) -> None:
    real = output_module.temp_beside

    def full(path, binary=True):
        handle, temp = real(path, binary)
        return _FullDisk(handle, room), temp

    monkeypatch.setattr(output_module, "temp_beside", full)
    monkeypatch.setattr(writer_module, "temp_beside", full)


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".partial"))


@pytest.mark.parametrize("command", ["import", "export", "writeup", "prove-witness"])
@pytest.mark.parametrize("room", [0, 40, 300])
def test_a_full_disk_leaves_the_old_file_and_no_partial_one(tmp_path, capsys, monkeypatch, command, room):
    source = _transcript(tmp_path / "run.sumtr")
    events = tmp_path / "run.jsonl"
    events.write_text(jsonl(_events(3)))
    out = tmp_path / {"import": "out.sumtr", "export": "out.jsonl", "writeup": "out.md",
                      "prove-witness": "w.json"}[command]
    out.write_bytes(OLD)
    argv = {"import": ["import", str(events), "-o", str(out), "--force"],
            "export": ["export", str(source), "-o", str(out), "--force"],
            "writeup": ["writeup", str(source), "-o", str(out), "--force"],
            "prove-witness": ["prove", "--kind", "generic", "--num-vars", "3", "-o", str(tmp_path / "p.sumtr"),
                              "--witness-out", str(out), "--force"]}[command]
    _fill_after(monkeypatch, room)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "no space left on device" in err.lower() and "internal error" not in err
    assert err.strip().splitlines()[-1].startswith("stepper ")
    assert out.read_bytes() == OLD
    assert _leftovers(tmp_path) == []


def test_without_force_every_output_is_refused_naming_it_and_nothing_is_written(tmp_path, capsys):
    source = _transcript(tmp_path / "run.sumtr")
    events = tmp_path / "run.jsonl"
    events.write_text(jsonl(_events(1)))
    mine = tmp_path / "mine"
    mine.write_bytes(OLD)
    for argv in (["import", str(events), "-o", str(mine)], ["export", str(source), "-o", str(mine)],
                 ["writeup", str(source), "-o", str(mine), "--format", "md"],
                 ["prove", "--num-vars", "3", "-o", str(mine)],
                 ["prove", "--num-vars", "3", "-o", str(tmp_path / "new.sumtr"), "--witness-out", str(mine)]):
        assert main(argv) == 2, argv
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and f"{mine} already exists" in err and "--force" in err, argv
        assert mine.read_bytes() == OLD
    assert not (tmp_path / "new.sumtr").exists()  # refused before any work
    assert _leftovers(tmp_path) == []


def test_a_full_disk_during_a_note_leaves_no_partial_note(tmp_path, capsys, monkeypatch):
    path = _transcript(tmp_path / "run.sumtr")
    before = path.read_bytes()
    real = os.fdopen

    def full(fd, *args, **kwargs):
        return _FullDisk(real(fd, *args, **kwargs), 5)

    monkeypatch.setattr(os, "fdopen", full)
    assert main(["note", str(path), "gate 3 scanner restarted"]) == 2
    monkeypatch.undo()
    assert "no space left on device" in capsys.readouterr().err.lower()
    assert path.read_bytes() == before  # the five bytes that did get down were taken back
    assert main(["note", str(path), "written once there was room"]) == 0
    assert [n.text for n in load(path).all_notes()] == ["written once there was room"]


def _killed(argv: list[str], delay: float) -> None:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    child = subprocess.Popen([sys.executable, "-m", "stepper", *argv], env=env, stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL)
    try:  # SIGKILL at the moment, or no signal at all when the command has already finished
        child.wait(timeout=delay)
    except subprocess.TimeoutExpired:
        child.send_signal(signal.SIGKILL)
        child.wait()


@pytest.mark.slow
@pytest.mark.parametrize("command", ["import", "export"])
def test_sigkill_at_random_moments_leaves_the_old_file_or_the_whole_new_one(tmp_path, command):
    rng = random.Random(f"sigkill-{command}")  # fixed: the same moments every run
    events = tmp_path / "big.jsonl"
    events.write_text(jsonl(_events(1500 if command == "import" else 4000)))  # about a second of work
    source = _transcript(tmp_path / "big.sumtr", 4000) if command == "export" else None
    out = tmp_path / ("out.sumtr" if command == "import" else "out.jsonl")
    seen = set()
    for attempt in range(6):
        out.write_bytes(OLD)
        argv = (["import", str(events), "-o", str(out), "--force"] if command == "import"
                else ["export", str(source), "-o", str(out), "--force"])
        _killed(argv, rng.uniform(0.05, 2.5))
        data = out.read_bytes()
        if data == OLD:
            seen.add("old")
        elif command == "import":
            whole = load(out)
            assert (whole.completeness, whole.digest, len(whole.instances)) == ("complete", "verified", 1500)
            seen.add("new")
        else:
            assert data.decode().count("\n") == 1 + 1 + 4000 * 8  # header, field, 8 events per instance
            seen.add("new")
        for leftover in _leftovers(tmp_path):  # a killed run may leave its temporary file, never a half OUT
            os.unlink(tmp_path / leftover)
    print(f"{command}: outcomes after SIGKILL: {sorted(seen)}")
    assert seen  # at least one outcome observed; each one was whole


@pytest.mark.slow
def test_sigkill_during_notes_never_loses_the_recording_or_leaves_half_a_note(tmp_path):
    rng = random.Random("sigkill-note")
    path = _transcript(tmp_path / "run.sumtr", 2000)
    recorded = path.read_bytes()
    kept = set()
    for attempt in range(6):
        _killed(["note", str(path), f"note {attempt}"], rng.uniform(0.05, 1.5))
        after = load(path)
        assert (after.completeness, after.digest) == ("complete", "verified")
        assert path.read_bytes().startswith(recorded)
        assert {n.text for n in after.all_notes()} <= {f"note {i}" for i in range(attempt + 1)}
        kept.add(len(after.all_notes()))
    print(f"note: notes present after each SIGKILL: {sorted(kept)}")
