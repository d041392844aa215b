"""Honest round polynomials by folding, checked against an independent sympy computation
(multilinear extensions written out symbolically and summed over the hypercube) and against
the worked sumcheck example of J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1
(g = 2*x1^3 + x1*x3 + x2*x3, H = 12; from memory)."""

from __future__ import annotations

import itertools
import random

import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.errors import InternalError
from stepper.field.expr import parse
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.diagnose.honest import HonestRound, fold, honest_round, honest_rounds, table_round_sums, tables_at
from stepper.field.poly import lagrange_at, mle_eval, point_from_challenges

BABYBEAR = NAMED_PRIMES["babybear"]
GOLDILOCKS = NAMED_PRIMES["goldilocks"]


def _sympy_round(p: int, tables: dict[str, list[int]], text: str, mu: int, bound: list[int], order: str, t: int) -> int:
    """g(t) computed with sympy: each table's multilinear extension as an explicit polynomial
    sum_b T[b] prod_j (x_j b_j + (1 - x_j)(1 - b_j)), the combine applied symbolically, then
    the bound variables substituted and the free ones summed over {0,1}."""
    xs = sympy.symbols(f"x1:{mu + 1}")
    mles = {}
    for name, table in tables.items():
        poly = 0
        for index, value in enumerate(table):
            term = value
            for j in range(mu):
                bit = (index >> j) & 1
                term *= xs[j] if bit else (1 - xs[j])
            poly += term
        mles[name] = poly
    g = sympy.sympify(text, locals={n: sympy.Symbol(n) for n in tables}).subs(mles, simultaneous=True)
    k = len(bound)
    order_vars = list(xs) if order == "low-first" else list(reversed(xs))
    subs = {order_vars[i]: bound[i] for i in range(k)}
    subs[order_vars[k]] = t
    free = order_vars[k + 1 :]
    total = 0
    expanded = sympy.expand(g.subs(subs))
    for bits in itertools.product([0, 1], repeat=len(free)):
        total += int(expanded.subs(dict(zip(free, bits))))
    return total % p


@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_every_round_matches_a_symbolic_sum_over_the_hypercube(order: str) -> None:
    p = 101  # small prime: sympy's integer arithmetic stays exact, reduced at the end
    field = get_field(p)
    rng = random.Random(3)
    mu = 3
    tables = {n: [rng.randrange(p) for _ in range(1 << mu)] for n in ("a", "b", "c")}
    text = "a*b*c - 2*a + b*b"
    challenges = [rng.randrange(p) for _ in range(mu)]
    arrays = {n: field.vec(v) for n, v in tables.items()}
    rounds = list(honest_rounds(field, arrays, parse(text), challenges, order, 4))
    for k in range(mu):
        assert isinstance(rounds[k], HonestRound)
        for t in range(4):
            assert rounds[k].evals[t] == _sympy_round(p, tables, text, mu, challenges[:k], order, t)


def _thaler_tables(field_p: int) -> dict[str, list[int]]:
    # tables x1, x2, x3: entry i holds bit j of i for x_(j+1); their MLEs are the variables themselves
    return {f"x{j + 1}": [(i >> j) & 1 for i in range(8)] for j in range(3)}


THALER_COMBINE = "2*x1*x1*x1 + x1*x3 + x2*x3"


def test_thaler_worked_example_claim_and_first_round() -> None:
    # J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1 (from memory):
    # g = 2 x1^3 + x1 x3 + x2 x3 sums to H = 12 over {0,1}^3, and g1(X1) = 8 X1^3 + 2 X1 + 1.
    p = 97
    field = get_field(p)
    tables = {n: field.vec(v) for n, v in _thaler_tables(p).items()}
    g1 = honest_round(field, tables, parse(THALER_COMBINE), 4)
    assert field.add(g1[0], g1[1]) == 12
    assert list(g1) == [(8 * t**3 + 2 * t + 1) % p for t in range(4)]


def test_thaler_worked_example_later_rounds_follow_the_challenges() -> None:
    # With X1 = r1 bound, g2(X2) = sum_x3 g(r1, X2, x3) = 2*(2 r1^3) + r1 + X2 (derived by hand).
    p = 97
    field = get_field(p)
    tables = {n: field.vec(v) for n, v in _thaler_tables(p).items()}
    r1, r2 = 2, 3
    folded = fold(field, tables, r1, "low-first")
    g2 = honest_round(field, folded, parse(THALER_COMBINE), 2)
    assert list(g2) == [(4 * r1**3 + r1 + x2) % p for x2 in (0, 1)]
    folded2 = fold(field, folded, r2, "low-first")
    g3 = honest_round(field, folded2, parse(THALER_COMBINE), 2)
    assert list(g3) == [(2 * r1**3 + r1 * x3 + r2 * x3) % p for x3 in (0, 1)]


