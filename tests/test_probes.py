"""Every bug-class probe on a transcript produced with exactly that fault by a small faulty
prover (tests/rootcause_prover.py), and exactness: an unrelated fault fires no probe.

Facts used (common practice, no source): a Montgomery-form value is v * R mod p with
R = 2^32 or 2^64 (the word size) or 2^256; reducing v + p in a 64-bit word that overflows
leaves (v + p) mod 2^64; a round polynomial of degree d needs d + 1 evaluations.
"""

from __future__ import annotations

import numpy as np
import pytest

from rootcause_prover import Fault, prove
from stepper.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.probes import first_difference
from stepper.rootcause import diagnose
from stepper.verify import replay_transcript

GOLDILOCKS = get_field(NAMED_PRIMES["goldilocks"])
GOLDILOCKS2 = get_field(NAMED_PRIMES["goldilocks"], DEFAULT_IRREDUCIBLES[("goldilocks", 2)])
BABYBEAR4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
BN254 = get_field(NAMED_PRIMES["bn254"])
COMBINE = "ledger * scans * eq - 2 * ledger"

CASES = [
    # (fault, field, probe expected, root-cause round, check)
    (Fault("other-order"), BABYBEAR4, "variable-order", 1, "honest-poly"),
    (Fault("other-order", 3), GOLDILOCKS, "variable-order", 3, "honest-poly"),
    (Fault("reversed-final"), BABYBEAR4, "reversed-point", 4, "final"),
    (Fault("challenge-ahead", 3), GOLDILOCKS2, "challenge-shift", 3, "honest-poly"),
    (Fault("challenge-behind", 3), GOLDILOCKS2, "challenge-shift", 3, "honest-poly"),
    (Fault("montgomery", 2, 32), BABYBEAR4, "montgomery", 2, "honest-poly"),
    (Fault("montgomery", 2, 64), GOLDILOCKS, "montgomery", 2, "honest-poly"),
    (Fault("montgomery", 3, 256), BN254, "montgomery", 3, "honest-poly"),
    (Fault("montgomery-claim", 0, 64), BABYBEAR4, "montgomery", 0, "claim"),
    (Fault("product-of-sums-claim"), GOLDILOCKS, "product-of-sums", 0, "claim"),
    (Fault("product-of-sums", 2), BABYBEAR4, "product-of-sums", 2, "honest-poly"),
    (Fault("drop-point", 2), GOLDILOCKS2, "point-count", 2, "honest-poly"),
    (Fault("extra-point", 1), GOLDILOCKS2, "point-count", 1, "degree"),
    (Fault("duplicate-point", 3, 1), BABYBEAR4, "point-count", 3, "honest-poly"),
    (Fault("negate-claim"), BN254, "negated", 0, "claim"),
    (Fault("negate-value", 2, 1), BABYBEAR4, "negated", 2, "honest-poly"),
    (Fault("negate-final"), GOLDILOCKS, "negated", 4, "final"),
    (Fault("unreduced", 2, 0), GOLDILOCKS, "not-reduced", 2, "honest-poly"),
    (Fault("unreduced", 3, 2), GOLDILOCKS2, "not-reduced", 3, "honest-poly"),
]


def _tables(field, seed: int = 21):
    rng = np.random.default_rng(seed)
    return {n: field.base.vrandom(16, rng) for n in ("ledger", "scans", "eq")}


@pytest.mark.parametrize(("fault", "field", "probe", "round_", "check"), CASES,
                         ids=[f"{c[0].kind}-{c[0].round}-{c[1].describe()[:12]}" for c in CASES])
def test_probe_names_the_fault_that_produced_the_transcript(fault, field, probe, round_, check) -> None:
    transcript, witness = prove(field, _tables(field), COMBINE, degree=3, fault=fault)
    diagnosis = diagnose(transcript, witness)
    cause = diagnosis.root_cause_json()
    assert cause is not None
    assert (cause["round"], cause["check"]) == (round_, check)
    names = [f["probe"] for f in diagnosis.findings_json()]
    assert probe in names
    finding = next(f for f in diagnosis.findings_json() if f["probe"] == probe)
    assert finding["round"] == round_ and finding["instance"] == 0 and finding["evidence"]


@pytest.mark.parametrize("form", ["evals-no-1", "coeffs", "coeffs-no-linear"])
def test_probes_work_in_every_round_form(form: str) -> None:
    # in the compressed forms the verifier recovers g(1) or c1 from the claim, so a bug is
    # matched against the values as sent, not against the decoded polynomial
    for fault, probe in ((Fault("negate-value", 2, 0), "negated"), (Fault("montgomery", 2, 64), "montgomery"),
                         (Fault("product-of-sums", 1), "product-of-sums"), (Fault("other-order", 2), "variable-order"),
                         (Fault("challenge-behind", 3), "challenge-shift"), (Fault("drop-point", 2), "point-count")):
        transcript, witness = prove(BABYBEAR4, _tables(BABYBEAR4), COMBINE, degree=3, form=form, fault=fault)
        assert probe in [f["probe"] for f in diagnose(transcript, witness).findings_json()]


def test_a_sum_consistent_offset_matches_no_known_bug_class() -> None:
    transcript, witness = prove(GOLDILOCKS, _tables(GOLDILOCKS), COMBINE, degree=3,
                                fault=Fault("sum-consistent", 2, 12345))
    diagnosis = diagnose(transcript, witness)
    assert diagnosis.root_cause_json()["round"] == 2
    assert diagnosis.findings_json() == []
    assert any("No known bug class" in s for s in diagnosis.explain())


def test_the_challenge_shift_evidence_names_the_challenge_used() -> None:
    transcript, witness = prove(GOLDILOCKS2, _tables(GOLDILOCKS2), COMBINE, degree=3, fault=Fault("challenge-ahead", 3))
    finding = next(f for f in diagnose(transcript, witness).findings_json() if f["probe"] == "challenge-shift")
    assert finding["evidence"]["used_challenge"] == "r_3" and finding["evidence"]["expected_challenge"] == "r_2"


def test_a_variable_order_bug_can_pass_the_verifier_yet_is_still_found() -> None:
    # A prover consistent with the other order passes every check (the verifier cannot know the
    # intended order), which is why a passing replay is not proof the prover is right.
    transcript, witness = prove(BABYBEAR4, _tables(BABYBEAR4), COMBINE, degree=3, fault=Fault("other-order"))
    assert replay_transcript(transcript).verdict == "accept"
    finding = next(f for f in diagnose(transcript, witness).findings_json() if f["probe"] == "variable-order")
    assert finding["evidence"]["used"] == "high-first" and finding["evidence"]["rounds_matched"] == 4


def test_not_reduced_is_not_claimed_for_a_31_bit_field_where_the_sum_cannot_wrap() -> None:
    # BabyBear < 2^31: v + p < 2^32 never wraps a 32-bit word, so the probe must stay silent
    transcript, witness = prove(BABYBEAR4, _tables(BABYBEAR4), COMBINE, degree=3, fault=Fault("negate-value", 2, 0))
    assert "not-reduced" not in [f["probe"] for f in diagnose(transcript, witness).findings_json()]


def test_first_difference_extends_the_shorter_polynomial_by_interpolation() -> None:
    field = get_field(101)
    line = [3, 5]  # 3 + 2t
    assert first_difference(field, line, [3, 5, 7, 9]) is None
    assert first_difference(field, line, [3, 5, 8]) == 2
    assert first_difference(field, [1], [2]) == 0
