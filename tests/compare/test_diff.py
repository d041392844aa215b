"""stepper.compare.diff: alignment, the first divergence and its classification.

Pairs come from tests/sumcheck_pairs.py (an honest plain-integer prover with the
built-in Fiat-Shamir schedule) and deliberately broken twins. Expected factors
are computed with Python's pow and sympy (a reference library), not by stepper.
"""

from __future__ import annotations

import dataclasses
import re

import jsonschema
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.compare.diff import JSON_SCHEMA, KINDS, Comparison, compare
from stepper.transcript.model import ChallengeMsg, FinalValue, InstanceStart, Note, RoundMsg
from sumcheck_pairs import BABYBEAR, Spec, brackwater_specs, fold, run_events, scale_all

SPECS = brackwater_specs()
A_EVENTS = run_events(SPECS)
A = fold(A_EVENTS)


def diff_with(**hooks: object) -> Comparison:
    return compare(A, fold(run_events(brackwater_specs(), **hooks)))  # type: ignore[arg-type]


def nth_round(n: int, change):  # a tamper hook acting on the n-th round payload sent (1-based)
    seen = {"rounds": 0}

    def hook(payload):
        if payload["type"] == "round":
            seen["rounds"] += 1
            if seen["rounds"] == n:
                payload["evals"] = change(list(payload["evals"]))
        return payload

    return hook


def assert_valid_json(c: Comparison) -> None:
    jsonschema.validate(c.to_json("a.sumtr", "b.sumtr"), JSON_SCHEMA)


def test_identical_runs_have_no_divergence():
    c = compare(A, fold(run_events(SPECS)))
    assert c.identical and c.divergence is None
    assert c.classification.kind == "identical"
    assert [p.pairing.by for p in c.pairs] == ["name", "name"]
    assert_valid_json(c)


def test_a_port_that_absorbs_one_extra_message_is_fiat_shamir_drift_at_the_first_challenge():
    c = diff_with(extra_absorb=True)
    d = c.divergence
    assert (c.classification.kind, d.element, d.instance_name, d.round) == (
        "fiat-shamir-drift", "challenge", "boarding-permutation", 1)
    assert c.pairs[0].rounds[0].same_values is True  # the round polynomial itself agrees
    assert_valid_json(c)


def test_a_wrong_evaluation_after_identical_challenges_is_prover_arithmetic_and_names_the_faulty_side():
    def bump(evals):
        evals[2] = (evals[2] + 1) % BABYBEAR
        return evals

    c = diff_with(tamper=nth_round(2, bump))
    d = c.divergence
    assert (c.classification.kind, d.element, d.round, d.index, d.detail) == (
        "prover-arithmetic", "value", 2, 2, "g(2)")
    # g(2) does not enter g(0) + g(1), so neither side breaks the sum check there
    assert "both satisfy" in c.classification.explanation and c.classification.side is None

    def bump_g1(evals):
        evals[1] = (evals[1] + 1) % BABYBEAR
        return evals

    c = diff_with(tamper=nth_round(2, bump_g1))
    assert c.classification.kind == "prover-arithmetic" and c.classification.side == "b"


@pytest.mark.parametrize("bits", [32, 64, 256])
def test_values_scaled_by_a_montgomery_radix_are_a_named_constant_factor(bits):
    radix = pow(2, bits, BABYBEAR)  # R = 2^bits mod p, computed by Python, not stepper
    c = diff_with(tamper=scale_all(radix))
    assert c.classification.kind == "constant-factor"
    assert c.divergence.element == "claim"
    assert c.classification.factor == str(radix)
    assert f"2^{bits} mod p" in c.classification.factor_name
    assert_valid_json(c)


def test_values_scaled_by_an_inverse_radix_are_named_as_such():
    inverse = int(sympy.mod_inverse(2**32, BABYBEAR))  # sympy as the reference for the inverse
    c = diff_with(tamper=scale_all(inverse))
    assert c.classification.factor == str(inverse)
    assert c.classification.factor_name.startswith("2^-32 mod p")


def test_an_arbitrary_constant_factor_is_reported_without_a_name():
    c = diff_with(tamper=scale_all(123457))
    assert c.classification.kind == "constant-factor"
    assert c.classification.factor == "123457" and c.classification.factor_name is None