FIELDS = [
    get_field(BABYBEAR, DEFAULT_IRREDUCIBLES[("babybear", 4)]),
    get_field(GOLDILOCKS),
    get_field(GOLDILOCKS, DEFAULT_IRREDUCIBLES[("goldilocks", 2)]),
    get_field(NAMED_PRIMES["bn254"]),
]


@pytest.mark.parametrize("field", FIELDS, ids=lambda f: f.describe())
@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_each_round_sums_to_the_previous_round_at_its_challenge(field, order: str) -> None:
    # The defining identity of an honest sumcheck prover (common practice, no source):
    # g_k(0) + g_k(1) = g_(k-1)(r_(k-1)), g_1(0) + g_1(1) = the sum, and the last round at
    # its challenge equals the combine of the tables' multilinear extensions at the point.
    rng = random.Random(11)
    nrng = np.random.default_rng(12)
    mu = 5
    tables = {n: field.base.vrandom(1 << mu, nrng) for n in ("a", "b", "c")}
    expr = parse("a*b*c + 5*a - c")
    challenges = [field.random(rng) for _ in range(mu)]
    out = list(honest_rounds(field, tables, expr, challenges, order, 4))
    total = field.base.vsum(expr.evaluate(field.base, tables))
    claim = field.lift(total)
    for k, r in enumerate(out[:mu]):
        assert field.add(r.evals[0], r.evals[1]) == claim
        claim = lagrange_at(field, r.evals, challenges[k])
    point = point_from_challenges(challenges, order)
    at_point = {n: mle_eval(field, tables[n], point) for n in tables}
    assert out[mu] == at_point
    assert expr.evaluate_scalar(field, at_point) == claim


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**31), mu=st.integers(1, 6), low=st.booleans())
def test_fold_agrees_with_the_multilinear_extension(seed: int, mu: int, low: bool) -> None:
    field = FIELDS[0]
    rng = random.Random(seed)
    table = field.base.vrandom(1 << mu, np.random.default_rng(seed))
    challenges = [field.random(rng) for _ in range(mu)]
    order = "low-first" if low else "high-first"
    cur = {"t": table}
    for r in challenges:
        cur = fold(field, cur, r, order)
    assert tuple(int(c) for c in cur["t"][0]) == mle_eval(field, table, point_from_challenges(challenges, order))


def test_in_place_fold_gives_the_same_values_as_a_copying_fold() -> None:
    field = FIELDS[0]
    nrng = np.random.default_rng(1)
    table = field.vrandom(1 << 17, nrng)  # more than one chunk
    r = (5, 6, 7, 8)
    for order in ("low-first", "high-first"):
        copied = fold(field, {"t": table}, r, order)["t"]
        scratch = table.copy()
        in_place = fold(field, {"t": scratch}, r, order, in_place=True)["t"]
        assert np.array_equal(copied, in_place)
        assert np.shares_memory(in_place, scratch)


def test_honest_rounds_that_may_overwrite_the_tables_give_the_same_rounds_in_their_memory() -> None:
    field = FIELDS[0]
    nrng = np.random.default_rng(2)
    tables = {name: field.vrandom(1 << 6, nrng) for name in ("a", "b")}
    expr = parse("a*b")
    challenges = [field.random(random.Random(k)) for k in range(6)]
    kept = list(honest_rounds(field, tables, expr, challenges, "low-first", 3))
    scratch = {name: t.copy() for name, t in tables.items()}
    overwritten = list(honest_rounds(field, scratch, expr, challenges, "low-first", 3, overwrite=True))
    assert overwritten == kept
    # every fold went into the given arrays: their first entry is now the table's value at the point
    assert tuple(int(c) for c in scratch["a"][0]) == kept[-1]["a"]
    assert tuple(int(c) for c in tables["a"][0]) != kept[-1]["a"]


def test_a_fold_never_changes_the_callers_tables_by_default() -> None:
    field = get_field(GOLDILOCKS)
    table = field.vrandom(64, np.random.default_rng(4))
    before = table.copy()
    fold(field, {"t": table}, 12345, "low-first")
    assert np.array_equal(table, before)


def test_tables_at_is_the_multilinear_extension_at_the_point() -> None:
    field = FIELDS[2]
    rng = random.Random(2)
    table = field.base.vrandom(16, np.random.default_rng(2))
    point = [field.random(rng) for _ in range(4)]
    assert tables_at(field, {"t": table}, point)["t"] == mle_eval(field, table, point)


def test_table_round_sums_are_sums_of_each_half_extended_linearly() -> None:
    field = get_field(101)
    table = field.vec(list(range(8)))
    sums = table_round_sums(field, {"t": table}, ["t"], 3, "low-first")["t"]
    assert sums == (0 + 2 + 4 + 6, 1 + 3 + 5 + 7, (2 * 16 - 12) % 101)


def test_tables_of_different_lengths_are_an_internal_error() -> None:
    field = get_field(101)
    with pytest.raises(InternalError, match="one length"):
        honest_round(field, {"a": field.vec([1, 2]), "b": field.vec([1, 2, 3, 4])}, parse("a*b"), 3)
