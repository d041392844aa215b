"""A numpy kernel for primes of 65 to 512 bits: each element as n limbs of 29 bits.

An array of N elements has shape (N, n), uint64, least significant limb first
(element first, like an extension's rows of coefficients, so a block of rounds
indexes the same way over every field). Inside every operation the limbs are
turned limb-major, (n, N), so that each numpy call works on one contiguous row
of N limbs and a multi-limb operation costs O(n) or O(n^2) numpy calls whatever N.

* Multiplication is Montgomery's (R = 2^(29 n), separated operand scanning): the
  product's 2n columns are summed without carrying, then n reduction steps each
  add m * p with m = -t_i / p mod 2^29 and pass the column's carry up. A column
  holds at most 2n products below 2^58 plus a carry below 2^35, which stays below
  2^64 while n <= 31 (common practice, no source; the bound is why the limbs have
  29 bits and the kernel stops at 512-bit primes).
* ``mul`` returns a * b mod p canonical (two Montgomery steps: a * b / R, then
  times R^2 / R). :meth:`LimbKernel.evaluate` keeps the challenge in Montgomery
  form (r R mod p), so each Horner step is one Montgomery product with a result
  in the plain domain.
* Addition and subtraction carry limb by limb and subtract p (or add it) where the
  result left the range, chosen with ``numpy.where`` from the final carry.

Every result is canonical. Compared with object arrays of Python ints (about a
microsecond per operation for 254-bit numbers here) a product costs about 0.25 us
per element at n = 9 (BN254) on blocks of 2^14 elements (``bench/fields.py``).
"""

from __future__ import annotations

from math import factorial
from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import FieldError
from stepper.field.kernels.base import COMPILED_MIN, Kernel

if TYPE_CHECKING:
    from stepper.field.shape import Element, FieldShape

__all__ = ["LimbKernel", "LIMB_BITS", "MAX_LIMB_PRIME_BITS", "word_columns"]

LIMB_BITS = 29
MAX_LIMB_PRIME_BITS = 512
_MASK = np.uint64((1 << LIMB_BITS) - 1)
_SHIFT = np.uint64(LIMB_BITS)
_ONE = np.uint64(1)


