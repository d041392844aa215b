"""stepper.diagnose.radix: constant factors between element lists and their names.

Expected values come from Python's pow and sympy (reference library), moduli from
their defining documents as pinned in stepper.field.field (BN254: EIP-197).
"""

from __future__ import annotations

import sympy

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.diagnose.radix import constant_ratio, factor_name

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source


def test_bn254_montgomery_radix_is_two_to_the_256():
    field = get_field(NAMED_PRIMES["bn254"])  # modulus from EIP-197
    radix = pow(2, 256, field.p)
    assert factor_name(field, radix) == "2^256 mod p (a Montgomery radix)"
    assert factor_name(field, 7) == "the integer 7"
    assert factor_name(field, field.p - 1) == "-1 (a sign flip)"


def test_constant_ratio_refuses_mismatched_zeros_and_unit_ratio():
    field = get_field(BABYBEAR)
    assert constant_ratio(field, [(0, 5), (2, 4)]) == (None, 0)
    assert constant_ratio(field, [(3, 3), (4, 4)]) == (None, 0)
    assert constant_ratio(field, [(0, 0), (2, 6), (5, 15)]) == (3, 2)


def test_inverse_radixes_and_extension_elements_are_named():
    field = get_field(BABYBEAR)
    inverse = int(sympy.mod_inverse(2**64, BABYBEAR))  # sympy as the reference for the inverse
    assert factor_name(field, inverse) == "2^-64 mod p (an inverse Montgomery radix)"
    ext = get_field(BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1))  # X^4 - 11, from memory (Plonky3's BabyBear quartic)
    assert factor_name(ext, ext.embed(pow(2, 32, BABYBEAR))) == "2^32 mod p (a Montgomery radix)"
    assert factor_name(field, 123457) is None


def test_constant_ratio_over_an_extension_field():
    ext = get_field(BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1))
    c = (3, 1, 0, 0)
    xs = [(1, 2, 3, 4), (5, 0, 0, 7)]
    assert constant_ratio(ext, [(x, ext.mul(c, x)) for x in xs]) == (c, 2)
