"""The eq-factored zero-check prover, against a brute-force oracle with plain integers.

Reference for the factoring (from memory): A. Gruen, "Some Improvements for the PIOP for ZeroCheck",
IACR ePrint 2024/108: the round polynomial of sum_x eq(w, x) * C(x) is
prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X), so the prover sends q_k, one degree lower, and the
verifier multiplies the eq factor back. The oracle below computes the full round polynomial
g_k(X) = sum over the unbound cube of eq(w, z) * C(z) from scratch and checks that factoring.
"""

from __future__ import annotations

import itertools
from math import prod

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers.eqfactored import prove_zero_factored
from stepper.provers.faults import Fault
from tests.provers.glue_helpers import run_glue_prover
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p


def plain_eq1(w: int, x: int) -> int:
    return (w * x + (1 - w) * (1 - x)) % P  # eq of one variable (common practice, no source)


def plain_lagrange(values: list[int], x: int) -> int:
    """The polynomial through (i, values[i]) at x, by Lagrange's formula with integers mod P."""
    total = 0
    for i, v in enumerate(values):
        num = den = 1
        for j in range(len(values)):
            if j != i:
                num = num * (x - j) % P
                den = den * (i - j) % P
        total += v * num * pow(den, -1, P)
    return total % P


def brute_full_round(tau, tables, constraint, bound, x) -> int:
    """g_k(x) = sum over the unbound cube of eq(tau, z) * C(z), low-first (z = bound, x, rest)."""
    mu = len(tau)
    total = 0
    for rest in itertools.product((0, 1), repeat=mu - len(bound) - 1):
        z = [*bound, x, *rest]
        env = {n: plain_mle(t, z, P) for n, t in tables.items()}
        total += prod(plain_eq1(w, v) for w, v in zip(tau, z)) * constraint(env)
    return total % P


def _run(tables, constraints, fault=None, field=BABYBEAR):
    arrays = {n: field.vec(v) for n, v in tables.items()}
    return run_glue_prover(field, lambda ch, c: prove_zero_factored(ch, c, "zero", arrays, constraints), fault)


@settings(max_examples=5, deadline=None)
@given(mu=st.integers(1, 4), seed=st.integers(0, 10_000))
def test_sent_rounds_times_the_eq_factor_are_the_brute_force_round_polynomials(mu, seed):
    rng = np.random.default_rng(seed)
    a = [int(v) for v in rng.integers(0, P, 1 << mu)]
    b = [int(v) for v in rng.integers(0, P, 1 << mu)]
    c = [x * y % P for x, y in zip(a, b)]
    tables = {"a": a, "b": b, "c": c}
    _, transcript, glue = _run(tables, ["a * b - c"])
    inst = transcript.instances[0]
    assert int(inst.start.claim) == 0 and inst.start.degree == 3
    tau = [int(v) for v in glue.values["tau"]]
    assert glue.starts[0] == {"eq_point": "tau", "final_expr": "eq(tau) * ((a * b - c))"}
    r = [int(rnd.challenge) for rnd in inst.rounds]
    for k, rnd in enumerate(inst.rounds):
        q = [int(v) for v in rnd.values]
        assert len(q) == 3  # degree d - 1 = 2: one value fewer than g_k
        before = prod(plain_eq1(w, x) for w, x in zip(tau[:k], r[:k])) % P
        for x in range(4):
            expected = brute_full_round(tau, tables, lambda e: e["a"] * e["b"] - e["c"], r[:k], x)
            assert before * plain_eq1(tau[k], x) * plain_lagrange(q, x) % P == expected
    env = {n: plain_mle(t, r, P) for n, t in tables.items()}
    for name in "abc":
        assert int(glue.openings[name]) == env[name]
    eq_all = prod(plain_eq1(w, x) for w, x in zip(tau, r)) % P
    assert int(inst.final) == eq_all * (env["a"] * env["b"] - env["c"]) % P


def test_a_broken_constraint_gives_rounds_that_no_longer_sum_to_zero():
    # sum_x eq(tau, x) C(x) != 0 once C(x) != 0 somewhere (except with probability <= mu/|F| over tau)
    a = [3, 5, 7, 11, 13, 17, 19, 23]
    c = [x * x % P for x in a]
    c[5] += 1
    _, transcript, glue = _run({"a": a, "c": c}, ["a * a - c"])
    tau = [int(v) for v in glue.values["tau"]]
    q = [int(v) for v in transcript.instances[0].rounds[0].values]
    round_sum = ((1 - tau[0]) * q[0] + tau[0] * q[1]) % P  # g_1(0) + g_1(1), eq factored back
    whole = sum(brute_full_round(tau, {"a": a, "c": c}, lambda e: e["a"] ** 2 - e["c"], [], x) for x in (0, 1)) % P
    assert round_sum == whole != 0


def test_several_constraints_are_mixed_with_gamma_and_final_expr_says_so():
    a = [1, 0, 1, 1]
    tables = {"occupied": a, "length": [40, 0, 51, 47]}
    constraints = ["occupied * occupied - occupied", "length - occupied * length"]
    _, transcript, glue = _run(tables, constraints)
    assert glue.starts[0]["final_expr"] == (
        "eq(tau) * ((occupied * occupied - occupied) + gamma * (length - occupied * length))")
    assert "gamma" in glue.values
    assert transcript.instances[0].start.degree == 3


@pytest.mark.parametrize("name", ["drop-eq", "double-eq"])
def test_eq_faults_scale_round_k_by_exactly_the_eq_factor_before_it(name):
    rng = np.random.default_rng(9)
    a = [int(v) for v in rng.integers(0, P, 16)]
    tables = {"a": a, "c": [x * x % P for x in a]}
    _, honest, _ = _run(tables, ["a * a - c"])
    _, faulty, glue = _run(tables, ["a * a - c"], Fault(name, 3))
    tau = [int(v) for v in glue.values["tau"]]
    r = [int(rnd.challenge) for rnd in honest.instances[0].rounds]
    factor = prod(plain_eq1(w, x) for w, x in zip(tau[:2], r[:2])) % P
    scale = factor if name == "double-eq" else pow(factor, -1, P)
    assert honest.instances[0].rounds[:2] == faulty.instances[0].rounds[:2]
    sent = [int(v) for v in faulty.instances[0].rounds[2].values]
    assert sent == [int(v) * scale % P for v in honest.instances[0].rounds[2].values]


def test_eq_faults_need_a_round_with_an_eq_factor_before_it():
    with pytest.raises(UsageError, match="K >= 2"):
        Fault("drop-eq", 1)


def test_an_extension_field_run_matches_its_own_final_value():
    field = field_from_spec({"name": "babybear", "extension_degree": 4})
    rng = np.random.default_rng(2)
    a = field.vrandom(8, rng)
    tables = {"a": a, "c": field.vmul(a, a)}
    run, transcript, _ = run_glue_prover(field, lambda ch, c: prove_zero_factored(ch, c, "z", tables, ["a * a - c"]))
    assert field.is_zero(transcript.instances[0].start.claim)
    assert transcript.instances[0].final == run.instances[0].final
