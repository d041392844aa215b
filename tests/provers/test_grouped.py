"""The grouped permutation check: both layers, batching, and the bucketed second layer."""

from __future__ import annotations

import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers.bucketing import bit_tables, group_buckets, round_masks, split_groups
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.reference import random_permutation_statement
from stepper.verify.replay import replay_transcript
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


def _grouped(field, mu, groups, switch, seed=4):
    statement = random_permutation_statement(field, mu, seed)
    return run_prover(field, lambda ch, c: prove_permutation_grouped(ch, c, statement, groups, switch_round=switch))


@pytest.mark.parametrize("spec", [{"name": "babybear"}, {"name": "goldilocks"}, {"name": "bn254"},
                                  {"name": "koalabear", "extension_degree": 4}])
def test_grouped_transcripts_are_accepted_including_the_batch_check(spec):
    field = field_from_spec(spec)
    run, transcript, _ = _grouped(field, 5, 2, None)
    report = replay_transcript(transcript)
    assert report.verdict == "accept", report.first_failure
    first, second = transcript.instances
    assert (first.start.degree, second.start.degree) == (3, 4)  # L + 1 and c + 1 with c = 3
    batch = second.start.batch
    assert batch is not None and len(batch.terms) == 2
    # the layer-2 claim is the batch of the group products at layer 1's point
    expected = field.add(batch.terms[0], field.mul(batch.coefficient, batch.terms[1]))
    assert second.start.claim == expected


@pytest.mark.parametrize("switch", [2, 3, 4, 5, None])
def test_bucketed_and_direct_second_layers_send_identical_rounds(switch):
    # differential test: same inputs, same (Fiat-Shamir) challenges, every round message equal
    _, direct, _ = _grouped(BABYBEAR, 8, 4, 1)
    _, bucketed, _ = _grouped(BABYBEAR, 8, 4, switch)
    def rounds(t):
        return [(r.number, r.values, r.challenge) for inst in t.instances for r in inst.rounds]
    assert rounds(bucketed) == rounds(direct)
    assert [i.final for i in bucketed.instances] == [i.final for i in direct.instances]


def test_bucketing_counts_fewer_multiplications_from_moderate_sizes_on():
    savings = {}
    for mu in (4, 8, 12):
        direct_run, _, _ = _grouped(BABYBEAR, mu, mu // 2, 1)
        bucket_run, _, _ = _grouped(BABYBEAR, mu, mu // 2, 3)
        savings[mu] = sum(direct_run.instances[1].round_mults) - sum(bucket_run.instances[1].round_mults)
    assert savings[8] > 0 and savings[12] > savings[8]


def test_every_bit_restricted_to_round_one_is_zero_one_y_or_one_minus_y():
    # common practice for this method, no source; checked with sympy's polynomials
    y = sympy.Symbol("Y")
    allowed = {sympy.Integer(0), sympy.Integer(1), y, 1 - y}
    statement = random_permutation_statement(BABYBEAR, 6, seed=9)
    for bits in bit_tables(statement.inverse(), 6):
        masks = round_masks(bits, 1)  # (z, t) -> s(t, z)
        for z in range(len(masks)):
            restricted = sympy.expand(int(masks[z, 0]) * (1 - y) + int(masks[z, 1]) * y)
            assert restricted in allowed


def test_round_one_counts_are_at_most_four_to_the_c_and_later_rounds_within_both_bounds():
    # round 1: <= 4^c (common practice, no source); round k: <= min(2^(2^k c), 2^(mu-k)) (derived here)
    mu = 10
    _, transcript, _ = _grouped(BABYBEAR, mu, 5, 5)
    stats = transcript.instances[1].buckets
    assert {s.round for s in stats} == {1, 2, 3, 4}
    for s in stats:
        c = 2
        assert s.bound_log2 == (1 << s.round) * c
        assert s.remaining == 1 << (mu - s.round)
        assert s.count <= min(2 ** s.bound_log2, s.remaining)
        if s.round == 1:
            assert s.count <= 4 ** c
        assert s.sizes is not None and sum(s.sizes) == s.remaining and len(s.sizes) == s.count


def test_bucket_keys_agree_with_a_plain_python_grouping():
    mu, k = 7, 2
    statement = random_permutation_statement(BABYBEAR, mu, seed=11)
    bits = bit_tables(statement.inverse(), mu)
    group = split_groups(mu, 3)[0]
    occupancy = group_buckets(bits, group, k)
    plain: dict[tuple, int] = {}
    for z in range(1 << (mu - k)):
        key = tuple(int(bits[i][b + (z << k)]) for i in group for b in range(1 << k))
        plain[key] = plain.get(key, 0) + 1
    assert occupancy.count == len(plain)
    assert sorted(occupancy.sizes.tolist()) == sorted(plain.values())


def test_identity_permutation_needs_few_buckets():
    from stepper.provers.permcheck import PermStatement

    n = 1 << 8
    f = BABYBEAR.vrandom(n, np.random.default_rng(0))
    identity = PermStatement(f, f, np.arange(n))
    run, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, identity, 4))
    round1 = [s.count for s in transcript.instances[1].buckets if s.round == 1]
    assert max(round1) <= 4  # bits of the identity are plain index bits: few patterns
    assert replay_transcript(transcript).verdict == "accept"


def test_group_counts_outside_one_to_mu_and_late_switch_rounds_are_usage_errors():
    from stepper.errors import UsageError

    with pytest.raises(UsageError, match="group count"):
        _grouped(BABYBEAR, 4, 5, None)
    with pytest.raises(UsageError, match="switch-over round"):
        _grouped(BABYBEAR, 4, 2, 6)


@settings(max_examples=10, deadline=None)
@given(mu=st.integers(2, 9), groups=st.integers(1, 9), seed=st.integers(0, 10_000))
def test_bucket_counts_never_exceed_either_bound_on_random_permutations(mu, groups, seed):
    # round k: count <= min(2^(2^k c), 2^(mu - k)) (derived here); sizes add up to the remaining entries
    groups = min(groups, mu)
    statement = random_permutation_statement(BABYBEAR, mu, seed)
    bits = bit_tables(statement.inverse(), mu)
    for group in split_groups(mu, groups):
        for k in range(1, min(mu, 4) + 1):
            occupancy = group_buckets(bits, group, k)
            assert occupancy.count <= min(2 ** ((1 << k) * len(group)), 1 << (mu - k))
            assert int(occupancy.sizes.sum()) == 1 << (mu - k)


def test_layer_one_opens_f_and_each_group_product_at_its_point():
    # the openings against the MLE by its definition (a sum over the cube; common practice, no source)
    from stepper.provers.faults import Fault
    from tests.provers.glue_helpers import run_glue_prover
    from tests.provers.helpers import plain_mle

    statement = random_permutation_statement(BABYBEAR, 4, seed=12)
    run, transcript, glue = run_glue_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, 2))
    rho = [int(r.challenge) for r in transcript.instances[0].rounds]
    tables = run.witness[0].tables
    for name in ("f", "p1", "p2"):
        assert int(glue.openings[name]) == plain_mle([int(v) for v in tables[name]], rho, BABYBEAR.p)
    assert glue.starts[0] == {"final_expr": "f * p1 * p2"}
    assert [int(v) for v in glue.values["alpha"]] and replay_transcript(transcript).verdict == "accept"
    _, bad, _ = run_glue_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, 2),
                                Fault("open-wrong-table"))
    first = replay_transcript(bad).first_failure
    assert (first.instance, first.round, first.check) == (0, 4, "evaluation")
