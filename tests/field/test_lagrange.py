"""The verifier's round evaluation agrees with sympy's polynomial interpolation.

sympy (a general-purpose reference library) interpolates the points (i, g(i)) over
the rationals; reducing its value at x modulo p must give our field value.
"""

from __future__ import annotations

from hypothesis import given, settings, strategies as st
from sympy import Rational, interpolate, symbols

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.lagrange import evaluate_round, round_evaluator, weights

X = symbols("X")


@settings(max_examples=40, deadline=None)
@given(st.sampled_from([97, NAMED_PRIMES["babybear"], NAMED_PRIMES["goldilocks"], NAMED_PRIMES["bn254"]]),
       st.lists(st.integers(min_value=0), min_size=1, max_size=6), st.integers(min_value=0))
def test_round_value_matches_sympy_interpolation(p, raw, x_raw):
    field = get_field(p)
    evals = tuple(v % p for v in raw)
    x = x_raw % p
    exact = interpolate(list(enumerate(evals)), X).subs(X, x) if len(evals) > 1 else Rational(evals[0])
    exact = Rational(exact)
    expected = exact.p * pow(exact.q, -1, p) % p
    assert evaluate_round(field, evals, x) == expected


def test_nodes_return_the_sent_values_and_weights_are_inverse_products():
    field = get_field(101)
    evals = (5, 17, 3, 99)
    assert [evaluate_round(field, evals, i) for i in range(4)] == list(evals)
    # w_1 for nodes 0..3 is 1 / ((1-0)(1-2)(1-3)) = 1/2 (common practice, no source)
    assert weights(101, 3)[1] * 2 % 101 == 1


def test_extension_values_go_through_the_generic_path():
    p = NAMED_PRIMES["babybear"]
    ext = get_field(p, (p - 11, 0, 0, 0, 1))
    line = ((1, 0, 0, 0), (3, 0, 0, 0))  # g(X) = 1 + 2X
    assert evaluate_round(ext, line, (0, 1, 0, 0)) == (1, 2, 0, 0)


@settings(max_examples=60, deadline=None)
@given(st.sampled_from([2, 3, 5, 97, 65537, NAMED_PRIMES["goldilocks"], NAMED_PRIMES["bn254"]]),
       st.integers(min_value=0, max_value=7), st.data())
def test_each_specialised_evaluator_agrees_with_sympy_interpolation(p, d, data):
    # Degrees 0..3 take straight-line code, higher ones prefix/suffix products; sympy
    # (a general-purpose reference library) interpolates over the rationals, reduced mod p.
    if d >= p:
        return
    evals = tuple(data.draw(st.integers(min_value=0, max_value=p - 1)) for _ in range(d + 1))
    x = data.draw(st.integers(min_value=0, max_value=p - 1))
    exact = Rational(interpolate(list(enumerate(evals)), X).subs(X, x)) if d else Rational(evals[0])
    assert round_evaluator(p, d)(evals, x) == exact.p * pow(exact.q, -1, p) % p
