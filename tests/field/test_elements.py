"""stepper.field.elements: display text of polynomials and values, and the codec face of Field."""

from __future__ import annotations

import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

import stepper.field.field
from stepper.field.elements import ElementCodec, clip_text, format_poly
from stepper.field.field import NAMED_PRIMES, get_field

BABYBEAR = NAMED_PRIMES["babybear"]
X = sympy.Symbol("X")


def test_every_field_is_an_element_codec_and_field_reexports_the_helpers():
    field = get_field(BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1))
    assert isinstance(field, ElementCodec)
    assert stepper.field.field.format_poly is format_poly
    assert stepper.field.field.clip_text is clip_text
    assert {"format_poly", "clip_text", "Element"} <= set(stepper.field.field.__all__)


def test_the_babybear_quartic_binomial_reads_as_a_negative_constant():
    # X^4 - 11 over BabyBear (from memory, as in the field module's defaults)
    assert format_poly((BABYBEAR - 11, 0, 0, 0, 1), BABYBEAR) == "X^4 - 11"
    assert format_poly((0, 0, 0), 101) == "0"


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(min_value=0, max_value=100), min_size=1, max_size=6))
def test_polynomial_text_matches_sympy_in_symmetric_representation(coeffs):
    # sympy is the reference: Poly over GF(101) keeps coefficients in (-p/2, p/2] (symmetric form)
    p = 101
    reference = sympy.Poly(list(reversed(coeffs)), X, modulus=p).as_expr()
    text = format_poly(tuple(coeffs), p)
    assert sympy.expand(sympy.sympify(text.replace("^", "**"), locals={"X": X}) - reference) == 0
    assert not text.startswith(" ") and "+ -" not in text


def test_long_text_is_clipped_to_the_limit_with_an_ellipsis():
    assert clip_text("short") == "short"
    clipped = clip_text("9" * 100, limit=20)
    assert len(clipped) == 20 and clipped.endswith("...") and clipped.startswith("9" * 17)
