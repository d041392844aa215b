"""Evaluating a round polynomial, given by g(0..d), at a challenge: the verifier's hot path.

In a prime field this runs on plain Python ints with cached barycentric weights
and prefix/suffix products of (x - j), so no modular inverse is taken per call;
extension fields (and the degenerate d >= p) go through :func:`stepper.poly.lagrange_at`.
Values returned are canonical.
"""

from __future__ import annotations

from functools import lru_cache
from typing import TYPE_CHECKING, Sequence

from stepper.errors import InputError, Where
from stepper.poly import lagrange_at

if TYPE_CHECKING:
    from stepper.field import Element, Field

__all__ = ["weights", "evaluate_round"]


@lru_cache(maxsize=64)
def weights(p: int, d: int) -> tuple[int, ...]:
    """Barycentric weights 1 / prod_(j != i) (i - j) mod p for the nodes 0..d."""
    out = []
    for i in range(d + 1):
        den = 1
        for j in range(d + 1):
            if j != i:
                den = den * (i - j) % p
        out.append(pow(den, -1, p))
    return tuple(out)


def evaluate_round(field: Field, evals: Sequence[Element], x: Element, where: Where | None = None) -> Element:
    """g(x) for g given by g(0..d): plain-int prefix/suffix products in a prime field."""
    d = len(evals) - 1
    p = field.p
    if field.degree == 1 and d < p:
        if x <= d:  # type: ignore[operator]
            return evals[x]  # type: ignore[index]
        w = weights(p, d)
        prefix = [1] * (d + 1)
        acc = 1
        for j in range(d):
            acc = acc * (x - j) % p  # type: ignore[operator]
            prefix[j + 1] = acc
        total = evals[d] * w[d] * prefix[d]  # type: ignore[operator]
        suffix = 1
        for i in range(d - 1, -1, -1):
            suffix = suffix * (x - i - 1) % p  # type: ignore[operator]
            total += evals[i] * w[i] * prefix[i] * suffix  # type: ignore[operator]
        return total % p
    try:
        return lagrange_at(field, evals, field.lift(x))
    except InputError as err:
        raise InputError(err.message, where) from None
