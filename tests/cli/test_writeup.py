"""`stepper writeup`: Markdown and HTML files from a transcript, with and without a witness.
Runs from tests/sumcheck_pairs.py; HTML checked with the standard library's html.parser.
"""

from __future__ import annotations

import json
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared test provers

from stepper.cli.main import main  # noqa: E402
from stepper.transcript.store import load  # noqa: E402
from stepper.verify.replay import replay_transcript  # noqa: E402
from sumcheck_pairs import BABYBEAR, brackwater_specs, run_events, save, witness_map  # noqa: E402


def bump_round_2(payload):
    bump_round_2.count = getattr(bump_round_2, "count", 0) + (payload["type"] == "round")
    if payload["type"] == "round" and bump_round_2.count == 2:
        payload["evals"][1] = (payload["evals"][1] + 1) % BABYBEAR
    return payload


@pytest.fixture
def failing(tmp_path: Path) -> Path:
    bump_round_2.count = 0
    return save(tmp_path / "isle-of-quill-0740.sumtr", run_events(brackwater_specs(), tamper=bump_round_2))


class Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.parts: list[str] = []
        self.tags: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)

    def handle_data(self, data):
        self.parts.append(data)


def test_html_report_holds_the_failing_rounds_explanation(failing, tmp_path, capsys):
    out = tmp_path / "report.html"
    assert main(["writeup", str(failing), "-o", str(out)]) == 0
    parser = Text()
    parser.feed(out.read_text(encoding="utf-8"))
    explanation = replay_transcript(load(failing)).first_failure.explanation
    assert explanation.startswith("round 2: g(0)+g(1) = ")
    assert explanation in " ".join(parser.parts)
    assert "script" not in parser.tags
    assert "reject" in capsys.readouterr().err


def test_markdown_report_with_a_witness_has_the_root_cause(failing, tmp_path):
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps(witness_map(brackwater_specs())), encoding="utf-8")
    out = tmp_path / "report.md"
    assert main(["writeup", str(failing), "--witness", str(witness), "-o", str(out)]) == 0
    md = out.read_text(encoding="utf-8")
    assert "## Root cause (with the witness)" in md
    assert "- **round**: 2" in md and "- **check**: honest-poly" in md
    assert "made with a witness" in md


def test_standard_output_needs_a_format(failing, capsys):
    assert main(["writeup", str(failing), "-o", "-", "--format", "md"]) == 0
    assert capsys.readouterr().out.startswith("# stepper write-up: isle-of-quill-0740")
    assert main(["writeup", str(failing), "-o", "-"]) == 2
    assert "expected -o to end in .md or .html" in capsys.readouterr().err


def test_a_witness_that_does_not_fit_is_exit_2_and_writes_nothing(failing, tmp_path, capsys):
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "boarding-permutation", "tables": {"t0": [1, 2]},
                                                  "combine": "t0"}]}), encoding="utf-8")
    out = tmp_path / "report.html"
    assert main(["writeup", str(failing), "--witness", str(witness), "-o", str(out)]) == 2
    assert capsys.readouterr().err.count("\n") == 1
    assert not out.exists()


def test_the_written_report_gets_ordinary_file_permissions_not_the_private_mode_of_a_temp_file(failing, tmp_path):
    # The report is for sharing: the temporary file it is written through must not leave it 0600.
    import os

    umask = os.umask(0o022)
    try:
        out = tmp_path / "report.md"
        assert main(["writeup", str(failing), "-o", str(out)]) == 0
    finally:
        os.umask(umask)
    assert out.stat().st_mode & 0o777 == 0o644


def test_an_expression_that_cannot_be_evaluated_is_exit_2_naming_the_file_and_writes_nothing(tmp_path, capsys):
    # t[1] of a one-element list is found only when the replay evaluates the claim_expr: the one line
    # names the file as well as the instance and the key (as stepper check does)
    events = [{"type": "field", "name": "babybear"}, {"type": "value", "name": "t", "value": [1]},
              {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 1, "claim_expr": "t[1]"},
              {"type": "round", "evals": [0, 1]}, {"type": "challenge", "value": 5}]
    run = tmp_path / "run.jsonl"
    run.write_text("".join(json.dumps(event) + "\n" for event in events), encoding="utf-8")
    out = tmp_path / "report.md"
    assert main(["writeup", str(run), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(run) in err and "'deck'" in err and "claim_expr" in err
    assert not out.exists()
