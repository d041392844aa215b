"""Vector kernels for prime fields.

* :class:`SmallPrimeKernel` for p < 2^32: uint64 entries; a product of two
  entries fits in 64 bits, so numpy's ``(a * b) % p`` is exact.
* :class:`GoldilocksKernel` for p = 2^64 - 2^32 + 1: uint64 entries; the
  128-bit product is assembled from 32-bit limbs and reduced with
  2^64 = 2^32 - 1 and 2^96 = -1 (mod p).
* :class:`Word64Kernel` for any other prime 2^32 < p < 2^64: uint64 entries,
  Montgomery multiplication in the compiled loops.
* :class:`ObjectKernel` for primes above 2^64: numpy object arrays of Python
  ints (exact for any size, about a microsecond per operation).

The three uint64 kernels share :class:`Uint64Kernel` (checked arrays, lists,
random draws); the two for p > 2^32 share :class:`WideKernel` (subtraction,
negation and the limb-wise sum, which do not depend on the shape of p).

Additions avoid ``%``: for uint64 entries and p < 2^63, a + b - p wraps
around when a + b < p, so min(a + b, a + b - p) is the canonical sum.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import FieldError
from stepper.field.kernels.base import COMPILED_MIN, Kernel

if TYPE_CHECKING:
    from stepper.field.shape import Element, FieldShape

__all__ = ["Uint64Kernel", "WideKernel", "SmallPrimeKernel", "GoldilocksKernel", "Word64Kernel", "ObjectKernel",
           "GOLDILOCKS", "as_uint64", "mod_u64"]

GOLDILOCKS = 2**64 - 2**32 + 1


def as_uint64(values: Any, p: int) -> np.ndarray:
    """A uint64 array of the integers ``values`` (list or array), each checked
    to be canonical for p < 2^64; raises FieldError naming the first bad entry."""
    if isinstance(values, np.ndarray):
        arr = values
    else:
        items = values if isinstance(values, list) else list(values)
        try:
            arr = np.array(items)
        except (ValueError, TypeError, OverflowError):  # ragged or exotic entries: checked one by one below
            arr = _object_vector(items)
        if arr.dtype.kind == "f":  # ints >= 2^63 mixed with small ones: numpy picks float64
            arr = _object_vector(items)
        if arr.size == 0:
            return np.zeros(arr.shape, dtype=np.uint64)
        if arr.ndim != 1:
            raise FieldError(f"expected one integer per entry for a vector over p = {p}, found nested sequences")
    if arr.dtype.kind == "O":
        items = arr.reshape(-1).tolist()
        for index, item in enumerate(items):
            if isinstance(item, bool) or not isinstance(item, (int, np.integer)) or not 0 <= item < p:
                raise FieldError(
                    f"expected canonical integer entries 0 <= v < p = {p}, found {item!r} at flat index {index}"
                )
        return np.array(items, dtype=np.uint64).reshape(arr.shape)
    if arr.dtype.kind not in "iu":
        raise FieldError(f"expected integer entries for a vector over p = {p}, found numpy dtype {arr.dtype}")
    if arr.dtype.kind == "i":
        bad = (arr < 0) | (arr >= p) if p <= np.iinfo(arr.dtype).max else arr < 0
    else:
        bad = arr >= p if p <= np.iinfo(arr.dtype).max else np.zeros(arr.shape, dtype=bool)
    if bad.any():
        index = int(np.flatnonzero(bad.reshape(-1))[0])
        raise FieldError(
            f"expected canonical entries 0 <= v < p = {p}, found {arr.reshape(-1)[index]} at flat index {index}"
        )
    return arr if arr.dtype == np.uint64 else arr.astype(np.uint64)


def mod_u64(x: np.ndarray, p64: np.uint64, out: np.ndarray | None = None) -> np.ndarray:
    """x mod p for a uint64 array ``x`` and the uint64 scalar ``p64``, as x - (x // p) * p:
    numpy divides a uint64 array by a scalar with a multiply and shifts (libdivide) but
    takes ``np.remainder`` with one hardware division per entry (measured at 2^14 entries:
    0.8 ns per entry against 1.9). ``out`` may be ``x``."""
    q = np.floor_divide(x, p64)
    q *= p64
    return np.subtract(x, q, out=q if out is None else out)


def _object_vector(items: list[Any]) -> np.ndarray:
    out = np.empty(len(items), dtype=object)
    for index, item in enumerate(items):
        out[index] = item
    return out


def _pair(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, tuple[int, ...]]:
    """Both operands broadcast to one shape, flattened, C-contiguous uint64."""
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape:
        a, b = np.broadcast_arrays(a, b)
    shape = a.shape
    flat_a = np.ascontiguousarray(a, dtype=np.uint64).reshape(-1)
    flat_b = np.ascontiguousarray(b, dtype=np.uint64).reshape(-1)
    return flat_a, flat_b, shape


class Uint64Kernel(Kernel):
    """What every prime below 2^64 shares: uint64 entries, checked arrays, lists, random draws."""

    dtype = np.uint64

    def __init__(self, field: FieldShape, compiled_min: int = COMPILED_MIN) -> None:
        super().__init__(field, compiled_min)
        self.p64 = np.uint64(field.p)

    def array(self, values: Any) -> np.ndarray:
        return as_uint64(values, self.p).reshape(-1)

    def to_list(self, a: np.ndarray) -> list[Element]:
        return a.tolist()  # type: ignore[no-any-return]

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.integers(0, self.p, size=n, dtype=np.uint64)


class WideKernel(Uint64Kernel):
    """What the primes 2^32 < p < 2^64 share: subtraction, negation and the limb-wise
    sum (a sum of entries may pass 2^64); multiplication depends on the shape of p."""

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.word_sub(fa, fb, self.p64, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        d = np.subtract(a, b, dtype=np.uint64, casting="unsafe")
        return d + np.less(a, b) * self.p64  # a borrow adds p (wrapping back below p); np.where is 5x slower

    def neg(self, a: np.ndarray) -> np.ndarray:
        r = np.subtract(self.p64, a, dtype=np.uint64, casting="unsafe")
        return np.minimum(r, r - self.p64)  # p - 0 = p becomes 0; below p, r - p wraps above r

    def sum(self, a: np.ndarray) -> Element:
        total = 0
        for start in range(0, len(a), 1 << 31):  # limb sums of 2^31 entries stay below 2^63
            chunk = a[start : start + (1 << 31)]
            total += int(np.sum(chunk & np.uint64(0xFFFFFFFF), dtype=np.uint64))
            total += int(np.sum(chunk >> np.uint64(32), dtype=np.uint64)) << 32
        return total % self.p


class SmallPrimeKernel(Uint64Kernel):
    def __init__(self, field: FieldShape, compiled_min: int = COMPILED_MIN) -> None:
        super().__init__(field, compiled_min)
        self.pinv = 1.0 / field.p

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.small_add(fa, fb, self.p64, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        s = np.add(a, b, dtype=np.uint64, casting="unsafe")
        return np.minimum(s, s - self.p64, out=s)

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.small_sub(fa, fb, self.p64, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        d = np.subtract(a, b, dtype=np.uint64, casting="unsafe")
        return np.minimum(d, d + self.p64, out=d)

    def neg(self, a: np.ndarray) -> np.ndarray:
        d = np.subtract(self.p64, a, dtype=np.uint64, casting="unsafe")
        return np.minimum(d, d - self.p64, out=d)

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is None:
            prod = np.multiply(a, b, dtype=np.uint64, casting="unsafe")
            return mod_u64(prod, self.p64, out=prod)
        fa, fb, shape = _pair(a, b)
        out = np.empty_like(fa)
        return compiled.small_mul(fa, fb, self.p64, self.pinv, out).reshape(shape)  # type: ignore[no-any-return]

    def sum(self, a: np.ndarray) -> Element:
        # chunks of 2^31 entries below 2^32 cannot overflow 2^63
        total = 0
        for start in range(0, len(a), 1 << 31):
            total += int(np.sum(a[start : start + (1 << 31)], dtype=np.uint64))
        return total % self.p


class GoldilocksKernel(WideKernel):
    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.gl_add(fa, fb, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        s = np.add(a, b, dtype=np.uint64, casting="unsafe")  # wraps mod 2^64
        carry = s < a
        s = s + carry * np.uint64(0xFFFFFFFF)  # 2^64 = 2^32 - 1 (mod p)
        return np.minimum(s, s - self.p64)  # below p, s - p wraps to s + 2^32 - 1 > s

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.gl_mul(fa, fb, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        a, b = np.asarray(a, dtype=np.uint64), np.asarray(b, dtype=np.uint64)
        if not a.ndim and not b.ndim:  # two scalars: the products below are worked in place, in arrays
            return self.mul(a.reshape(1), b.reshape(1))[0]  # type: ignore[no-any-return]
        m32 = np.uint64(0xFFFFFFFF)
        s32 = np.uint64(32)
        a0, a1 = a & m32, a >> s32
        b0, b1 = b & m32, b >> s32
        # a b = hi 2^64 + mid 2^32 + lo over 32-bit halves; each product below has the operands' broadcast shape
        lo, mid, cross, hi = a0 * b0, a0 * b1, a1 * b0, a1 * b1
        mid += cross
        np.less(mid, cross, out=cross)  # the middle sum's carry, worth 2^96 = 2^32 * 2^64
        cross <<= s32
        hi += cross
        np.right_shift(mid, s32, out=cross)
        hi += cross
        mid <<= s32
        lo += mid
        np.less(lo, mid, out=mid)  # the low word's carry
        hi += mid
        return self._reduced(lo, hi)

    def _reduced(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """(hi * 2^64 + lo) mod p with hi = hh * 2^32 + hl: lo - hh + hl * (2^32 - 1), worked in place in
        ``lo`` and ``hi`` (both overwritten; of one shape: :meth:`mul`'s own words, or
        :meth:`reduce128`'s copies). Branch-free: np.where costs about 5x more here."""
        m32 = np.uint64(0xFFFFFFFF)
        hh = hi >> np.uint64(32)
        hi &= m32
        borrow = lo < hh
        lo -= hh
        np.multiply(borrow, m32, out=hh)  # borrow: subtract 2^64 = add p - 2^64 = -(2^32 - 1)
        lo -= hh
        hi *= m32  # hl * (2^32 - 1) < 2^64
        lo += hi
        np.less(lo, hi, out=hh)  # carry: add 2^64 = 2^32 - 1
        hh *= m32
        lo += hh
        np.subtract(lo, self.p64, out=hh)
        return np.minimum(lo, hh, out=lo)  # below p, lo - p wraps above lo

    def reduce128(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """(hi * 2^64 + lo) mod p with hi = hh * 2^32 + hl: lo - hh + hl * (2^32 - 1); the inputs are left
        as they are (:meth:`_reduced` works on copies of them)."""
        lo, hi = np.broadcast_arrays(np.asarray(lo, dtype=np.uint64), np.asarray(hi, dtype=np.uint64))
        if not lo.ndim:  # two scalars: worked in arrays of one, as mul does
            return self._reduced(lo.reshape(1).copy(), hi.reshape(1).copy())[0]  # type: ignore[no-any-return]
        return self._reduced(lo.copy(), hi.copy())


class Word64Kernel(WideKernel):
    """Any other prime 2^32 < p < 2^64: uint64 entries. Small arrays multiply
    through Python ints (exact, about 0.3 us per entry); large ones through the
    compiled Montgomery loop. Sums may pass 2^64, so additions watch the carry."""

    def __init__(self, field: FieldShape, compiled_min: int = COMPILED_MIN) -> None:
        super().__init__(field, compiled_min)
        self.pneg_inv = np.uint64((-pow(field.p, -1, 2**64)) % 2**64)
        self.r2 = np.uint64(2**128 % field.p)

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            return compiled.word_add(fa, fb, self.p64, np.empty_like(fa)).reshape(shape)  # type: ignore[no-any-return]
        s = np.add(a, b, dtype=np.uint64, casting="unsafe")  # wraps mod 2^64 when a + b >= 2^64
        return s - ((s < a) | (s >= self.p64)) * self.p64

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        compiled = self._use_compiled(a, b)
        if compiled is not None:
            fa, fb, shape = _pair(a, b)
            out = np.empty_like(fa)
            compiled.word_mul(fa, fb, self.p64, self.pneg_inv, self.r2, out)
            return out.reshape(shape)
        prod = np.multiply(np.asarray(a).astype(object), np.asarray(b).astype(object)) % self.p
        return np.asarray(prod, dtype=object).astype(np.uint64)


class ObjectKernel(Kernel):
    dtype = object

    def array(self, values: Any) -> np.ndarray:
        items = values.reshape(-1).tolist() if isinstance(values, np.ndarray) else list(values)
        for index, item in enumerate(items):
            if isinstance(item, bool) or not isinstance(item, (int, np.integer)) or not 0 <= item < self.p:
                raise FieldError(
                    f"expected canonical integer entries 0 <= v < p = {self.p}, found "
                    f"{str(item)[:60]} at flat index {index}"
                )
        out = np.empty(len(items), dtype=object)
        out[:] = [int(v) for v in items]
        return out

    def zeros(self, n: int) -> np.ndarray:
        out = np.empty(n, dtype=object)
        out[:] = 0
        return out

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        words = (self.p.bit_length() + 64 + 63) // 64
        raw = rng.integers(0, 2**63, size=(n, words), dtype=np.uint64)
        out = np.empty(n, dtype=object)
        out[:] = [int.from_bytes(row.tobytes(), "little") % self.p for row in raw]
        return out

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        prod = np.multiply(a, b)
        if isinstance(prod, np.ndarray) and prod.dtype == object:
            return np.remainder(prod, self.p, out=prod)  # reuses the product's array
        return prod % self.p  # type: ignore[no-any-return]

    def sum(self, a: np.ndarray) -> Element:
        return int(a.sum()) % self.p if len(a) else 0
