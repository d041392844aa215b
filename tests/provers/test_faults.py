"""Every named fault is caught by the verifier and named by the matching root-cause probe."""

from __future__ import annotations

from pathlib import Path

import pytest

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.faults import FAULTS, GLUE_FAULT_KINDS, Fault, montgomery_radix, parse_fault
from stepper.provers.generic import prove_sum
from stepper.provers.permcheck import prove_permutation_direct
from stepper.provers.reference import random_permutation_statement
from stepper.verify.replay import replay_transcript
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
GOLDILOCKS = get_field(NAMED_PRIMES["goldilocks"])

# fault -> (verifier's failing round and check for mu = 5, probe that names it). Where the verifier
# notices follows from the sumcheck checks (common practice, no source): a scaled or wrong round K
# breaks g(0) + g(1) = claim at K; a dropped last evaluation keeps g(0), g(1), so the wrong g(r) shows
# at K + 1 (or at the final check after the last round); a challenge used one round late changes
# round K + 1; after a switch of binding order every sum still holds (the sum over the remaining
# variables does not depend on the order), so only the final check can see it.
EXPECTED = {
    "flip-order@1": (None, "variable-order"),
    "flip-order@2": ((5, "final"), "variable-order"),
    "flip-order@4": ((5, "final"), "variable-order"),
    "reverse-point": ((5, "final"), "reversed-point"),
    "stale-challenge@2": ((3, "sum"), "challenge-shift"),
    "stale-challenge@3": ((4, "sum"), "challenge-shift"),
    "stale-challenge@4": ((5, "sum"), "challenge-shift"),
    "montgomery@1": ((1, "sum"), "montgomery"),
    "montgomery@2": ((2, "sum"), "montgomery"),
    "montgomery@5": ((5, "sum"), "montgomery"),
    "product-of-sums@1": ((1, "sum"), "product-of-sums"),
    "product-of-sums@2": ((2, "sum"), "product-of-sums"),
    "product-of-sums@4": ((4, "sum"), "product-of-sums"),
    "drop-eval@2": ((3, "sum"), "point-count"),
    "drop-eval@4": ((5, "sum"), "point-count"),
    "drop-eval@5": ((5, "final"), "point-count"),
    "negate-claim": ((1, "sum"), "negated"),
}


def _perm_proof(field, fault):
    statement = random_permutation_statement(field, 5, seed=8)
    return run_prover(field, lambda ch, c: prove_permutation_direct(ch, c, statement), fault)


def test_every_fault_name_is_covered_here():
    # the glue faults act between sumchecks: test_openings.py, test_gkr.py and test_eqfactored.py cover them
    assert {text.split("@")[0] for text in EXPECTED} | {"unbound-claim"} | set(GLUE_FAULT_KINDS) == set(FAULTS)


@pytest.mark.parametrize("text", sorted(EXPECTED))
def test_each_fault_is_rejected_where_the_verifier_can_see_it(text):
    _, transcript, _ = _perm_proof(BABYBEAR, parse_fault(text))
    report = replay_transcript(transcript)
    assert report.verdict == "reject"
    where, _ = EXPECTED[text]
    if where is not None:
        assert (report.first_failure.round, report.first_failure.check) == where


@pytest.mark.parametrize("text", sorted(EXPECTED))
def test_each_fault_is_named_by_the_matching_root_cause_probe(text, tmp_path):
    import json

    from stepper.provers.engine import witness_payload
    from stepper.diagnose.rootcause import diagnose
    from stepper.diagnose.witness import load_witness

    run, transcript, _ = _perm_proof(BABYBEAR, parse_fault(text))
    path = tmp_path / "witness.json"
    path.write_text(json.dumps(witness_payload(BABYBEAR, run.witness)))
    diagnosis = diagnose(transcript, load_witness(str(path)), replay_transcript(transcript))
    probes = {finding["probe"] for finding in diagnosis.findings_json()}
    assert EXPECTED[text][1] in probes, diagnosis.findings_json()
    cause = diagnosis.root_cause_json()
    assert (cause["round"], cause["check"]) == _first_wrong_message(text)


def _first_wrong_message(text):
    """Where the witness must blame the prover: round K for a fault at round K, except a
    challenge used one round late, which first changes round K + 1; the claim is round 0 and
    the final value belongs to the last round (mu = 5)."""
    name, _, at = text.partition("@")
    if name == "negate-claim":
        return (0, "claim")
    if name == "reverse-point":
        return (5, "final")
    return (int(at) + (name == "stale-challenge"), "honest-poly")


def test_unbound_claim_changes_the_built_in_challenges_and_the_weak_plug_in_is_flagged():
    import sys

    import numpy as np

    samples = str(Path(__file__).resolve().parents[2] / "samples")
    sys.path.insert(0, samples)
    try:
        from weak_schedule import derive
    finally:
        sys.path.remove(samples)
    rng_tables = {"a": BABYBEAR.vrandom(16, np.random.default_rng(1))}
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_sum(ch, c, "s", rng_tables, "a * a"),
                                  Fault("unbound-claim"))
    built_in = replay_transcript(transcript)
    assert (built_in.first_failure.round, built_in.first_failure.check) == (1, "challenge")
    weak = replay_transcript(transcript, challenger=derive)
    assert weak.verdict == "accept"
    assert any(f.kind == "unbound-claim" for f in weak.findings)


@pytest.mark.parametrize("k", [2, 3])
def test_switching_the_binding_order_part_way_is_rejected(k):
    _, transcript, _ = _perm_proof(BABYBEAR, Fault("flip-order", k))
    assert replay_transcript(transcript).verdict == "reject"


def test_montgomery_radix_is_the_usual_word_size_power_of_two():
    # common practice, no source: R = 2^32 for 31-bit primes, 2^64 for Goldilocks
    assert montgomery_radix(BABYBEAR) == pow(2, 32, BABYBEAR.p)
    assert montgomery_radix(GOLDILOCKS) == pow(2, 64, GOLDILOCKS.p)


@pytest.mark.parametrize("text, message", [
    ("melt-down", "expected a fault among"),
    ("reverse-point@3", "expected no @ROUND"),
    ("drop-eval@x", "positive integer"),
    ("stale-challenge@1", "K >= 2"),
    ("montgomery@0", "round >= 1"),
])
def test_bad_fault_specs_are_usage_errors(text, message):
    with pytest.raises(UsageError, match=message):
        parse_fault(text)


def test_claim_faults_refuse_a_zero_claim():
    from stepper.provers.generic import prove_zero

    tables = {"a": BABYBEAR.vec([0] * 8)}
    with pytest.raises(UsageError, match="non-zero claim"):
        run_prover(BABYBEAR, lambda ch, c: prove_zero(ch, c, "z", tables, ["a"]), Fault("negate-claim"))
