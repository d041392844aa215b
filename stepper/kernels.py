"""Vectorised field arithmetic on numpy arrays, one kernel per kind of field.

* :class:`SmallPrimeKernel` for p < 2^32: uint64 entries, products fit in 64 bits.
* :class:`GoldilocksKernel` for p = 2^64 - 2^32 + 1: uint64 entries, 32-bit limb
  products reduced with 2^64 = 2^32 - 1 and 2^96 = -1 (mod p).
* :class:`ObjectKernel` for every other prime: numpy object arrays of Python ints.
* :class:`ExtensionKernel` for F_p[X]/(q): shape (n, k) arrays of the base kernel's
  dtype, schoolbook products reduced by q.

Every function takes and returns canonical arrays; none loops in Python over entries.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import FieldError

if TYPE_CHECKING:
    from stepper.field import Element, Field

__all__ = ["Kernel", "kernel_for", "GOLDILOCKS"]

GOLDILOCKS = 2**64 - 2**32 + 1


class Kernel(ABC):
    """Arithmetic on vectors of one field."""

    dtype: Any

    def __init__(self, field: Field) -> None:
        self.field = field
        self.p = field.p

    @abstractmethod
    def array(self, values: Any) -> np.ndarray:
        """A canonical array from elements or an existing array."""

    def to_list(self, a: np.ndarray) -> list[Element]:
        return [int(x) for x in a]

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros(n, dtype=self.dtype)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.array([int(x) for x in rng.integers(0, self.p, size=n, dtype=np.uint64)])

    def scalar_array(self, s: Element) -> np.ndarray:
        return self.array([s])

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a + b) % self.p

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a + (self.p - b)) % self.p

    def neg(self, a: np.ndarray) -> np.ndarray:
        return (self.p - a) % self.p

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a * b) % self.p

    def scale(self, a: np.ndarray, s: Element) -> np.ndarray:
        return self.mul(a, self.scalar_array(s)[0])

    def sum(self, a: np.ndarray) -> Element:
        return int(sum(int(x) for x in np.asarray(a, dtype=object))) % self.p if len(a) else 0

    def dot(self, a: np.ndarray, b: np.ndarray) -> Element:
        return self.sum(self.mul(a, b))

    def inv(self, a: np.ndarray) -> np.ndarray:
        """Montgomery's batch inversion by a product tree (log-depth numpy passes)."""
        n = len(a)
        if n == 0:
            return a.copy()
        levels = [a]
        while len(levels[-1]) > 1:
            cur = levels[-1]
            if len(cur) % 2:
                cur = np.concatenate([cur, self.array([self.field.one])])
            levels.append(self.mul(cur[0::2], cur[1::2]))
        root = self.to_list(levels[-1])[0]
        if self.field.is_zero(root):
            raise FieldError("expected every entry to be non-zero for batch inversion, found a zero")
        inv = self.array([self.field.inv(root)])
        for level in reversed(levels[:-1]):
            cur = level
            if len(cur) % 2:
                cur = np.concatenate([cur, self.array([self.field.one])])
            out = self.zeros(len(cur))
            out[0::2] = self.mul(inv, cur[1::2])
            out[1::2] = self.mul(inv, cur[0::2])
            inv = out[: len(level)]
        return inv

    def poly_eval(self, coeffs: list[Element], xs: np.ndarray) -> np.ndarray:
        acc = self.zeros(len(xs))
        for c in reversed(coeffs):
            acc = self.add(self.mul(acc, xs), self._broadcast(c, len(xs)))
        return acc

    def _broadcast(self, s: Element, n: int) -> np.ndarray:
        return np.repeat(self.scalar_array(s), n, axis=0)


class SmallPrimeKernel(Kernel):
    dtype = np.uint64

    def array(self, values: Any) -> np.ndarray:
        arr = np.asarray(values, dtype=np.uint64) if not isinstance(values, np.ndarray) else values.astype(np.uint64)
        return arr.reshape(-1)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.integers(0, self.p, size=n, dtype=np.uint64)

    def sum(self, a: np.ndarray) -> Element:
        # chunks of 2^31 entries < 2^32 cannot overflow 2^63
        total = 0
        for start in range(0, len(a), 1 << 31):
            total += int(np.sum(a[start : start + (1 << 31)], dtype=np.uint64))
        return total % self.p


