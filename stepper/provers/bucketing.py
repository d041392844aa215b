"""Bucket keys of the grouped permutation check's second layer, and sums by bucket.

In round k (low-first) of the second sumcheck, variables x_1..x_(k-1) are bound
to challenges and x_k is the round variable; an entry z of the remaining
hypercube {0,1}^(mu-k) sees, for each permutation bit i, the 2^k table bits
s_i(b, z), b in {0,1}^k. Those bits fix the bit's restricted polynomial in the
round variable, so entries whose bits agree over a whole group of c bits share
one polynomial: they fall into one bucket, and there are at most
min(2^(2^k * c), 2^(mu - k)) buckets (at most 4^c in round 1, where each bit
restricts to one of 0, 1, Y, 1 - Y).

Everything here is pure and works without field products: keys are bit
packing, occupancy is :func:`numpy.unique`, and :func:`segment_sum` adds
field elements by bucket (additions only; 64-bit limbs where needed).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

import numpy as np

if TYPE_CHECKING:
    from stepper.field.field import Field

__all__ = ["MAX_MASK_BITS", "GroupBuckets", "bit_tables", "group_codes", "codes_of_inverse", "round_masks", "code_masks",
           "group_buckets", "code_buckets", "segment_sum", "subset_sums", "split_groups"]

MAX_MASK_BITS = 16  # 2^(k-1) <= 16, i.e. bucketing up to round 5: subset-sum tables of <= 2^16 entries


@dataclass(frozen=True, slots=True)
class GroupBuckets:
    """Occupancy of one group of ``width`` bits in round ``round``: ``packed`` (one key per
    bucket, ascending; see :func:`code_buckets`) and ``sizes`` (entries per bucket).
    ``entry_keys`` holds every entry's packed key, or, for keys compared as rows, its
    bucket already. :meth:`inverse` gives the bucket of every entry and :meth:`rows`
    unpacks the keys; both are computed only when asked for (a round whose buckets do
    not pay needs neither)."""

    packed: np.ndarray
    sizes: np.ndarray
    width: int
    round: int
    entry_keys: np.ndarray

    @property
    def count(self) -> int:
        return len(self.sizes)

    def inverse(self) -> np.ndarray:
        """The bucket (index into ``sizes``) of every remaining entry."""
        if self.packed.ndim == 2:
            return self.entry_keys
        largest = int(self.packed[-1])
        if largest < 4 * len(self.entry_keys) + (1 << 16):  # a rank table no larger than a few times the keys
            rank = np.zeros(largest + 1, dtype=np.intp)
            rank[self.packed.astype(np.intp)] = np.arange(self.count, dtype=np.intp)
            return rank[self.entry_keys]
        return np.searchsorted(self.packed, self.entry_keys)

    def rows(self) -> np.ndarray:
        """Shape (count, width): column pos holds, for each bucket, the 2^k table bits of
        the group's bit pos, bit b being s(b + 2^k z) (x_1 lowest), as uint64."""
        if self.packed.ndim == 2:
            return self.packed
        c, span = self.width, 1 << self.round
        one = np.uint64(1)
        packed = self.packed.astype(np.uint64)
        out = np.zeros((self.count, c), dtype=np.uint64)
        for pos in range(c):
            for b in range(span):
                out[:, pos] |= ((packed >> np.uint64(c * b + pos)) & one) << np.uint64(b)
        return out


def split_groups(num_vars: int, groups: int) -> list[list[int]]:
    """Bits 0..num_vars-1 split into ``groups`` consecutive groups, sizes differing by at most one."""
    base, extra = divmod(num_vars, groups)
    out, start = [], 0
    for j in range(groups):
        size = base + (1 if j < extra else 0)
        out.append(list(range(start, start + size)))
        start += size
    return out


def bit_tables(inverse_perm: np.ndarray, num_vars: int) -> list[np.ndarray]:
    """s_i[y] = bit i of sigma^-1(y), as uint8 tables, for i = 0..num_vars-1."""
    inv = np.asarray(inverse_perm, dtype=np.int64)
    return [((inv >> i) & 1).astype(np.uint8) for i in range(num_vars)]


def _code_dtype(width: int) -> type[np.unsignedinteger]:
    return next(t for t in (np.uint8, np.uint16, np.uint32, np.uint64) if width <= 8 * np.dtype(t).itemsize)


def group_codes(bits: Sequence[np.ndarray], group: Sequence[int]) -> np.ndarray:
    """code[y] = sum over pos of s_(group[pos])[y] << pos: the group's bits of sigma^-1(y)
    as one small integer (the narrowest unsigned type that holds them)."""
    dtype = _code_dtype(len(group))
    code = np.zeros(len(bits[0]), dtype=dtype)
    for pos, i in enumerate(group):
        code |= bits[i].astype(dtype) << dtype(pos)
    return code


def codes_of_inverse(inverse_perm: np.ndarray, groups: Sequence[Sequence[int]]) -> list[np.ndarray]:
    """:func:`group_codes` of every group straight from sigma^-1 (no bit tables)."""
    inv = np.asarray(inverse_perm, dtype=np.int64)
    out = []
    for group in groups:
        dtype = _code_dtype(len(group))
        if list(group) == list(range(group[0], group[0] + len(group))):  # consecutive bits: one shift
            code = np.empty(len(inv), dtype=dtype)
            for start in range(0, len(inv), 1 << 16):  # in blocks: no int64 temporaries as long as inv
                code[start : start + (1 << 16)] = (inv[start : start + (1 << 16)] >> group[0]) & ((1 << len(group)) - 1)
            out.append(code)
        else:
            out.append(group_codes([((inv >> i) & 1).astype(np.uint8) for i in range(max(group) + 1)], group))
    return out


