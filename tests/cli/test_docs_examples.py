"""What README.md and DEVELOPERS.md tell a new user, checked against what the commands do.

Each test reads the documented text itself (a quoted output, a list of names, a command) so
that the docs and the tool cannot drift apart unnoticed: changing either side fails here.
"""

from __future__ import annotations

import re
from pathlib import Path

from stepper.cli.main import main
from stepper.cli.schema_cmd import SCHEMAS

ROOT = Path(__file__).parents[2]
README = (ROOT / "README.md").read_text(encoding="utf-8")
DEVELOPERS = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")


def test_the_quoted_first_failure_is_what_check_prints_for_the_file_named_beside_it(capsys, monkeypatch):
    found = re.search(r"The first failure is told in one sentence; for\s+`stepper check (\S+)` \(exit (\d)\):"
                      r"\s+```\n(.*?)```", README, re.S)
    assert found, "README no longer quotes check's first failure for a named file"
    path, code, quoted = found.group(1), int(found.group(2)), found.group(3)
    monkeypatch.chdir(ROOT)
    assert main(["check", path]) == code
    printed = capsys.readouterr().out
    assert quoted in printed, f"README quotes:\n{quoted}\ncheck printed:\n{printed}"


def test_the_schema_names_in_the_commands_table_are_the_ones_stepper_schema_accepts():
    row = next(line for line in README.splitlines() if line.startswith("| `stepper schema NAME`"))
    listed = re.search(r"\(schema names (.*)\)", row)
    assert listed, row
    assert re.findall(r"`([a-z-]+)`", listed.group(1)) == list(SCHEMAS)


def test_the_developers_quick_test_command_is_the_one_ci_runs():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    ci_command = next(line for line in ci.splitlines() if line.startswith("python3 -m venv"))
    claims = [line for line in DEVELOPERS.splitlines() if "CI runs exactly this" in line]
    assert claims, "DEVELOPERS.md no longer names the command CI runs"
    for line in claims:
        assert ci_command in line, f"DEVELOPERS.md says CI runs {line!r}, but .ci/run runs {ci_command!r}"
    assert ci_command in README