class GoldilocksKernel(Kernel):
    dtype = np.uint64

    def array(self, values: Any) -> np.ndarray:
        if isinstance(values, np.ndarray):
            return values.astype(np.uint64).reshape(-1)
        return np.array([int(v) for v in values], dtype=np.uint64)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.integers(0, self.p, size=n, dtype=np.uint64)

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        s = a + b  # wraps mod 2^64
        carry = s < a
        s = s + carry.astype(np.uint64) * np.uint64(0xFFFFFFFF)  # 2^64 = 2^32 - 1 (mod p)
        return np.where(s >= np.uint64(self.p), s - np.uint64(self.p), s)

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        d = a - b
        return np.where(a < b, d + np.uint64(self.p), d)

    def neg(self, a: np.ndarray) -> np.ndarray:
        return np.where(a == 0, a, np.uint64(self.p) - a)

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        m32 = np.uint64(0xFFFFFFFF)
        s32 = np.uint64(32)
        a0, a1 = a & m32, a >> s32
        b0, b1 = b & m32, b >> s32
        lo = a0 * b0
        mid1 = a0 * b1
        mid2 = a1 * b0
        hi = a1 * b1
        mid = mid1 + mid2
        mid_carry = (mid < mid1).astype(np.uint64)  # worth 2^96
        lo_new = lo + (mid << s32)
        c = (lo_new < lo).astype(np.uint64)
        hi = hi + (mid >> s32) + (mid_carry << s32) + c
        return self._reduce128(lo_new, hi)

    def _reduce128(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """(hi * 2^64 + lo) mod p with hi = hh * 2^32 + hl: lo - hh + hl * (2^32 - 1)."""
        m32 = np.uint64(0xFFFFFFFF)
        p = np.uint64(self.p)
        hh = hi >> np.uint64(32)
        hl = hi & m32
        t = lo - hh
        t = np.where(lo < hh, t - m32, t)  # borrow: subtract 2^64 = add p - 2^64 = -(2^32 - 1)
        u = hl * m32  # < 2^64
        r = t + u
        r = np.where(r < t, r + m32, r)
        return np.where(r >= p, r - p, r)

    def sum(self, a: np.ndarray) -> Element:
        lo = a & np.uint64(0xFFFFFFFF)
        hi = a >> np.uint64(32)
        total = int(np.sum(lo, dtype=np.uint64)) if len(a) < (1 << 32) else sum(int(x) for x in lo)
        total += int(np.sum(hi, dtype=np.uint64)) << 32
        return total % self.p


class ObjectKernel(Kernel):
    dtype = object

    def array(self, values: Any) -> np.ndarray:
        out = np.empty(len(values), dtype=object)
        out[:] = [int(v) for v in values]
        return out

    def zeros(self, n: int) -> np.ndarray:
        out = np.empty(n, dtype=object)
        out[:] = 0
        return out

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        words = (self.p.bit_length() + 64 + 63) // 64
        raw = rng.integers(0, 2**63, size=(n, words), dtype=np.uint64)
        vals = [int.from_bytes(row.tobytes(), "little") % self.p for row in raw]
        return self.array(vals)

    def sum(self, a: np.ndarray) -> Element:
        return int(a.sum()) % self.p if len(a) else 0


class ExtensionKernel(Kernel):
    """F_p[X]/(q): arrays of shape (n, k); the base kernel does the coefficient work."""

    def __init__(self, field: Field, base: Kernel) -> None:
        super().__init__(field)
        self.base = base
        self.k = field.degree
        self.dtype = base.dtype
        # X^(k + j) mod q as k base coefficients, for j = 0 .. k - 2
        self.reductions: list[list[int]] = []
        q = field.irreducible
        row = [(-c) % self.p for c in q[:-1]]  # X^k = -(q0 + q1 X + ...)
        for _ in range(self.k - 1):
            self.reductions.append(row)
            top = row[-1]
            row = [0] + row[:-1]
            row = [(r + top * x) % self.p for r, x in zip(row, [(-c) % self.p for c in q[:-1]])]

    def array(self, values: Any) -> np.ndarray:
        if isinstance(values, np.ndarray):
            if values.ndim == 2:
                return values
            out = self.zeros(len(values))  # base-field entries, embedded
            out[:, 0] = self.base.array(values)
            return out
        rows = [self.field.lift(v) for v in values]
        flat = self.base.array([c for row in rows for c in row])  # type: ignore[union-attr]
        return flat.reshape(len(rows), self.k)

    def to_list(self, a: np.ndarray) -> list[Element]:
        return [tuple(int(c) for c in row) for row in a]

    def zeros(self, n: int) -> np.ndarray:
        return self.base.zeros(n * self.k).reshape(n, self.k)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.base.random(n * self.k, rng).reshape(n, self.k)

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.base.add(a, b)

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.base.sub(a, b)

    def neg(self, a: np.ndarray) -> np.ndarray:
        return self.base.neg(a)

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
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
                    prod[i] = bk.add(prod[i], bk.mul(top, bk.array([coef])[0]))
        return np.stack(prod[:k], axis=1)

    def scale(self, a: np.ndarray, s: Element) -> np.ndarray:
        return self.mul(a, self.scalar_array(s))

    def sum(self, a: np.ndarray) -> Element:
        return tuple(self.base.sum(a[:, i]) for i in range(self.k))  # type: ignore[misc]


def kernel_for(field: Field) -> Kernel:
    base: Kernel
    if field.p < 2**32:
        base = SmallPrimeKernel(field.base)
    elif field.p == GOLDILOCKS:
        base = GoldilocksKernel(field.base)
    else:
        base = ObjectKernel(field.base)
    return ExtensionKernel(field, base) if field.is_extension else base
