"""The in-process recording samples (samples/record_inprocess.py, record_channel_adapter.py,
prove_sailing.py): each records a proof `stepper check` accepts, and none of them writes over
a file that is already there unless asked to (--force on the command line, replace=True)."""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

from stepper.cli.main import main
from stepper.errors import UsageError

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def sample(name: str):
    spec = importlib.util.spec_from_file_location(f"sample_{name}", SAMPLES / f"{name}.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


RECORD = {
    "record_inprocess": lambda module, path, **kw: module.prove(str(path), **kw),
    "record_channel_adapter": lambda module, path, **kw: module.main(str(path), **kw),
    "prove_sailing": lambda module, path, **kw: module.main(str(path), **kw),
}


@pytest.mark.parametrize("name", sorted(RECORD))
def test_a_sample_records_a_proof_check_accepts_and_refuses_to_record_over_it(name, tmp_path, capsys):
    module, record = sample(name), RECORD[name]
    path = tmp_path / "quill.sumtr"
    record(module, path)
    before = path.read_bytes()
    with pytest.raises(UsageError, match="already exists"):
        record(module, path)
    assert path.read_bytes() == before  # left as it was
    record(module, path, replace=True)
    capsys.readouterr()
    assert main(["check", str(path)]) == 0


def test_a_sample_run_twice_from_the_shell_says_so_in_one_line_and_force_replaces(tmp_path):
    path = tmp_path / "quill.sumtr"
    run = [sys.executable, str(SAMPLES / "record_inprocess.py"), str(path)]
    assert subprocess.run(run, capture_output=True, text=True, timeout=120).returncode == 0
    again = subprocess.run(run, capture_output=True, text=True, timeout=120)
    assert again.returncode == 2 and again.stderr.count("\n") == 1
    assert "already exists" in again.stderr and "(add --force to replace it)" in again.stderr  # the script's flag
    forced = subprocess.run([*run, "--force"], capture_output=True, text=True, timeout=120)
    assert forced.returncode == 0, forced.stderr
