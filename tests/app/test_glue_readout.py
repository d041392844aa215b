"""The glue's readout lines (stepper/app/glue_readout.py, used by stepper/app/readout.py).

Expected and found values are those `stepper check --json` reports for the same file (its
`link` and `evaluation` objects per instance, contract 3); the openings are the file's own
events. Every verdict must read by symbol and word, not by colour alone.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parents[1]))  # the JSON contract helper

from json_contracts import conforming  # noqa: E402
from proofs import SHIPPED, glued_events  # noqa: E402

from stepper.app import glue_readout  # noqa: E402
from stepper.app.proof_model import ProofModel  # noqa: E402
from stepper.app.readout import round_lines, statement_lines  # noqa: E402
from stepper.app.source import TranscriptSource  # noqa: E402
from stepper.cli.main import main  # noqa: E402


def opened(path: Path) -> ProofModel:
    model = TranscriptSource(path).open()
    model.report()
    return model


def check_json(path: Path, capsys) -> dict:
    capsys.readouterr()
    main(["check", str(path), "--json"])
    return conforming(capsys.readouterr().out, "check")


def text_of(lines) -> str:
    return "\n".join(line.text() for line in lines)


def test_the_link_row_shows_claim_expr_its_value_the_claim_sent_and_what_it_is_built_from(capsys):
    path = SHIPPED / "glue-broken-link.sumtr"
    link = check_json(path, capsys)["instances"][1]["link"]
    lines = round_lines(opened(path), (1, 0))
    text = text_of(lines)
    assert f"claim_expr: {link['expr']}" in text
    assert f"gives: {link['expected']}" in text and f"claim sent: {link['found']}" in text
    assert "link: ✕ fail (link)" in text
    assert "the claim is not linked to the values it should be built from" in text  # the replay's sentence
    assert "opening: manifest.v2.lo = 895969385  (table v2.lo)" in text  # as sent in the file
    assert "squeeze: manifest.c2 = " in text and "■ same" in text  # sent, and re-derived by the schedule
    assert lines[1].value.startswith("0 of 2   ✕ fail") and lines[1].tone == "bad"


def test_the_last_round_shows_the_openings_received_and_the_evaluation_against_final_expr(capsys):
    path = SHIPPED / "glue-wrong-opening.sumtr"
    evaluation = check_json(path, capsys)["instances"][1]["evaluation"]
    text = text_of(round_lines(opened(path), (1, 5)))
    assert "evaluation: ✕ fail: final_expr gives" in text.splitlines()[2]  # at the top, before the values
    assert "openings: 2 received at this instance's point" in text
    assert "opening: occupied = 944107342" in text and "opening: length = 944107342" in text
    assert f"final_expr: {evaluation['expr']}" in text
    assert f"gives: {evaluation['expected']}" in text and f"reduced claim: {evaluation['found']}" in text
    assert "also uses: gamma, tau" in text and "value: gamma = " in text


def test_glue_sent_after_an_instance_is_listed_on_its_last_round_with_squeezes_re_derived():
    text = text_of(round_lines(opened(SHIPPED / "ferries-fingerprint.sumtr"), (0, 1)))
    assert "evaluation: ■ pass (evaluation)" in text
    assert "sent after: " in text and "squeeze: manifest.c2 = 1856562365" in text
    assert "re-derived: 1856562365  ■ same" in text


def test_a_glue_verdict_always_carries_a_symbol_and_a_word():
    for path, pos in ((SHIPPED / "glue-broken-link.sumtr", (1, 0)), (SHIPPED / "glue-wrong-opening.sumtr", (1, 5)),
                      (SHIPPED / "ferries-fingerprint.sumtr", (0, 1))):
        model = opened(path)
        lines = (glue_readout.link_lines(model, pos[0]) + glue_readout.closing_lines(model, pos[0])
                 + glue_readout.statement_glue(model, pos[0]))
        toned = [line for line in lines if line.tone in ("good", "bad")
                 and line.label in ("round", "link", "evaluation", "re-derived")]
        assert toned
        for line in toned:
            assert any(f"{s} {w}" in line.value for s, w in (("■", "pass"), ("✕", "fail"), ("■", "same"),
                                                                ("✕", "differs"))), line


def test_the_statement_names_the_link_and_evaluation_and_an_eq_factored_instance_says_so(tmp_path):
    model = opened(SHIPPED / "glue-broken-link.sumtr")
    text = text_of(statement_lines(model, 1))
    assert "link: ✕ fail: the claim against manifest.v2.lo + manifest.c2 * (manifest.v2.hi - manifest.v2.lo)" in text
    assert "evaluation: ■ pass: the reduced claim against eq(manifest.r2)" in text
    eq = opened(glued_events(tmp_path / "eq.jsonl", "zerocheck-eq"))
    first = text_of(round_lines(eq, (0, 1)))
    assert "eq-factored: sent q_k(0..2); the verifier's g_k(X) = prod_(i<k) eq(w_i, r_i)" in first
    assert "eq point w: tau" in first and "eq point w: tau" in text_of(statement_lines(eq, 0))
