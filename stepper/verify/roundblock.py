"""The rounds of many instances checked at once, with numpy (no I/O).

:class:`stepper.verify.replay.Replay` checks one round at a time and names what fails.
Most transcripts fail nowhere, and for them this module asks one question of a
whole block of consecutive instances over one field whose rounds all carry the
same number m of evaluations g(0..m-1): *does every check pass?*

* every value is canonical (below p; every coefficient, in an extension);
* sum: g_k(0) + g_k(1) equals the claim carried in (the instance's claim for
  k = 1, g_(k-1)(r_(k-1)) after), with g(1) = g(0) when m = 1;
* challenge: each recorded r_k equals the re-derived one (when there is one);
* final: the final value equals g_mu(r_mu).

The answer is yes or no. On no the caller replays event by event, which names
the instance, round and check; this module never explains. Degree bounds and
the instance rules are the caller's (they are per instance, not per round).

Every field works here, each on its numpy kernel (:func:`block_kernel`): uint64
entries for primes below 2^64, rows of 29-bit limbs for primes of 65 to 512 bits
(BN254, BLS12-381: :class:`~stepper.field.kernels.limbs.LimbKernel`, Montgomery
products in numpy), object arrays of Python ints above, rows of k coefficients for an
extension. Over limb rows the sum, challenge and final checks are congruences mod p on
values never made canonical (:mod:`stepper.field.kernels.limb_rounds`), and the
re-derived challenges arrive as the schedule's unreduced samples (:class:`WideSamples`).

g(r) is evaluated for a whole column of rounds at once in Newton's forward-difference
form, g(r) = sum_k c_k r(r-1)...(r-k+1) with c_k = (Delta^k g)(0) / k!, by Horner's
rule: m - 1 subtraction passes, m - 2 multiplications by a base-field constant (the
1/k!, constants of the degree) and m - 1 by (r - j); no inverse per round.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import comb, factorial

import numpy as np

from stepper.field.kernels import GOLDILOCKS, ExtensionKernel, Kernel, kernel_for
from stepper.field.kernels.prime import GoldilocksKernel, SmallPrimeKernel, WideKernel, mod_u64
from stepper.field.kernels.limbs import MAX_LIMB_PRIME_BITS, LimbKernel
from stepper.field.field import Field
from stepper.verify.cells import below_p, words_to_ints

__all__ = ["block_kernel", "supports", "reduce_wide", "reduce_wide_digits", "WideSamples", "evaluate_at",
           "block_passes"]

_NEVER_COMPILED = 1 << 62  # numba's import costs more than a whole block on numpy
MAX_VALUES = 1 << 12  # evaluations per round checked by the block


def supports(field: Field, values: int) -> bool:
    """Whether blocks of this field with ``values`` evaluations per round can be checked here:
    fewer evaluations than p (k! must be invertible for k < m) and at most ``MAX_VALUES``."""
    return 0 < values <= min(field.p, MAX_VALUES)


def block_kernel(field: Field) -> Kernel:
    """The numpy-only kernel of a field: limb rows for a prime of 65 to 512 bits."""
    if not field.is_extension and 64 < field.p.bit_length() <= MAX_LIMB_PRIME_BITS:
        return LimbKernel(field.base, _NEVER_COMPILED)
    return kernel_for(field, _NEVER_COMPILED)


def _base(kernel: Kernel) -> Kernel:
    return kernel.base if isinstance(kernel, ExtensionKernel) else kernel


def reduce_wide(kernel: Kernel, digests: np.ndarray, wide: int) -> np.ndarray:
    """Each row's first ``wide`` bytes as a little-endian integer, mod p: the wide reduction
    of the built-in schedule, for a whole block of squeezed samples (shape (n, >= wide),
    uint8), as base-field entries of ``kernel`` (its base kernel for an extension).
    32-bit limbs below 2^32 and 64-bit limbs for Goldilocks (``wide`` <= 24); Python ints
    in an object array otherwise."""
    base = _base(kernel)
    if isinstance(base, LimbKernel):
        return base.reduce_bytes(np.ascontiguousarray(digests[:, :wide]))
    p = base.p
    if p < 2**32 and digests.shape[1] % 4 == 0 and wide <= digests.shape[1]:
        return _reduce_words(np.ascontiguousarray(digests).view("<u4"), wide, p)
    if p == GOLDILOCKS and wide == 24 and digests.shape[1] % 8 == 0:  # the schedule's width: whole words
        return _reduce_goldilocks(base, np.ascontiguousarray(digests).view("<u8"))
    if wide <= 24 and (p < 2**32 or p == GOLDILOCKS):
        head = np.zeros((digests.shape[0], 24), dtype=np.uint8)
        head[:, :wide] = digests[:, :wide]
        if p < 2**32:
            return _reduce_words(head.view("<u4"), wide, p)
        return _reduce_goldilocks(base, head.view("<u8"))
    values = np.remainder(words_to_ints(np.ascontiguousarray(digests[:, :wide])), p)
    return values if base.dtype is object else values.astype(np.uint64)


def reduce_wide_digits(kernel: ExtensionKernel, samples: np.ndarray, wide: int) -> np.ndarray:
    """Each row's first ``wide`` bytes as a little-endian integer W, reduced mod p^k and cut into its
    k base-p digits, constant first (shape (n, k)): the extension challenges of ``stepper-sha256/2``.
    The digits of W mod p^k are the k lowest base-p digits of W, so no reduction mod p^k is made:
    below 2^32, W's 32-bit words are divided by p k times in numpy, from the top word down (each
    partial remainder below p, so each step fits 64 bits), the remainders being the digits; Python
    ints in object arrays otherwise. Each step divides by the scalar p with ``floor_divide`` (numpy
    divides by a scalar with a multiply and shifts) and takes the remainder as partial - q p: about
    twice as fast as ``np.divmod``, which divides entry by entry in hardware."""
    base, k = kernel.base, kernel.k
    p = base.p
    count = samples.shape[0]
    if p < 2**32 and base.dtype is not object:
        words = np.zeros((count, -(-wide // 4)), dtype=np.uint32)
        words.view(np.uint8)[:, :wide] = samples[:, :wide]
        rest = words.T.astype(np.uint64, order="C")  # one row per word (contiguous: a strided row divides slowly)
        digits = np.empty((k, count), dtype=np.uint64)
        p64, s32 = np.uint64(p), np.uint64(32)
        partial = np.empty(count, dtype=np.uint64)
        for digit in range(k):
            # after ``digit`` divisions W < 2^(8 wide) / p^digit: the words above that are zero
            top = min(len(rest), -(-(8 * wide - digit * (p.bit_length() - 1)) // 32))
            remainder = digits[digit]
            remainder[:] = 0
            for word in range(top - 1, -1, -1):
                np.left_shift(remainder, s32, out=partial)
                partial |= rest[word]
                quotient = np.floor_divide(partial, p64, out=rest[word])
                np.multiply(quotient, p64, out=remainder)
                np.subtract(partial, remainder, out=remainder)
        return digits.T
    if p == GOLDILOCKS and k == 2 and wide <= 32:
        return _goldilocks_digits(base, samples, wide)
    value = np.remainder(words_to_ints(np.ascontiguousarray(samples[:, :wide])), p ** k)
    columns = []
    for _ in range(k - 1):  # object arrays: no divmod ufunc
        columns.append(value % p)
        value = value // p
    columns.append(value)  # below p: the top digit
    out = np.stack(columns, axis=1)
    return out if base.dtype is object else out.astype(np.uint64)


def _goldilocks_digits(base: Kernel, samples: np.ndarray, wide: int) -> np.ndarray:
    """:func:`reduce_wide_digits` for p = 2^64 - 2^32 + 1, k = 2 and at most 32 bytes, in uint64/int64
    columns. c0 = W mod p by Horner's rule over W's 64-bit words (``reduce128``). Q = (W - c0) / p
    is exact, and it is divided out from the low 32-bit digit up: p = 1 (mod 2^32), so each quotient
    digit is the low digit of what is left, and q p = q 2^64 - q 2^32 + q changes only the next two
    digits (signed, carried as they go). c1 = Q mod p (Q < 2^193: seven digits), by Horner again."""
    count = samples.shape[0]
    raw = np.zeros((count, 36), dtype=np.uint8)  # a spare 32-bit digit above W for the last subtraction
    raw[:, :wide] = samples[:, :wide]
    reduce128 = base.reduce128  # type: ignore[attr-defined]  # a GoldilocksKernel here
    words = raw[:, :32].view("<u8").T.astype(np.uint64, order="C")
    c0 = reduce128(words[1], reduce128(words[2], words[3]))
    c0 = reduce128(words[0], c0)
    rest = raw.view("<u4").T.astype(np.int64, order="C")  # nine signed 32-bit digits, least significant first
    mask = np.int64(0xFFFFFFFF)
    rest[0] -= (c0 & np.uint64(0xFFFFFFFF)).astype(np.int64)
    rest[1] -= (c0 >> np.uint64(32)).astype(np.int64)
    quotient = np.zeros((8, count), dtype=np.uint64)
    for i in range(7):
        digit = rest[i] & mask  # what is left below 2^(32 (i + 1)), a multiple of 2^(32 i)
        rest[i + 1] += (rest[i] - digit) >> 32  # the carry (or borrow), exact
        rest[i + 1] += digit  # minus digit * p, shifted by 32 i: + digit 2^32 ...
        rest[i + 2] -= digit  # ... - digit 2^64 (the digit itself cancels)
        quotient[i] = digit.astype(np.uint64)
    q = quotient[0::2] | (quotient[1::2] << np.uint64(32))  # Q's four 64-bit words
    c1 = reduce128(q[1], reduce128(q[2], q[3]))
    return np.stack((c0, reduce128(q[0], c1)), axis=1)


def _reduce_goldilocks(base: Kernel, limbs: np.ndarray) -> np.ndarray:
    """Each row's first three little-endian 64-bit words (shape (n, >= 3), uint64) as one
    integer mod Goldilocks. 2^128 = -2^32 (mod p), so the value is (l1 * 2^64 + l0) - l2 * 2^32,
    and l2 * 2^32 = (l2 >> 32) * 2^64 + (l2 mod 2^32) * 2^32: two 128-bit reductions, no multiply."""
    l0, l1, l2 = limbs[:, 0], limbs[:, 1], limbs[:, 2]
    reduce128 = base.reduce128  # type: ignore[attr-defined]  # a GoldilocksKernel here
    m32, s32 = np.uint64(0xFFFFFFFF), np.uint64(32)
    return base.sub(reduce128(l0, l1), reduce128((l2 & m32) << s32, l2 >> s32))


def _reduce_words(words: np.ndarray, wide: int, p: int) -> np.ndarray:
    """Each row's first ``wide`` bytes mod p < 2^32, from the row's little-endian 32-bit words
    (shape (n, >= ceil(wide / 4)), uint32): Horner's rule from the top word down, the
    partial top word masked, one reduction per word (``mod_u64``)."""
    count, rest = divmod(wide, 4)
    top = words[:, count].astype(np.uint64) & np.uint64((1 << 8 * rest) - 1) if rest else None
    if top is None:
        count -= 1
        top = words[:, count].astype(np.uint64)
    p64, s32 = np.uint64(p), np.uint64(32)
    acc = mod_u64(top, p64)
    for i in range(count - 1, -1, -1):
        acc <<= s32
        acc |= words[:, i]
        mod_u64(acc, p64, out=acc)
    return acc


@dataclass(frozen=True, slots=True)
class WideSamples:
    """The schedule's samples for a block of challenges, one row of ``wide`` little-endian bytes
    per challenge, not reduced: over rows of limbs :func:`block_passes` tests each against its
    recorded challenge by a congruence, which costs less than reducing it."""

    rows: np.ndarray


def _times_constant(kernel: Kernel, a: np.ndarray, c: int) -> np.ndarray:
    """a times the base-field constant c (every coefficient, in an extension)."""
    base = _base(kernel)
    return base.mul(a, c if base.dtype is object else np.uint64(c))  # type: ignore[arg-type]


def _minus_constant(kernel: Kernel, a: np.ndarray, c: int) -> np.ndarray:
    """a - c for the base-field constant c (the constant coefficient, in an extension)."""
    base = _base(kernel)
    const = base.array([c])
    if a.ndim == 1:
        return base.sub(a, const)
    out = a.copy()
    out[:, 0] = base.sub(a[:, 0], const)
    return out


def evaluate_at(kernel: Kernel, evals: np.ndarray, points: np.ndarray) -> np.ndarray:
    """g_i(points[i]) for each row i of ``evals`` = g_i(0..m-1) (canonical; m <= p). Shapes:
    (n, m) and (n,) over a prime field, (n, m, k) and (n, k) over a degree-k extension."""
    m = evals.shape[1]
    p = kernel.p
    if isinstance(kernel, LimbKernel):
        return kernel.evaluate(evals, points)
    if evals.dtype == object and evals.ndim == 2 and m > 1:
        return _evaluate_wide(p, evals, points)
    if isinstance(kernel, ExtensionKernel) and kernel.dtype is not object and len(evals):
        return _evaluate_columns(kernel, evals, points)
    deltas = [evals[:, 0]]
    layer = [evals[:, i] for i in range(m)]
    for _ in range(1, m):
        layer = [kernel.sub(layer[i + 1], layer[i]) for i in range(len(layer) - 1)]
        deltas.append(layer[0])
    coefficients = [deltas[k] if k < 2 else _over_factorial(kernel, deltas[k], k) for k in range(m)]
    acc = coefficients[m - 1]
    for k in range(m - 1, 0, -1):
        shifted = _minus_constant(kernel, points, k - 1) if k > 1 else points
        acc = kernel.add(coefficients[k - 1], kernel.mul(acc, shifted))
    return acc


def _evaluate_columns(kernel: ExtensionKernel, evals: np.ndarray, points: np.ndarray) -> np.ndarray:
    """:func:`evaluate_at` over an extension with uint64 coefficients, by columns: the block is held
    as one contiguous row per g(j) with its k coefficient columns one after another (a view when
    :func:`stepper.verify.cells.decode_grid` decoded it), so Newton's differences and the 1/d! are
    one pass per row over every coefficient at once (they are the same linear map of the degree on
    each coefficient). Horner's rule then multiplies by r - j: through :func:`_horner_lazy` when k
    raw products fit in 64 bits, else :func:`_mul_columns` on lists of k columns."""
    base, m, k = kernel.base, evals.shape[1], kernel.k
    count = len(evals)
    rows = np.ascontiguousarray(evals.transpose(1, 2, 0)).reshape(m, k * count)  # row j: g(j)'s k columns
    layer = list(rows)
    deltas = [layer[0]]
    for _ in range(1, m):
        layer = [base.sub(layer[i + 1], layer[i]) for i in range(len(layer) - 1)]
        deltas.append(layer[0])
    for d in range(2, m):  # the 1/d! of Newton's form: constants of the degree
        deltas[d] = _over_factorial(base, deltas[d], d)
    coefficients = [row.reshape(k, count) for row in deltas]  # each (k, n): one column per coefficient
    r = np.ascontiguousarray(points.T)
    if _horner_fits(kernel):
        return _horner_lazy(kernel, coefficients, r).T
    acc = list(coefficients[m - 1])
    r_columns = list(r)
    for d in range(m - 1, 0, -1):
        shifted = r_columns if d == 1 else [base.sub(r_columns[0], base.array([d - 1])), *r_columns[1:]]
        acc = [base.add(x, y) for x, y in zip(coefficients[d - 1], _mul_columns(kernel, acc, shifted))]
    return np.stack(acc, axis=1)


def _horner_fits(kernel: ExtensionKernel) -> bool:
    """Whether :func:`_horner_lazy` applies: a prime below 2^32 whose k raw products plus one entry
    below p fit in 64 bits (BabyBear^4, KoalaBear^4, Mersenne31^4)."""
    return isinstance(kernel.base, SmallPrimeKernel) and kernel.k * (kernel.p - 1) ** 2 + kernel.p < 2**64


def _horner_lazy(kernel: ExtensionKernel, coefficients: list[np.ndarray], r: np.ndarray) -> np.ndarray:
    """Horner's rule c_(m-1), c_(m-2) + acc (r - (m-2)), ..., c_0 + acc r over an extension, each
    argument (k, n) coefficient columns, the result too. Multiplying by r is the k x k matrix whose
    column i is X^i r mod q (built once per block: X r is r shifted up, its top coefficient times
    X^k mod q folded in); by r - j it is that matrix minus j on its diagonal (X^i stays below X^k).
    Each step is one sum of k raw products per coefficient (``einsum``: no product array), plus the
    coefficient c, and one remainder: below 2^64 by :func:`_horner_fits`."""
    base, k = kernel.base, kernel.k
    p64 = np.uint64(kernel.p)
    count = r.shape[1]
    matrix = np.empty((k, k, count), dtype=np.uint64)  # matrix[t, i]: coefficient t of X^i r mod q
    matrix[:, 0] = r
    for i in range(1, k):
        top = matrix[k - 1, i - 1]
        matrix[1:, i] = matrix[:-1, i - 1]
        matrix[0, i] = 0
        for t, constant in enumerate(kernel.xk):  # X^k = sum of xk[t] X^t (mod q)
            if constant:
                matrix[t, i] = base.add(matrix[t, i], mod_u64(top * np.uint64(constant), p64))
    diagonal = matrix.reshape(k * k, count)[::k + 1]  # matrix[t, t], a view
    r_diagonal = diagonal.copy()
    m = len(coefficients)
    acc = coefficients[m - 1]
    for d in range(m - 1, 0, -1):
        diagonal[...] = r_diagonal if d == 1 else base.sub(r_diagonal, base.array([d - 1]))
        raw = np.einsum("in,tin->tn", acc, matrix)
        raw += coefficients[d - 1]
        acc = mod_u64(raw, p64, out=raw)
    return acc


def _over_factorial(kernel: Kernel, column: np.ndarray, d: int) -> np.ndarray:
    """column / d! (entries of a prime kernel, or of an extension's base: every coefficient). Over a
    prime above 2^32, where a product costs about 25 numpy passes, by exact division: a half by a
    shift (:func:`_halve`), and up to 7! by :func:`_divided`; otherwise times the inverse of d!."""
    p = kernel.p
    if isinstance(kernel, WideKernel):
        if d == 2:
            return _halve(column, p)
        if d <= 7:
            return _divided(column, factorial(d), p)
    return _times_constant(kernel, column, pow(factorial(d), -1, p))


def _divided(column: np.ndarray, n: int, p: int) -> np.ndarray:
    """x / n mod p for canonical uint64 entries x and a small n (coprime to p, n < 2^16): x = n q + s,
    and x + k p is a multiple of n for k = -s p^-1 mod n, so x / n = q + (s + k p) / n, the second
    term one of n constants (a look-up by s). q <= (p - 1) / n and each constant is below
    ((n - 1) (p + 1)) / n, so the sum is at most p: one conditional subtraction makes it canonical."""
    k_of = (-pow(p, -1, n)) % n  # k = s * k_of mod n
    table = np.array([(s + (s * k_of % n) * p) // n for s in range(n)], dtype=np.uint64)
    n64 = np.uint64(n)
    quotient = np.floor_divide(column, n64)
    rest = column - quotient * n64
    quotient += table.take(rest.astype(np.intp))
    return np.minimum(quotient, quotient - np.uint64(p))


def _halve(column: np.ndarray, p: int) -> np.ndarray:
    """x / 2 mod an odd p for canonical uint64 entries: x >> 1, plus (p + 1) / 2 when x is odd
    ((x - 1) / 2 + (p + 1) / 2 = (x + p) / 2 < p, with no sum above 2^64)."""
    return (column >> np.uint64(1)) + (column & np.uint64(1)) * np.uint64((p + 1) // 2)


def _mul_columns(kernel: ExtensionKernel, a: list[np.ndarray], b: list[np.ndarray]) -> list[np.ndarray]:
    """The products of two extension vectors held as k coefficient columns each (contiguous
    uint64). Below 2^32 (when k products below p^2 fit in 64 bits) the raw sum of each power
    X^(i+j) is reduced once, as ``ExtensionKernel``'s numpy product does; otherwise the base
    kernel's products, Karatsuba's three for k = 2 (a0 b0, a1 b1, (a0 + a1)(b0 + b1))."""
    base, k, p = kernel.base, kernel.k, kernel.p
    if isinstance(base, SmallPrimeKernel) and k * (p - 1) ** 2 + p < 2**64:
        p64 = np.uint64(p)
        raw: list[np.ndarray] = []
        for i in range(k):
            for j in range(k):
                term = a[i] * b[j]
                if i + j == len(raw):
                    raw.append(term)
                else:
                    np.add(raw[i + j], term, out=raw[i + j])
        if _folds_unreduced(kernel):  # reduce X^k .. X^(2k-2), fold them into the raw low powers, reduce once
            tops = [mod_u64(power, p64, out=power) for power in raw[k:]]
            for i in range(k):
                for j, row in enumerate(kernel.reductions):
                    if row[i]:
                        raw[i] += tops[j] * np.uint64(row[i])
            return [mod_u64(power, p64, out=power) for power in raw[:k]]
        powers = [mod_u64(power, p64, out=power) for power in raw]
        out = []
        for i in range(k):
            acc = powers[i]
            for j, row in enumerate(kernel.reductions):
                if row[i]:
                    acc = acc + powers[k + j] * np.uint64(row[i])
            out.append(acc if acc is powers[i] else mod_u64(acc, p64, out=acc))
        return out
    if k == 2:
        low, high = base.mul(a[0], b[0]), base.mul(a[1], b[1])
        middle = base.sub(base.sub(base.mul(base.add(a[0], a[1]), base.add(b[0], b[1])), low), high)
        products = [low, middle, high]
    else:
        products = [base.mul(a[0], b[j]) for j in range(k)]
        for i in range(1, k):
            for j in range(k):
                term = base.mul(a[i], b[j])
                if i + j < len(products):
                    products[i + j] = base.add(products[i + j], term)
                else:
                    products.append(term)
    out = products[:k]
    for j, row in enumerate(kernel.reductions):
        for i, coefficient in enumerate(row):
            if coefficient:
                out[i] = base.add(out[i], _times_small(base, products[k + j], coefficient))
    return out


def _times_small(base: Kernel, column: np.ndarray, c: int) -> np.ndarray:
    """column * c for a base-field constant c: over Goldilocks with c < 2^32 (X^2 = 7 in the quadratic
    extension) as x0 c + x1 c 2^32 for x = x1 2^32 + x0, two 64-bit products and one 128-bit
    reduction instead of a full product's four; otherwise the kernel's product."""
    if not isinstance(base, GoldilocksKernel) or c >= 2**32:
        return base.mul(column, base.array([c]))
    c64, m32, s32 = np.uint64(c), np.uint64(0xFFFFFFFF), np.uint64(32)
    low = (column & m32) * c64
    high = (column >> s32) * c64
    lo = low + (high << s32)
    hi = (high >> s32) + (lo < low)
    return base.reduce128(lo, hi)  # type: ignore[no-any-return]


def _folds_unreduced(kernel: ExtensionKernel) -> bool:
    """Whether each low power's raw sum (i + 1 products of entries below p) plus its reduction terms
    (a reduced high power times a row coefficient) stays below 2^64: then :func:`_mul_columns`
    reduces k + (k - 1) sums instead of 2k - 1 and again the coefficients that take reduction terms."""
    bound = (kernel.p - 1) ** 2
    return all((i + 1) * bound + sum(row[i] for row in kernel.reductions) * (kernel.p - 1) < 2**64
               for i in range(kernel.k))


def _evaluate_wide(p: int, evals: np.ndarray, points: np.ndarray) -> np.ndarray:
    """:func:`evaluate_at` over a prime held as Python ints (object arrays), where a reduction
    mod p costs about twice a product: the Lagrange form scaled by (m-1)!, whose weights are
    the small integers W_i = (-1)^(m-1-i) C(m-1, i), summed by halves without reducing,
    S = S_left * P_right + S_right * P_left with P the product of the (x - j) of a half,
    then g(x) = S / (m-1)! with two reductions per row (the halves are reduced from the
    third level on, so the integers stay below about 8 times p's size)."""
    m = evals.shape[1]
    parts: list[tuple[np.ndarray, np.ndarray]] = []  # (S, P) of each half, leaves first
    for i in range(m):
        weight = (-1) ** (m - 1 - i) * comb(m - 1, i)
        column = evals[:, i]
        parts.append((column if weight == 1 else column * weight, points - i if i else points))
    level = 0
    while len(parts) > 1:
        level += 1
        merged = []
        for j in range(0, len(parts) - 1, 2):
            (s_left, p_left), (s_right, p_right) = parts[j], parts[j + 1]
            total = s_left * p_right + s_right * p_left
            product = p_left * p_right if len(parts) > 2 else p_left  # the top product is never used
            if level >= 3:
                total, product = total % p, product % p
            merged.append((total, product))
        if len(parts) % 2:
            merged.append(parts[-1])
        parts = merged
    scaled = np.remainder(parts[0][0], p)
    return np.remainder(scaled * pow(factorial(m - 1), -1, p), p)  # type: ignore[no-any-return]


def block_passes(kernel: Kernel, evals: np.ndarray, challenges: np.ndarray, starts: np.ndarray,
                 claims: np.ndarray, finals: np.ndarray, rederived: np.ndarray | WideSamples | None) -> bool:
    """Whether every check above passes for a block of instances.

    ``evals`` (n, m) and ``challenges`` (n,) hold the rounds of all instances in stream order
    (with a trailing axis of k coefficients over an extension); ``starts`` the row of each
    instance's first round (ascending, the first 0); ``claims`` and ``finals`` one value per
    instance; ``rederived`` the re-derived challenges (canonical, or the samples they are reduced
    from: :class:`WideSamples`) or None."""
    n, m = evals.shape[:2]
    if n == 0 or len(starts) == 0 or starts[0] != 0:
        return False
    if isinstance(kernel, LimbKernel):
        passes = _limb_passes(kernel, evals, challenges, starts, claims, finals, rederived)
        if passes is not None:
            return passes
        if isinstance(rederived, WideSamples):
            rederived = kernel.reduce_bytes(rederived.rows)
    assert not isinstance(rederived, WideSamples)  # samples are made for rows of limbs only (packed_runs)
    if rederived is not None and not np.array_equal(rederived, challenges):
        return False  # equal to the re-derived ones (canonical: reduced mod p), the challenges are canonical too
    if not (below_p(kernel, evals) and (rederived is not None or below_p(kernel, challenges))
            and below_p(kernel, finals) and below_p(kernel, claims)):
        return False
    carried = evaluate_at(kernel, evals, challenges)
    claim_in = np.empty_like(carried)
    claim_in[1:] = carried[:-1]
    claim_in[starts] = claims
    sums = kernel.add(evals[:, 0], evals[:, 1 if m > 1 else 0])
    if not np.array_equal(sums, claim_in):
        return False
    ends = np.append(starts[1:], n) - 1
    return bool(np.array_equal(carried[ends], finals))


def _limb_passes(kernel: LimbKernel, evals: np.ndarray, challenges: np.ndarray, starts: np.ndarray,
                 claims: np.ndarray, finals: np.ndarray, rederived: np.ndarray | WideSamples | None) -> bool | None:
    """:func:`block_passes` over rows of limbs, by congruences mod p instead of canonical values
    (:mod:`stepper.field.kernels.limb_rounds`); None when the lazy Horner plan does not hold for
    this round size (the canonical path then decides). The sum g(0) + g(1) is never reduced: it
    is congruent to the claim, or to g(r) of the round before, which is congruent to it."""
    from stepper.field.kernels.limb_rounds import multiple_of_p, rounds_congruent, wide_congruent

    rows, m = evals.shape[:2]
    if not (below_p(kernel, evals) and below_p(kernel, challenges) and below_p(kernel, finals)
            and below_p(kernel, claims)):
        return False
    if isinstance(rederived, WideSamples):
        if not wide_congruent(kernel, rederived.rows, challenges).all():
            return False
    elif rederived is not None and not np.array_equal(rederived, challenges):
        return False
    # (m, n, N) limb-major columns, a view: each limb of each g(j) one contiguous run when the block
    # was decoded by LimbKernel.from_bytes_grid (strided otherwise)
    columns = evals.transpose(1, 2, 0)
    sums = columns[0] + columns[1 if m > 1 else 0]  # below 2p, limbs below 2^30
    ends = np.append(starts[1:], rows) - 1
    targets = np.empty_like(sums)
    targets[:, :-1] = sums[:, 1:]
    targets[:, ends] = finals.T
    matches = rounds_congruent(kernel, columns, np.ascontiguousarray(challenges.T), targets, 2)
    if matches is None:
        return None
    if not matches.all():
        return False
    claim_gap = sums[:, starts].view(np.int64) - claims.T.view(np.int64)
    claim_gap += kernel._p_limbs.view(np.int64)  # the sum minus the claim, plus p: in [0, 3p)
    return bool(multiple_of_p(kernel, claim_gap, 3).all())