def _halve(key: np.ndarray, bits: int) -> np.ndarray:
    """key(2u) | key(2u + 1) << bits, in the narrowest type that holds 2 * bits bits."""
    dtype = _code_dtype(2 * bits)
    return key[0::2].astype(dtype, copy=False) | (key[1::2].astype(dtype) << dtype(bits))


def round_masks(bits: np.ndarray, round_: int) -> np.ndarray:
    """Shape (2^(mu-k), 2): mask[z, t] packs the 2^(k-1) bits s(b', t, z), b' in
    {0,1}^(k-1), bit j of the mask being b' = j (x_1 lowest); ``bits`` holds 0 and 1."""
    mask = bits
    for step in range(round_ - 1):
        mask = _halve(mask, 1 << step)
    return mask.astype(np.uint64).reshape(-1, 2)


def code_masks(codes: np.ndarray, c: int, round_: int) -> list[np.ndarray]:
    """:func:`round_masks` of each of the group's ``c`` bits, flattened (index t + 2z),
    straight from the group's codes: halve them into keys of 2^(k-1) codes, then pick
    each bit's 2^(k-1) bits out of the key."""
    span = 1 << (round_ - 1)
    if c * span > 64:
        return [round_masks(((codes >> codes.dtype.type(pos)) & 1).astype(np.uint8), round_).reshape(-1)
                for pos in range(c)]
    key = codes
    for step in range(round_ - 1):
        key = _halve(key, c << step)
    dtype = _code_dtype(span)
    out = []
    for pos in range(c):
        mask = ((key >> key.dtype.type(pos)) & 1).astype(dtype)
        for b in range(1, span):
            mask |= ((key >> key.dtype.type(c * b + pos)) & 1).astype(dtype) << dtype(b)
        out.append(mask)
    return out


def group_buckets(bits: Sequence[np.ndarray], group: Sequence[int], round_: int) -> GroupBuckets:
    """Bucket every remaining entry of round ``round_`` by the group's 2^k * c table bits."""
    return code_buckets(group_codes(bits, group), len(group), round_)


def code_buckets(codes: np.ndarray, c: int, round_: int) -> GroupBuckets:
    """:func:`group_buckets` from the group's :func:`group_codes` (``c`` bits each).

    Up to 64 bits the key of entry z is packed with the code at b + 2^k z in bits
    c*b .. c*b + c - 1, built by halving: key_k(z) = key_(k-1)(2z) | key_(k-1)(2z+1) << c 2^(k-1),
    so each round reads the codes once. Past 64 bits the rows are compared whole."""
    if (c << round_) <= 64:
        key = codes
        for step in range(round_):
            key = _halve(key, c << step)
        packed, sizes = _unique_keys(key, c << round_)
        return GroupBuckets(packed, sizes, c, round_, key)
    rows = []
    for pos in range(c):
        m = round_masks(((codes >> codes.dtype.type(pos)) & 1).astype(np.uint8), round_)
        rows.append(m[:, 0] | (m[:, 1] << np.uint64(1 << (round_ - 1))))
    stacked = np.stack(rows, axis=1)
    keys, inverse, sizes = np.unique(stacked, axis=0, return_inverse=True, return_counts=True)
    return GroupBuckets(keys, sizes, c, round_, inverse.reshape(-1))


def _unique_keys(key: np.ndarray, bits: int) -> tuple[np.ndarray, np.ndarray]:
    """``np.unique(key, return_counts=True)`` for keys of ``bits`` bits: by counting into a
    table of 2^bits slots when that table is no larger than a few times the keys (no sort:
    the first rounds of a large permutation), by sorting otherwise."""
    if bits <= 24 and (1 << bits) <= 4 * len(key) + (1 << 16):
        counts = np.bincount(key, minlength=1 << bits)
        present = np.flatnonzero(counts)
        return present.astype(key.dtype), counts[present]
    return np.unique(key, return_counts=True)  # type: ignore[no-any-return]


def segment_sum(field: Field, values: np.ndarray, inverse: np.ndarray, count: int) -> np.ndarray:
    """out[b] = sum of values[z] over z with inverse[z] = b (field additions only)."""
    if field.is_extension:
        cols = [segment_sum(field.base, values[:, c], inverse, count) for c in range(field.degree)]
        return np.stack(cols, axis=1)
    p = field.p
    if values.dtype == np.uint64 and p < 2**32:
        out = np.zeros(count, dtype=np.uint64)
        np.add.at(out, inverse, values)
        return out % np.uint64(p)
    if values.dtype == np.uint64:  # 64-bit prime: add 32-bit limbs separately
        lo = np.zeros(count, dtype=np.uint64)
        hi = np.zeros(count, dtype=np.uint64)
        np.add.at(lo, inverse, values & np.uint64(0xFFFFFFFF))
        np.add.at(hi, inverse, values >> np.uint64(32))
        shift = field.vec([pow(2, 32, p)] * count)
        return field.vadd(field.vmul(hi % np.uint64(p), shift), lo % np.uint64(p))
    out = field.vzeros(count)
    np.add.at(out, inverse, values)
    return field.vec([int(v) % p for v in out])


def subset_sums(field: Field, weights: np.ndarray) -> np.ndarray:
    """W[mask] = sum of weights[j] over the set bits j of mask, for every mask
    of len(weights) bits (2^len entries; additions only)."""
    table = field.vzeros(1)
    for j in range(len(weights)):
        table = np.concatenate([table, field.vadd(table, np.repeat(weights[j : j + 1], len(table), axis=0))])
    return table
