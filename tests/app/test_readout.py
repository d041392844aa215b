"""Readouts: the summary carries the caution; a compressed round shows its recovered value."""

from __future__ import annotations

from proofs import P, brackwater_payloads
from test_proof_model import model_of

from stepper.app.readout import round_lines, summary_lines


def test_the_summary_warns_that_a_pass_is_not_a_soundness_proof():
    model = model_of(brackwater_payloads())
    text = "\n".join(line.text() for line in summary_lines(model))
    assert "verdict: accept" in text
    assert "evidence about this one run" in text
    assert "soundness" in text and "babybear (p = 2013265921)" in text


def test_a_round_in_evals_no_1_form_shows_g1_recovered_from_the_claim():
    payloads = brackwater_payloads(instances=("deck-slots-zero",))
    model = model_of(payloads)
    claim = payloads[2]["claim"]
    g0 = payloads[3]["evals"][0]
    lines = {line.label: line.value for line in round_lines(model, (0, 1))}
    # evals-no-1 leaves g(1) out: g(1) = claim - g(0) (common practice, no source)
    assert lines["recovered g(1)"] == str((claim - g0) % P)
    assert lines["g(1)"] == str((claim - g0) % P)
    assert lines["re-derived"].endswith("(same)")
