"""Constant factors between two runs' elements, and the names such factors usually have.

Pure. A value kept in Montgomery form is the canonical value times R = 2^k mod p
(k the limb width times the limb count: 2^32 for 31-bit fields, 2^64 for
Goldilocks, 2^256 for 254/255-bit fields; common practice, no source), so two
runs that disagree only in that representation differ by one constant
factor on every element. :func:`constant_ratio` finds such a factor (zero must
meet zero); :func:`factor_name` names it when it is a power-of-two radix, its
inverse, a small integer or -1.
"""

from __future__ import annotations

from typing import Sequence

from stepper.field.field import Element, Field

__all__ = ["RADIX_BITS", "constant_ratio", "factor_name"]

RADIX_BITS = (16, 32, 64, 128, 192, 256, 320, 384, 448, 512)


def constant_ratio(field: Field, pairs: Sequence[tuple[Element, Element]]) -> tuple[Element | None, int]:
    """The constant c != 1 with y = c x for every pair, and how many nonzero pairs back it."""
    ratio: Element | None = None
    count = 0
    for x, y in pairs:
        if field.is_zero(x) and field.is_zero(y):
            continue
        if field.is_zero(x) or field.is_zero(y):
            return None, 0
        q = field.div(y, x)
        if ratio is not None and q != ratio:
            return None, 0
        ratio, count = q, count + 1
    if ratio is None or ratio == field.one:
        return None, 0
    return ratio, count


def factor_name(field: Field, c: Element) -> str | None:
    """A name for c when it is a power-of-two radix (or its inverse) or a small integer."""
    for k in RADIX_BITS:
        r = field.embed(pow(2, k, field.p))
        if c == r:
            return f"2^{k} mod p (a Montgomery radix)"
        if not field.is_zero(r) and c == field.inv(r):
            return f"2^-{k} mod p (an inverse Montgomery radix)"
    for n in range(2, 257):
        if c == field.embed(n):
            return f"the integer {n}"
        if c == field.embed(-n):
            return f"the integer -{n}"
    if c == field.embed(-1):
        return "-1 (a sign flip)"
    return None