@settings(max_examples=12, deadline=None)
@given(st.integers(min_value=2, max_value=BABYBEAR - 1))
def test_any_constant_factor_is_recovered_exactly(factor):
    c = diff_with(tamper=scale_all(factor))
    assert c.classification.kind == "constant-factor"
    assert int(c.classification.factor) == factor


def _shift_rounds(events, extra: bool):
    """B's instance 0 with one extra round inserted at round 2 (extra) or round 2 dropped."""
    rounds = [(e, c) for e, c in zip(events, events[1:]) if isinstance(e, RoundMsg) and e.instance == 0
              and isinstance(c, ChallengeMsg)]
    if extra:
        inserted = (RoundMsg(0, 2, (1, 2, 3)), ChallengeMsg(0, 2, 99))
        new = [rounds[0], inserted, *rounds[1:-1]]
    else:
        new = [rounds[0], *rounds[2:], (RoundMsg(0, 3, (4, 5, 6)), ChallengeMsg(0, 3, 77))]
    out = []
    for e in events:
        if isinstance(e, (RoundMsg, ChallengeMsg)) and e.instance == 0 or isinstance(e, FinalValue) and e.instance == 0:
            continue
        out.append(e)
        if isinstance(e, InstanceStart) and e.index == 0:
            for k, (r, c) in enumerate(new, start=1):
                out += [dataclasses.replace(r, round=k), dataclasses.replace(c, round=k)]
    return out


def test_an_extra_transcript_step_is_a_round_shift_forward():
    c = compare(A, fold(_shift_rounds(A_EVENTS, extra=True)))
    assert (c.classification.kind, c.classification.shift, c.divergence.round) == ("round-shift", 1, 2)


def test_a_missing_transcript_step_is_a_round_shift_backward():
    c = compare(A, fold(_shift_rounds(A_EVENTS, extra=False)))
    assert (c.classification.kind, c.classification.shift, c.divergence.round) == ("round-shift", -1, 2)


def test_challenges_listed_in_reverse_are_recognised():
    challenges = {}
    for e in A_EVENTS:
        if isinstance(e, ChallengeMsg):
            challenges.setdefault(e.instance, []).append(e.value)
    reversed_events = [
        dataclasses.replace(e, value=challenges[e.instance][-e.round]) if isinstance(e, ChallengeMsg) else e
        for e in A_EVENTS
    ]
    c = compare(A, fold(reversed_events))
    assert (c.classification.kind, c.divergence.element, c.divergence.round) == ("challenges-reversed", "challenge", 1)


def test_instances_in_another_order_are_instance_order_and_still_compared_by_name():
    c = compare(A, fold(run_events(list(reversed(SPECS)))))
    assert c.classification.kind == "instance-order"
    assert [(p.pairing.a, p.pairing.b) for p in c.pairs] == [(0, 1), (1, 0)]
    assert any("Matched by name" in r for r in c.remarks)
    assert_valid_json(c)


def test_unnamed_instances_with_claims_in_another_order_are_instance_order():
    specs = [Spec(f"instance {k}", s.tables) for k, s in enumerate(SPECS)]
    swapped = [Spec(f"instance {k}", s.tables) for k, s in enumerate(reversed(SPECS))]
    c = compare(fold(run_events(specs)), fold(run_events(swapped)))
    assert c.pairs[0].pairing.by == "name"  # the default names coincide, so they align by name ...
    assert c.classification.kind == "instance-order"  # ... and the claims reveal the reordering
    assert c.divergence.element == "claim"


def test_a_batch_of_the_same_claims_in_another_order_is_claim_order():
    batch = {"type": "batch", "coefficient": 5, "terms": [11, 22, 33]}
    a = fold(run_events(SPECS, batch=batch))
    b = fold(run_events(SPECS, batch={**batch, "terms": [22, 11, 33]}))
    c = compare(a, b)
    assert (c.classification.kind, c.divergence.element, c.divergence.index) == ("claim-order", "batch", 0)


def test_different_fields_stop_the_comparison_at_the_field():
    c = compare(A, fold(run_events(SPECS, p=101)))
    assert (c.classification.kind, c.divergence.element) == ("different-fields", "field")
    assert c.divergence.b == "F_p p=101"
    assert_valid_json(c)


