"""The glue between instances in the app's model (stepper/app/glue_model.py, its use in
stepper/app/proof_model.py and the rows and strip of stepper/app/round_rows.py).

The reference for every verdict is `stepper check` on the same file (contract 3 of the check
command: `link` at round 0, `evaluation` at the instance's last round, `squeeze` where the
replay had got to); the app must tell the same story: same instance, round and check, in the
same words. Files: the two glue bugs of the shipped catalogue (transcripts/ferries) and small
runs of the reference provers (tests/app/proofs.py).
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the JSON contract helper

from json_contracts import conforming  # noqa: E402
from proofs import SHIPPED, bump_squeeze, glued_events  # noqa: E402

from stepper.app.proof_model import ProofModel  # noqa: E402
from stepper.app.round_rows import EVALUATION_MARK, LINK_MARK  # noqa: E402
from stepper.app.source import TranscriptSource, new_model  # noqa: E402
from stepper.cli.main import main  # noqa: E402


def opened(path: Path) -> ProofModel:
    model = TranscriptSource(path).open()
    model.report()
    return model


def checked(path: Path, capsys: pytest.CaptureFixture[str]) -> tuple[dict, str]:
    """`stepper check --json` and the plain text of the same file."""
    capsys.readouterr()
    main(["check", str(path), "--json"])
    doc = conforming(capsys.readouterr().out, "check")
    main(["check", str(path)])
    return doc, capsys.readouterr().out


def _case(name: str, kind: str, **options: object):  # a generated file, built in the test's folder
    return pytest.param(lambda tmp: glued_events(tmp / f"{name}.jsonl", kind, **options), id=name)


def _written(name: str, payloads: list[dict]):  # a few events typed out, as a JSON-lines file
    def make(tmp: Path) -> Path:
        path = tmp / f"{name}.jsonl"
        path.write_text("".join(json.dumps(p) + "\n" for p in payloads))
        return path

    return pytest.param(make, id=name)


# An instance of no variables: its claim is its reduced claim, so its evaluation sits at round 0
# (the instance's last round), beside its link (contract 3, as restated in transcripts/FORMAT.md).
NO_VARIABLES = [
    {"type": "field", "name": "babybear"},
    {"type": "value", "name": "fare", "value": 5},
    {"type": "instance", "name": "fares.flat", "num_vars": 0, "degree": 1, "claim": 10, "claim_expr": "2*fare",
     "final_expr": "fare"},
]


# A batch whose combined claim (10 + 7*1 = 17) is not the next instance's claim (18):
# `check` reports it at that instance's round 0 (its claim), as it does a broken link.
BROKEN_BATCH = [
    {"type": "field", "name": "babybear"},
    {"type": "instance", "name": "fares.day", "num_vars": 1, "degree": 1, "claim": 10},
    {"type": "round", "evals": [4, 6]},
    {"type": "challenge", "value": 3},
    {"type": "final", "value": 10},
    {"type": "batch", "coefficient": 7, "terms": [10, 1], "sources": ["fares.day", "surcharge"]},
    {"type": "instance", "name": "fares.week", "num_vars": 1, "degree": 1, "claim": 18},
    {"type": "round", "evals": [9, 9]},
    {"type": "challenge", "value": 2},
    {"type": "final", "value": 9},
]


def _shipped(name: str):
    return pytest.param(lambda tmp: SHIPPED / f"{name}.sumtr", id=name)


SAME_STORY = [
    _shipped("glue-wrong-opening"),  # evaluation at the deck-slot proof's last round
    _shipped("glue-broken-link"),  # link of manifest layer 2, at its claim
    _case("stale-coefficient", "gkr-product", fault="stale-coefficient", fault_instance=1),
    _case("wrong-table", "zerocheck", fault="open-wrong-table"),
    _case("drop-eq", "zerocheck-eq", fault="drop-eq@3"),
    _case("squeeze-after-layer1", "gkr-product", retouch=bump_squeeze(1)),
    _case("squeeze-before-layer1", "gkr-product", retouch=bump_squeeze(0)),
    _written("no-variables", NO_VARIABLES),
    _written("broken-batch", BROKEN_BATCH),
]


@pytest.mark.parametrize("make", SAME_STORY)
def test_the_app_and_check_name_the_same_first_failure_in_the_same_words(make, tmp_path, capsys):
    path = make(tmp_path)
    doc, text = checked(path, capsys)
    model = opened(path)
    first = model.failures[0]
    expected = doc["first_failure"]
    assert (first[0], first[1], model.failure_checks[first][0]) == (
        expected["instance"], expected["round"], expected["check"])
    assert model.verdict() == doc["verdict"] == "reject"
    assert f"REJECTED at {model.place(first)}, check {expected['check']}:" in text


def test_every_glue_check_of_an_honest_chain_passes_with_the_replays_values(tmp_path, capsys):
    path = SHIPPED / "ferries-fingerprint.sumtr"
    doc, _ = checked(path, capsys)
    model = opened(path)
    assert model.verdict() == doc["verdict"] == "accept" and model.failures == []
    for summary in doc["instances"]:
        index = summary["index"]
        link, evaluation = model.glue.link[index], model.glue.evaluation[index]
        assert (str(link.expected), str(link.found), link.status) == (
            summary["link"]["expected"], summary["link"]["found"], "pass")
        assert (str(evaluation.expected), evaluation.status) == (summary["evaluation"]["expected"], "pass")
    checks = model.glue.squeeze_checks()
    assert [c.status for c in checks] == ["pass"] * 3
    assert [c.derived for c in checks] == [c.record.value for c in checks]


def test_a_squeeze_sent_wrong_shows_the_value_the_schedule_derives_which_check_expects(tmp_path, capsys):
    path = glued_events(tmp_path / "p.jsonl", "gkr-product", retouch=bump_squeeze(1))
    doc, _ = checked(path, capsys)
    model = opened(path)
    wrong = [c for c in model.glue.squeeze_checks() if c.status == "fail"]
    assert len(wrong) == 1
    assert (str(wrong[0].derived), str(wrong[0].record.value)) == (
        doc["first_failure"]["expected"], doc["first_failure"]["found"])


def test_every_squeeze_shown_is_the_replays_own_result_in_stream_order():
    """The model re-derives nothing: each squeeze's value and status are the replay's."""
    from stepper.transcript.model import Squeeze
    from stepper.verify.replay import Replay
    from stepper.verify.glue_results import SqueezeResult

    model = opened(SHIPPED / "ferries-fingerprint.sumtr")
    records = [r for r in model.records if type(r).__name__ != "Note"]
    replay = Replay(keep_rounds=True)
    results = [r for record in records for r in replay.feed(record) if isinstance(r, SqueezeResult)]
    checks = model.glue.squeeze_checks()
    assert len(checks) == len(results) == sum(isinstance(r, Squeeze) for r in records) > 0
    assert [c.record.name for c in checks] == [r.name for r in results]
    assert [(c.derived, c.status) for c in checks] == [(r.expected, r.status) for r in results]
    assert all(c.status == "pass" for c in checks)


def test_a_linked_instance_has_a_round_0_row_and_its_last_round_carries_the_evaluation():
    model = opened(SHIPPED / "glue-broken-link.sumtr")
    link = model.glue.link[1]
    rows = model.rows(1, width=20)
    assert rows[0].cells()[:2] == ("0 link", "✕ fail")
    assert rows[0].claim_in == str(link.expected) and rows[0].claim_out == str(model.instances[1].start.claim)
    assert [r.round for r in rows] == [0, 1, 2]
    assert rows[-1].cells()[1] == f"■ pass {EVALUATION_MARK}■"
    assert model.strip_line(1) == f"✕{LINK_MARK}✕■┆■{EVALUATION_MARK}■"
    assert model.first_round(1) == 0
    plain = opened(SHIPPED / "ferries-honest.sumtr")
    assert plain.first_round(0) == 1 and plain.rows(0)[0].round == 1


def test_stepping_counts_the_link_row_as_a_round_both_ways():
    model = opened(SHIPPED / "glue-broken-link.sumtr")  # 1 round, then 2, then 3; each with a link row
    assert model.step((0, 1), 1) == (1, 0)
    assert model.step((1, 0), 1) == (1, 1)
    assert model.step((1, 0), -1) == (0, 1)
    assert model.step((0, 1), 4) == (2, 0)
    assert model.step((2, 0), -4) == (0, 1)
    assert model.step((0, 0), -1) == (0, 0)
    assert model.step((2, 3), 1) == (2, 3)


def test_the_evaluation_waits_for_its_openings_and_is_not_counted_as_passed(tmp_path):
    model = opened(SHIPPED / "glue-wrong-opening.sumtr")
    records = model.records
    cut = next(i for i, r in enumerate(records) if type(r).__name__ == "Opening" and r.instance == 1)
    partial = new_model()
    partial.feed_all(records[:cut])
    partial.finish("incomplete", "missing", final=False)
    partial.report()
    assert partial.strip_line(1).endswith(f"┆■{EVALUATION_MARK}◌")
    assert partial.failures == [] and partial.verdict() == "incomplete"


def test_seeking_a_value_finds_an_opening_on_its_instances_last_round_and_a_link_value_at_round_0():
    from stepper.app.value_search import find_value

    model = opened(SHIPPED / "glue-broken-link.sumtr")
    assert find_value(model, "533427179", (0, 0)) == (0, 1)  # manifest.v2.hi, opened after layer 1
    assert find_value(model, str(model.glue.link[1].expected), (0, 1)) == (1, 0)


def test_an_instance_of_no_variables_shows_its_evaluation_on_its_round_0_row(tmp_path):
    from stepper.app.readout import round_lines

    model = opened(_written("no-variables", NO_VARIABLES).values[0](tmp_path))
    text = "\n".join(line.text() for line in round_lines(model, (0, 0)))
    assert "link: ■ pass (link)" in text and "evaluation: ✕ fail (evaluation)" in text
    assert text.splitlines()[2].startswith("evaluation: ✕ fail: final_expr gives 5, the reduced claim is 10")
    assert model.strip_line(0) == f"■{LINK_MARK}{EVALUATION_MARK}✕"


def test_a_glue_expression_the_replay_cannot_evaluate_stops_the_read_with_checks_reason(tmp_path, capsys):
    path = _written("index-past-end", [
        {"type": "field", "name": "babybear"},
        {"type": "value", "name": "tau", "value": [5, 6, 7]},
        {"type": "instance", "name": "fares.zero", "num_vars": 1, "degree": 1, "claim": 10, "final_expr": "tau[5]"},
        {"type": "round", "evals": [3, 7]},
        {"type": "challenge", "value": 9},
    ]).values[0](tmp_path)
    capsys.readouterr()
    assert main(["check", str(path)]) == 2
    reason = capsys.readouterr().err.strip().removeprefix("stepper check: ")
    source = TranscriptSource(path)
    model = source.open(strict=False)
    assert source.problem == reason  # the replay's refusal, word for word
    assert model.verdict() == "incomplete" and model.failures == []  # the record it refused is not replayed
    assert model.round_count == 1


def test_a_failed_batch_has_a_round_0_row_with_the_combined_claim_against_the_claim_sent(tmp_path):
    from stepper.app.readout import round_lines
    path = tmp_path / "broken-batch.jsonl"
    path.write_text("".join(json.dumps(p) + "\n" for p in BROKEN_BATCH))
    model = opened(path)
    assert model.first_round(1) == 0 and model.first_round(0) == 1
    row = model.rows(1)[0]
    assert (row.round, row.label, row.claim_in.strip(), row.claim_out.strip()) == (0, "batch", "17", "18")
    lines = {line.label: line.value for line in round_lines(model, (1, 0))}
    assert "fail" in lines["batch check"] and lines["claimed sum"] == "18"
