"""The command-line skeleton: every subcommand is listed, bad usage is one line and exit 2."""

from __future__ import annotations

import subprocess
import sys

from stepper.cli.main import COMMANDS, main


def test_help_lists_every_subcommand(capsys):
    try:
        main(["--help"])
    except SystemExit as stop:
        assert stop.code == 0
    out = capsys.readouterr().out
    for name in COMMANDS:
        assert name in out


def test_unknown_subcommand_is_one_line_and_exit_2():
    proc = subprocess.run([sys.executable, "-m", "stepper", "frobnicate"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0
    assert "Traceback" not in proc.stderr


def test_unknown_flag_is_one_line_and_exit_2():
    proc = subprocess.run([sys.executable, "-m", "stepper", "--no-such-flag"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0


def test_an_unknown_flag_after_a_subcommand_names_that_subcommand(capsys):
    try:
        main(["info", "some.sumtr", "--no-such-flag"])
    except SystemExit as stop:
        assert stop.code == 2
    err = capsys.readouterr().err
    assert err == "stepper info: unrecognized arguments: --no-such-flag (see stepper info --help)\n"


def test_ctrl_c_inside_a_compiled_kernel_is_an_interruption_not_an_internal_error(monkeypatch, capsys):
    # A compiled kernel hit by SIGINT returns with the KeyboardInterrupt set, and CPython raises
    # SystemError from it (its __cause__); that is the person's Ctrl-C, exit 130.
    import stepper.cli.info_cmd as info_cmd

    def run(args):
        try:
            raise KeyboardInterrupt
        except KeyboardInterrupt as stop:
            raise SystemError("kernel returned a result with an exception set") from stop

    monkeypatch.setattr(info_cmd, "run", run)
    assert main(["info", "some.sumtr"]) == 130
    assert capsys.readouterr().err == "stepper info: interrupted\n"
