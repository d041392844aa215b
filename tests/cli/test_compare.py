"""`stepper compare`: exit codes, human output and the JSON schema, on files written by the store.

Runs come from tests/sumcheck_pairs.py (plain-integer honest prover, built-in schedule).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared test provers

from stepper.cli.main import main  # noqa: E402
from json_contracts import conforming  # noqa: E402
from stepper.compare.diff import JSON_SCHEMA  # noqa: E402
from sumcheck_pairs import BABYBEAR, brackwater_specs, run_events, save, scale_all  # noqa: E402


@pytest.fixture
def runs(tmp_path: Path) -> dict[str, Path]:
    specs = brackwater_specs()
    honest = run_events(specs)
    return {
        "a": save(tmp_path / "a.sumtr", honest),
        "same": save(tmp_path / "same.sumtr", honest),
        "port": save(tmp_path / "port.sumtr", run_events(specs, extra_absorb=True)),
        "monty": save(tmp_path / "monty.sumtr", run_events(specs, tamper=scale_all(pow(2, 32, BABYBEAR)))),
        "cut": save(tmp_path / "cut.sumtr", honest[:7], finish=False),
    }


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["compare", *argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_identical_files_exit_0(runs, capsys):
    code, out, _ = run(capsys, str(runs["a"]), str(runs["same"]))
    assert code == 0
    assert "identical" in out
    assert "not evidence that either run" in out


def test_a_port_with_an_extra_absorb_exits_1_and_names_fiat_shamir_drift_with_both_values(runs, capsys):
    code, out, _ = run(capsys, str(runs["a"]), str(runs["port"]))
    assert code == 1
    assert "first divergence: instance 'boarding-permutation' (A #0, B #0), round 1, challenge" in out
    assert "kind: fiat-shamir-drift" in out
    assert "* " in out  # the differing lines of the round window are marked


def test_json_output_follows_the_published_schema(runs, capsys):
    for other, kind in (("same", "identical"), ("port", "fiat-shamir-drift"), ("monty", "constant-factor"),
                        ("cut", "truncated")):
        code, out, _ = run(capsys, str(runs["a"]), str(runs[other]), "--json")
        doc = conforming(out, "diff")
        jsonschema.validate(doc, JSON_SCHEMA)
        assert doc["classification"]["kind"] == kind
        assert code == (0 if kind == "identical" else 1)
    assert doc["b"]["completeness"] == "incomplete"  # diff works on an incomplete transcript


def test_the_schema_flag_prints_the_schema(capsys):
    code, out, _ = run(capsys, "--schema")
    assert code == 0 and json.loads(out) == json.loads(json.dumps(JSON_SCHEMA))


def test_bad_input_is_one_line_and_exit_2(runs, tmp_path, capsys):
    junk = tmp_path / "junk.sumtr"
    junk.write_bytes(b"\x00\x01 not a transcript")
    for argv in ([str(runs["a"]), str(tmp_path / "missing.sumtr")], [str(runs["a"]), str(junk)], [str(runs["a"])]):
        try:
            code, _, err = run(capsys, *argv)
        except SystemExit as stop:  # argparse refuses a missing operand by exiting
            code, err = stop.code, capsys.readouterr().err
        assert code == 2
        assert err.startswith("stepper compare: ") and err.count("\n") == 1
        assert "Traceback" not in err


def test_an_unreadable_file_through_python_dash_m_is_one_line_and_exit_2(runs, tmp_path):
    # the process boundary: exit code and standard error of `python -m stepper compare`
    proc = subprocess.run([sys.executable, "-m", "stepper", "compare", str(runs["a"]), str(tmp_path / "missing.sumtr")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.startswith("stepper compare: ") and proc.stderr.count("\n") == 1
    assert "Traceback" not in proc.stderr