def test_the_same_polynomials_in_a_compressed_form_are_an_encoding_difference():
    def compress(payload):
        if payload["type"] == "instance" and payload["name"] == "boarding-permutation":
            payload["form"] = "evals-no-1"
        if payload["type"] == "round" and len(payload["evals"]) == 3:
            payload["evals"] = [payload["evals"][0], payload["evals"][2]]
        return payload

    c = compare(A, fold(run_events(SPECS, tamper=compress)))
    assert (c.classification.kind, c.divergence.element, c.divergence.detail) == ("encoding", "statement", "form")
    assert "agree up to round 1" in c.classification.explanation  # the form is hashed, so challenges part there


def test_one_more_evaluation_of_the_same_polynomial_is_an_encoding_difference():
    x = sympy.Symbol("x")

    def extend(evals):  # g(3) of the degree-2 interpolant, computed by sympy
        poly = sympy.interpolate([(0, evals[0]), (1, evals[1]), (2, evals[2])], x)
        num, den = sympy.fraction(sympy.together(poly.subs(x, 3)))
        return [*evals, int(num) * int(sympy.mod_inverse(int(den), BABYBEAR)) % BABYBEAR]

    c = diff_with(tamper=nth_round(1, extend))
    assert (c.classification.kind, c.divergence.element, c.divergence.round) == ("encoding", "value", 1)


def test_an_incomplete_run_that_agrees_so_far_is_truncated_on_its_side():
    c = compare(A, fold(A_EVENTS[:6], "incomplete"))  # field, schedule, instance, round 1, challenge 1, round 2
    assert (c.classification.kind, c.classification.side) == ("truncated", "b")
    assert (c.divergence.element, c.divergence.round, c.divergence.b) == ("challenge", 2, None)
    c = compare(fold(A_EVENTS[:7], "incomplete"), A)
    assert (c.classification.kind, c.classification.side, c.divergence.round) == ("truncated", "a", 3)
    assert_valid_json(c)


def test_a_different_final_value_after_identical_rounds_is_final_value():
    events = [dataclasses.replace(e, value=(e.value + 1) % BABYBEAR) if isinstance(e, FinalValue) and e.instance == 1
              else e for e in A_EVENTS]
    c = compare(A, fold(events))
    assert (c.classification.kind, c.divergence.element, c.divergence.instance_name) == (
        "final-value", "final", "deck-slots-zero")


def test_different_num_vars_is_a_different_statement():
    small = [Spec(SPECS[0].name, [t[:4] for t in SPECS[0].tables]), SPECS[1]]
    c = compare(A, fold(run_events(small)))
    assert (c.classification.kind, c.divergence.detail, c.divergence.a, c.divergence.b) == (
        "statement", "num_vars", "3", "2")


def test_a_different_table_entry_is_a_different_claim():
    changed = [Spec(SPECS[0].name, [[1, *SPECS[0].tables[0][1:]], SPECS[0].tables[1]]), SPECS[1]]
    c = compare(A, fold(run_events(changed)))
    assert (c.classification.kind, c.divergence.element, c.divergence.round) == ("different-claim", "claim", 0)


def test_an_instance_only_one_side_has_is_extra_instance():
    c = compare(A, fold(run_events([*SPECS, Spec("manifest-zero", [[1, 2], [3, 4]])])))
    assert (c.classification.kind, c.classification.side, c.divergence.instance_name) == (
        "extra-instance", "b", "manifest-zero")


def test_an_instance_inserted_in_the_middle_is_reported_before_the_instances_after_it():
    c = compare(A, fold(run_events([SPECS[0], Spec("manifest-zero", [[1, 2], [3, 4]]), SPECS[1]])))
    assert (c.classification.kind, c.divergence.instance_b, c.divergence.instance_name) == (
        "extra-instance", 1, "manifest-zero")
    assert "stands before 'deck-slots-zero'" in c.remarks[0]


def test_notes_and_metadata_never_make_runs_differ():
    events = [*A_EVENTS, Note("checked by the harbour office", 0, 1)]
    b = dataclasses.replace(fold(events), header=dataclasses.replace(A.header, metadata={"label": "other"}))
    assert compare(A, b).identical


def test_every_kind_has_a_description_and_the_schema_is_valid():
    jsonschema.Draft202012Validator.check_schema(JSON_SCHEMA)
    assert all(KINDS.values())
    assert set(JSON_SCHEMA["properties"]["classification"]["properties"]["kind"]["enum"]) == set(KINDS)


# ----- pairs from the reference provers (stepper.provers), one per named fault -----------------------
from stepper.provers.channel import ListSink  # noqa: E402
from stepper.provers.faults import FAULTS, parse_fault  # noqa: E402
from stepper.provers.reference import ProveSpec, parse_field, prove  # noqa: E402

