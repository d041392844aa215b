"""Every bug-class probe on a transcript produced with exactly that fault by a small faulty
prover (tests/rootcause_prover.py) and by the reference provers' named faults
(stepper.provers, at round 1 and at later rounds, over several fields, forms and prover
kinds), and exactness: an unrelated fault fires no probe.

Facts used (common practice, no source): a Montgomery-form value is v * R mod p with
R = 2^32 or 2^64 (the word size) or 2^256; reducing v + p in a 64-bit word that overflows
leaves (v + p) mod 2^64; a round polynomial of degree d needs d + 1 evaluations.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from json_contracts import conforming
from rootcause_prover import Fault, prove
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.diagnose.probes import first_difference
from stepper.diagnose.rootcause import diagnose
from stepper.verify.replay import replay_transcript

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


# ----- the reference provers' named faults, at round 1 and at later rounds -------------------
# Each case: a fault of stepper.provers.faults injected into a reference prover (stepper.provers.reference),
# the round the witness must blame first, and the probe that must name it. The expected rounds follow
# from the sumcheck rules (common practice, no source): a wrong round K is the root cause at K, except
# stale-challenge@K, which folds the tables after round K with r_(K-1), so round K + 1 is the first
# wrong one. Fields, forms, orders and prover kinds vary so that each probe is met in several settings.
REFERENCE_CASES = [
    # (fault, kind, field, form, order, root-cause round, probe)
    ("flip-order@1", "generic", "babybear^4", "evals", "low-first", 1, "variable-order"),
    ("flip-order@2", "ferries", "bn254", "evals-no-1", "low-first", 2, "variable-order"),
    ("flip-order@3", "perm-direct", "goldilocks", "coeffs", "low-first", 3, "variable-order"),
    ("flip-order@4", "zerocheck", "babybear", "coeffs-no-linear", "high-first", 4, "variable-order"),
    ("flip-order@3", "perm-grouped", "babybear^4", "evals", "low-first", 3, "variable-order"),
    ("stale-challenge@2", "generic", "goldilocks", "evals", "high-first", 3, "challenge-shift"),
    ("stale-challenge@4", "perm-grouped", "babybear^4", "coeffs", "low-first", 5, "challenge-shift"),
    ("stale-challenge@3", "ferries", "babybear", "evals", "low-first", 4, "challenge-shift"),
    ("montgomery@1", "zerocheck", "bn254", "evals", "low-first", 1, "montgomery"),
    ("montgomery@3", "ferries", "goldilocks", "coeffs-no-linear", "low-first", 3, "montgomery"),
    ("montgomery@4", "perm-direct", "babybear^4", "evals-no-1", "low-first", 4, "montgomery"),
    ("product-of-sums@1", "perm-grouped", "babybear", "evals", "low-first", 1, "product-of-sums"),
    ("product-of-sums@3", "generic", "bn254", "coeffs-no-linear", "low-first", 3, "product-of-sums"),
    ("product-of-sums@2", "zerocheck", "babybear^4", "evals-no-1", "high-first", 2, "product-of-sums"),
    ("drop-eval@1", "generic", "babybear^4", "coeffs", "low-first", 1, "point-count"),
    ("drop-eval@2", "ferries", "goldilocks", "evals-no-1", "low-first", 2, "point-count"),
    ("drop-eval@4", "perm-direct", "bn254", "evals", "low-first", 4, "point-count"),
]


def _reference_diagnosis(fault_text: str, kind: str, field_name: str, form: str, order: str, num_vars: int = 5):
    from stepper.provers.channel import ListSink
    from stepper.provers.engine import witness_payload
    from stepper.provers.faults import parse_fault
    from stepper.provers.reference import ProveSpec, parse_field
    from stepper.provers.reference import prove as reference_prove
    from stepper.diagnose.witness import witness_from_map

    field = parse_field(field_name)
    spec = ProveSpec(kind, num_vars=num_vars, seed=4, fault=parse_fault(fault_text), form=form, order=order)
    sink = ListSink()
    run = reference_prove(spec, field, sink)
    transcript = sink.transcript()
    report = replay_transcript(transcript)
    return field, report, diagnose(transcript, witness_from_map(witness_payload(field, run.witness)), report)


@pytest.mark.parametrize(("fault", "kind", "field_name", "form", "order", "round_", "probe"), REFERENCE_CASES,
                         ids=[f"{c[0]}-{c[1]}-{c[2]}-{c[3]}" for c in REFERENCE_CASES])
def test_each_reference_prover_fault_is_named_by_its_probe_at_the_round_it_starts(
        fault, kind, field_name, form, order, round_, probe) -> None:
    field, report, diagnosis = _reference_diagnosis(fault, kind, field_name, form, order)
    assert report.verdict == "reject"
    cause = diagnosis.root_cause_json()
    assert (cause["instance"], cause["round"], cause["check"]) == (0, round_, "honest-poly")
    findings = {f["probe"]: f for f in diagnosis.findings_json()}
    assert list(findings) == [probe], findings  # exact: no other bug class reproduces the rounds
    evidence = findings[probe]["evidence"]
    k = int(fault.split("@")[1])
    if probe == "variable-order":
        assert evidence["from_round"] == k and evidence["declared"] == order
        assert evidence["rounds_matched"] == 5 - k + 1  # every round from the switch to the last
    elif probe == "challenge-shift":
        assert (evidence["expected_challenge"], evidence["used_challenge"]) == (f"r_{k}", f"r_{k - 1}")
    elif probe == "montgomery":
        # R is the machine word of the base prime (common practice, no source): 2^32, 2^64, 2^256
        bits = {"babybear": 32, "goldilocks": 64, "bn254": 256}[field_name.split("^")[0]]
        assert (evidence["radix"], evidence["R_mod_p"]) == (f"2^{bits}", str(pow(2, bits, field.p)))
    elif probe == "point-count":  # the last of the d + 1 evaluations is missing
        assert evidence["kind"] == "dropped" and evidence["point"] == evidence["honest_points"] - 1


def test_a_switch_of_binding_order_whose_first_round_looks_honest_is_traced_back_to_the_switch() -> None:
    # Hand-derived tables (common practice, no source: multilinear algebra over any field), independent
    # of x1, with A(x2, x3) = 1 + x2 and B(x2, x3) = 1 + x2 + 3 x3 - 2 x2 x3. Round 2 of a low-first
    # prover sums over x3 (g(t) = sum A(t, x3) B(t, x3) = 5 + 5t); bound high-first it sums over x2
    # (h(t) = sum A(x2, t) B(x2, t) = 5 + 5t): the same polynomial, so a prover that switches order at
    # round 2 sends an honest-looking round 2, and its round 3 (1 + t) B(t, r2) is the first wrong one.
    for field in (GOLDILOCKS, BABYBEAR4):
        tables = {"a": field.base.vec([1, 1, 2, 2, 1, 1, 2, 2]), "b": field.base.vec([1, 1, 2, 2, 4, 4, 3, 3])}
        transcript, witness = prove(field, tables, "a * b", degree=2, fault=Fault("other-order", 2))
        assert transcript.instances[0].rounds[1].values == (field.embed(5), field.embed(10), field.embed(15))
        diagnosis = diagnose(transcript, witness)
        assert diagnosis.root_cause_json()["round"] == 3
        finding = next(f for f in diagnosis.findings_json() if f["probe"] == "variable-order")
        assert finding["evidence"]["from_round"] == 2 and finding["evidence"]["first_wrong_round"] == 3
        assert "first shows in round 3" in finding["message"]


def test_check_command_names_a_binding_order_switch_at_round_3(tmp_path, capsys) -> None:

    from stepper.cli.main import main

    out, witness = tmp_path / "sailing.sumtr", tmp_path / "witness.json"
    assert main(["prove", "--kind", "ferries", "--num-vars", "5", "--fault", "flip-order@3", "-o", str(out),
                 "--witness-out", str(witness)]) == 0
    capsys.readouterr()
    assert main(["check", str(out), "--witness", str(witness), "--json"]) == 1
    report = conforming(capsys.readouterr().out, "check")
    cause = report["root_cause"]
    assert (cause["instance_name"], cause["round"], cause["probes"]) == ("boarding-permutation", 3, ["variable-order"])
    # every sum check holds after the switch; only the final check can see it, two rounds later
    assert (report["first_failure"]["round"], report["first_failure"]["check"]) == (5, "final")


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 2**16), mu=st.integers(2, 5), data=st.data(),
       order=st.sampled_from(["low-first", "high-first"]), form=st.sampled_from(["evals", "coeffs-no-linear"]),
       field=st.sampled_from([GOLDILOCKS, BABYBEAR4, BN254]))
def test_a_switch_of_binding_order_at_any_round_before_the_last_is_named_with_that_round(
        seed, mu, data, order, form, field) -> None:
    switch = data.draw(st.integers(1, mu - 1), label="switch round")  # at round mu both ends are one variable
    rng = np.random.default_rng(seed)
    tables = {n: field.base.vrandom(1 << mu, rng) for n in ("ledger", "scans", "eq")}
    transcript, witness = prove(field, tables, COMBINE, degree=3, order=order, form=form,
                                fault=Fault("other-order", switch), seed=seed)
    findings = {f["probe"]: f for f in diagnose(transcript, witness).findings_json()}
    evidence = findings["variable-order"]["evidence"]
    assert (evidence["from_round"], evidence["declared"], evidence["rounds_matched"]) == (switch, order, mu - switch + 1)