class LimbKernel(Kernel):
    """Arithmetic mod a prime 2^64 < p < 2^512 on rows of 29-bit limbs (see the module docstring)."""

    dtype = np.uint64

    def __init__(self, field: FieldShape, compiled_min: int = COMPILED_MIN) -> None:
        super().__init__(field, compiled_min)
        p = self.p
        if not 64 < p.bit_length() <= MAX_LIMB_PRIME_BITS or p % 2 == 0:
            raise FieldError(f"expected an odd prime of 65 to {MAX_LIMB_PRIME_BITS} bits for 29-bit limbs, "
                             f"found one of {p.bit_length()} bits")
        self.byte_width = (p.bit_length() + 7) // 8
        # R = 2^(29n) > 4p keeps Montgomery outputs below 2p; 29n >= 8 * bytes lets a cell's every bit land in a limb
        self.n = n = -(-max(p.bit_length() + 2, 8 * self.byte_width) // LIMB_BITS)
        self._r_bits = LIMB_BITS * n
        self._p_limbs = self._column(p)
        self._minus_p_inverse = np.uint64(-pow(p, -1, 1 << LIMB_BITS) % (1 << LIMB_BITS))
        self._r2 = self._column((1 << (2 * self._r_bits)) % p)  # R^2 mod p: times it, a Montgomery step gives x R

    # ----- limbs <-> integers and bytes ---------------------------------------------
    def _column(self, value: int) -> np.ndarray:
        """One integer as limb-major limbs, shape (n, 1)."""
        mask = (1 << LIMB_BITS) - 1
        return np.array([[(value >> (LIMB_BITS * i)) & mask] for i in range(self.n)], dtype=np.uint64)

    def from_bytes(self, cells: np.ndarray) -> np.ndarray:
        """Rows of little-endian bytes (uint8, shape (N, w), w at most the field's byte width) as
        limb rows, shape (N, n); not reduced, not checked (every bit of a row lands in a limb).
        The rows are a view of limb-major limbs (Fortran order): :meth:`_major` takes them back
        without a copy."""
        return self.from_bytes_grid(cells, 1)[:, 0]

    def from_bytes_grid(self, cells: np.ndarray, values: int) -> np.ndarray:
        """Rows of ``values`` packed elements each (uint8, shape (N, values * w)) as limb rows of
        shape (N, values, n), not reduced: a view of limb-major limbs (n, values, N), in which
        each limb of each value position is one contiguous run of N (a block of rounds reads its
        evaluations g(j) by value position, :func:`~stepper.field.kernels.limb_rounds.rounds_congruent`).
        Whole 64-bit words (w a multiple of 8, the bytes of a row contiguous, as in a slice of a
        block's rows) are gathered word-major straight from the rows by one copy of an unaligned
        view; other widths are zero-padded to words first."""
        count = cells.shape[0]
        width = cells.shape[1] // values
        if width > self.byte_width:
            raise FieldError(f"expected at most {self.byte_width} bytes per element, found {width}")
        columns = word_columns(cells, values)
        limbs = self._limbs_of_columns(columns.reshape(len(columns), values * count), self.n)
        return limbs.reshape(self.n, values, count).transpose(2, 1, 0)

    @staticmethod
    def _limbs_of_columns(columns: np.ndarray, count: int) -> np.ndarray:
        """The first ``count`` 29-bit limbs of integers given word-major (uint64, shape (k, N): word j
        of every integer in one contiguous run; bits past the k words are zero): shape (count, N)."""
        out = np.empty((count, columns.shape[1]), dtype=np.uint64)
        for i in range(count):
            word, shift = divmod(LIMB_BITS * i, 64)
            if word >= len(columns):
                out[i] = 0
                continue
            limb = columns[word] >> np.uint64(shift)
            if shift + LIMB_BITS > 64 and word + 1 < len(columns):
                limb |= columns[word + 1] << np.uint64(64 - shift)
            np.bitwise_and(limb, _MASK, out=out[i])
        return out

    def array(self, values: Any) -> np.ndarray:
        if isinstance(values, np.ndarray) and values.dtype == np.uint64 and values.ndim == 2 \
                and values.shape[1] == self.n:
            if not self.below_p(values) or (values > _MASK).any():
                raise FieldError(f"expected canonical limb rows below p = {self.p}")
            return values
        items = values.reshape(-1).tolist() if isinstance(values, np.ndarray) else list(values)
        for index, item in enumerate(items):
            if isinstance(item, bool) or not isinstance(item, (int, np.integer)) or not 0 <= item < self.p:
                raise FieldError(f"expected canonical integer entries 0 <= v < p = {self.p}, found "
                                 f"{str(item)[:60]} at flat index {index}")
        width = self.byte_width
        raw = b"".join([int(v).to_bytes(width, "little") for v in items])
        return self.from_bytes(np.frombuffer(raw, dtype=np.uint8).reshape(len(items), width))

    def to_list(self, a: np.ndarray) -> list[Element]:
        return [int(v) for v in self._integers(a)]

    def _integers(self, a: np.ndarray) -> np.ndarray:
        """The elements as an object array of Python ints (n passes over the limbs)."""
        rows = np.asarray(a).reshape(-1, self.n)
        total = np.zeros(len(rows), dtype=object)
        for i in range(self.n - 1, -1, -1):
            total = (total << LIMB_BITS) + rows[:, i].astype(object)
        return total

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros((n, self.n), dtype=np.uint64)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        wide = rng.integers(0, 256, size=(n, self.byte_width + 16), dtype=np.uint8)
        return self.reduce_bytes(wide)

    def sum(self, a: np.ndarray) -> Element:
        return int(np.sum(self._integers(a))) % self.p if len(a) else 0

    def _first_zero(self, a: np.ndarray) -> int:
        return int(np.flatnonzero(np.all(a == 0, axis=-1))[0])

    # ----- limb-major helpers ----------------------------------------------------------
    def _major(self, a: np.ndarray) -> np.ndarray:
        """(N, n) or (n,) element rows as contiguous limb-major (n, N)."""
        return np.ascontiguousarray(np.asarray(a, dtype=np.uint64).reshape(-1, self.n).T)

    @staticmethod
    def _rows(t: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(t.T)

    def _carry(self, t: np.ndarray) -> np.ndarray:
        """Propagate carries so that every limb but the top one is below 2^29 (in place)."""
        for i in range(t.shape[0] - 1):
            t[i + 1] += t[i] >> _SHIFT
            t[i] &= _MASK
        return t

    def _minus_p(self, t: np.ndarray) -> np.ndarray:
        """t - p where t >= p, t otherwise, for normalised limbs of a value below 2p (n limbs)."""
        diff = np.empty_like(t)
        borrow = np.zeros(t.shape[1], dtype=np.uint64)
        top = np.uint64(1 << LIMB_BITS)
        for i in range(self.n):
            d = t[i] + top - self._p_limbs[i] - borrow
            borrow = _ONE - (d >> _SHIFT)
            np.bitwise_and(d, _MASK, out=diff[i])
        return np.where(borrow == 0, diff, t)  # no borrow out of the top limb: t >= p

    def _below(self, t: np.ndarray) -> np.ndarray:
        """Per column, whether the normalised limbs t are below p."""
        borrow = np.zeros(t.shape[1], dtype=np.uint64)
        top = np.uint64(1 << LIMB_BITS)
        for i in range(self.n):
            borrow = _ONE - ((t[i] + top - self._p_limbs[i] - borrow) >> _SHIFT)
        return borrow == 1

    def _add_major(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self._minus_p(self._carry(a + b))

    def _sub_major(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """a - b mod p for canonical limb-major a, b: the limbs of a - b + p, then one conditional
        subtraction. Every limb but the top one borrows 2^29 from the next (so none is negative);
        the top limb may wrap below zero in uint64 until the carries arrive, which is exact
        arithmetic mod 2^64 on a final value in [1, 2p)."""
        top = np.uint64(1 << LIMB_BITS)
        t = a + top - b
        t += self._p_limbs
        t[1:] -= _ONE
        t[-1] -= top
        return self._minus_p(self._carry(t))

    def _montgomery(self, a: np.ndarray, b: np.ndarray, carried: bool = True) -> np.ndarray:
        """a b / R mod p, below a b / R + p, for limb-major a, b (limbs below 2^29). Operand scanning with the reduction interleaved: step i adds a_i b,
        then m p with m = -t_i / p mod 2^29 (limb i becomes zero) and passes limb i's carry up; a
        column gets the same products as a product followed by a reduction, in another order.
        ``carried=False`` leaves the n limbs as summed (each below 2n 2^58 + 2^35, the top one zero)
        for a caller that adds to them and carries once (:mod:`~stepper.field.kernels.limb_rounds`)."""
        n, p_limbs, q = self.n, self._p_limbs, self._minus_p_inverse
        count = max(a.shape[1], b.shape[1])
        t = np.empty((2 * n + 1, count), dtype=np.uint64)
        np.multiply(a[0], b, out=t[:n])  # the first step's products: no zeros to add them to
        t[n:] = 0
        product = np.empty((n, count), dtype=np.uint64)
        m = np.empty(count, dtype=np.uint64)
        for i in range(n):
            if i:
                np.multiply(a[i], b, out=product)
                t[i:i + n] += product
            np.multiply(t[i], q, out=m)  # mod 2^64: its low 29 bits are those of (t_i mod 2^29) q
            m &= _MASK
            np.multiply(m, p_limbs, out=product)
            t[i:i + n] += product
            np.right_shift(t[i], _SHIFT, out=m)
            t[i + 1] += m
        return self._carry(t[n:])[:n] if carried else t[n:2 * n]

    def _reduce_steps(self, t: np.ndarray, steps: int) -> np.ndarray:
        """Montgomery reduction by 2^(29 steps), in place on the columns t (limb-major, rows enough for
        the carries): each step adds m p with m = -t_i / p mod 2^29, making limb i zero, and passes
        its carry up. The n limbs from row ``steps`` on (the value is below 2p < R: nothing above)."""
        n, p_limbs, q = self.n, self._p_limbs, self._minus_p_inverse
        for i in range(steps):
            m = ((t[i] & _MASK) * q) & _MASK
            t[i:i + n] += m * p_limbs
            t[i + 1] += t[i] >> _SHIFT
        return self._carry(t[steps:])[:n]

    def _mul_major(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self._minus_p(self._montgomery(self._minus_p(self._montgomery(a, b)), self._r2))

    # ----- the Kernel face --------------------------------------------------------------
    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self._shaped(self._add_major(self._major(a), self._major(b)), a, b)

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self._shaped(self._sub_major(self._major(a), self._major(b)), a, b)

    def neg(self, a: np.ndarray) -> np.ndarray:
        return self.sub(self.zeros(1), a) if np.ndim(a) == 2 else self.sub(self.zeros(1)[0], a)

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self._shaped(self._mul_major(self._major(a), self._major(b)), a, b)

    def _shaped(self, t: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        rows = self._rows(t)
        return rows if np.ndim(a) == 2 or np.ndim(b) == 2 else rows[0]

    def below_p(self, a: np.ndarray) -> bool:
        """Whether every element of limb rows (any leading shape; limbs below 2^29) is below p:
        decided by the top limb alone, except where it equals p's top limb."""
        if a.size == 0:
            return True
        top = np.asarray(a)[..., self.n - 1]
        p_top = self._p_limbs[self.n - 1, 0]
        if (top > p_top).any():
            return False
        ties = top == p_top
        if not ties.any():
            return True
        return bool(self._below(self._major(np.asarray(a)[ties])).all())

    def reduce_bytes(self, rows: np.ndarray) -> np.ndarray:
        """Each row of little-endian bytes (uint8, shape (N, w)) as an integer mod p, canonical limb
        rows: k Montgomery reduction steps divide the value x by 2^(29k) mod p, with k two limbs
        more than x has above p's n (so the result is below x / 2^(29k) + p < 2p), then one
        Montgomery product by 2^(29k) R mod p multiplies it back."""
        count, width = rows.shape
        limbs = -(-8 * width // LIMB_BITS)
        n = self.n
        steps = max(1, limbs - n + 2)
        t = np.zeros((max(limbs, steps + n) + 1, count), dtype=np.uint64)
        t[:limbs] = self._limbs_of_columns(word_columns(rows)[:, 0], limbs)
        reduced = self._reduce_steps(t, steps)  # x / 2^(29k) mod p, below 2p
        back = self._column(pow(2, LIMB_BITS * steps + self._r_bits, self.p))
        return self._rows(self._minus_p(self._montgomery(self._minus_p(reduced), back)))

    def evaluate(self, evals: np.ndarray, points: np.ndarray) -> np.ndarray:
        """g_i(points[i]) for rows of evaluations g_i(0..m-1) (shape (N, m, n); m <= p), canonical
        limb rows.

        (m-1)! g(r) = sum_j C_j r^j where C_j = sum_i W_ji g_i with small integers W (the Lagrange
        basis scaled by (m-1)!, from :func:`_power_weights`). Each C_j is formed limb by limb in
        int64 and made non-negative by adding a multiple of p; Horner's rule then runs lazily,
        acc <- REDC(acc * r R) + C_j (REDC(x) = x / R mod p, so each step multiplies by r), with
        no reduction to canonical form in between, as long as every acc stays below (R / p) p,
        where REDC's output stays below 2p (:meth:`_lazy_plan` checks the bound for m). One last Montgomery product by R / (m-1)! gives g(r).
        Where the weights are too large for that bound (m > 4 for BN254: R / p > 2^7), Newton's forward
        differences run on canonical values instead (:meth:`_evaluate_canonical`)."""
        count, m = evals.shape[0], evals.shape[1]
        columns = np.ascontiguousarray(np.moveaxis(evals.reshape(count, m, self.n), 0, -1))  # (m, n, N)
        if m == 1:
            return self._rows(columns[0])
        plan = self._lazy_plan(m)
        r_mont = self._minus_p(self._montgomery(self._major(points), self._r2))  # r R mod p
        if plan is None:
            return self._rows(self._evaluate_canonical(columns, r_mont))
        weights, offsets = plan
        signed = columns.view(np.int64)
        acc = None
        for j in range(m - 1, -1, -1):
            term = self._combination(signed, weights[j], offsets[j])
            acc = term if acc is None else self._carry(self._montgomery(acc, r_mont) + term)
        assert acc is not None
        scale = self._column(pow(factorial(m - 1), -1, self.p) * (1 << self._r_bits) % self.p)
        return self._rows(self._minus_p(self._montgomery(acc, scale)))

    def _combination(self, signed: np.ndarray, weights: tuple[int, ...], offset: int) -> np.ndarray:
        """sum_i weights[i] g_i + offset p as normalised limbs (limb-major, uint64), for the
        columns g_i (int64 limbs below 2^29); the caller's offset makes the value non-negative."""
        t = np.zeros(signed.shape[1:], dtype=np.int64)
        for weight, column in zip(weights, signed):
            if weight:
                t += column * weight if weight != 1 else column
        t += self._p_limbs.astype(np.int64) * offset
        for i in range(self.n - 1):  # signed carries: >> floors, & keeps the low 29 bits
            t[i + 1] += t[i] >> 29
            t[i] &= (1 << LIMB_BITS) - 1
        return t.view(np.uint64)

    def _lazy_plan(self, m: int) -> tuple[list[tuple[int, ...]], list[int]] | None:
        """The weights W_j and the offsets (multiples of p) of each C_j, or None when some acc
        of Horner's rule could reach R / p times p (then the canonical path is used)."""
        weights = _power_weights(m)
        offsets = [sum(-w for w in row if w < 0) for row in weights]
        spans = [sum(abs(w) for w in row) for row in weights]
        room = 1 << (self._r_bits - self.p.bit_length())  # R / p > room: REDC(x r R) < (x / room + 1) p
        bound = spans[m - 1]
        for j in range(m - 2, -1, -1):
            if bound >= room:
                return None
            bound = bound // room + 1 + spans[j] + 1
        return (weights, offsets) if bound < room else None

    def _evaluate_canonical(self, columns: np.ndarray, r_mont: np.ndarray) -> np.ndarray:
        """Newton's forward differences on canonical values, divided by k! (a Montgomery product by
        R / k! each), and Horner's rule with (r - j) R mod p: every step one Montgomery product."""
        m, p = columns.shape[0], self.p
        layer = list(columns)
        deltas = [layer[0]]
        for _ in range(1, m):
            layer = [self._sub_major(layer[j + 1], layer[j]) for j in range(len(layer) - 1)]
            deltas.append(layer[0])
        coefficients = [deltas[0], deltas[1]]
        for k in range(2, m):
            constant = self._column(pow(factorial(k), -1, p) * (1 << self._r_bits) % p)
            coefficients.append(self._minus_p(self._montgomery(deltas[k], constant)))
        acc = coefficients[m - 1]
        for k in range(m - 1, 0, -1):
            shift = r_mont if k == 1 else self._sub_major(r_mont, self._column((k - 1) * (1 << self._r_bits) % p))
            acc = self._add_major(coefficients[k - 1], self._minus_p(self._montgomery(acc, shift)))
        return acc


def word_columns(cells: np.ndarray, values: int = 1) -> np.ndarray:
    """Rows of ``values`` little-endian integers of w bytes each (uint8, shape (N, values * w)) as their
    64-bit words, word-major: shape (ceil(w / 8), values, N), contiguous (word j of value v of every row
    in one run). When w is a multiple of 8 and a row's bytes are contiguous (any distance between
    rows), one copy of an unaligned uint64 view of the rows; otherwise the rows are zero-padded to whole
    words first."""
    count = cells.shape[0]
    width = cells.shape[1] // values
    words = -(-width // 8)
    if width % 8 or (count and cells.strides[1] != 1) or width == 0:
        padded = np.zeros((count, values, 8 * words), dtype=np.uint8)
        padded[:, :, :width] = cells.reshape(count, values, width)
        cells = padded.reshape(count, values * 8 * words)
    view = cells.view("<u8").reshape(count, values, words)
    return np.ascontiguousarray(view.transpose(2, 1, 0))


def _power_weights(m: int) -> list[tuple[int, ...]]:
    """W with (m-1)! g(X) = sum_j (sum_i W[j][i] g(i)) X^j for every polynomial g of degree below m:
    the coefficients of (m-1)! times the Lagrange basis polynomials of the nodes 0..m-1 (integers:
    (m-1)! / prod_(j != i) (i - j) = +-C(m-1, i))."""
    scale = factorial(m - 1)
    columns = []
    for i in range(m):
        poly = [1]  # prod_(j != i) (X - j), constant first
        for j in range(m):
            if j != i:
                poly = [(poly[k - 1] if k else 0) - j * (poly[k] if k < len(poly) else 0) for k in range(len(poly) + 1)]
        denominator = 1
        for j in range(m):
            if j != i:
                denominator *= i - j
        columns.append([c * scale // denominator for c in poly])
    return [tuple(columns[i][j] for i in range(m)) for j in range(m)]
