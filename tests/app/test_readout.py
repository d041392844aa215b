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


def test_plain_evals_are_listed_once_and_compressed_values_as_sent_as_well():
    # In the plain form the values sent are g(0), g(1), ...: listing them twice would push the
    # verdict and the root cause out of the pane; a compressed form shows both.
    payloads = brackwater_payloads(instances=("boarding-permutation", "deck-slots-zero"))
    model = model_of(payloads)
    forms = [view.start.form for view in model.instances]
    plain, compressed = forms.index("evals"), forms.index("evals-no-1")
    plain_labels = [line.label for line in round_lines(model, (plain, 1))]
    assert "sent[0]" not in plain_labels and "g(0)" in plain_labels
    compressed_labels = [line.label for line in round_lines(model, (compressed, 1))]
    assert "sent[0]" in compressed_labels and "recovered g(1)" in compressed_labels
