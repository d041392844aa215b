"""Compiled loops (numba) behind the vector kernels, used for large arrays.

This module imports numba at its top, so nothing imports it eagerly: a kernel
loads it the first time an array reaches its ``compiled_min`` entries. Every
function is ``njit(cache=True)``: the first run on a machine compiles (about a
second), later processes load the machine code from numba's cache.

Invariants: inputs are C-contiguous uint64 arrays of canonical entries and the
``out`` array has the result's shape (that of the first operand, where the second may be a
single row); every entry written is canonical.

Reduction modulo a prime p < 2^32 avoids the slow integer division: for
x < 2^40 p, q = trunc(float(x) / p) is within one of floor(x / p) because a
float64 carries 53 bits, so x - q p lies in [-p, 2p) and one correction step
makes it canonical. Goldilocks p = 2^64 - 2^32 + 1 reduces a 128-bit product
with 2^64 = 2^32 - 1 and 2^96 = -1 (mod p). Any other prime below 2^64 uses
Montgomery reduction with R = 2^64: REDC(REDC(a b) (R^2 mod p)) = a b mod p.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = [
    "small_mul",
    "small_ext_mul",
    "small_binomial_mul",
    "small_binomial4_mul",
    "small_ext4_mul",
    "small_add",
    "small_sub",
    "gl_add",
    "gl_mul",
    "gl_ext_mul",
    "word_mul",
    "word_add",
    "word_sub",
    "first_call",
]

_ZERO = np.uint64(0)
_ONE = np.uint64(1)
_S32 = np.uint64(32)
_M32 = np.uint64(0xFFFFFFFF)
_GL_P = np.uint64(0xFFFFFFFF00000001)
_GL_EPS = np.uint64(0xFFFFFFFF)  # 2^64 mod p


@njit(cache=True, inline="always")
def _mod_small(x: np.uint64, p: np.uint64, pinv: float) -> np.uint64:
    """x mod p for a uint64 x < 2^40 p and p < 2^32 (pinv = 1.0 / p)."""
    q = np.uint64(np.float64(x) * pinv)
    r = np.int64(x - q * p)
    ip = np.int64(p)
    if r < 0:
        r += ip
    elif r >= ip:
        r -= ip
    return np.uint64(r)


@njit(cache=True)
def small_mul(a: np.ndarray, b: np.ndarray, p: np.uint64, pinv: float, out: np.ndarray) -> np.ndarray:
    """out = a * b mod p, entrywise, for p < 2^32."""
    ip = np.int64(p)
    for i in range(a.shape[0]):
        x = a[i] * b[i]
        q = np.uint64(np.float64(a[i]) * np.float64(b[i]) * pinv)
        r = np.int64(x - q * p)
        if r < 0:
            r += ip
        elif r >= ip:
            r -= ip
        out[i] = np.uint64(r)
    return out


@njit(cache=True)
def small_ext_mul(
    a: np.ndarray, b: np.ndarray, xk: np.ndarray, p: np.uint64, pinv: float, out: np.ndarray,
) -> np.ndarray:
    """out = a * b in F_p[X]/(q), rows of k coefficients, p < 2^32;
    xk holds X^k mod q (= -q_0, ..., -q_(k-1))."""
    n, k = a.shape
    prod = np.zeros(2 * k - 1, dtype=np.uint64)
    for i in range(n):
        for t in range(2 * k - 1):
            prod[t] = _ZERO
        for j in range(k):
            aj = a[i, j]
            if aj == _ZERO:
                continue
            for m in range(k):
                prod[j + m] += _mod_small(aj * b[i, m], p, pinv)
        for t in range(2 * k - 2, k - 1, -1):
            c = _mod_small(prod[t], p, pinv)
            if c == _ZERO:
                continue
            for m in range(k):
                if xk[m] != _ZERO:
                    prod[t - k + m] += _mod_small(c * xk[m], p, pinv)
        for m in range(k):
            out[i, m] = _mod_small(prod[m], p, pinv)
    return out


@njit(cache=True)
def small_binomial_mul(
    a: np.ndarray, b: np.ndarray, w: np.uint64, p: np.uint64, pinv: float, out: np.ndarray,
) -> np.ndarray:
    """out = a * b in F_p[X]/(X^k - w), rows of k coefficients, p < 2^32:
    c_t = sum_(j+m=t) a_j b_m + w * sum_(j+m=t+k) a_j b_m."""
    n, k = a.shape
    for i in range(n):
        for t in range(k):
            low = _ZERO
            for j in range(t + 1):
                low += _mod_small(a[i, j] * b[i, t - j], p, pinv)
            high = _ZERO
            for j in range(t + 1, k):
                high += _mod_small(a[i, j] * b[i, t + k - j], p, pinv)
            wrapped = _mod_small(_mod_small(high, p, pinv) * w, p, pinv)
            out[i, t] = _mod_small(low + wrapped, p, pinv)
    return out


@njit(cache=True)
def small_binomial4_mul(
    a: np.ndarray, b: np.ndarray, w: np.uint64, p: np.uint64, pinv: float, out: np.ndarray,
) -> np.ndarray:
    """The k = 4 case of :func:`small_binomial_mul`, unrolled, for p < 2^31:
    four raw products sum below 4 (p - 1)^2 < 2^64, so each coefficient
    needs one reduction before and one after the multiplication by w. ``b`` may
    be a single row, which multiplies every row of ``a`` (a scalar, not copied n times)."""
    step = 0 if b.shape[0] == 1 else 1
    for i in range(a.shape[0]):
        a0, a1, a2, a3 = a[i, 0], a[i, 1], a[i, 2], a[i, 3]
        j = i * step
        b0, b1, b2, b3 = b[j, 0], b[j, 1], b[j, 2], b[j, 3]
        h0 = _mod_small(a1 * b3 + a2 * b2 + a3 * b1, p, pinv)
        h1 = _mod_small(a2 * b3 + a3 * b2, p, pinv)
        h2 = _mod_small(a3 * b3, p, pinv)
        c0 = _mod_small(a0 * b0, p, pinv) + _mod_small(h0 * w, p, pinv)
        c1 = _mod_small(a0 * b1 + a1 * b0, p, pinv) + _mod_small(h1 * w, p, pinv)
        c2 = _mod_small(a0 * b2 + a1 * b1 + a2 * b0, p, pinv) + _mod_small(h2 * w, p, pinv)
        out[i, 0] = _mod_small(c0, p, pinv)
        out[i, 1] = _mod_small(c1, p, pinv)
        out[i, 2] = _mod_small(c2, p, pinv)
        out[i, 3] = _mod_small(a0 * b3 + a1 * b2 + a2 * b1 + a3 * b0, p, pinv)
    return out


@njit(cache=True)
def small_ext4_mul(
    a: np.ndarray, b: np.ndarray, xk: np.ndarray, p: np.uint64, pinv: float, out: np.ndarray,
) -> np.ndarray:
    """The k = 4 case of :func:`small_ext_mul`, unrolled, for p < 2^31 (raw
    sums of four products fit in 64 bits); X^6, X^5, X^4 are folded down in turn
    with X^4 = xk_0 + xk_1 X + xk_2 X^2 + xk_3 X^3. ``b`` may be a single row, as in
    :func:`small_binomial4_mul`."""
    x0, x1, x2, x3 = xk[0], xk[1], xk[2], xk[3]
    step = 0 if b.shape[0] == 1 else 1
    for i in range(a.shape[0]):
        a0, a1, a2, a3 = a[i, 0], a[i, 1], a[i, 2], a[i, 3]
        j = i * step
        b0, b1, b2, b3 = b[j, 0], b[j, 1], b[j, 2], b[j, 3]
        r0 = _mod_small(a0 * b0, p, pinv)
        r1 = _mod_small(a0 * b1 + a1 * b0, p, pinv)
        r2 = _mod_small(a0 * b2 + a1 * b1 + a2 * b0, p, pinv)
        r3 = _mod_small(a0 * b3 + a1 * b2 + a2 * b1 + a3 * b0, p, pinv)
        r4 = _mod_small(a1 * b3 + a2 * b2 + a3 * b1, p, pinv)
        r5 = _mod_small(a2 * b3 + a3 * b2, p, pinv)
        r6 = _mod_small(a3 * b3, p, pinv)
        r2 += _mod_small(r6 * x0, p, pinv)
        r3 += _mod_small(r6 * x1, p, pinv)
        r4 += _mod_small(r6 * x2, p, pinv)
        r5 = _mod_small(r5 + _mod_small(r6 * x3, p, pinv), p, pinv)
        r1 += _mod_small(r5 * x0, p, pinv)
        r2 += _mod_small(r5 * x1, p, pinv)
        r3 += _mod_small(r5 * x2, p, pinv)
        r4 = _mod_small(r4 + _mod_small(r5 * x3, p, pinv), p, pinv)
        out[i, 0] = _mod_small(r0 + _mod_small(r4 * x0, p, pinv), p, pinv)
        out[i, 1] = _mod_small(r1 + _mod_small(r4 * x1, p, pinv), p, pinv)
        out[i, 2] = _mod_small(r2 + _mod_small(r4 * x2, p, pinv), p, pinv)
        out[i, 3] = _mod_small(r3 + _mod_small(r4 * x3, p, pinv), p, pinv)
    return out


@njit(cache=True)
def small_add(a: np.ndarray, b: np.ndarray, p: np.uint64, out: np.ndarray) -> np.ndarray:
    """out = a + b mod p, entrywise, for p < 2^63."""
    for i in range(a.shape[0]):
        s = a[i] + b[i]
        out[i] = s - p if s >= p else s
    return out


@njit(cache=True)
def small_sub(a: np.ndarray, b: np.ndarray, p: np.uint64, out: np.ndarray) -> np.ndarray:
    """out = a - b mod p, entrywise, for p < 2^63."""
    for i in range(a.shape[0]):
        out[i] = a[i] - b[i] if a[i] >= b[i] else a[i] + (p - b[i])
    return out


@njit(cache=True, inline="always")
def _gl_reduce128(lo: np.uint64, hi: np.uint64) -> np.uint64:
    hh = hi >> _S32
    hl = hi & _M32
    t = lo - hh
    if lo < hh:
        t -= _GL_EPS
    u = hl * _GL_EPS
    r = t + u
    if r < t:
        r += _GL_EPS
    if r >= _GL_P:
        r -= _GL_P
    return r


@njit(cache=True, inline="always")
def _gl_mul1(a: np.uint64, b: np.uint64) -> np.uint64:
    hi, lo = _mul128(a, b)
    return _gl_reduce128(lo, hi)


@njit(cache=True, inline="always")
def _gl_add1(a: np.uint64, b: np.uint64) -> np.uint64:
    s = a + b
    if s < a:
        s += _GL_EPS
    if s >= _GL_P:
        s -= _GL_P
    return s


@njit(cache=True)
def gl_add(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> np.ndarray:
    for i in range(a.shape[0]):
        out[i] = _gl_add1(a[i], b[i])
    return out


@njit(cache=True)
def gl_mul(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> np.ndarray:
    for i in range(a.shape[0]):
        out[i] = _gl_mul1(a[i], b[i])
    return out


@njit(cache=True)
def gl_ext_mul(a: np.ndarray, b: np.ndarray, xk: np.ndarray, out: np.ndarray) -> np.ndarray:
    """out = a * b in F_p[X]/(q) over Goldilocks; xk holds X^k mod q."""
    n, k = a.shape
    prod = np.zeros(2 * k - 1, dtype=np.uint64)
    for i in range(n):
        for t in range(2 * k - 1):
            prod[t] = _ZERO
        for j in range(k):
            aj = a[i, j]
            for m in range(k):
                prod[j + m] = _gl_add1(prod[j + m], _gl_mul1(aj, b[i, m]))
        for t in range(2 * k - 2, k - 1, -1):
            c = prod[t]
            for m in range(k):
                if xk[m] != _ZERO:
                    prod[t - k + m] = _gl_add1(prod[t - k + m], _gl_mul1(c, xk[m]))
        for m in range(k):
            out[i, m] = prod[m]
    return out


@njit(cache=True, inline="always")
def _mul128(a: np.uint64, b: np.uint64) -> tuple[np.uint64, np.uint64]:
    """The 128-bit product a * b as (high, low) 64-bit words."""
    a0 = a & _M32
    a1 = a >> _S32
    b0 = b & _M32
    b1 = b >> _S32
    lo = a0 * b0
    mid1 = a0 * b1
    mid = mid1 + a1 * b0
    mid_carry = _ONE if mid < mid1 else _ZERO
    lo2 = lo + (mid << _S32)
    carry = _ONE if lo2 < lo else _ZERO
    return a1 * b1 + (mid >> _S32) + (mid_carry << _S32) + carry, lo2


@njit(cache=True, inline="always")
def _redc(hi: np.uint64, lo: np.uint64, p: np.uint64, pneg_inv: np.uint64) -> np.uint64:
    """(hi 2^64 + lo) / 2^64 mod p for hi < p: Montgomery's reduction."""
    m = lo * pneg_inv  # wraps mod 2^64: m = -lo / p mod 2^64
    mp_hi, mp_lo = _mul128(m, p)
    carry = _ONE if lo != _ZERO else _ZERO  # lo + mp_lo = 0 mod 2^64, with a carry unless both are 0
    t = hi + mp_hi
    overflow = t < hi
    t2 = t + carry
    overflow = overflow or t2 < t
    if overflow or t2 >= p:
        t2 -= p
    return t2


