"""The stderr progress bar: silent off a terminal, drawn on one, never swallowing Ctrl-C."""

from __future__ import annotations

import io

import numpy as np
import pytest

from rootcause_prover import prove
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.cli.progress import terminal_progress, wants_bar
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


def test_a_ctrl_c_is_held_until_the_next_callback_and_then_raised_there(default_sigint) -> None:
    # An interrupt delivered inside a compiled kernel would come back as a SystemError;
    # holding it until the next callback (between rounds) keeps exit code 130 reachable.
    import os
    import signal

    calls: list[int] = []
    with pytest.raises(KeyboardInterrupt):
        with terminal_progress("work", stream=io.StringIO()) as update:
            os.kill(os.getpid(), signal.SIGINT)
            calls.append(1)  # still running: the signal was held, not raised here
            update(1, 2)
            calls.append(2)
    assert calls == [1]
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_a_held_ctrl_c_without_a_later_callback_is_raised_when_the_block_ends(default_sigint) -> None:
    import os
    import signal

    with pytest.raises(KeyboardInterrupt):
        with terminal_progress("work", stream=io.StringIO()):
            os.kill(os.getpid(), signal.SIGINT)
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_an_ignored_sigint_is_left_ignored() -> None:
    # a background job runs with SIGINT ignored: the block must neither catch nor restore it
    import os
    import signal

    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        with terminal_progress("work", stream=io.StringIO()) as update:
            os.kill(os.getpid(), signal.SIGINT)
            update(1, 2)
        assert signal.getsignal(signal.SIGINT) is signal.SIG_IGN
    finally:
        signal.signal(signal.SIGINT, previous)
