"""The command-line skeleton: every subcommand is listed, bad usage is one line and exit 2."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from stepper.cli.main import COMMANDS, main


def test_help_lists_every_subcommand(capsys):
    try:
        main(["--help"])
    except SystemExit as stop:
        assert stop.code == 0
    out = capsys.readouterr().out
    for name in COMMANDS:
        assert name in out


def test_help_builds_no_subcommand_arguments_and_imports_no_command_work():
    # `stepper --help` lists the subcommands with their summaries only: no subcommand's arguments are
    # added (prove's fault table is read for its --fault help), and no command module imports at its
    # top what only its run needs (json, subprocess, the check's file handling, the transcript store,
    # the error tree and the dataclasses module with inspect, which it is made of)
    code = ("import sys\nbefore = set(sys.modules)\nfrom stepper.cli.main import main\ntry:\n    main(['--help'])\n"
            "except SystemExit:\n    pass\nprint(sorted(name for name in set(sys.modules) - before if name in "
            "('stepper.provers.faults', 'json', 'subprocess', 'signal', 'stepper.cli.check_file', "
            "'stepper.transcript.store', 'stepper.transcript.condition', 'numpy', 'stepper.errors', 'dataclasses', "
            "'inspect')))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.stdout.strip().splitlines()[-1] == "[]", proc.stderr


def test_help_after_a_command_name_still_lists_that_commands_arguments(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["info", "--help"])
    assert stop.value.code == 0
    assert "--rows N" in capsys.readouterr().out


def test_the_entry_point_freezes_what_is_alive_before_the_process_exits(monkeypatch):
    # the shutdown's collector passes over stepper's and numpy's modules are work the exit does anyway
    import gc

    import stepper.cli.main as cli_main

    calls = []
    monkeypatch.setattr(cli_main, "main", lambda: calls.append("main") or 3)
    monkeypatch.setattr(gc, "freeze", lambda: calls.append("freeze"))
    monkeypatch.setattr(cli_main, "_set_here", [])
    for name in cli_main.PROCESS_SETTINGS:
        monkeypatch.setenv(name, "1")  # restored afterwards; entry() changes nothing already set
    with pytest.raises(SystemExit) as stop:
        cli_main.entry()
    assert stop.value.code == 3 and calls == ["main", "freeze"]


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



HONEST = Path(__file__).parents[2] / "transcripts" / "ferries" / "ferries-honest.sumtr"


@pytest.mark.parametrize("old, new", [("report", "writeup"), ("diff", "compare")])
def test_retired_command_names_still_run_the_new_command_after_one_line_on_stderr(tmp_path, capsys, old, new):
    out = tmp_path / "w.md"
    argv = [old, str(HONEST), "-o", str(out)] if old == "report" else [old, str(HONEST), str(HONEST)]
    assert main(argv) == 0
    err = capsys.readouterr().err.splitlines()
    assert err[0] == f"stepper: `stepper {old}` is now `stepper {new}`; the old name goes in the next release"
    assert out.exists() == (old == "report")


def test_retired_command_names_are_not_listed_in_the_help(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    listed = {line.split()[0] for line in capsys.readouterr().out.splitlines() if line.startswith("    ")}
    assert {"writeup", "compare"} <= listed and not {"report", "diff"} & listed


@pytest.mark.parametrize("argv", [["info", "-"], ["export", "-"], ["buckets", "-"], ["note", "-", "text"],
                                  ["writeup", "-", "-o", "out.md"], ["compare", "-", "other.sumtr"],
                                  ["import", "-", "-o", "out.sumtr"]])
def test_a_dash_where_only_check_reads_standard_input_is_a_usage_error_not_a_missing_file(argv, tmp_path,
                                                                                         monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err == f"stepper {argv[0]}: expected a file name, found '-' (only `stepper check` reads standard input)\n"
    assert list(tmp_path.iterdir()) == []  # nothing written
