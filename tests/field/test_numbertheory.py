"""Primality and irreducibility tests agree with sympy and galois."""

from __future__ import annotations

import galois
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.field.numbertheory import is_irreducible, is_probable_prime, polymod_pow_x

SETTINGS = settings(max_examples=30, deadline=None)


def test_primality_matches_sympy_below_3000():
    # reference: sympy.isprime
    assert [n for n in range(3000) if is_probable_prime(n)] == [n for n in range(3000) if sympy.isprime(n)]


@SETTINGS
@given(n=st.integers(0, 2**130))
def test_primality_matches_sympy_on_large_numbers(n):
    # reference: sympy.isprime
    assert is_probable_prime(n) == sympy.isprime(n)


def test_strong_pseudoprimes_are_caught():
    # 3215031751 is a strong pseudoprime to the bases 2, 3, 5 and 7 (from memory; sympy confirms it
    # is composite); 561 and 41041 are Carmichael numbers (common practice, no source).
    for n in (561, 41041, 3215031751):
        assert not sympy.isprime(n)
        assert not is_probable_prime(n)
    assert is_probable_prime(2**61 - 1) and is_probable_prime(2**127 - 1)  # Mersenne primes


def test_word_sized_primes_used_in_tests_are_prime_per_sympy():
    # reference: sympy.isprime (tests/field/test_kernels.py relies on these three)
    for p in (2**32 - 5, 2**40 - 87, 2**64 - 59):
        assert sympy.isprime(p) and is_probable_prime(p)


_GF = {p: galois.GF(p, compile="python-calculate") for p in (2, 7, 101)}


@SETTINGS
@given(p=st.sampled_from([2, 7, 101]), coeffs=st.lists(st.integers(0, 100), min_size=1, max_size=6))
def test_irreducibility_matches_galois(p, coeffs):
    # reference: galois.Poly.is_irreducible over GF(p)
    q = tuple(c % p for c in coeffs) + (1,)
    expected = galois.Poly(list(reversed(q)), field=_GF[p]).is_irreducible()
    assert is_irreducible(q, p) == expected


@SETTINGS
@given(e=st.integers(0, 10**6), coeffs=st.lists(st.integers(0, 100), min_size=2, max_size=5))
def test_x_to_a_power_modulo_q_matches_galois(e, coeffs):
    # reference: galois's pow(poly, exponent, modulus) over GF(101)
    gf = _GF[101]
    q = tuple(c % 101 for c in coeffs) + (1,)
    expected = pow(galois.Poly([1, 0], field=gf), e, galois.Poly(list(reversed(q)), field=gf))
    ours = polymod_pow_x(e, q, 101)
    assert [int(c) for c in reversed(expected.coeffs.tolist())] == (ours or [0])
