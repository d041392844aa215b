"""The stderr progress bar: silent off a terminal, drawn on one, never swallowing Ctrl-C."""

from __future__ import annotations

import functools
import io

import numpy as np
import pytest

from rootcause_prover import prove
from stepper.field.field import NAMED_PRIMES, get_field
import stepper.cli.progress as progress_module
from stepper.cli.progress import rate_text, terminal_progress, wants_bar
from stepper.diagnose.rootcause import diagnose


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_no_bar_is_drawn_when_the_stream_is_not_a_terminal() -> None:
    stream = io.StringIO()
    assert not wants_bar(stream)
    with terminal_progress("work", delay=0.0, stream=stream) as update:
        update(1, 10)
        update(10, 10)
    assert stream.getvalue() == ""


def test_a_bar_is_drawn_on_a_terminal_once_the_delay_has_passed(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("TERM", raising=False)
    stream = _Tty()
    with terminal_progress("recomputing", delay=0.0, stream=stream) as update:
        update(3, 10)
    assert "recomputing" in stream.getvalue()


def test_ctrl_c_during_recomputation_reaches_the_caller() -> None:
    field = get_field(NAMED_PRIMES["goldilocks"])
    rng = np.random.default_rng(1)
    transcript, witness = prove(field, {n: field.vrandom(32, rng) for n in ("a", "b")}, "a*b", degree=2)

    def interrupt(done: int, total: int) -> None:
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        with terminal_progress("work", delay=0.0, stream=_Tty()) as update:
            diagnose(transcript, witness, progress=lambda d, t: (update(d, t), interrupt(d, t)))


@pytest.fixture
def default_sigint():
    """Python's own SIGINT handler for the test, whatever the process started with: a test run
    launched as a background job from a script starts with SIGINT ignored, and Python then
    installs no handler of its own."""
    import signal

    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    yield
    signal.signal(signal.SIGINT, previous)


# The tests below raise SIGINT with signal.raise_signal (C raise(): the calling thread), not
# os.kill(getpid()): in an xdist worker the kernel may hand a process-wide signal to execnet's
# thread, and the handler then runs in the main thread at some later moment, possibly after
# the block has put the default handler back (a KeyboardInterrupt inside a gc callback).


def test_a_ctrl_c_is_held_until_the_next_callback_and_then_raised_there(default_sigint) -> None:
    # An interrupt delivered inside a compiled kernel would come back as a SystemError;
    # holding it until the next callback (between rounds) keeps exit code 130 reachable.
    import signal

    calls: list[int] = []
    with pytest.raises(KeyboardInterrupt):
        with terminal_progress("work", stream=io.StringIO()) as update:
            signal.raise_signal(signal.SIGINT)
            calls.append(1)  # still running: the signal was held, not raised here
            update(1, 2)
            calls.append(2)
    assert calls == [1]
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_a_held_ctrl_c_without_a_later_callback_is_raised_when_the_block_ends(default_sigint) -> None:
    import signal

    with pytest.raises(KeyboardInterrupt):
        with terminal_progress("work", stream=io.StringIO()):
            signal.raise_signal(signal.SIGINT)
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_an_ignored_sigint_is_left_ignored() -> None:
    # a background job runs with SIGINT ignored: the block must neither catch nor restore it
    import signal

    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        with terminal_progress("work", stream=io.StringIO()) as update:
            signal.raise_signal(signal.SIGINT)
            update(1, 2)
        assert signal.getsignal(signal.SIGINT) is signal.SIG_IGN
    finally:
        signal.signal(signal.SIGINT, previous)


def test_the_rate_text_gives_the_average_throughput_and_the_time_left_at_it() -> None:
    assert rate_text(2_500_000, 10_000_000, 2.0, "entries") == "1.2 M entries/s, about 6 s left"
    assert rate_text(500, 1_000, 1.0, "entries") == "500 entries/s, about 1 s left"
    assert rate_text(1_000, 1_000_000, 1.0, "entries") == "1.0 k entries/s, about 16.6 min left"
    assert rate_text(0, 10, 1.0, "entries") == "entries/s not known yet"


def test_lines_are_written_off_a_terminal_only_when_asked_for(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(progress_module, "LINE_SECONDS", 0.0)
    quiet, asked = io.StringIO(), io.StringIO()
    with terminal_progress("recomputing", delay=0.0, stream=quiet, unit="entries") as update:
        update(3, 10)
    with terminal_progress("recomputing", delay=0.0, stream=asked, always=True, unit="entries") as update:
        update(3, 10)
        update(10, 10)  # the end is not a line of its own
    assert quiet.getvalue() == ""
    (line,) = asked.getvalue().splitlines()
    assert line.startswith("recomputing: 30% (3 of 10 entries), ") and "entries/s" in line


def test_the_bar_on_a_terminal_shows_the_throughput(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("TERM", raising=False)
    stream = _Tty()
    with terminal_progress("recomputing", delay=0.0, stream=stream, unit="entries") as update:
        update(3, 10)
    assert "entries/s" in stream.getvalue()


def test_progress_lines_go_to_stderr_and_leave_the_json_on_stdout_whole(tmp_path, capsys,
                                                                       monkeypatch: pytest.MonkeyPatch) -> None:
    import json

    from stepper.cli.main import main

    monkeypatch.setattr(progress_module, "LINE_SECONDS", 0.0)
    monkeypatch.setattr(progress_module, "terminal_progress",
                        functools.partial(progress_module.terminal_progress, delay=0.0))
    proof, folder = tmp_path / "p.sumtr", tmp_path / "w"
    assert main(["prove", "--kind", "generic", "--num-vars", "8", "-o", str(proof), "--witness-out",
                 str(folder)]) == 0
    capsys.readouterr()
    code = main(["check", str(proof), "--witness", str(folder), "--json", "--progress", "--chunk", "4"])
    out, err = capsys.readouterr()
    assert code == 0
    assert json.loads(out)["verdict"] == "accept"
    assert "root cause: recomputing rounds:" in err and "entries/s" in err and "left" in err
