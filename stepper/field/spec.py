"""Reading the `field` event: which field a prover's declaration names.

A declaration gives ``name`` (one of :data:`stepper.field.field.NAMED_PRIMES`) or
``modulus`` (any prime up to 1024 bits, decimal or 0x text or an integer),
an optional ``extension_degree`` (1..16) and an optional ``irreducible``
(degree + 1 coefficients, constant first, monic). A named field of a degree
listed in :data:`stepper.field.field.DEFAULT_IRREDUCIBLES` may omit the polynomial.
Every refusal is a :class:`FieldError` saying what was expected and found.
"""

from __future__ import annotations

import re
from typing import Any

from stepper.errors import FieldError, Where
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, clip_text, get_field

__all__ = ["read_field_spec", "field_from_spec", "MAX_EXTENSION_BITS"]

# p^k above 2^4096 would make the irreducibility check of a hostile declaration slow
MAX_EXTENSION_BITS = 4096
MAX_INTEGER_TEXT = 1100  # characters: a 1024-bit modulus needs at most 309 decimal digits
# a modulus given as text; compiled on first use (re caches it): most files name their field
_INTEGER_TEXT = r"0[xX](?P<hex>[0-9a-fA-F]+)|(?P<dec>[0-9]+)"


def read_field_spec(spec: dict[str, Any], where: Where | None = None) -> Field:
    """The field a `field` event names: ``name`` or ``modulus``, optional
    ``extension_degree`` and ``irreducible`` (constant first, monic)."""
    name = spec.get("name")
    modulus = spec.get("modulus")
    if name is not None:
        if not isinstance(name, str) or name.lower() not in NAMED_PRIMES:
            known = ", ".join(NAMED_PRIMES)
            raise FieldError(f"expected a field name among {known}, found {clip_text(repr(name))}", where)
        name = name.lower()
        p = NAMED_PRIMES[name]
        if modulus is not None and _as_int(modulus, "modulus", where) != p:
            raise FieldError(f"field name {name} and modulus {clip_text(str(modulus))} disagree", where)
    elif modulus is not None:
        p = _as_int(modulus, "modulus", where)
        if p < 2 or p.bit_length() > 1024:
            raise FieldError(f"expected a prime modulus of at most 1024 bits, found {clip_text(str(modulus))}", where)
    else:
        raise FieldError("expected a field event with `name` or `modulus`, found neither", where)
    degree = spec.get("extension_degree", 1)
    if isinstance(degree, bool) or not isinstance(degree, int) or not 1 <= degree <= 16:
        raise FieldError(f"expected extension_degree an integer in 1..16, found {clip_text(repr(degree))}", where)
    if degree > 1 and p.bit_length() * degree > MAX_EXTENSION_BITS:
        raise FieldError(
            f"expected an extension of at most {MAX_EXTENSION_BITS} bits, found degree {degree} over a "
            f"{p.bit_length()}-bit prime",
            where,
        )
    irreducible = spec.get("irreducible")
    if degree == 1:
        if irreducible not in (None, [], [0, 1]):
            raise FieldError("an irreducible polynomial was given for extension_degree 1", where)
        q: tuple[int, ...] = ()
    elif irreducible is None:
        default = DEFAULT_IRREDUCIBLES.get((name or "", degree)) if name else None
        if default is None:
            raise FieldError(
                f"expected an `irreducible` polynomial: no default for degree {degree} over {name or p}", where
            )
        q = default
    else:
        if not isinstance(irreducible, list) or len(irreducible) != degree + 1:
            raise FieldError(f"expected `irreducible` as {degree + 1} coefficients, constant first", where)
        q = tuple(_as_int(c, "irreducible coefficient", where) for c in irreducible)
    try:
        return get_field(p, q)
    except FieldError as err:
        raise FieldError(err.message, where) from None


def _as_int(value: object, what: str, where: Where | None) -> int:
    if isinstance(value, bool):
        raise FieldError(f"expected {what} as an integer, found {value!r}", where)
    if isinstance(value, int):
        return value
    if isinstance(value, str):
        match = re.fullmatch(_INTEGER_TEXT, value.strip(), re.ASCII)
        if match is not None and len(value.strip()) <= MAX_INTEGER_TEXT:
            hex_digits = match.group("hex")
            return int(hex_digits, 16) if hex_digits is not None else int(match.group("dec"), 10)
    raise FieldError(f"expected {what} as an integer or decimal/0x string, found {clip_text(repr(value))}", where)


def field_from_spec(spec: dict[str, Any], where: Where | None = None) -> Field:
    """The field a `field` event names: ``name`` or ``modulus``, optional
    ``extension_degree`` and ``irreducible`` (constant first, monic)."""
    return read_field_spec(spec, where)
