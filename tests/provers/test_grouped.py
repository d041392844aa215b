"""The grouped permutation check: both layers, batching, and the bucketed second layer."""

from __future__ import annotations

import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers import counting
from stepper.provers.bucketing import (
    bit_tables,
    code_buckets,
    code_masks,
    codes_of_inverse,
    group_buckets,
    group_codes,
    round_masks,
    split_groups,
)
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


@pytest.mark.parametrize("groups, k", [(3, 1), (3, 2), (3, 3), (2, 4), (1, 3)])  # (2, 4) and (1, 3): keys past 64 bits
def test_bucket_keys_agree_with_a_plain_python_grouping(groups, k):
    mu = 7
    statement = random_permutation_statement(BABYBEAR, mu, seed=11)
    bits = bit_tables(statement.inverse(), mu)
    group = split_groups(mu, groups)[0]
    occupancy = group_buckets(bits, group, k)
    plain: dict[tuple, list[int]] = {}
    for z in range(1 << (mu - k)):
        key = tuple(int(bits[i][b + (z << k)]) for i in group for b in range(1 << k))
        plain.setdefault(key, []).append(z)
    assert occupancy.count == len(plain)
    assert sorted(occupancy.sizes.tolist()) == sorted(len(zs) for zs in plain.values())
    inverse, rows = occupancy.inverse(), occupancy.rows()
    for zs in plain.values():  # one bucket per key, holding exactly the entries with that key
        assert len({int(inverse[z]) for z in zs}) == 1 and occupancy.sizes[inverse[zs[0]]] == len(zs)
    for z in range(1 << (mu - k)):  # a bucket's row of bit i: bit b is s_i(b + 2^k z)
        expected = [sum(int(bits[i][b + (z << k)]) << b for b in range(1 << k)) for i in group]
        assert [int(v) for v in rows[inverse[z]]] == expected


@pytest.mark.parametrize("groups", [1, 3, 7])
def test_group_codes_from_sigma_inverse_equal_the_codes_from_its_bit_tables(groups):
    statement = random_permutation_statement(BABYBEAR, 7, seed=13)
    bits = bit_tables(statement.inverse(), 7)
    parts = split_groups(7, groups)
    for group, code in zip(parts, codes_of_inverse(statement.inverse(), parts)):
        assert code.tolist() == group_codes(bits, group).tolist()
        assert code_buckets(code, len(group), 2).sizes.tolist() == group_buckets(bits, group, 2).sizes.tolist()


@pytest.mark.parametrize("groups, k", [(3, 1), (3, 2), (3, 3), (3, 4), (2, 5), (1, 5)])  # (1, 5): 7 * 16 bits > 64
def test_masks_from_the_codes_equal_each_bits_round_masks(groups, k):
    mu = 9
    statement = random_permutation_statement(BABYBEAR, mu, seed=14)
    bits = bit_tables(statement.inverse(), mu)
    for group in split_groups(mu, groups):
        masks = code_masks(group_codes(bits, group), len(group), k)
        assert [m.tolist() for m in masks] == [round_masks(bits[i], k).reshape(-1).tolist() for i in group]


# sha256 of `stepper prove --kind perm-grouped --num-vars 9 --groups 3 [--switch-round 4] --field F`
# with SOURCE_DATE_EPOCH=1700000000. First pinned from the prover as it stood before it worked in
# blocks (main at e932cff) and passed unchanged by the blocked one; pinned again when the second
# layer gained its glue (a squeezed beta, claim_expr, final_expr, bit openings), which changes the
# bytes on purpose. Blocks of 3 pairs and of 2^15 must both give these bytes.
PINNED = {
    ("babybear", None): "e73d79827d3d15fb36c2b6365235d85176c86ac4881b71dd232778b7a906e6ab",
    ("goldilocks", None): "3d27d48e4b33f80b3827f9297c9b6bbd2f8702837ea8a37721071a758a3702f7",
    ("babybear^4", None): "8973e6468f6401cf97fd8bfbecf0eae655d6b28bcb73b2f758bde7f765d3b346",
    ("babybear", 4): "055ef1c7326e1a0df16fb25c2ab5a2647430234b021e0c7cbeba8e8d49108dcf",
    ("goldilocks", 4): "7ff0d64a791d42ff37991017f6b73a4a8b04515c294edd635d04b2e96913523b",
    ("babybear^4", 4): "590c9e22f181db0e1892c18cc39980adf56080f21c3fbbf96c9159078cf0a5c6",
}


