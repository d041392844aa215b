"""`stepper check` in CI: many files and standard input, the most severe exit code, JUnit XML,
one-line CI annotations, --color and NO_COLOR, STEPPER_DEBUG, and --strict."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from json_contracts import conforming
from plain_sumcheck import BABYBEAR, Plain, jsonl, thaler_payloads
from stepper.cli.check_many import most_severe
from stepper.cli.main import main

CHALLENGES = (5, 7, 11)


def honest_text() -> str:
    return jsonl(thaler_payloads(Plain(BABYBEAR), CHALLENGES))


def faulty_text() -> str:
    payloads = thaler_payloads(Plain(BABYBEAR), CHALLENGES)
    rounds = [p for p in payloads if p["type"] == "round"]
    rounds[1]["evals"][0] = str((int(rounds[1]["evals"][0]) + 1) % BABYBEAR)  # round 2's g(0) off by one
    return jsonl(payloads)


def incomplete_text() -> str:
    payloads = thaler_payloads(Plain(BABYBEAR), CHALLENGES)
    return jsonl(payloads[:4])  # field, instance, round 1, challenge 1


@pytest.fixture
def files(tmp_path: Path) -> dict[str, Path]:
    out = {"honest": honest_text(), "faulty": faulty_text(), "incomplete": incomplete_text(),
           "garbage": "this is not a transcript\n"}
    paths = {}
    for name, text in out.items():
        paths[name] = tmp_path / f"{name}.jsonl"
        paths[name].write_text(text)
    return paths


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["check", *argv])
    got = capsys.readouterr()
    return code, got.out, got.err


def test_the_most_severe_code_wins_in_a_fixed_order():
    # 70 (bug) > 2 (unusable) > 1 (failed) > 3 (incomplete) > 0: the order EVENTS.md documents
    assert most_severe([0, 3]) == 3
    assert most_severe([3, 1, 0]) == 1
    assert most_severe([1, 2, 3]) == 2
    assert most_severe([2, 70, 1]) == 70
    assert most_severe([]) == 0


def test_many_files_print_one_line_each_and_a_summary(files, capsys):
    code, out, err = run(capsys, *(str(files[k]) for k in ("honest", "faulty", "incomplete")))
    lines = out.splitlines()
    assert code == 1 and err == ""
    assert lines[0].startswith("accepted") and str(files["honest"]) in lines[0]
    assert lines[1].startswith("REJECTED") and "round 2, check sum" in lines[1]
    assert lines[2].startswith("INCOMPLETE")
    assert lines[3] == "checked 3 file(s): 1 accepted, 1 failed, 1 incomplete, 0 unusable; exit 1"
    assert "not a soundness proof" in lines[4]


def test_an_unusable_file_is_reported_on_its_line_and_the_others_still_checked(files, capsys):
    code, out, err = run(capsys, str(files["garbage"]), str(files["honest"]))
    assert code == 2
    assert out.splitlines()[0].startswith("UNUSABLE") and "expected a stepper transcript" in out
    assert out.splitlines()[1].startswith("accepted")
    assert "Traceback" not in out + err


def test_an_unusable_files_line_names_it_once(files, tmp_path, capsys):
    folder = tmp_path / "proofs"
    folder.mkdir()
    missing = tmp_path / "missing.sumtr"
    code, out, _ = run(capsys, str(missing), str(folder), str(files["garbage"]), str(files["honest"]))
    assert code == 2
    for line, path in zip(out.splitlines()[:3], (missing, folder, files["garbage"])):
        assert line.startswith("UNUSABLE") and line.count(str(path)) == 1, line


def test_only_incomplete_and_accepted_files_exit_3(files, capsys):
    assert run(capsys, str(files["honest"]), str(files["incomplete"]))[0] == 3


def test_standard_input_is_read_with_a_dash(files):
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", "-", "--json"],
                          input=files["faulty"].read_bytes(), capture_output=True)
    assert proc.returncode == 1
    assert conforming(proc.stdout.decode(), "check")["first_failure"]["round"] == 2
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", "-"], input=b"nonsense", capture_output=True)
    assert proc.returncode == 2 and proc.stderr.decode().startswith("stepper check: <stdin>")


def test_a_dash_given_twice_or_a_witness_with_many_files_is_a_usage_error(files, capsys):
    assert run(capsys, "-", "-")[0] == 2
    assert run(capsys, str(files["honest"]), str(files["faulty"]), "--witness", "w.json")[0] == 2


def test_json_with_many_files_follows_its_schema(files, capsys):
    code, out, _ = run(capsys, str(files["honest"]), str(files["garbage"]), "--json")
    doc = conforming(out, "check-files")
    assert code == 2 and doc["exit_code"] == 2
    assert [f["exit_code"] for f in doc["files"]] == [0, 2]
    assert doc["files"][1]["result"] is None and "expected a stepper transcript" in doc["files"][1]["error"]


def test_single_file_json_is_exactly_the_one_file_contract(files, capsys):
    code, out, _ = run(capsys, str(files["faulty"]), "--json")
    doc = conforming(out, "check")
    assert code == 1 and "files" not in doc and "strict" not in doc


def test_junit_has_a_test_case_per_file_and_instance_with_the_failure_values(files, tmp_path, capsys):
    report = tmp_path / "out.xml"
    code, _, _ = run(capsys, str(files["honest"]), str(files["faulty"]), str(files["garbage"]),
                     "--junit", str(report))
    assert code == 2
    root = ET.parse(report).getroot()  # well-formed XML (reference: the standard library's parser)
    assert root.tag == "testsuites" and root.get("tests") == "3"
    assert root.get("failures") == "1" and root.get("errors") == "1"
    suites = root.findall("testsuite")
    assert [s.get("name") for s in suites] == [str(files[k]) for k in ("honest", "faulty", "garbage")]
    assert suites[0].find("testcase").get("name") == "#0 boarding-permutation"
    failure = suites[1].find("testcase/failure")
    assert failure.get("type") == "sum"
    assert failure.get("message").startswith("round 2, check sum: expected ")
    assert ", found " in failure.get("message") and failure.text
    assert suites[2].find("testcase/error").get("type") == "unusable"


def test_junit_never_replaces_a_file_without_force(files, tmp_path, capsys):
    report = tmp_path / "out.xml"
    report.write_text("keep me")
    code, _, err = run(capsys, str(files["honest"]), "--junit", str(report))
    assert code == 2 and "--force" in err and report.read_text() == "keep me"
    assert run(capsys, str(files["honest"]), "--junit", str(report), "--force")[0] == 0
    assert ET.parse(report).getroot().get("tests") == "1"
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".partial")]


def test_a_junit_report_that_cannot_be_written_is_refused_before_any_file_is_checked(files, tmp_path, capsys):
    for report in (tmp_path / "no-such-folder" / "out.xml", tmp_path):  # a missing folder; a folder itself
        code, out, err = run(capsys, str(files["faulty"]), "--junit", str(report))
        assert code == 2 and out == "" and err.count("\n") == 1  # one line, no file checked or printed
    report = tmp_path / "kept.xml"
    report.write_text("keep me")
    code, out, err = run(capsys, str(files["faulty"]), "--junit", str(report))
    assert code == 2 and out == "" and "--force" in err and report.read_text() == "keep me"


def test_ci_lines_in_the_github_and_compiler_forms(files, capsys):
    _, out, _ = run(capsys, str(files["faulty"]), str(files["incomplete"]), "--ci-lines", "github")
    marks = [line for line in out.splitlines() if line.startswith("::")]
    assert marks[0].startswith(f"::error file={files['faulty']},title=stepper check::instance #0")
    assert marks[1].startswith("::warning file=")
    _, out, _ = run(capsys, str(files["faulty"]), "--ci-lines", "compiler")
    assert f"{files['faulty']}:1: error: instance #0 'boarding-permutation', round 2, check sum" in out


def _cli(*argv: str, env: dict[str, str] | None = None) -> subprocess.CompletedProcess[str]:
    full = {k: v for k, v in os.environ.items() if k not in ("NO_COLOR", "STEPPER_DEBUG")}
    full.update(env or {})
    return subprocess.run([sys.executable, "-m", "stepper", *argv], capture_output=True, text=True, env=full)


def test_color_always_never_and_no_color(files, capsys, monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    assert "\x1b[" in run(capsys, str(files["faulty"]), "--color", "always")[1]
    assert "\x1b[" not in run(capsys, str(files["faulty"]), "--color", "never")[1]
    assert "\x1b[" not in run(capsys, str(files["faulty"]))[1]  # auto: captured output is not a terminal
    assert "\x1b[31mREJECTED" in run(capsys, str(files["faulty"]), str(files["honest"]), "--color", "always")[1]
    monkeypatch.setenv("NO_COLOR", "1")
    assert "\x1b[" in run(capsys, str(files["faulty"]), "--color", "always")[1]  # the flag wins


def test_no_color_is_honoured_on_a_terminal(files, monkeypatch):
    from stepper.cli.check_file import colour_wanted

    monkeypatch.setattr(sys.stdout, "isatty", lambda: True)
    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.setenv("TERM", "xterm")
    assert colour_wanted("auto")
    monkeypatch.setenv("NO_COLOR", "1")
    assert not colour_wanted("auto")
    assert colour_wanted("always")


def test_stepper_debug_shows_the_traceback_behind_the_message(files):
    plain = _cli("check", str(files["garbage"]))
    assert plain.returncode == 2 and "Traceback" not in plain.stderr and len(plain.stderr.splitlines()) == 1
    debug = _cli("check", str(files["garbage"]), env={"STEPPER_DEBUG": "1"})
    assert debug.returncode == 2 and "Traceback (most recent call last)" in debug.stderr
    assert debug.stderr.splitlines()[-1] == plain.stderr.splitlines()[0]


def test_strict_fails_what_plain_check_accepts(files, tmp_path, capsys):
    # the plain-integer proof has no schedule and a 27-bit field: accepted, but not under --strict
    assert run(capsys, str(files["honest"]))[0] == 0
    code, out, _ = run(capsys, str(files["honest"]), "--strict")
    assert code == 1
    assert "challenges unchecked: not re-derived: the transcript declares no schedule" in out
    assert "weak soundness bound" in out
    code, out, _ = run(capsys, str(files["honest"]), "--strict", "--json")
    doc = conforming(out, "check")
    assert code == 1 and doc["verdict"] == "accept" and len(doc["strict"]) == 2


def test_strict_turns_incomplete_and_unknown_events_into_failures(files, tmp_path, capsys):
    code, out, _ = run(capsys, str(files["incomplete"]), "--strict")
    assert code == 1 and "the transcript is incomplete" in out
    extra = tmp_path / "extra.jsonl"
    extra.write_text(honest_text() + json.dumps({"type": "commitment", "root": "0xab"}) + "\n")
    code, out, _ = run(capsys, str(extra), "--strict")
    assert code == 1 and "unknown event types: commitment x1" in out


def test_strict_passes_a_sound_looking_run(tmp_path, capsys):
    # BN254 challenges (a 254-bit field, EIP-196/197) and the built-in schedule: nothing to fail
    out = tmp_path / "bn.sumtr"
    assert main(["prove", "--kind", "zerocheck", "--field", "bn254", "--num-vars", "3", "-o", str(out)]) == 0
    capsys.readouterr()
    code, text, _ = run(capsys, str(out), "--strict")
    assert code == 0 and "STRICT" not in text


def test_force_without_junit_is_a_usage_error(files, capsys):
    assert run(capsys, str(files["honest"]), "--force")[0] == 2


def test_files_may_follow_a_flag(files, capsys):
    code, out, _ = run(capsys, str(files["honest"]), "--strict", str(files["faulty"]), "--color", "never",
                       str(files["incomplete"]))
    assert code == 1
    assert [line.split()[1] for line in out.splitlines()[:3]] == [
        f"{files[k]}:" for k in ("honest", "faulty", "incomplete")]
