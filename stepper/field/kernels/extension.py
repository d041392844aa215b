"""The vector kernel of an extension field F_p[X]/(q), q monic of degree k.

An element is a row of k base coefficients, constant term first, so a vector
is an array of shape (n, k) in the base kernel's dtype. Addition works on the
coefficients; a product is the schoolbook product of the two rows reduced by
X^k = -(q_0 + q_1 X + ... + q_(k-1) X^(k-1)). For a binomial q = X^k - w (the
usual choice) that reduction is one multiplication by w per coefficient.

Large arrays over a prime below 2^32 or over Goldilocks use the numba loops;
everything else (small arrays, other primes) the base kernel's operations.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import FieldError
from stepper.field.kernels.base import COMPILED_MIN, Kernel
from stepper.field.kernels.prime import GoldilocksKernel, SmallPrimeKernel, mod_u64

if TYPE_CHECKING:
    from stepper.field.shape import Element, FieldShape

__all__ = ["ExtensionKernel"]


class ExtensionKernel(Kernel):
    """F_p[X]/(q): arrays of shape (n, k); the base kernel does the coefficient work."""

    def __init__(self, field: FieldShape, base: Kernel, compiled_min: int = COMPILED_MIN) -> None:
        super().__init__(field, compiled_min)
        self.base = base
        self.k = field.degree
        self.dtype = base.dtype
        p = self.p
        self.xk: list[int] = [(-c) % p for c in field.irreducible[:-1]]  # X^k mod q
        self.binomial = not any(self.xk[1:])
        # X^(k + j) mod q as k base coefficients, for j = 0 .. k - 2
        self.reductions: list[list[int]] = []
        row = list(self.xk)
        for _ in range(self.k - 1):
            self.reductions.append(row)
            top = row[-1]
            row = [0, *row[:-1]]
            row = [(r + top * x) % p for r, x in zip(row, self.xk)]
        compiled_base = isinstance(base, (SmallPrimeKernel, GoldilocksKernel))
        self._xk_array = np.array(self.xk, dtype=np.uint64) if compiled_base else None
        self._lazy = 4 * (p - 1) ** 2 < 2**64  # four raw products fit in uint64
        # numpy products reduced once per coefficient: k raw products, or a reduced coefficient plus
        # k - 1 products by the reduction rows, fit in uint64 (any prime below 2^32 for small k)
        self._numpy_lazy = isinstance(base, SmallPrimeKernel) and self.k * (p - 1) ** 2 + p < 2**64
        # a binomial whose k raw products fit in uint64: w folded into the second operand first
        self._numpy_binomial = self._numpy_lazy and self.binomial

    # ----- construction and conversion -------------------------------------------
    def array(self, values: Any) -> np.ndarray:
        k = self.k
        if isinstance(values, np.ndarray):
            if values.ndim == 1:  # base-field entries, embedded
                out = self.zeros(len(values))
                out[:, 0] = self.base.array(values)
                return out
            if values.ndim != 2 or values.shape[1] != k:
                raise FieldError(
                    f"expected an array of shape (n, {k}) for {self.field.describe()}, found shape {values.shape}"
                )
            return self.base.array(values.reshape(-1)).reshape(-1, k)
        flat: list[Any] = []
        count = 0
        for index, value in enumerate(values):
            count += 1
            if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
                flat.append(value)
                flat.extend([0] * (k - 1))
            elif isinstance(value, (tuple, list)) and len(value) == k:
                flat.extend(value)
            else:
                raise FieldError(
                    f"expected an element of {self.field.describe()} (an int or {k} coefficients) at index "
                    f"{index}, found {str(value)[:60]}"
                )
        return self.base.array(flat).reshape(count, k)

    def to_list(self, a: np.ndarray) -> list[Element]:
        return [tuple(row) for row in a.tolist()]

    def zeros(self, n: int) -> np.ndarray:
        return self.base.zeros(n * self.k).reshape(n, self.k)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.base.random(n * self.k, rng).reshape(n, self.k)

    # ----- arithmetic ---------------------------------------------------------------
    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.base.add(a, b)

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.base.sub(a, b)

    def neg(self, a: np.ndarray) -> np.ndarray:
        return self.base.neg(a)

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b) if self._xk_array is not None else None
        if compiled is None:
            return self._mul_numpy(a, b)
        base = self.base
        # the unrolled k = 4 loops take a single row as the second operand (a scalar) uncopied
        by_row = (self.k == 4 and self._lazy and isinstance(base, SmallPrimeKernel) and a.ndim == b.ndim == 2
                  and 1 in (a.shape[0], b.shape[0]))
        if by_row and a.shape[0] == 1:
            a, b = b, a
        elif a.shape != b.shape and not by_row:
            a, b = np.broadcast_arrays(a, b)
        fa = np.ascontiguousarray(a, dtype=np.uint64)
        fb = np.ascontiguousarray(b, dtype=np.uint64)
        out = np.empty_like(fa)
        if isinstance(base, GoldilocksKernel):
            return compiled.gl_ext_mul(fa, fb, self._xk_array, out)  # type: ignore[no-any-return]
        assert isinstance(base, SmallPrimeKernel)
        if self.binomial:
            w = np.uint64(self.xk[0])
            if self.k == 4 and self._lazy:
                return compiled.small_binomial4_mul(fa, fb, w, base.p64, base.pinv, out)  # type: ignore[no-any-return]
            return compiled.small_binomial_mul(fa, fb, w, base.p64, base.pinv, out)  # type: ignore[no-any-return]
        if self.k == 4 and self._lazy:
            return compiled.small_ext4_mul(  # type: ignore[no-any-return]
                fa, fb, self._xk_array, base.p64, base.pinv, out
            )
        return compiled.small_ext_mul(fa, fb, self._xk_array, base.p64, base.pinv, out)  # type: ignore[no-any-return]

    def _mul_numpy(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        if self._numpy_binomial and a.ndim == b.ndim == 2 and (a.shape == b.shape or 1 in (len(a), len(b))):
            return self._mul_numpy_binomial(a, b)
        if self._numpy_lazy:
            return self._mul_numpy_lazy(a, b)
        k, bk = self.k, self.base
        n = max(len(a), len(b))
        prod = [bk.zeros(n) for _ in range(2 * k - 1)]
        for i in range(k):
            for j in range(k):
                prod[i + j] = bk.add(prod[i + j], bk.mul(a[:, i], b[:, j]))
        for j, row in enumerate(self.reductions):
            top = prod[k + j]
            for i, coef in enumerate(row):
                if coef:
                    prod[i] = bk.add(prod[i], bk.mul(top, bk.scalar_array(coef)[0]))
        return np.stack(prod[:k], axis=1)

    def _mul_numpy_binomial(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """The product modulo X^k - w on coefficient columns: c_t = sum_(i <= t) a_i b_(t-i) +
        sum_(i > t) a_i (w b_(t+k-i) mod p). With w folded into b's coefficients first, each c_t
        is k raw products below p^2 (they fit in uint64) and one remainder: k - 1 + k remainders
        in all (none for w when b is a single row, a scalar), every product on contiguous
        columns (a transposed copy of each operand; strided columns multiply about 3x slower)."""
        k, p = self.k, self.base.p64  # type: ignore[attr-defined]
        a, b = np.asarray(a, dtype=np.uint64), np.asarray(b, dtype=np.uint64)
        if len(a) == 1 and len(b) != 1:
            a, b = b, a
        cols = np.ascontiguousarray(a.T)
        w = self.xk[0]
        plain: list[Any]
        wrapped: list[Any]
        if len(b) == 1:
            row = [int(c) for c in b[0]]
            plain = [np.uint64(c) for c in row]
            wrapped = [np.uint64(c * w % self.p) for c in row]
        else:
            b_cols = np.ascontiguousarray(b.T)
            plain = list(b_cols)
            wrapped = [None, *(mod_u64(b_cols[j] * np.uint64(w), p) for j in range(1, k))]
        acc = np.empty(cols.shape, dtype=np.uint64)
        term = np.empty(cols.shape[1], dtype=np.uint64)
        for t in range(k):
            np.multiply(cols[0], plain[t], out=acc[t])
            for i in range(1, k):
                j = t - i
                np.multiply(cols[i], plain[j] if j >= 0 else wrapped[j + k], out=term)
                acc[t] += term
        mod_u64(acc, p, out=acc)
        return np.ascontiguousarray(acc.T)

    def _mul_numpy_lazy(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """The schoolbook product on uint64 without reducing each product: the raw sums of each
        power X^(i+j) (at most k products below p^2), one remainder per power, the powers from X^k
        up folded in by the reduction rows (a coefficient below p plus k - 1 products below p^2),
        one remainder per coefficient: 3k - 1 remainders instead of one per product."""
        k, p = self.k, np.uint64(self.p)
        a, b = np.asarray(a, dtype=np.uint64), np.asarray(b, dtype=np.uint64)
        raw: list[np.ndarray | None] = [None] * (2 * k - 1)
        for i in range(k):
            for j in range(k):
                term = a[:, i] * b[:, j]
                held = raw[i + j]
                raw[i + j] = term if held is None else np.add(held, term, out=held)
        powers = [mod_u64(r, p, out=r) for r in raw if r is not None]
        out = np.empty((len(powers[0]), k), dtype=np.uint64)
        for i in range(k):
            acc = powers[i]
            for j, row in enumerate(self.reductions):
                if row[i]:
                    acc = acc + powers[k + j] * np.uint64(row[i])
            mod_u64(acc, p, out=out[:, i])
        return out

    def mul_base(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """a (shape (n, k)) times b (base entries, shape (n,)): k base products per entry."""
        return self.base.mul(a, np.asarray(b)[:, None])

    def scale(self, a: np.ndarray, s: Element) -> np.ndarray:
        if isinstance(s, int) or self.field.is_base(s):
            scalar = s if isinstance(s, int) else s[0]
            return self.base.mul(a, self.base.scalar_array(scalar)[0])
        return self.mul(a, self.scalar_array(s))

    def sum(self, a: np.ndarray) -> Element:
        return tuple(self.base.sum(a[:, i]) for i in range(self.k))  # type: ignore[misc]
