"""The planner predicts the grouped prover's multiplications exactly and recommends the cheapest."""

from __future__ import annotations

import numpy as np
import pytest

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.planner import direct_cost, grouped_cost, measure_buckets, plan
from stepper.provers.bucketing import bit_tables, split_groups
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.permcheck import prove_permutation_direct
from stepper.provers.reference import random_permutation_statement
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


@pytest.mark.parametrize("mu, groups", [(4, 2), (5, 2), (7, 3), (9, 4)])  # (4, 2), switch 5: every round bucketed
def test_prediction_equals_the_prover_counter_for_every_switch_round(mu, groups):
    statement = random_permutation_statement(BABYBEAR, mu, seed=mu)
    parts = split_groups(mu, groups)
    counts, _ = measure_buckets(bit_tables(statement.inverse(), mu), parts, mu)
    padded = counts + [[1 << (mu - k) for _ in parts] for k in range(len(counts) + 1, mu + 1)]
    for switch in (1, 2, 3, 5, None):
        _, _, counter = run_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, groups,
                                                                                     switch_round=switch))
        layer1, layer2, _ = grouped_cost(mu, [len(g) for g in parts], padded, switch)
        assert layer1 + layer2 == counter.total


def test_direct_prediction_equals_the_direct_prover_counter():
    statement = random_permutation_statement(BABYBEAR, 6, seed=1)
    _, _, counter = run_prover(BABYBEAR, lambda ch, c: prove_permutation_direct(ch, c, statement))
    assert direct_cost(6) == counter.total


def test_recommendation_is_the_cheapest_row_and_beats_direct_at_moderate_sizes():
    sigma = np.random.default_rng(2).permutation(1 << 10)
    inverse = np.argsort(sigma)
    result = plan(10, inverse, BABYBEAR.p ** 4)
    assert result.recommended.total == min(r.total for r in result.rows)
    assert result.recommended.total < result.direct
    assert {r.groups for r in result.rows} == set(range(1, 11))


def test_soundness_error_is_the_union_of_the_four_bounds():
    # sumcheck: v * d / |F| per instance; Schwartz-Zippel for alpha and the batch (common practice, no source)
    inverse = np.arange(16)
    result = plan(4, inverse, 101, groups=[2])
    row = result.rows[0]
    mu, L, c = 4, 2, 2
    assert row.soundness * 101 == mu + mu * (L + 1) + (L - 1) + mu * (c + 1)
    assert result.direct_soundness * 101 == mu + mu * (mu + 1)


def test_a_structured_permutation_measures_fewer_buckets_than_a_random_one():
    mu = 8
    identity = plan(mu, np.arange(1 << mu), BABYBEAR.p, groups=[4])
    shuffled = plan(mu, np.argsort(np.random.default_rng(0).permutation(1 << mu)), BABYBEAR.p, groups=[4])
    def first_round(result):
        return next(r.bucket_counts[0] for r in result.rows if r.switch_round == 5)
    assert first_round(identity) < first_round(shuffled)


def test_group_counts_outside_range_are_usage_errors():
    with pytest.raises(UsageError, match="group counts"):
        plan(3, np.arange(8), 101, groups=[4])
    with pytest.raises(UsageError, match="2\\^3"):
        plan(3, np.arange(4), 101)