@njit(cache=True)
def word_mul(
    a: np.ndarray, b: np.ndarray, p: np.uint64, pneg_inv: np.uint64, r2: np.uint64, out: np.ndarray,
) -> np.ndarray:
    """out = a * b mod p for an odd prime p < 2^64 (pneg_inv = -1/p mod 2^64, r2 = 2^128 mod p)."""
    for i in range(a.shape[0]):
        hi, lo = _mul128(a[i], b[i])
        x = _redc(hi, lo, p, pneg_inv)  # a b / R
        hi, lo = _mul128(x, r2)
        out[i] = _redc(hi, lo, p, pneg_inv)  # a b / R * R^2 / R = a b
    return out


@njit(cache=True)
def word_add(a: np.ndarray, b: np.ndarray, p: np.uint64, out: np.ndarray) -> np.ndarray:
    """out = a + b mod p for p < 2^64 (the sum may wrap past 2^64)."""
    for i in range(a.shape[0]):
        s = a[i] + b[i]
        out[i] = s - p if (s < a[i] or s >= p) else s
    return out


@njit(cache=True)
def word_sub(a: np.ndarray, b: np.ndarray, p: np.uint64, out: np.ndarray) -> np.ndarray:
    """out = a - b mod p for p < 2^64 (Goldilocks included)."""
    for i in range(a.shape[0]):
        d = a[i] - b[i]
        out[i] = d + p if a[i] < b[i] else d
    return out


def first_call() -> None:
    """Run one loop on one entry: numba loads its typing and lowering registries on the first
    call in a process, which :func:`stepper.field.kernels.base.load_compiled` wants done while
    it holds numba's optional packages back."""
    one = np.ones(1, dtype=np.uint64)
    small_add(one, one, np.uint64(3), np.empty_like(one))
