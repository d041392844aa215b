"""`stepper completion SHELL`: scripts generated from the parser offer every command and option,
and the shells themselves accept them (checked with the shell's own no-execute mode when present)."""

from __future__ import annotations

import shutil
import subprocess
import sys

import pytest

from stepper.cli.main import COMMANDS, main


def _script(capsys, shell: str) -> str:
    assert main(["completion", shell]) == 0
    return capsys.readouterr().out


@pytest.mark.parametrize("shell", ["bash", "zsh", "fish"])
def test_every_command_and_the_check_options_are_offered(shell, capsys):
    script = _script(capsys, shell)
    for command in COMMANDS:
        assert command in script
    for option in ("--strict", "--junit", "--challenges-exec", "--ci-lines", "--color"):
        assert option.lstrip("-") in script


@pytest.mark.parametrize("shell, flag", [("bash", "-n"), ("zsh", "-n"), ("fish", "--no-execute")])
def test_the_shell_parses_the_script(shell, flag, capsys, tmp_path):
    program = shutil.which(shell)
    if program is None:
        pytest.skip(f"{shell} is not installed here: its script was generated but not parsed")
    path = tmp_path / f"stepper.{shell}"
    path.write_text(_script(capsys, shell))
    proc = subprocess.run([program, flag, str(path)], capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr


def test_an_unknown_shell_exits_2(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["completion", "ksh"])
    assert stop.value.code == 2


def test_checking_a_file_never_loads_the_completion_library(tmp_path):
    code = ("import sys\nfrom stepper.cli.main import main\ntry:\n    main(['check', '/nonexistent'])\n"
            "finally:\n    print('shtab' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.stdout.strip().endswith("False")
