"""`stepper view` as a user starts it: a real process in a real (pseudo-)terminal.

The screens themselves are specified headlessly through the Pilot in tests/app; this
file checks what only a real process shows: the command draws the proof screen in a
terminal of 80x24, the quit key ends it with exit 0, and the terminal is handed back
(the alternate screen left, the cursor shown again).
"""

from __future__ import annotations

import fcntl
import os
import pty
import select
import struct
import subprocess
import sys
import termios
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
HONEST = ROOT / "transcripts" / "ferries" / "ferries-honest.sumtr"
KEY_BAR = b"k keys"  # the last entry of the proof screen's key bar (stepper/app/keymap.py)
LEAVE_ALTERNATE_SCREEN = b"\x1b[?1049l"  # DEC private mode 1049 reset (xterm control sequences, common practice)
SHOW_CURSOR = b"\x1b[?25h"  # DEC private mode 25 set (xterm control sequences, common practice)


def run_in_terminal(argv: list[str], key: bytes | None, timeout: float = 60.0) -> tuple[int, bytes]:
    """Start ``argv`` on a fresh 80x24 pseudo-terminal, press ``key`` once the key bar is
    drawn (or, for None, close the terminal then), and return the exit code and everything
    the process wrote."""
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 80, 0, 0))
    env = {k: v for k, v in os.environ.items() if k not in ("NO_COLOR", "TEXTUAL")}
    env.update(TERM="xterm-256color", PYTHONPATH=str(ROOT))
    proc = subprocess.Popen(argv, stdin=slave, stdout=slave, stderr=slave, cwd=ROOT, env=env, close_fds=True)
    os.close(slave)
    seen, pressed = b"", False
    deadline = time.monotonic() + timeout
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            ready, _, _ = select.select([master], [], [], 0.1)
            if ready:
                try:
                    chunk = os.read(master, 1 << 16)
                except OSError:  # the child closed the terminal
                    break
                seen += chunk
            if not pressed and KEY_BAR in seen:
                pressed = True
                if key is None:  # the terminal goes away (its window closed, no hang-up signal sent)
                    os.close(master)
                    master = -1
                    break
                os.write(master, key)
        code = proc.wait(timeout=10)
        while master >= 0 and select.select([master], [], [], 0)[0]:  # what the process wrote while leaving
            try:
                chunk = os.read(master, 1 << 16)
            except OSError:
                break
            if not chunk:
                break
            seen += chunk
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        if master >= 0:
            os.close(master)
    assert pressed, f"the key bar never appeared within {timeout} s; the process wrote {seen[-400:]!r}"
    return code, seen


@pytest.mark.skipif(not sys.platform.startswith(("linux", "darwin")), reason="needs a POSIX pseudo-terminal")
def test_view_draws_the_proof_in_a_terminal_and_the_quit_key_ends_it_cleanly():
    code, seen = run_in_terminal([sys.executable, "-m", "stepper", "view", str(HONEST)], b"q")
    assert code == 0
    assert b"Traceback" not in seen
    tail = seen[seen.rindex(KEY_BAR):]
    assert LEAVE_ALTERNATE_SCREEN in tail and SHOW_CURSOR in tail  # the terminal is handed back


def test_view_off_a_terminal_stops_the_whole_file_check_it_started(monkeypatch, capsys):
    from stepper.app import whole_file
    from stepper.cli.main import main

    started: list[whole_file.WholeFileCheck] = []
    stopped: list[whole_file.WholeFileCheck] = []

    class Watched(whole_file.WholeFileCheck):
        def __init__(self, path: Path, *, child: bool | None = None) -> None:
            super().__init__(path, child=True)  # a child process, as in a real start
            started.append(self)

        def stop(self) -> None:
            stopped.append(self)
            super().stop()

    monkeypatch.setattr(whole_file, "WholeFileCheck", Watched)
    assert main(["view", str(HONEST)]) == 2  # the test's standard input is not a terminal
    assert "expected a terminal" in capsys.readouterr().err
    assert stopped == started and len(started) == 1
    started[0].future.result(timeout=60)
    with pytest.raises(ChildProcessError):
        os.waitpid(started[0].pid, os.WNOHANG)  # type: ignore[arg-type]  # gone, and reaped


def test_view_of_a_missing_file_says_so_in_the_words_check_uses(tmp_path, capsys):
    from stepper.cli.main import main

    missing = tmp_path / "missing.sumtr"
    assert main(["check", str(missing)]) == 2
    checked = capsys.readouterr().err.replace("stepper check:", "")
    assert main(["view", str(missing)]) == 2
    viewed = capsys.readouterr().err.replace("stepper view:", "")
    assert viewed == checked and "could not open the file" in viewed


@pytest.mark.skipif(not sys.platform.startswith(("linux", "darwin")), reason="needs a POSIX pseudo-terminal")
def test_view_ends_when_its_terminal_goes_away_instead_of_polling_it_forever():
    started = time.monotonic()
    code, _ = run_in_terminal([sys.executable, "-m", "stepper", "view", str(HONEST)], None)
    assert code == 0 and time.monotonic() - started < 60  # proc.wait(10) above raised otherwise


def test_a_live_terminal_is_not_gone_and_a_closed_one_is():
    from stepper.app.app import terminal_gone

    master, slave = pty.openpty()
    try:
        assert not terminal_gone(slave)
        os.close(master)
        assert terminal_gone(slave)
    finally:
        os.close(slave)
    read_end, write_end = os.pipe()  # not a terminal: never judged gone
    try:
        assert not terminal_gone(read_end)
    finally:
        os.close(read_end)
        os.close(write_end)
