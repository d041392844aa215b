"""A block of sumcheck rounds checked on rows of 29-bit limbs, as congruences mod p (no I/O).

:class:`~stepper.field.kernels.limbs.LimbKernel` makes every result canonical, at the cost
of a Montgomery product or a conditional subtraction of p per step. A block of rounds only
asks whether values are *equal* mod p, and a congruence can be tested on values known only
to lie below a small multiple of p, so the checks here never make a value canonical:

* :func:`rounds_congruent`: (m-1)! g_i(r_i) = (m-1)! t_i mod p for every column i, where g_i
  is given by its values g_i(0..m-1), r_i is a point and t_i a target below a small multiple
  of p (the next round's g(0) + g(1), never reduced, or the final value). Newton's forward
  differences scaled by (m-1)! are small signed integer combinations of the columns, formed
  limb by limb; Horner's rule then runs on them, each step one Montgomery product by
  (r_i - k) R mod p plus the next coefficient made non-negative by a fixed multiple of p,
  with no reduction in between, while :func:`horner_plan` shows every partial value stays
  below R (a Montgomery product of x < a p and y < b p is below (a b p / R + 1) p).
* :func:`wide_congruent`: rows of little-endian bytes (the schedule's wide samples) against
  canonical values: the sample's limbs above p's n folded onto the low ones by the constants
  2^(29 k) mod p (one product of a limb by a constant each, no carry in between), minus v plus
  p, is a small multiple of p exactly when x = v mod p.
* :func:`multiple_of_p`: the last step of both. An integer D in [0, q p] is a multiple of p
  exactly when D - round(D / p) p is zero, and D / p needs only the top three limbs in
  floating point (their error is far below p / 2); the subtraction itself is exact.

Compared with canonical values (``LimbKernel.evaluate`` and ``reduce_bytes``, then equality
tests) this saves the conversion of g(r) out of Montgomery form, the product that turns a wide
sample back out of its Montgomery steps, every conditional subtraction and the sum
g(0) + g(1) mod p (``python3 bench/check_fields.py --fields bn254,bls12-381`` measures the
whole check).
"""

from __future__ import annotations

from functools import lru_cache
from math import factorial
from typing import TYPE_CHECKING

import numpy as np

from stepper.field.kernels.limbs import LIMB_BITS, word_columns

if TYPE_CHECKING:
    from stepper.field.kernels.limbs import LimbKernel

__all__ = ["horner_plan", "rounds_congruent", "wide_congruent", "multiple_of_p"]

_MASK = (1 << LIMB_BITS) - 1
_INT64_ROOM = 1 << 61  # signed limbs stay below this (products of limbs are formed in uint64 elsewhere)
_INT64_LIMB = 1 << 63  # a signed 64-bit limb is below this in size


def _normalise(t: np.ndarray) -> np.ndarray:
    """Signed limbs (int64, limb-major) carried in place so that every limb but the top one is in
    [0, 2^29): arithmetic shifts floor, so a negative limb borrows from the next."""
    for i in range(t.shape[0] - 1):
        t[i + 1] += t[i] >> LIMB_BITS
        t[i] &= _MASK
    return t


def multiple_of_p(kernel: LimbKernel, d: np.ndarray, bound: int) -> np.ndarray:
    """Per column, whether the integer with signed limbs ``d`` (int64, limb-major (n, N), the value
    known to lie in [0, bound p]) is a multiple of p. Each limb below 2^60 in size, and each limb's
    part of D / p (|d_j| 2^(29 j) / p) a few times the bound at most, as the callers' sums of a
    bounded multiple of p and a bounded subtraction give: the estimate from the top three limbs in
    floating point is then within 2^-12 of D / p (relative error 2^-53 per step on parts below
    2^36; the limbs left out weigh below 2^-17), well inside the half unit rounding allows, even where
    a limb is past 2^53 (12! times a difference in rounds of 13 values). The bound below 2^33, so
    that the quotient times a limb of p stays below 2^62. Consumes ``d``."""
    n, p = kernel.n, kernel.p
    if bound >= 1 << 33:
        raise ValueError(f"expected a quotient bound below 2^33, found {bound}")
    weights = np.array([2.0 ** (LIMB_BITS * i) / p for i in range(n - 3, n)])
    quotient = np.rint(weights @ d[n - 3:].astype(np.float64)).astype(np.int64)
    d -= quotient * kernel._p_limbs.astype(np.int64)
    return np.logical_not(_normalise(d).any(axis=0))  # type: ignore[no-any-return]