@pytest.mark.parametrize("field_name, switch", sorted(PINNED, key=str))
@pytest.mark.parametrize("block", [3, 1 << 15])
def test_transcripts_are_the_pinned_bytes_whatever_the_block_size(monkeypatch, tmp_path, field_name, switch, block):
    import hashlib

    from stepper.cli.main import main

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    monkeypatch.setattr(counting, "BLOCK", block)  # 3: every table of the proof in several blocks
    out = tmp_path / "p.sumtr"
    flags = ["--switch-round", str(switch)] if switch else []
    assert main(["prove", "--kind", "perm-grouped", "--num-vars", "9", "--groups", "3", "--field", field_name,
                 "-o", str(out), *flags]) == 0
    assert hashlib.sha256(out.read_bytes()).hexdigest() == PINNED[(field_name, switch)]


@pytest.mark.parametrize("spec", [{"name": "bn254"}, {"name": "koalabear", "extension_degree": 4}])
def test_rounds_in_blocks_send_what_one_block_sends(monkeypatch, spec):
    # object arrays (bn254) and a degree-4 extension: blocks of 5 pairs against one block, counts included
    field = field_from_spec(spec)
    statement = random_permutation_statement(field, 7, 21)

    def rounds(block):
        monkeypatch.setattr(counting, "BLOCK", block)
        run, transcript, counter = run_prover(field, lambda ch, c: prove_permutation_grouped(ch, c, statement, 3))
        sent = [(r.values, r.challenge) for inst in transcript.instances for r in inst.rounds]
        return sent, [i.final for i in transcript.instances], counter.per_phase()

    assert rounds(5) == rounds(1 << 15)


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


def test_layer_two_is_linked_to_layer_one_and_opens_each_bit_as_a_brute_force_sum_says():
    # oracle: multilinear extensions and eq by their definitions, in plain integers (common practice, no source)
    import math

    from tests.provers.glue_helpers import run_glue_prover
    from tests.provers.helpers import plain_mle

    p = BABYBEAR.p
    for mu, groups, switch in [(3, 2, None), (4, 2, None), (4, 2, 1), (4, 3, 5)]:  # (4, 3, 5): every round bucketed
        statement = random_permutation_statement(BABYBEAR, mu, seed=30 + mu)
        _, transcript, glue = run_glue_prover(
            BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, groups, switch_round=switch))
        first, second = transcript.instances
        rho = [int(r.challenge) for r in first.rounds]
        point = [int(r.challenge) for r in second.rounds]
        alpha, beta = [int(a) for a in glue.values["alpha"]], int(glue.squeezes["beta"])
        inverse = statement.inverse()
        bits = [plain_mle([int(inverse[y]) >> i & 1 for y in range(1 << mu)], point, p) for i in range(mu)]
        assert [int(glue.openings[f"s{i + 1}"]) for i in range(mu)] == bits
        opened = [int(glue.openings[f"p{j + 1}"]) for j in range(groups)]
        assert int(second.start.claim) == sum(pow(beta, j, p) * v for j, v in enumerate(opened)) % p
        e = [(1 - a + (2 * a - 1) * s) % p for a, s in zip(alpha, bits)]
        batched = sum(pow(beta, j, p) * math.prod(e[i] for i in group) for j, group in enumerate(split_groups(mu, groups)))
        eq = math.prod(x * y + (1 - x) * (1 - y) for x, y in zip(rho, point))
        assert int(second.final) == eq * batched % p
        assert glue.starts[1]["claim_expr"].startswith("p1 + beta * p2")
        assert glue.starts[1]["final_expr"].startswith("eq(point(permutation)) * ((1 - alpha[0] + ")
        assert replay_transcript(transcript).verdict == "accept"


@pytest.mark.parametrize("fault", ["open-wrong-table", "open-reversed", "open-other-point", "final-without-eq"])
def test_a_glue_fault_in_the_second_layer_fails_its_evaluation_at_the_last_round(fault):
    # a wrong opening or a final_expr without its eq term breaks the evaluation check (contract 3)
    from stepper.provers.faults import Fault
    from tests.provers.glue_helpers import run_glue_prover

    statement = random_permutation_statement(BABYBEAR, 4, seed=33)
    _, transcript, _ = run_glue_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, 2),
                                       Fault(fault, 1, 1))
    first = replay_transcript(transcript).first_failure
    assert (first.instance, first.round, first.check) == (1, 4, "evaluation")


def test_final_without_eq_aimed_at_the_first_layer_is_a_usage_error():
    from stepper.errors import UsageError
    from stepper.provers.faults import Fault

    statement = random_permutation_statement(BABYBEAR, 4, seed=33)
    with pytest.raises(UsageError, match="first instance of a grouped proof has none"):
        run_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, 2), Fault("final-without-eq"))
