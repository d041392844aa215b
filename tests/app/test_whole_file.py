"""The whole-file check the app runs beside its first screen (stepper/app/whole_file.py).

What it keeps must tell the same story as `stepper check --json` on the same file and as
the app itself once every event is read; the child process and the thread must agree;
and no child is ever left behind.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from proofs import brackwater_payloads, bump_g1, write_transcript
from stepper.app import whole_file
from stepper.app.readout import summary_lines
from stepper.app.source import TranscriptSource
from stepper.app.whole_file import WholeFile, WholeFileCheck, check_whole_file, child_possible
from stepper.cli.main import main

WAIT = 30.0  # seconds: far more than a check of these files takes, even on a loaded machine


def check_json(path: Path, capsys: pytest.CaptureFixture[str]) -> dict:
    main(["check", str(path), "--json"])
    return json.loads(capsys.readouterr().out)


def line(model, label: str) -> str:
    return next(x.value for x in summary_lines(model) if x.label == label)


# No bucket events between rounds: the whole-file pass takes such a file (the grouped instance's
# buckets send it to the event-by-event read); the deck instance's compressed rounds go through
# the replay one event at a time within the pass.
TAKEN = ("boarding-permutation", "deck-slots-zero")


def taken_file(tmp: Path, mu: int = 4, **options: object) -> Path:
    return write_transcript(tmp / f"taken-{mu}.sumtr", brackwater_payloads(mu, TAKEN, **options))  # type: ignore[arg-type]


def stopping_early(tmp: Path) -> Path:
    """A sealed file whose last instance (compressed form) stops after two of its four rounds."""
    payloads = brackwater_payloads(4, TAKEN)
    last = max(i for i, p in enumerate(payloads) if p["type"] == "instance")
    return write_transcript(tmp / "short.sumtr", payloads[: last + 5])  # the instance, two rounds, two challenges


@pytest.mark.parametrize("kind", ["honest", "stopping early"])
def test_what_the_app_keeps_agrees_with_check_json_and_with_the_app_after_its_full_read(tmp_path, capsys, kind):
    path = taken_file(tmp_path) if kind == "honest" else stopping_early(tmp_path)
    swept = check_whole_file(path)
    assert swept is not None
    expected = check_json(path, capsys)  # the check command's contract, restated in transcripts/EVENTS.md
    report = swept.report
    assert report.verdict == expected["verdict"] == ("accept" if kind == "honest" else "incomplete")
    assert report.first_failure is None and expected["first_failure"] is None
    assert report.counts == expected["counts"]
    assert swept.rounds == sum(len(i["rounds"]) for i in expected["instances"])
    assert str(report.soundness.total_rounds_degree) == expected["soundness"]["numerator"]
    assert report.instances == () and report.soundness.per_instance == ()  # light: nothing per instance
    full = TranscriptSource(path).open()  # the app after reading every event, the slow way
    assert swept.proof == line(full, "proof")
    assert report.verdict == full.verdict()


def test_a_failing_file_is_left_to_the_event_by_event_read(tmp_path):
    failing = taken_file(tmp_path, tamper=bump_g1("boarding-permutation", 2))
    assert check_whole_file(failing) is None  # the replay then names the failure, as check does


@pytest.mark.parametrize("child", [True, False], ids=["child process", "thread"])
def test_the_child_process_and_the_thread_give_the_same_summary(tmp_path, child):
    path = taken_file(tmp_path)
    check = WholeFileCheck(path, child=child)
    got = check.future.result(timeout=WAIT)
    assert isinstance(got, WholeFile)
    assert got == check_whole_file(path)
    if child:
        assert check.pid is not None
        with pytest.raises(ChildProcessError):
            os.waitpid(check.pid, os.WNOHANG)  # reaped before the result was handed over: not even a zombie
    else:
        assert check.pid is None


def test_a_child_that_dies_gives_none_and_the_file_is_read_event_by_event(tmp_path, monkeypatch):
    def dies(path: object) -> None:
        os._exit(9)  # the child dies before sending anything

    monkeypatch.setattr(whole_file, "check_whole_file", dies)
    check = WholeFileCheck(taken_file(tmp_path), child=True)
    assert check.future.result(timeout=WAIT) is None
    with pytest.raises(ChildProcessError):
        os.waitpid(check.pid, os.WNOHANG)  # type: ignore[arg-type]


def test_stopping_a_child_under_way_reaps_it(tmp_path):
    path = taken_file(tmp_path, mu=10)
    check = WholeFileCheck(path, child=True)
    check.stop()
    assert check.future.result(timeout=WAIT) in (None, check_whole_file(path))  # stopped, or done first
    with pytest.raises(ChildProcessError):
        os.waitpid(check.pid, os.WNOHANG)  # type: ignore[arg-type]


def test_a_failing_check_comes_back_as_none_from_the_child(tmp_path):
    path = taken_file(tmp_path, tamper=bump_g1("boarding-permutation", 2))
    assert WholeFileCheck(path, child=True).future.result(timeout=WAIT) is None


def test_a_child_is_used_only_on_linux_in_a_process_without_other_threads(monkeypatch):
    monkeypatch.setattr(whole_file.threading, "active_count", lambda: 1)
    monkeypatch.setattr(whole_file.sys, "platform", "linux")
    assert child_possible() == hasattr(os, "fork")
    monkeypatch.setattr(whole_file.threading, "active_count", lambda: 2)
    assert not child_possible()
    monkeypatch.setattr(whole_file.threading, "active_count", lambda: 1)
    monkeypatch.setattr(whole_file.sys, "platform", "darwin")
    assert not child_possible()


def test_a_followed_file_or_one_with_a_witness_is_not_checked_whole(honest_file, tmp_path):
    assert TranscriptSource(honest_file, follow=True).start_whole_file_check() is None
    assert TranscriptSource(honest_file, tmp_path / "w.json").start_whole_file_check() is None


def test_the_app_hears_back_even_when_someone_else_reaped_the_child(tmp_path, monkeypatch):
    reaped = []
    waitpid = os.waitpid

    def got_there_first(pid: int, options: int) -> tuple[int, int]:
        reaped.append(waitpid(pid, options))  # a handler waiting for any child took it first
        raise ChildProcessError

    monkeypatch.setattr(whole_file.os, "waitpid", got_there_first)
    path = taken_file(tmp_path)
    assert WholeFileCheck(path, child=True).future.result(timeout=WAIT) == check_whole_file(path)
    assert len(reaped) == 1


def test_nothing_the_child_writes_reaches_the_terminal(tmp_path, monkeypatch, capfd):
    def noisy(path: object) -> None:
        print("from the child", flush=True)
        os.write(2, b"from the child\n")  # a stray warning would land in the middle of the app's screen

    monkeypatch.setattr(whole_file, "check_whole_file", noisy)
    assert WholeFileCheck(taken_file(tmp_path), child=True).future.result(timeout=WAIT) is None
    out, err = capfd.readouterr()
    assert "from the child" not in out + err


@pytest.mark.parametrize("child", [True, False], ids=["child process", "thread"])
def test_a_check_nobody_waits_for_any_more_ends_quietly(tmp_path, monkeypatch, child):
    raised: list[object] = []
    monkeypatch.setattr(whole_file.threading, "excepthook", raised.append)
    check = WholeFileCheck(taken_file(tmp_path, mu=8), child=child)
    check.future.cancel()  # what asyncio does to the future it wrapped when the app closes first
    check.stop()
    check.thread.join(WAIT)
    assert not check.thread.is_alive() and raised == []  # no "Exception in thread" on the terminal


def test_a_refused_fork_leaves_the_check_to_a_thread(tmp_path, monkeypatch):
    def refused() -> int:
        raise BlockingIOError(11, "Resource temporarily unavailable")  # fork(2)'s EAGAIN

    monkeypatch.setattr(whole_file.os, "fork", refused)
    path = taken_file(tmp_path)
    check = WholeFileCheck(path, child=True)
    assert check.pid is None and check.future.result(timeout=WAIT) == check_whole_file(path)
