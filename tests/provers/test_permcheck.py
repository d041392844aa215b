"""The direct permutation check: its claim is g~(alpha), its transcripts pass the verifier."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers.permcheck import PermStatement, prove_permutation_direct
from stepper.provers.reference import random_permutation_statement
from stepper.verify.replay import replay_transcript
from tests.provers.helpers import plain_mle, run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


def test_claim_equals_the_brute_force_mle_of_g_at_the_permutation_point():
    # independent reference: g~(alpha) by the Lagrange sum over the hypercube with plain ints,
    # and the identity g~(alpha) = sum_y f(y) eq(alpha, sigma^-1(y)) (common practice, no source)
    p = BABYBEAR.p
    statement = random_permutation_statement(BABYBEAR, 4, seed=5)
    run, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_direct(ch, c, statement))
    claim = transcript.instances[0].start.claim
    inverse = [int(v) for v in statement.inverse()]
    tables = run.witness[0].tables
    # alpha_i is the value table e_i takes where bit i of sigma^-1 is set
    alpha = [int(tables[f"e{i + 1}"][next(y for y in range(16) if inverse[y] >> i & 1)]) for i in range(4)]
    assert claim == plain_mle([int(v) for v in statement.g], alpha, p)
    via_f = 0
    for y in range(16):
        weight = 1
        for i, a in enumerate(alpha):
            weight = weight * (a if inverse[y] >> i & 1 else 1 - a) % p
        via_f = (via_f + int(statement.f[y]) * weight) % p
    assert via_f == claim


@pytest.mark.parametrize("spec", [{"name": "babybear"}, {"name": "goldilocks"}, {"name": "bn254"},
                                  {"name": "babybear", "extension_degree": 4}])
def test_direct_transcripts_are_accepted_over_every_kind_of_field(spec):
    field = field_from_spec(spec)
    statement = random_permutation_statement(field, 4, seed=2)
    _, transcript, _ = run_prover(field, lambda ch, c: prove_permutation_direct(ch, c, statement))
    report = replay_transcript(transcript)
    assert report.verdict == "accept", report.first_failure
    assert transcript.instances[0].start.degree == 5  # mu + 1


def test_a_false_permutation_fails_the_first_round():
    statement = random_permutation_statement(BABYBEAR, 5, seed=3)
    g = statement.g.copy()
    g[0], g[1] = g[1], g[0]  # the log no longer follows sigma
    false = PermStatement(statement.f, g, statement.sigma)
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_direct(ch, c, false))
    report = replay_transcript(transcript)
    assert report.verdict == "reject"
    assert (report.first_failure.round, report.first_failure.check) == (1, "sum")


def test_direct_round_one_does_mu_plus_two_points_times_mu_products_per_pair_plus_folds():
    mu = 6
    statement = random_permutation_statement(BABYBEAR, mu, seed=1)
    run, _, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_direct(ch, c, statement))
    half = 1 << (mu - 1)
    assert run.instances[0].round_mults[0] == half * ((mu + 2) * mu + (mu + 1))


def test_statement_refuses_a_non_permutation():
    from stepper.errors import InputError

    with pytest.raises(InputError, match="permutation"):
        PermStatement(np.zeros(4, dtype=np.uint64), np.zeros(4, dtype=np.uint64), np.array([0, 0, 1, 2]))


@settings(max_examples=8, deadline=None)
@given(mu=st.integers(1, 5), seed=st.integers(0, 10_000))
def test_random_permutations_are_always_accepted(mu, seed):
    statement = random_permutation_statement(BABYBEAR, mu, seed)
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_direct(ch, c, statement))
    assert replay_transcript(transcript).verdict == "accept"
