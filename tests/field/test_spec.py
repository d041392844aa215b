"""Reading a `field` declaration: named fields, user moduli, extensions, refusals."""

from __future__ import annotations

import pytest

from stepper.errors import FieldError, Where
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.field.spec import read_field_spec


def test_names_moduli_and_extensions_are_read():
    bb = NAMED_PRIMES["babybear"]
    assert read_field_spec({"name": "BabyBear"}) is get_field(bb)
    assert read_field_spec({"modulus": "0x65"}) is get_field(101)
    declared = {"modulus": 101, "extension_degree": 2, "irreducible": [2, 0, 1]}
    assert read_field_spec(declared) is get_field(101, (2, 0, 1))
    bb4 = get_field(bb, DEFAULT_IRREDUCIBLES["babybear", 4])
    assert read_field_spec({"name": "babybear", "extension_degree": 4}) is bb4
    assert field_from_spec({"name": "babybear", "modulus": str(bb)}) is get_field(bb)


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        ({"name": "nope"}, "field name among"),
        ({"name": "babybear", "modulus": 7}, "disagree"),
        ({"modulus": 15}, "not prime"),
        ({"modulus": 1.5}, "as an integer"),
        ({"modulus": "1_01"}, "as an integer"),  # Python's int() would accept the underscore
        ({"modulus": "9" * 2000}, "as an integer"),
        ({"name": "babybear", "extension_degree": 3}, "no default for degree 3"),
        ({"name": "babybear", "extension_degree": 2, "irreducible": [1, 1]}, "3 coefficients"),
        ({"name": "babybear", "extension_degree": True}, "extension_degree"),
        ({"name": "babybear", "irreducible": [2, 1]}, "extension_degree 1"),
        ({"modulus": 2**521 - 1, "extension_degree": 8, "irreducible": [1] * 9}, "at most 4096 bits"),  # M521 is prime
        ({"modulus": 101, "extension_degree": 2, "irreducible": [1, 0, 1]}, "reducible"),  # -1 is a square mod 101
        ({}, "neither"),
    ],
)
def test_unusable_declarations_are_refused_with_the_place(spec, message):
    where = Where(file="events.jsonl", line=1)
    with pytest.raises(FieldError, match=message) as caught:
        field_from_spec(spec, where)
    assert "events.jsonl, line 1" in str(caught.value)
