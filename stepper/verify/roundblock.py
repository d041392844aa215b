"""The rounds of many instances checked at once, with numpy (no I/O).

:class:`stepper.verify.replay.Replay` checks one round at a time and names what fails.
Most transcripts fail nowhere, and for them this module asks one question of a
whole block of consecutive instances over one prime field whose rounds all carry
the same number m of evaluations g(0..m-1): *does every check pass?*

* every value is canonical (below p);
* sum: g_k(0) + g_k(1) equals the claim carried in (the instance's claim for
  k = 1, g_(k-1)(r_(k-1)) after), with g(1) = g(0) when m = 1;
* challenge: each recorded r_k equals the re-derived one (when there is one);
* final: the final value equals g_mu(r_mu).

The answer is yes or no. On no the caller replays event by event, which names
the instance, round and check; this module never explains. Degree bounds and
the instance rules are the caller's (they are per instance, not per round).

g(r) is evaluated in Newton's forward-difference form, g(r) = sum_k c_k r(r-1)...(r-k+1)
with c_k = (Delta^k g)(0) / k!, by Horner's rule: m - 1 subtraction passes, m - 2
multiplications by a constant and m - 1 by (r - j); no inverse per round.
"""

from __future__ import annotations

from math import factorial

import numpy as np

from stepper.field.kernels import GOLDILOCKS, Kernel, kernel_for
from stepper.field.field import Field

__all__ = ["block_kernel", "supports", "reduce_wide", "evaluate_at", "block_passes"]

_NEVER_COMPILED = 1 << 62  # numba's import costs more than a whole block on numpy


def supports(field: Field, values: int) -> bool:
    """Whether blocks of this field with ``values`` evaluations per round can be checked here:
    a prime field below 2^32 or Goldilocks (numpy kernels with no Python objects), and
    fewer evaluations than p (k! must be invertible for k < m)."""
    return not field.is_extension and (field.p < 2**32 or field.p == GOLDILOCKS) and 0 < values <= min(field.p, 1 << 12)


def block_kernel(field: Field) -> Kernel:
    """The numpy-only kernel of a supported field."""
    return kernel_for(field, _NEVER_COMPILED)


def reduce_wide(kernel: Kernel, digests: np.ndarray, wide: int) -> np.ndarray:
    """Each row's first ``wide`` bytes (``wide`` <= 24) as a little-endian integer, mod p:
    the wide reduction of the built-in schedule, for a whole block of squeezed digests
    (shape (n, 32), uint8). 32-bit limbs below 2^32, 64-bit limbs for Goldilocks."""
    p = kernel.p
    head = np.zeros((digests.shape[0], 24), dtype=np.uint8)
    head[:, :wide] = digests[:, :wide]
    if p < 2**32:
        limbs = head.view("<u4").astype(np.uint64)
        p64, s32 = np.uint64(p), np.uint64(32)
        acc = limbs[:, 5] % p64
        for i in range(4, -1, -1):
            acc = ((acc << s32) | limbs[:, i]) % p64
        return acc  # type: ignore[no-any-return]
    limbs = head.view("<u8")
    l0, l1, l2 = limbs[:, 0], limbs[:, 1], limbs[:, 2]
    # Goldilocks: 2^128 = -2^32 (mod p), so the value is (l1 * 2^64 + l0) - l2 * 2^32, and
    # l2 * 2^32 = (l2 >> 32) * 2^64 + (l2 mod 2^32) * 2^32: two 128-bit reductions, no multiply.
    reduce128 = kernel.reduce128  # type: ignore[attr-defined]  # a GoldilocksKernel here
    m32, s32 = np.uint64(0xFFFFFFFF), np.uint64(32)
    return kernel.sub(reduce128(l0, l1), reduce128((l2 & m32) << s32, l2 >> s32))


def evaluate_at(kernel: Kernel, evals: np.ndarray, points: np.ndarray) -> np.ndarray:
    """g_i(points[i]) for each row i of ``evals`` = g_i(0..m-1) (canonical uint64; m <= p)."""
    m = evals.shape[1]
    p = kernel.p
    deltas = [evals[:, 0]]
    layer = [evals[:, i] for i in range(m)]
    for _ in range(1, m):
        layer = [kernel.sub(layer[i + 1], layer[i]) for i in range(len(layer) - 1)]
        deltas.append(layer[0])
    coefficients = [deltas[k] if k < 2 else kernel.mul(deltas[k], kernel.array([pow(factorial(k), -1, p)]))
                    for k in range(m)]
    acc = coefficients[m - 1]
    for k in range(m - 1, 0, -1):
        shifted = kernel.sub(points, kernel.array([k - 1])) if k > 1 else points
        acc = kernel.add(coefficients[k - 1], kernel.mul(acc, shifted))
    return acc


def block_passes(kernel: Kernel, evals: np.ndarray, challenges: np.ndarray, starts: np.ndarray,
                 claims: np.ndarray, finals: np.ndarray, rederived: np.ndarray | None) -> bool:
    """Whether every check above passes for a block of instances.

    ``evals`` (n, m) and ``challenges`` (n,) hold the rounds of all instances in stream order;
    ``starts`` the row of each instance's first round (ascending, the first 0); ``claims``
    and ``finals`` one value per instance; ``rederived`` the re-derived challenges or None."""
    p64 = np.uint64(kernel.p)
    n, m = evals.shape
    if n == 0 or len(starts) == 0 or starts[0] != 0:
        return False
    if evals.max() >= p64 or challenges.max() >= p64 or finals.max() >= p64 or claims.max() >= p64:
        return False
    if rederived is not None and not np.array_equal(rederived, challenges):
        return False
    carried = evaluate_at(kernel, evals, challenges)
    claim_in = np.empty(n, dtype=np.uint64)
    claim_in[1:] = carried[:-1]
    claim_in[starts] = claims
    sums = kernel.add(evals[:, 0], evals[:, 1 if m > 1 else 0])
    if not np.array_equal(sums, claim_in):
        return False
    ends = np.append(starts[1:], n) - 1
    return bool(np.array_equal(carried[ends], finals))
