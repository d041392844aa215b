"""Round polynomials, multilinear extensions and the eq polynomial, checked
against sympy's interpolation, a published worked example and brute force."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.errors import InputError
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field
from stepper.field.poly import (
    FORMS,
    RoundPoly,
    coeffs_to_evals,
    eq_eval,
    eq_table,
    eval_coeffs,
    interpolate,
    lagrange_at,
    mle_eval,
    point_from_challenges,
)

SETTINGS = settings(max_examples=25, deadline=None)

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
BB4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
BN254 = get_field(NAMED_PRIMES["bn254"])
GL2 = get_field(NAMED_PRIMES["goldilocks"], DEFAULT_IRREDUCIBLES[("goldilocks", 2)])


def element(field: Field) -> st.SearchStrategy[object]:
    coeff = st.integers(0, field.p - 1)
    return st.tuples(*([coeff] * field.degree)) if field.is_extension else coeff


# ----- interpolation ------------------------------------------------------------------


@SETTINGS
@given(data=st.data(), field=st.sampled_from([BABYBEAR, BN254]))
def test_interpolation_matches_sympy(data, field):
    # reference: sympy.interpolate over the rationals, coefficients then reduced mod p
    p = field.p
    evals = data.draw(st.lists(st.integers(0, p - 1), min_size=1, max_size=6))
    x = sympy.symbols("x")
    poly = sympy.Poly(sympy.interpolate(list(enumerate(evals)), x), x)
    expected = [0] * len(evals)
    for (power,), coeff in poly.terms():
        num, den = sympy.fraction(sympy.Rational(coeff))
        expected[power] = int(num) * pow(int(den), -1, p) % p
    assert list(interpolate(field, evals)) == expected


@SETTINGS
@given(data=st.data(), field=st.sampled_from([BABYBEAR, BB4, GL2]))
def test_evaluation_at_any_point_agrees_with_the_coefficients(data, field):
    coeffs = data.draw(st.lists(element(field), min_size=1, max_size=6))
    x = data.draw(element(field))
    evals = coeffs_to_evals(field, coeffs)
    assert lagrange_at(field, evals, x) == eval_coeffs(field, coeffs, x)
    assert RoundPoly(evals).at(field, x) == eval_coeffs(field, coeffs, x)
    assert interpolate(field, evals) == tuple(field.lift(c) for c in coeffs)


def test_true_degree_sees_through_padding():
    square = coeffs_to_evals(BABYBEAR, [0, 0, 1], count=5)  # X^2 sent as 5 evaluations
    assert RoundPoly(square).sent_degree == 4
    assert RoundPoly(square).true_degree(BABYBEAR) == 2
    assert RoundPoly((0, 0, 0)).true_degree(BABYBEAR) == -1
    assert RoundPoly((9,)).sum01(BABYBEAR) == 18


def test_too_many_evaluation_points_for_a_tiny_field_is_an_input_error():
    # over F_5[X]/(X^2 - 2) the nodes 0..5 are not distinct, so 6 evaluations define nothing
    tiny = get_field(5, (3, 0, 1))
    with pytest.raises(InputError, match="fewer than p = 5"):
        lagrange_at(tiny, [1, 2, 3, 4, 0, 1], (0, 1))


# ----- the textbook worked example ------------------------------------------------------


def thaler_g(x1: int, x2: int, x3: int) -> int:
    """g = 2 x1^3 + x1 x3 + x2 x3 (J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1)."""
    return 2 * x1**3 + x1 * x3 + x2 * x3


def test_thaler_section_4_1_example_by_brute_force():
    # J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1 (values from memory):
    # the sum over {0,1}^3 is 12 and the first round polynomial is 8X^3 + 2X + 1,
    # i.e. evaluations 1, 11, 69, 223 at 0, 1, 2, 3. Recomputed here by brute force.
    field = BABYBEAR
    cube = list(itertools.product((0, 1), repeat=3))
    assert sum(thaler_g(*b) for b in cube) == 12
    first = tuple(sum(thaler_g(x, b2, b3) for b2, b3 in itertools.product((0, 1), repeat=2)) for x in range(4))
    assert first == (1, 11, 69, 223)
    g1 = RoundPoly.from_form(field, "evals", first, 12)
    assert g1.sum01(field) == 12
    assert g1.coeffs(field) == (1, 2, 0, 8)  # 8X^3 + 2X + 1
    assert RoundPoly.from_form(field, "coeffs", (1, 2, 0, 8), 12).evals == first
    assert g1.true_degree(field) == 3


def test_thaler_example_runs_all_three_rounds_honestly():
    # the protocol of the same section with challenges of our own choosing: every round's
    # g_k(0) + g_k(1) equals the previous claim, and the last claim is g at the challenge point.
    field = BABYBEAR
    p = field.p
    challenges = (2, 3, 6)
    claim = 12
    bound: list[int] = []
    for k in range(3):
        free = 3 - k - 1
        evals = []
        for x in range(4):
            total = 0
            for tail in itertools.product((0, 1), repeat=free):
                total += thaler_g(*bound, x, *tail)
            evals.append(total % p)
        g = RoundPoly(tuple(evals))
        assert g.sum01(field) == claim
        claim = g.at(field, challenges[k])
        bound.append(challenges[k])
    assert claim == thaler_g(*challenges) % p


# ----- compressed forms ------------------------------------------------------------------


@SETTINGS
@given(data=st.data(), field=st.sampled_from([BABYBEAR, BB4, BN254]), form=st.sampled_from(FORMS))
def test_every_form_round_trips_through_the_claim(data, field, form):
    evals = tuple(data.draw(st.lists(element(field), min_size=2, max_size=5)))
    poly = RoundPoly(evals)
    claim = poly.sum01(field)
    sent = poly.to_form(field, form)
    back = RoundPoly.from_form(field, form, sent, claim)
    assert back.evals == evals
    assert back.recovered == {"evals-no-1": "g(1)", "coeffs-no-linear": "c1"}.get(form)


def test_compressed_forms_recover_the_missing_value_from_the_claim():
    field = BABYBEAR
    # g = 3 + 4X + 5X^2: g(0) + g(1) = 3 + 12 = 15
    assert RoundPoly.from_form(field, "evals-no-1", (3, 31), 15).recovered_value == 12
    assert RoundPoly.from_form(field, "coeffs-no-linear", (3, 5), 15).recovered_value == 4
    assert RoundPoly.from_form(field, "coeffs-no-linear", (3, 5), 15).evals == (3, 12, 31)


def test_unknown_form_or_empty_compressed_values_are_input_errors():
    with pytest.raises(InputError, match="round form among"):
        RoundPoly.from_form(BABYBEAR, "lagrange", (1, 2), 3)
    with pytest.raises(InputError, match="at least one value"):
        RoundPoly.from_form(BABYBEAR, "evals-no-1", (), 3)


# ----- multilinear extensions and eq -------------------------------------------------------


def brute_force_mle(field: Field, table: list[object], point: tuple[object, ...]) -> object:
    """sum_b table[b] prod_j (x_j if bit j of b else 1 - x_j): the Lagrange form of the MLE."""
    acc = field.zero
    for index, value in enumerate(table):
        weight = field.one
        for j, x in enumerate(point):
            weight = field.mul(weight, x if index >> j & 1 else field.sub(field.one, x))
        acc = field.add(acc, field.mul(weight, value))
    return acc


@SETTINGS
@given(data=st.data(), field=st.sampled_from([BABYBEAR, BB4, BN254]), mu=st.integers(0, 4))
def test_mle_agrees_with_the_brute_force_lagrange_sum(data, field, mu):
    table = data.draw(st.lists(element(field), min_size=1 << mu, max_size=1 << mu))
    point = tuple(data.draw(st.lists(element(field), min_size=mu, max_size=mu)))
    assert mle_eval(field, field.vec(table), point) == brute_force_mle(field, table, point)


@SETTINGS
@given(data=st.data(), mu=st.integers(0, 4))
def test_base_table_in_an_extension_takes_the_mixed_fast_path_to_the_same_value(data, mu):
    table = data.draw(st.lists(st.integers(0, BABYBEAR.p - 1), min_size=1 << mu, max_size=1 << mu))
    point = tuple(data.draw(st.lists(element(BB4), min_size=mu, max_size=mu)))
    lifted = [BB4.lift(v) for v in table]
    assert mle_eval(BB4, BABYBEAR.vec(table), point) == brute_force_mle(BB4, lifted, point)


def test_mle_at_a_boolean_point_is_the_table_entry():
    table = BABYBEAR.vec([10, 11, 12, 13, 14, 15, 16, 17])
    # entry 6 = 0b110: x_1 = 0, x_2 = 1, x_3 = 1 (index bit j is x_(j+1))
    assert mle_eval(BABYBEAR, table, (0, 1, 1)) == 16


def test_low_first_and_high_first_bind_opposite_ends():
    field = BABYBEAR
    rng = np.random.default_rng(5)
    table = field.vrandom(8, rng)
    challenges = (101, 202, 303)
    # high-first: round 1 binds x_3, the most significant index bit: fold the halves
    cur = table
    for r in challenges:
        half = len(cur) // 2
        cur = field.vadd(cur[:half], field.vscale(field.vsub(cur[half:], cur[:half]), r))
    assert mle_eval(field, table, point_from_challenges(challenges, "high-first")) == field.vlist(cur)[0]
    # low-first: round 1 binds x_1, the least significant bit: fold even/odd pairs
    cur = table
    for r in challenges:
        cur = field.vadd(cur[0::2], field.vscale(field.vsub(cur[1::2], cur[0::2]), r))
    assert mle_eval(field, table, point_from_challenges(challenges, "low-first")) == field.vlist(cur)[0]


def test_mle_refuses_a_table_of_the_wrong_size():
    with pytest.raises(InputError, match="2\\^2 = 4 entries.*found 3"):
        mle_eval(BABYBEAR, BABYBEAR.vec([1, 2, 3]), (5, 6))


@SETTINGS
@given(
    data=st.data(),
    field=st.sampled_from([BABYBEAR, BB4, GL2]),
    mu=st.integers(0, 5),
    order=st.sampled_from(["low-first", "high-first"]),
)
def test_eq_table_sums_to_one_and_matches_eq_eval(data, field, mu, order):
    challenges = data.draw(st.lists(element(field), min_size=mu, max_size=mu))
    point = point_from_challenges(challenges, order)
    table = eq_table(field, point)
    assert len(table) == 1 << mu
    assert field.vsum(table) == field.one  # sum over the cube of eq(point, b) = prod (x + 1 - x) = 1
    entries = field.vlist(table)
    for index in (0, (1 << mu) - 1, (1 << mu) // 3):
        bits = tuple(field.embed(index >> j & 1) for j in range(mu))
        assert entries[index] == eq_eval(field, point, bits)


@pytest.mark.parametrize("p", [7, 2**31 - 2**27 + 1, 2**64 - 2**32 + 1])  # BabyBear, Goldilocks: common practice, no source
def test_lagrange_weights_equal_the_defining_products(p):
    # barycentric weights w_i = 1 / prod_{j != i} (i - j), straight from their definition (plain integers)
    from stepper.field.poly import lagrange_weights

    for d in range(0, min(p - 1, 40)):
        direct = []
        for i in range(d + 1):
            den = 1
            for j in range(d + 1):
                if j != i:
                    den = den * (i - j) % p
            direct.append(pow(den, -1, p))
        assert lagrange_weights(p, d) == tuple(direct)


@pytest.mark.parametrize("name", ["bn254", "goldilocks"])  # moduli pinned in tests/field/test_field.py
def test_coefficients_become_values_by_horner_and_a_round_past_the_cap_is_refused(name):
    import random

    from stepper.field.poly import MAX_COEFFS, coeffs_to_evals, eval_coeffs

    field = get_field(NAMED_PRIMES[name])
    rng = random.Random(5)
    for n in (1, 9, 40):  # the vector path against the one-point Horner rule
        coeffs = [field.random(rng) for _ in range(n)]
        assert coeffs_to_evals(field, coeffs) == tuple(eval_coeffs(field, coeffs, i) for i in range(n))
    assert len(coeffs_to_evals(field, [1] * MAX_COEFFS)) == MAX_COEFFS
    with pytest.raises(InputError, match=f"at most {MAX_COEFFS} coefficients in a round .*found {MAX_COEFFS + 1}"):
        coeffs_to_evals(field, [1] * (MAX_COEFFS + 1))
