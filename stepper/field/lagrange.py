"""Evaluating a round polynomial, given by g(0..d), at a challenge: the verifier's hot path.

In a prime field this runs on plain Python ints: :func:`round_evaluator` returns,
per (p, d), a function with the barycentric weights baked in that forms the
products of (x - j) without any modular inverse (straight-line code for d <= 3,
prefix/suffix products above) and reduces once at the end. Extension fields (and
the degenerate d >= p) go through :func:`stepper.field.poly.lagrange_at`. Values
returned are canonical.
"""

from __future__ import annotations

from functools import lru_cache
from typing import TYPE_CHECKING, Callable, Sequence

from stepper.errors import InputError, Where
from stepper.field.poly import lagrange_at, lagrange_weights

if TYPE_CHECKING:
    from stepper.field.field import Element, Field

__all__ = ["weights", "round_evaluator", "evaluate_round"]

PrimeEvaluator = Callable[[Sequence[int], int], int]


weights = lagrange_weights  # barycentric weights for the nodes 0..d, shared with stepper.field.poly


@lru_cache(maxsize=64)
def round_evaluator(p: int, d: int) -> PrimeEvaluator:
    """``g(x)`` for canonical ints g(0..d) and x in F_p (requires d < p):
    sum_i g(i) * w_i * prod_(j != i) (x - j), reduced mod p once."""
    if d >= p:
        raise ValueError(f"expected fewer than p = {p} nodes, found {d + 1}")
    if d == 0:
        return lambda e, x: e[0]
    if d == 1:
        return lambda e, x: (e[0] + (e[1] - e[0]) * x) % p
    w = weights(p, d)
    if d == 2:
        w0, w1, w2 = w

        def degree2(e: Sequence[int], x: int) -> int:
            t1, t2 = x - 1, x - 2
            return (e[0] * w0 * t1 * t2 + (e[1] * w1 * t2 + e[2] * w2 * t1) * x) % p

        return degree2
    if d == 3:
        w0, w1, w2, w3 = w

        def degree3(e: Sequence[int], x: int) -> int:
            t1, t2, t3 = x - 1, x - 2, x - 3
            low, high = x * t1, t2 * t3
            return ((e[0] * w0 * t1 + e[1] * w1 * x) * high + (e[2] * w2 * t3 + e[3] * w3 * t2) * low) % p

        return degree3

    def prefix_suffix(e: Sequence[int], x: int) -> int:
        prefix = [1] * (d + 1)
        acc = 1
        for j in range(d):
            acc = acc * (x - j) % p
            prefix[j + 1] = acc
        total = e[d] * w[d] * prefix[d]
        suffix = 1
        for i in range(d - 1, -1, -1):
            suffix = suffix * (x - i - 1) % p
            total += e[i] * w[i] * prefix[i] * suffix
        return total % p

    return prefix_suffix


def evaluate_round(field: Field, evals: Sequence[Element], x: Element, where: Where | None = None) -> Element:
    """g(x) for g given by g(0..d): plain ints in a prime field, :func:`lagrange_at` otherwise."""
    d = len(evals) - 1
    p = field.p
    if field.degree == 1 and d < p:
        return round_evaluator(p, d)(evals, x)  # type: ignore[arg-type]
    try:
        return lagrange_at(field, evals, field.lift(x))
    except InputError as err:
        raise InputError(err.message, where) from None
