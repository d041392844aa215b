"""GKR for a product circuit: every layer checked against a brute-force oracle with plain integers.

Reference for the reduction (from memory): J. Thaler, "Proofs, Arguments, and Zero-Knowledge",
chapter 4 (the GKR protocol): a layer's claim V~_k(r) = sum_x eq(r, x) * V_(k+1)(x, 0) * V_(k+1)(x, 1)
for a multiplication layer, and two claims about the next layer reduced to one on the line through
them, V~_(k+1)(s, c) = V~_(k+1)(s, 0) + c * (V~_(k+1)(s, 1) - V~_(k+1)(s, 0)). The oracle below sums
over the whole cube with Python integers; it shares no code with the prover.
"""

from __future__ import annotations

import itertools
from math import prod

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.faults import Fault
from stepper.provers.gkr import prove_grand_product
from tests.provers.glue_helpers import run_glue_prover
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p


def plain_eq(a: list[int], b: list[int]) -> int:
    """prod_i (a_i b_i + (1 - a_i)(1 - b_i)) mod P (the eq polynomial; common practice, no source)."""
    return prod((x * y + (1 - x) * (1 - y)) % P for x, y in zip(a, b, strict=True)) % P


def plain_layers(values: list[int]) -> list[list[int]]:
    """[V_0 .. V_n] by the circuit's definition: V_k[b] = V_(k+1)[b] * V_(k+1)[b + 2^k]."""
    layers = [values]
    while len(layers[0]) > 1:
        upper = layers[0]
        half = len(upper) // 2
        layers.insert(0, [upper[b] * upper[b + half] % P for b in range(half)])
    return layers


def brute_round(point: list[int], lo: list[int], hi: list[int], bound: list[int], x: int) -> int:
    """g(X = x) of the layer sumcheck: sum over the unbound cube of eq(r, z) * lo~(z) * hi~(z),
    z = (bound challenges, x, cube point), every MLE evaluated from scratch."""
    k = len(point)
    free = k - len(bound) - 1
    total = 0
    for rest in itertools.product((0, 1), repeat=free):
        z = [*bound, x, *rest]
        total += plain_eq(point, z) * plain_mle(lo, z, P) * plain_mle(hi, z, P)
    return total % P


def _honest(n: int, seed: int):
    rng = np.random.default_rng(seed)
    table = BABYBEAR.vrandom(1 << n, rng)
    run, transcript, glue = run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, table))
    return [int(v) for v in table], run, transcript, glue


@settings(max_examples=5, deadline=None)
@given(n=st.integers(3, 4), seed=st.integers(0, 10_000))
def test_every_layer_matches_the_brute_force_circuit(n, seed):
    values, run, transcript, glue = _honest(n, seed)
    layers = plain_layers(values)
    assert [int(v) for v in glue.values["product.outputs"]] == layers[1]
    assert layers[1][0] * layers[1][1] % P == prod(values) % P  # the grand product, by definition
    assert len(transcript.instances) == n - 1
    prev_point: list[int] = []
    for k, inst in enumerate(transcript.instances, start=1):
        c = int(glue.squeezes[f"product.c{k}"])
        point = [*prev_point, c]
        assert [int(v) for v in glue.values[f"product.r{k}"]] == point
        assert int(inst.start.claim) == plain_mle(layers[k], point, P)  # V~_k(r_k)
        upper = layers[k + 1]
        lo, hi = upper[: 1 << k], upper[1 << k:]
        challenges = [int(r.challenge) for r in inst.rounds]
        for j, rnd in enumerate(inst.rounds):
            expected = [brute_round(point, lo, hi, challenges[:j], x) for x in range(4)]
            assert [int(v) for v in rnd.values] == expected
        assert int(glue.openings[f"product.v{k + 1}.lo"]) == plain_mle(lo, challenges, P)
        assert int(glue.openings[f"product.v{k + 1}.hi"]) == plain_mle(hi, challenges, P)
        reduced = plain_eq(point, challenges) * plain_mle(lo, challenges, P) * plain_mle(hi, challenges, P) % P
        assert int(inst.final) == reduced
        prev_point = challenges


def test_claims_are_linked_through_the_openings_and_the_squeezed_coefficient():
    # the line through the two openings, at c (Thaler ch. 4, from memory), recomputed with integers
    values, _, transcript, glue = _honest(4, 7)
    for k in range(2, 4):
        lo = int(glue.openings[f"product.v{k}.lo"])
        hi = int(glue.openings[f"product.v{k}.hi"])
        c = int(glue.squeezes[f"product.c{k}"])
        assert int(transcript.instances[k - 1].start.claim) == (lo + c * (hi - lo)) % P
        assert glue.starts[k - 1]["claim_expr"] == f"product.v{k}.lo + product.c{k} * (product.v{k}.hi - product.v{k}.lo)"
        assert glue.starts[k - 1]["final_expr"] == f"eq(product.r{k}) * product.v{k + 1}.lo * product.v{k + 1}.hi"


def test_stale_coefficient_builds_the_claim_with_the_previous_layer_coefficient():
    rng = np.random.default_rng(3)
    table = BABYBEAR.vrandom(16, rng)
    _, transcript, glue = run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, table),
                                          Fault("stale-coefficient", 1, 1))
    lo, hi = int(glue.openings["product.v2.lo"]), int(glue.openings["product.v2.hi"])
    stale = int(glue.squeezes["product.c1"])
    assert int(transcript.instances[1].start.claim) == (lo + stale * (hi - lo)) % P
    with pytest.raises(UsageError, match="earlier coefficient"):
        run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, table), Fault("stale-coefficient", 1, 0))


def test_final_without_eq_drops_the_eq_term_from_final_expr_only():
    rng = np.random.default_rng(4)
    table = BABYBEAR.vrandom(8, rng)
    _, _, glue = run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, table),
                                 Fault("final-without-eq", 1, 1))
    assert glue.starts[0]["final_expr"].startswith("eq(product.r1) * ")
    assert glue.starts[1]["final_expr"] == "product.v3.lo * product.v3.hi"


def test_too_small_a_table_is_a_usage_error():
    with pytest.raises(UsageError, match="n >= 3"):
        run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, BABYBEAR.vec([1, 2, 3, 4])))


def test_layer_rounds_count_products_honestly():
    # per round of layer k over 2^m remaining entries: 4 points x 2 products x 2^(m-1) pairs, then
    # 3 folds of 2^(m-1) entries (common practice, no source: that is what the engine's loop does)
    _, run, _, _ = _honest(4, 1)
    layer3 = run.instances[2]
    assert layer3.round_mults == (4 * 2 * 4 + 3 * 4, 4 * 2 * 2 + 3 * 2, 4 * 2 * 1 + 3 * 1)
