"""Each glue probe names the bug of a reference prover that makes exactly that bug, and stays
silent on the honest run. Expected values are recomputed here with plain integers (the MLE and the
eq polynomial by their definitions; common practice, no source)."""

from __future__ import annotations

from math import prod

import numpy as np
import pytest

from stepper.diagnose.glue_probes import (
    eq_prefix, probe_eq_factor, probe_final_without_eq, probe_opening_point, probe_opening_table,
    probe_stale_coefficient,
)
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.eqfactored import prove_zero_factored
from stepper.provers.faults import Fault
from stepper.provers.gkr import prove_grand_product
from tests.provers.glue_helpers import run_glue_prover
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p
TABLE = BABYBEAR.vrandom(16, np.random.default_rng(21))


def _gkr(fault=None):
    return run_glue_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, TABLE), fault)


def _layer_point(transcript, k):
    return [int(r.challenge) for r in transcript.instances[k - 1].rounds]


def _halves(k):
    """The two halves of GKR layer k+1 (layer 4 is the table) as plain integers."""
    layer = [int(v) for v in TABLE]
    for _ in range(4 - (k + 1)):
        half = len(layer) // 2
        layer = [layer[b] * layer[b + half] % P for b in range(half)]
    half = len(layer) // 2
    return layer[:half], layer[half:]


def test_opening_point_names_the_reversed_point():
    _, transcript, glue = _gkr(Fault("open-reversed", 1, 1))
    point = _layer_point(transcript, 2)
    lo, _ = _halves(2)
    sent = glue.openings["product.v3.lo"]
    assert int(sent) == plain_mle(lo, point[::-1], P) != plain_mle(lo, point, P)
    finding = probe_opening_point(BABYBEAR, "product.v3.lo", sent, BABYBEAR.vec(lo), point, {}, instance=1)
    assert finding is not None and finding.probe == "opening-point" and finding.evidence["point"] == "reversed"


def test_opening_point_names_the_other_instance_and_is_silent_on_honest_openings():
    point, other = [5, 6, 7], [8, 9, 10]
    table = [3, 1, 4, 1, 5, 9, 2, 6]
    at_other = plain_mle(table, other, P)
    finding = probe_opening_point(BABYBEAR, "a", at_other, BABYBEAR.vec(table), point, {"deck": other})
    assert finding is not None and finding.evidence["point"] == "deck"
    honest = plain_mle(table, point, P)
    assert probe_opening_point(BABYBEAR, "a", honest, BABYBEAR.vec(table), point, {"deck": other}) is None


def test_opening_table_names_the_table_whose_value_was_sent():
    _, transcript, glue = _gkr(Fault("open-wrong-table", 1, 0))
    point = _layer_point(transcript, 1)
    lo, hi = _halves(1)
    values = {"v2.lo": plain_mle(lo, point, P), "v2.hi": plain_mle(hi, point, P)}
    sent = glue.openings["product.v2.lo"]
    assert int(sent) == values["v2.hi"]
    finding = probe_opening_table(BABYBEAR, "product.v2.lo", "v2.lo", sent, values, instance=0)
    assert finding is not None and finding.evidence["matches"] == "v2.hi"
    assert probe_opening_table(BABYBEAR, "product.v2.hi", "v2.hi", values["v2.hi"], values) is None


def test_stale_coefficient_names_the_earlier_squeeze():
    _, transcript, glue = _gkr(Fault("stale-coefficient", 1, 1))
    lo, hi = int(glue.openings["product.v2.lo"]), int(glue.openings["product.v2.hi"])
    squeezes = [(n, glue.squeezes[n]) for n in ("product.c1", "product.c2")]

    def claim_expr(over):  # product.v2.lo + product.c2 * (product.v2.hi - product.v2.lo)
        c = int(over.get("product.c2", glue.squeezes["product.c2"]))
        return (lo + c * (hi - lo)) % P

    claim = transcript.instances[1].start.claim
    assert claim_expr({}) != int(claim)  # the link fails
    finding = probe_stale_coefficient(BABYBEAR, claim, claim_expr, ["product.v2.lo", "product.c2"], squeezes,
                                      instance=1)
    assert finding is not None and finding.evidence == {"expected_squeeze": "product.c2",
                                                        "used_squeeze": "product.c1"}
    _, honest, honest_glue = _gkr()
    assert probe_stale_coefficient(BABYBEAR, honest.instances[1].start.claim, claim_expr, ["product.c2"],
                                   squeezes) is None


@pytest.mark.parametrize("name, kind", [("drop-eq", "dropped"), ("double-eq", "doubled")])
def test_eq_factor_names_a_dropped_or_doubled_factor(name, kind):
    a = [int(v) for v in np.random.default_rng(5).integers(0, P, 16)]
    tables = {"a": BABYBEAR.vec(a), "c": BABYBEAR.vec([x * x % P for x in a])}
    _, honest, glue = run_glue_prover(BABYBEAR, lambda ch, c: prove_zero_factored(ch, c, "z", tables, ["a * a - c"]))
    _, faulty, fglue = run_glue_prover(BABYBEAR, lambda ch, c: prove_zero_factored(ch, c, "z", tables, ["a * a - c"]),
                                       Fault(name, 3))
    tau = [int(v) for v in fglue.values["tau"]]
    r = [int(x.challenge) for x in faulty.instances[0].rounds]

    def round_sum(q, k):  # the verifier's g_k(0) + g_k(1), eq factor multiplied back
        before = prod((w * x + (1 - w) * (1 - x)) % P for w, x in zip(tau[: k - 1], r[: k - 1])) % P
        return before * ((1 - tau[k - 1]) * int(q[0]) + tau[k - 1] * int(q[1])) % P

    # the running claim before round 3 is g_2(r_2) of the (honest) round 2, by Lagrange through q_2(0..2)
    q2 = [int(v) for v in faulty.instances[0].rounds[1].values]
    lag = sum(q2[i] * prod(r[1] - j for j in range(3) if j != i) * pow(prod(i - j for j in range(3) if j != i), -1, P)
              for i in range(3)) % P
    before2 = (tau[0] * r[0] + (1 - tau[0]) * (1 - r[0])) % P
    expected = before2 * (tau[1] * r[1] + (1 - tau[1]) * (1 - r[1])) * lag % P
    found = round_sum(faulty.instances[0].rounds[2].values, 3)
    factor = eq_prefix(BABYBEAR, tau, r[:2])
    assert int(factor) == before2 * (tau[1] * r[1] + (1 - tau[1]) * (1 - r[1])) % P
    finding = probe_eq_factor(BABYBEAR, expected, found, factor, instance=0, round_=3)
    assert finding is not None and finding.evidence["kind"] == kind
    honest_found = round_sum(honest.instances[0].rounds[2].values, 3)
    assert honest_found == expected
    assert probe_eq_factor(BABYBEAR, expected, honest_found, factor) is None


def test_final_without_eq_names_the_missing_term():
    _, transcript, glue = _gkr(Fault("final-without-eq", 1, 2))
    inst = transcript.instances[2]
    point = _layer_point(transcript, 3)
    value = int(glue.openings["product.v4.lo"]) * int(glue.openings["product.v4.hi"]) % P  # final_expr as sent
    candidates = {"product.r3": glue.values["product.r3"], "product.r2": glue.values["product.r2"]}
    finding = probe_final_without_eq(BABYBEAR, inst.final, value, point, candidates, instance=2, round_=3)
    assert finding is not None and finding.evidence == {"missing": "eq(product.r3)"}
    assert probe_final_without_eq(BABYBEAR, inst.final, inst.final, point, candidates) is None
