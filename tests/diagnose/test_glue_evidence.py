"""Glue evidence: the witness root cause of an eq-factored proof, and the glue probes asked about the
verifier's first failure (values recomputed by the provers' brute-force tests; here: which probe answers)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from stepper.diagnose.glue_evidence import glue_findings
from stepper.diagnose.rootcause import diagnose
from stepper.diagnose.witness import load_witness
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.engine import witness_payload
from stepper.provers.eqfactored import prove_zero_factored
from stepper.provers.faults import Fault
from stepper.provers.generic import prove_zero
from stepper.provers.gkr import prove_grand_product
from stepper.verify.replay import replay_transcript
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p
A = [int(v) for v in np.random.default_rng(41).integers(0, P, 16)]
TABLES = {"a": BABYBEAR.vec(A), "c": BABYBEAR.vec([x * x % P for x in A])}


def _factored(fault=None, order="low-first"):
    return run_prover(BABYBEAR, lambda ch, c: prove_zero_factored(ch, c, "z", TABLES, ["a * a - c"], order=order),
                      fault)


def _diagnosed(run, transcript, tmp_path):
    path = tmp_path / "w.json"
    path.write_text(json.dumps(witness_payload(BABYBEAR, run.witness)))
    return diagnose(transcript, load_witness(str(path)), replay_transcript(transcript))


@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_an_honest_eq_factored_proof_has_no_root_cause_and_a_scaled_round_is_blamed(order, tmp_path):
    run, transcript, _ = _factored(order=order)
    assert _diagnosed(run, transcript, tmp_path).root_cause_json() is None
    run, transcript, _ = _factored(Fault("double-eq", 3), order=order)
    cause = _diagnosed(run, transcript, tmp_path).root_cause_json()
    assert (cause["round"], cause["check"]) == (3, "honest-poly")


@pytest.mark.parametrize("name, kind", [("drop-eq", "dropped"), ("double-eq", "doubled")])
def test_the_eq_factor_probe_answers_a_failed_sum_of_an_eq_factored_round(name, kind):
    _, transcript, _ = _factored(Fault(name, 2))
    report = replay_transcript(transcript)
    assert (report.first_failure.round, report.first_failure.check) == (2, "sum")
    found = glue_findings(transcript, report.first_failure)
    assert [(f.probe, f.evidence["kind"]) for f in found] == [("eq-factor", kind)]


def test_the_stale_coefficient_probe_answers_a_failed_link():
    table = BABYBEAR.vrandom(16, np.random.default_rng(42))
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, table),
                                  Fault("stale-coefficient", 1, 2))
    report = replay_transcript(transcript)
    assert (report.first_failure.instance, report.first_failure.round, report.first_failure.check) == (2, 0, "link")
    found = glue_findings(transcript, report.first_failure)
    assert [f.probe for f in found] == ["stale-coefficient"]
    assert found[0].evidence == {"expected_squeeze": "product.c3", "used_squeeze": "product.c2"}


def test_the_final_without_eq_probe_answers_a_failed_evaluation():
    rng = np.random.default_rng(43)
    a, b = BABYBEAR.vrandom(8, rng), BABYBEAR.vrandom(8, rng)
    tables = {"a": a, "b": b, "c": BABYBEAR.vmul(a, b)}
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_zero(ch, c, "z", tables, ["a * b - c"]),
                                  Fault("final-without-eq"))
    report = replay_transcript(transcript)
    assert (report.first_failure.round, report.first_failure.check) == (3, "evaluation")
    found = glue_findings(transcript, report.first_failure)
    assert [(f.probe, f.evidence) for f in found] == [("final-without-eq", {"missing": "eq(tau)"})]


def test_opening_probes_answer_a_wrong_opening_with_the_witness_tables(tmp_path):
    rng = np.random.default_rng(44)
    a, b = BABYBEAR.vrandom(16, rng), BABYBEAR.vrandom(16, rng)
    tables = {"a": a, "b": b, "c": BABYBEAR.vmul(a, b)}
    for fault, probe in ((Fault("open-reversed"), "opening-point"), (Fault("open-wrong-table"), "opening-table")):
        run, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_zero(ch, c, "z", tables, ["a * b - c"]), fault)
        report = replay_transcript(transcript)
        assert report.first_failure.check == "evaluation"
        found = glue_findings(transcript, report.first_failure, run.witness[0].tables)
        assert probe in [f.probe for f in found]
        assert glue_findings(transcript, report.first_failure) == ()  # without tables no opening probe runs
