"""The fuzz harness (bench/fuzz.py): a short fixed-seed budget finds nothing, every input that ever
failed (tests/fuzz/corpus/) now gets a documented outcome, and the harness itself does tell a
failure when there is one (so a clean run means something). The documented exit codes are those of
README.md ("Exit codes, the same for every command"); the rest is common practice, no source.
"""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).parents[2]
CORPUS = Path(__file__).parent / "corpus"


def _harness():
    sys.path.insert(0, str(ROOT / "bench"))
    spec = importlib.util.spec_from_file_location("stepper_fuzz_harness", ROOT / "bench" / "fuzz.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.slow
@pytest.mark.parametrize("part", range(4))
def test_a_short_fixed_seed_run_over_every_input_kind_finds_nothing(tmp_path, part):
    # a count, not a time budget: the same 500 inputs on every run, however busy the machine, in four
    # parts of 125 (--skip makes and drops the earlier parts' inputs) that run side by side
    proc = subprocess.run([sys.executable, str(ROOT / "bench" / "fuzz.py"), "--inputs", "125", "--seed", "7",
                           "--skip", str(125 * part), "--plugin-seconds", "0.25",
                           "--corpus", str(tmp_path / "corpus"), "--memory-mb", "3072"],
                          capture_output=True, text=True, timeout=240, cwd=ROOT)
    summary = json.loads(proc.stdout)
    assert summary["failures"] == 0, summary["failed"]
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert (summary["inputs"], summary["first_input"]) == (125, 125 * part + 1)  # not vacuous: every input ran
    assert set(summary["inputs_by_kind"]) == {"transcript", "jsonl", "witness", "plugin"}
    assert {"0", "1", "2"} <= set(summary["exit_codes"])  # accepted, rejected and refused inputs all occurred


def test_the_parts_of_a_split_run_are_the_inputs_of_the_whole_run(monkeypatch):
    harness = _harness()
    ran: list[tuple[str, dict[str, bytes]]] = []

    def record(target, paths, timeout):  # what each command would have been given, instead of running it
        ran.append((target, {role: Path(path).read_bytes() for role, path in paths.items() if Path(path).is_file()}))
        return None, 0, ""

    monkeypatch.setattr(harness, "run_target", record)

    def run(inputs, skip):
        ran.clear()
        summary = harness.fuzz(0, 7, None, 10.0, max_inputs=inputs, skip=skip)
        assert (summary["inputs"], summary["first_input"]) == (inputs, skip + 1)
        return list(ran)

    whole = run(6, 0)
    assert run(2, 0) + run(3, 2) + run(1, 5) == whole
    assert run(3, 0) != run(3, 3)  # not vacuous: the parts differ from one another


@pytest.mark.parametrize("case", sorted(p.name for p in CORPUS.iterdir() if p.is_dir()) if CORPUS.is_dir() else [])
def test_every_input_that_ever_failed_now_gets_a_documented_outcome(case):
    folder = CORPUS / case
    found = json.loads((folder / "case.json").read_text())["found"]
    # a plug-in that hangs is stopped by its own limit, a quarter of a second here, well under the
    # harness's (20 s), so a hang of the harness still tells a limit that does not work
    assert _harness().replay_saved(folder, plugin_seconds=0.25) is None, f"once: {found}"


def test_the_harness_reports_an_internal_error_a_hang_and_an_escaped_exception(tmp_path, monkeypatch):
    harness = _harness()
    paths = {"T": str(tmp_path / "t.sumtr"), "O": str(tmp_path / "out")}
    (tmp_path / "t.sumtr").write_bytes(b"stepper:sumcheck\n")
    import stepper.cli.main as cli

    def bug(argv):
        raise RuntimeError("a bug")

    def hang(argv):
        import time

        time.sleep(30)

    def leak(argv):
        raise SystemExit(4)

    def odd(argv):
        return 5

    outcomes = {}
    for name, fake in (("bug", bug), ("hang", hang), ("leak", leak), ("odd", odd)):
        monkeypatch.setattr(cli, "main", fake)
        outcomes[name] = harness.run_target("check", paths, timeout=0.5)[0]
    monkeypatch.undo()
    assert outcomes["bug"].startswith("escaped exception RuntimeError")
    assert outcomes["hang"].startswith("hang")
    assert outcomes["leak"].startswith("escaped exception SystemExit")
    assert outcomes["odd"].startswith("undocumented exit code 5")
    assert harness.run_target("check", paths, timeout=10)[0] is None  # the real command: exit 2, one line