# fault -> (kind, element, round) of the first divergence against the honest run of the same sailing
EXPECTED_FAULT_DIFFS = {
    "flip-order@2": ("prover-arithmetic", "value", 2),
    "reverse-point": ("final-value", "final", 4),
    "stale-challenge@2": ("prover-arithmetic", "value", 3),  # round 2's tables fold wrongly; round 3 shows it
    "montgomery@2": ("constant-factor", "value", 2),
    "product-of-sums@2": ("prover-arithmetic", "value", 2),
    "drop-eval@2": ("prover-arithmetic", "value", 2),
    "negate-claim": ("constant-factor", "claim", 0),
    "unbound-claim": ("fiat-shamir-drift", "challenge", 1),
}


# glue faults: (prover kind, fault, instance it hits) -> (kind, element, round) of the first divergence.
# A wrong opening follows identical rounds; a claim that breaks its claim_expr is the link; a final_expr
# written differently is a link in the statement; an eq-factored round scaled by the eq factor differs
# from the honest one by that one constant on every value (common practice, no source).
EXPECTED_GLUE_DIFFS = {
    ("ferries", "open-wrong-table", 2): ("different-opening", "opening", 4),
    ("ferries", "open-other-point", 2): ("different-opening", "opening", 4),
    ("zerocheck-eq", "open-reversed", 0): ("different-opening", "opening", 4),
    ("gkr-product", "stale-coefficient", 1): ("link", "claim", 0),
    ("zerocheck-eq", "drop-eq@2", 0): ("constant-factor", "value", 2),
    ("zerocheck-eq", "double-eq@3", 0): ("constant-factor", "value", 3),
    ("zerocheck", "final-without-eq", 0): ("link", "statement", 0),
}


def reference_run(field_name: str, fault: str | None = None, kind: str = "ferries", mu: int = 4, instance: int = 0):
    sink = ListSink()
    prove(ProveSpec(kind, num_vars=mu, fault=None if fault is None else parse_fault(fault, instance)),
          parse_field(field_name), sink)
    return sink.transcript()


def test_every_named_fault_has_an_expected_diff():
    glue = {fault.split("@")[0] for _, fault, _ in EXPECTED_GLUE_DIFFS}
    assert {f.split("@")[0] for f in EXPECTED_FAULT_DIFFS} | glue == set(FAULTS)


@pytest.mark.parametrize("kind, fault, instance", sorted(EXPECTED_GLUE_DIFFS))
def test_glue_faults_are_classified(kind, fault, instance):
    c = compare(reference_run("babybear", kind=kind), reference_run("babybear", fault, kind=kind, instance=instance))
    d = c.divergence
    assert (c.classification.kind, d.element, d.round) == EXPECTED_GLUE_DIFFS[(kind, fault, instance)]
    assert d.instance_a == instance
    assert_valid_json(c)


@pytest.mark.parametrize("fault", sorted(EXPECTED_FAULT_DIFFS))
def test_reference_prover_faults_are_classified(fault):
    honest = reference_run("babybear")
    c = compare(honest, reference_run("babybear", fault))
    d = c.divergence
    assert (c.classification.kind, d.element, d.round) == EXPECTED_FAULT_DIFFS[fault]
    assert d.instance_name == "boarding-permutation"
    assert_valid_json(c)


@pytest.mark.parametrize("field_name, bits", [("babybear^4", 32), ("goldilocks", 64), ("bn254", 256)])
def test_the_montgomery_fault_is_named_by_each_fields_radix(field_name, bits):
    honest = reference_run(field_name, kind="generic", mu=3)
    c = compare(honest, reference_run(field_name, "montgomery@1", kind="generic", mu=3))
    field = parse_field(field_name)
    assert c.classification.kind == "constant-factor"
    assert c.classification.factor == field.fmt(field.embed(pow(2, bits, field.p)))  # R = 2^bits mod p by pow
    assert c.classification.factor_name == f"2^{bits} mod p (a Montgomery radix)"
    # every value of the scaled round backs the ratio, and the sentence counts them
    assert re.search(r"checked on [2-9] values\)", c.classification.explanation)


def test_the_negated_claim_is_reported_as_a_sign_slip():
    c = compare(reference_run("babybear"), reference_run("babybear", "negate-claim"))
    assert c.classification.factor_name == "-1 (a sign flip)" and "negated" in c.classification.explanation