def horner_plan(kernel: LimbKernel, m: int, point_bound: int = 3) -> tuple[list[int], list[int], int] | None:
    """For rounds of m values: the weights (m-1)!/k! of the differences, the multiples of p that
    make each scaled difference non-negative, and the bound (in units of p) of the value Horner's
    rule ends with; None when some partial value could reach R (then the canonical path is used).
    ``point_bound``: the points (r - k) R mod p are below that many p (r R mod p, below 2p, plus a
    constant below p)."""
    if m < 1:
        return None
    scale = factorial(m - 1)
    weights = [scale // factorial(k) for k in range(m)]
    offsets = [w << (k - 1) if k else 0 for k, w in enumerate(weights)]  # a k-th difference lies in (-2^(k-1) p, 2^(k-1) p)
    if max(w << max(k, 1) for k, w in enumerate(weights)) << (LIMB_BITS + 1) >= _INT64_ROOM:
        return None  # the scaled differences would not fit signed 64-bit limbs
    room = (1 << kernel._r_bits) / kernel.p  # R / p
    bound = float(weights[m - 1] << max(m - 1, 1))
    if bound >= room:
        return None
    for k in range(m - 2, -1, -1):
        bound = bound * point_bound / room + 1 + (weights[k] << max(k, 1) if k else weights[k])
        if bound >= room:  # every partial value below R: its top limb below 2^29, as products need
            return None
    return weights, offsets, int(bound) + 1


def rounds_congruent(kernel: LimbKernel, columns: np.ndarray, points: np.ndarray, targets: np.ndarray,
                     target_bound: int) -> np.ndarray | None:
    """Per column i, whether g_i(points_i) = targets_i mod p; None when :func:`horner_plan` finds
    no safe plan for these m. ``columns``: g_i(0..m-1), canonical, limb-major (m, n, N) uint64;
    ``points``: canonical, limb-major (n, N); ``targets``: limb-major (n, N), limbs below 2^31,
    values below ``target_bound`` p."""
    m = columns.shape[0]
    plan = horner_plan(kernel, m)
    if plan is None:
        return None
    weights, offsets, acc_bound = plan
    p_limbs = kernel._p_limbs.astype(np.int64)
    layer = list(columns.view(np.int64))
    coefficients = [layer[0]]
    for _ in range(1, m):
        layer = [layer[j + 1] - layer[j] for j in range(len(layer) - 1)]
        coefficients.append(layer[0])
    r_mont = montgomery_form(kernel, points) if m > 1 else points  # r R mod p, below 2p
    acc = _normalise(_scaled(coefficients[m - 1], weights[m - 1], offsets[m - 1], p_limbs)).view(np.uint64)
    # the points (r - k) R mod p are r R mod p plus a constant below p, not carried: limbs below 2^30, so a
    # product's limbs left as summed are below n 2^59 + n 2^58 + 2^35 and fit signed 64-bit limbs with the
    # term added (its limbs below 2^41) while 3 n 2^58 + 2^41 < 2^63, n <= 10 (BN254 and the BLS12-381 scalar
    # field, stepper's bls12-381: n = 9; every prime above 288 bits, BLS12-381's 381-bit base field among
    # them, carries each product)
    carried = (3 * kernel.n << 58) + (1 << 41) >= _INT64_LIMB
    for k in range(m - 2, -1, -1):
        shift = r_mont if k == 0 else r_mont + kernel._column(-k * (1 << kernel._r_bits) % kernel.p)
        term = _scaled(coefficients[k], weights[k], offsets[k], p_limbs)
        term += kernel._montgomery(acc, shift, carried).view(np.int64)  # below (a b p / R + 1) p
        acc = _normalise(term).view(np.uint64)  # the one carry pass of the step
    scale = weights[0]  # (m-1)!
    d = acc.view(np.int64) - targets.astype(np.int64) * scale
    d += p_limbs * (scale * target_bound)
    return multiple_of_p(kernel, d, acc_bound + scale * target_bound)


def montgomery_form(kernel: LimbKernel, points: np.ndarray) -> np.ndarray:
    """x R mod p for limb-major x (limbs below 2^29, any value below 2^(29 n)), below 2p, limbs carried
    (uint64). Folded rather than multiplied: x R = sum_i x_i 2^(29 (i + n)), and each limb times the
    constant 2^(29 (i + n)) mod p (n products of a limb by a column, no carries between: each limb of
    the sum below n 2^58) gives a value below n 2^29 p; its quotient by p is estimated in floating point
    from every limb, so subtracting that quotient minus one times p leaves a value in (p / 2 - 1, 3 p / 2 + 1).
    Half the numpy passes of a Montgomery product by R^2 mod p.

    The bound: the sum T = x R mod p + k p is below n 2^29 p <= 2^34 p (n <= 18 at 512 bits), its limbs
    below n 2^58 < 2^63. Every term of the estimate is non-negative and carries at most three roundings
    (the limb to float64, the weight, the product) plus one per addition, so the estimate is within
    (n + 3) 2^-53 T / p < 21 2^-53 2^34 < 2^-14 of T / p. Rounding it lands within 1/2 + 2^-14 of T / p,
    so T - (that - 1) p lies in ((1/2 - 2^-14) p, (3/2 + 2^-14) p): positive and below 2p whatever
    the input, with half a unit to spare for the estimate's error."""
    n = kernel.n
    constants = _fold_constants(kernel)
    total = np.multiply(constants[0], points[0]).view(np.int64)
    for i in range(1, n):
        total += (constants[i] * points[i]).view(np.int64)
    quotient = np.rint(_quotient_weights(kernel) @ total.astype(np.float64)).astype(np.int64)
    quotient -= 1
    total -= quotient * kernel._p_limbs.view(np.int64)
    return _normalise(total).view(np.uint64)


@lru_cache(maxsize=16)
def _fold_constants(kernel: LimbKernel) -> tuple[np.ndarray, ...]:
    """Per limb i, the column of 2^(29 (i + n)) mod p (uint64, shape (n, 1))."""
    return tuple(kernel._column(pow(2, LIMB_BITS * (i + kernel.n), kernel.p)) for i in range(kernel.n))


@lru_cache(maxsize=16)
def _quotient_weights(kernel: LimbKernel) -> np.ndarray:
    """2^(29 i) / p for every limb i (float64): the weights of a value's estimated quotient by p."""
    return np.array([2.0 ** (LIMB_BITS * i) / kernel.p for i in range(kernel.n)])


def _scaled(difference: np.ndarray, weight: int, offset: int, p_limbs: np.ndarray) -> np.ndarray:
    """weight * difference + offset * p, a new array of signed limbs (not carried)."""
    term = difference * weight if weight != 1 else difference.copy()
    if offset:
        term += p_limbs * offset
    return term


def wide_congruent(kernel: LimbKernel, rows: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Per row, whether the little-endian integer of ``rows`` (uint8, (N, w)) is congruent to the
    value of the same row of ``values`` (limb rows (N, n), limbs below 2^29, canonical) mod p.

    The sample's limbs above the n of p are folded onto the low ones with the constants
    2^(29 k) mod p (each limb times one constant: no carries between steps), the value
    subtracted and p added, so the integer checked lies in [0, (2^(29 n) / p + f 2^29 + 1) p] for
    f folded limbs; :func:`multiple_of_p` decides."""
    width = rows.shape[1]
    n, p = kernel.n, kernel.p
    limbs = max(n, -(-8 * width // LIMB_BITS))
    sample = kernel._limbs_of_columns(word_columns(rows)[:, 0], limbs).view(np.int64)  # (limbs, N), each below 2^29
    if limbs - n > 8:
        raise ValueError(f"expected samples of at most {n + 8} limbs, found {limbs}")
    d = sample[:n]
    for k in range(n, limbs):  # each product below 2^58: at most 2^3 of them keep a limb below 2^62
        d += _signed_column(kernel, pow(2, LIMB_BITS * k, p)) * sample[k]
    d -= values.T.view(np.int64)
    d += kernel._p_limbs.view(np.int64)
    bound = -(-(1 << kernel._r_bits) // p) + (limbs - n << LIMB_BITS) + 1
    return multiple_of_p(kernel, _normalise(d), bound)


def _signed_column(kernel: LimbKernel, value: int) -> np.ndarray:
    """One integer below 2^(29 n) as signed limb-major limbs, shape (n, 1)."""
    return np.array([[(value >> (LIMB_BITS * i)) & _MASK] for i in range(kernel.n)], dtype=np.int64)
