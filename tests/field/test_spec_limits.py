"""The caps on a declared field (README "Limits"), met exactly and exceeded by one: a prime modulus of
at most 1024 bits and an extension of degree at most 16. The primes come from sympy (prevprime and
nextprime around 2^1024); X^16 + 2X + 3 over F_7 was found with galois.irreducible_poly(7, 16) and is
checked again by stepper's own admission (galois) when the field is declared. The caps are stepper's
own choices (common practice, no source)."""

from __future__ import annotations

import pytest
import sympy

from stepper.errors import FieldError
from stepper.field.spec import field_from_spec


def test_a_prime_of_1024_bits_is_taken_and_one_of_1025_bits_is_refused():
    at_cap = sympy.prevprime(2**1024)  # sympy
    past = sympy.nextprime(2**1024)  # sympy: 1025 bits
    assert (at_cap.bit_length(), past.bit_length()) == (1024, 1025)
    assert field_from_spec({"modulus": str(at_cap)}).p == at_cap
    with pytest.raises(FieldError, match="at most 1024 bits"):
        field_from_spec({"modulus": str(past)})


def test_an_extension_of_degree_16_is_taken_and_degree_17_is_refused():
    field = field_from_spec({"modulus": "7", "extension_degree": 16, "irreducible": [3, 2] + [0] * 14 + [1]})
    assert field.degree == 16
    with pytest.raises(FieldError, match="16"):
        field_from_spec({"modulus": "7", "extension_degree": 17, "irreducible": [3, 2] + [0] * 15 + [1]})
