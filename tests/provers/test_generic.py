"""Generic sumcheck over a combine expression, and the zero-check built on it."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers.engine import ExprSummand
from stepper.provers.generic import prove_sum, prove_zero
from stepper.field.expr import parse
from stepper.verify.replay import replay_transcript
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


def _variable_tables(field, mu):
    """x1, x2, ... as multilinear tables: entry i holds bit j of i for x_(j+1)."""
    return {f"x{j + 1}": field.vec([i >> j & 1 for i in range(1 << mu)]) for j in range(mu)}


def test_textbook_worked_example_sum_and_first_round():
    # J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1 (values from memory, recomputed
    # below by brute force): g = 2*x1^3 + x1*x3 + x2*x3 sums to 12 over {0,1}^3 and its first round
    # polynomial is 8X^3 + 2X + 1, i.e. 1, 11, 69, 223 at 0..3.
    tables = _variable_tables(BABYBEAR, 3)
    combine = "2 * x1 * x1 * x1 + x1 * x3 + x2 * x3"
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_sum(ch, c, "thaler", tables, combine))
    brute = sum(2 * a**3 + a * c + b * c for a, b, c in itertools.product((0, 1), repeat=3))
    inst = transcript.instances[0]
    assert inst.start.claim == brute == 12
    assert inst.rounds[0].values == (1, 11, 69, 223)
    assert replay_transcript(transcript).verdict == "accept"


@pytest.mark.parametrize("order", ["low-first", "high-first"])
@pytest.mark.parametrize("form", ["evals", "evals-no-1", "coeffs", "coeffs-no-linear"])
def test_every_order_and_form_is_accepted(order, form):
    rng = np.random.default_rng(3)
    tables = {n: BABYBEAR.vrandom(32, rng) for n in "abc"}
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_sum(ch, c, "s", tables, "a * b - 3 * c + a",
                                                                    order=order, form=form))
    start = transcript.instances[0].start
    assert (start.order, start.form) == (order, form)
    assert replay_transcript(transcript).verdict == "accept"


@settings(max_examples=6, deadline=None)
@given(mu=st.integers(1, 4), seed=st.integers(0, 1000))
def test_claim_is_the_plain_integer_sum_of_the_combine(mu, seed):
    p = BABYBEAR.p
    rng = np.random.default_rng(seed)
    tables = {n: BABYBEAR.vrandom(1 << mu, rng) for n in "ab"}
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_sum(ch, c, "s", tables, "a * a * b + 5"))
    plain = sum(int(a) * int(a) * int(b) + 5 for a, b in zip(tables["a"], tables["b"])) % p
    assert transcript.instances[0].start.claim == plain


def test_products_are_counted_per_multiplication_node_and_entry():
    summand = ExprSummand.of(parse("a * b * c + 2 * a - (3 * 4)"))
    assert summand.products == 3  # a*b, (a*b)*c, 2*a; the constant product 3*4 is free


@pytest.mark.parametrize("spec", [{"name": "babybear"}, {"name": "babybear", "extension_degree": 4},
                                  {"name": "goldilocks"}])
def test_zero_check_of_vanishing_constraints_is_accepted_with_claim_zero(spec):
    field = field_from_spec(spec)
    rng = np.random.default_rng(5)
    a, b = field.vrandom(16, rng), field.vrandom(16, rng)
    tables = {"a": a, "b": b, "c": field.vmul(a, b)}
    run, transcript, _ = run_prover(field, lambda ch, c: prove_zero(ch, c, "z", tables, ["a * b - c", "c - b * a"]))
    assert field.is_zero(transcript.instances[0].start.claim)
    assert transcript.instances[0].start.degree == 3  # eq times a degree-2 constraint
    assert replay_transcript(transcript).verdict == "accept"
    assert run.witness[0].combine.startswith("eq * (")


def test_zero_check_of_a_constraint_broken_at_one_entry_is_rejected():
    rng = np.random.default_rng(6)
    a = BABYBEAR.vrandom(16, rng)
    c = BABYBEAR.vmul(a, a)
    c[7] = (int(c[7]) + 1) % BABYBEAR.p
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, cnt: prove_zero(ch, cnt, "z", {"a": a, "c": c}, ["a * a - c"]))
    report = replay_transcript(transcript)
    assert report.verdict == "reject" and report.first_failure.round == 1


def test_missing_tables_and_a_reserved_eq_name_are_usage_errors():
    tables = {"a": BABYBEAR.vec([1, 2])}
    with pytest.raises(UsageError, match="no table|none for"):
        run_prover(BABYBEAR, lambda ch, c: prove_sum(ch, c, "s", tables, "a * b"))
    with pytest.raises(UsageError, match="'eq'"):
        run_prover(BABYBEAR, lambda ch, c: prove_zero(ch, c, "z", {"eq": tables["a"]}, ["eq"]))
