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

__all__ = ["MAX_MASK_BITS", "GroupBuckets", "bit_tables", "round_masks", "group_buckets", "segment_sum",
           "subset_sums", "split_groups"]

MAX_MASK_BITS = 16  # 2^(k-1) <= 16, i.e. bucketing up to round 5: subset-sum tables of <= 2^16 entries


@dataclass(frozen=True, slots=True)
class GroupBuckets:
    """Occupancy of one group in one round: ``keys`` (one row per bucket),
    ``inverse`` (the bucket of every entry) and ``sizes`` (entries per bucket)."""

    keys: np.ndarray
    inverse: np.ndarray
    sizes: np.ndarray

    @property
    def count(self) -> int:
        return len(self.sizes)


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


def round_masks(bits: np.ndarray, round_: int) -> np.ndarray:
    """Shape (2^(mu-k), 2): mask[z, t] packs the 2^(k-1) bits s(b', t, z), b' in
    {0,1}^(k-1), bit j of the mask being b' = j (x_1 lowest)."""
    n = len(bits)
    width = 1 << (round_ - 1)
    rows = bits.reshape(n // (2 * width), 2, width)
    mask = rows[:, :, 0].astype(np.uint64)
    for b in range(1, width):  # one pass per bit position: n / width entries each
        mask |= rows[:, :, b].astype(np.uint64) << np.uint64(b)
    return mask


def group_buckets(bits: Sequence[np.ndarray], group: Sequence[int], round_: int) -> GroupBuckets:
    """Bucket every remaining entry of round ``round_`` by the group's 2^k * c bits."""
    width = 1 << round_  # bits per permutation bit in the key
    rows = []
    for i in group:
        m = round_masks(bits[i], round_)
        rows.append(m[:, 0] | (m[:, 1] << np.uint64(width // 2)))
    if width * len(group) <= 64:
        key = np.zeros(len(rows[0]), dtype=np.uint64)
        for pos, row in enumerate(rows):
            key |= row << np.uint64(width * pos)
        combined, inverse, sizes = _unique_keys(key, width * len(group))
        low = np.uint64((1 << width) - 1)  # width <= 32: bucketing stops by round 5
        keys = np.stack([(combined >> np.uint64(width * pos)) & low for pos in range(len(rows))], axis=1)
    else:
        stacked = np.stack(rows, axis=1)
        keys, inverse, sizes = np.unique(stacked, axis=0, return_inverse=True, return_counts=True)
    return GroupBuckets(keys, inverse.reshape(-1), sizes)


def _unique_keys(key: np.ndarray, bits: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``np.unique(key, return_inverse=True, return_counts=True)`` for keys of ``bits`` bits:
    by counting into a table of 2^bits slots when that table is no larger than a few times
    the keys (no sort: the first rounds of a large permutation), by sorting otherwise."""
    if bits <= 24 and (1 << bits) <= 4 * len(key) + (1 << 16):
        slots = key.astype(np.intp)
        counts = np.bincount(slots, minlength=1 << bits)
        present = np.flatnonzero(counts)
        rank = np.zeros(1 << bits, dtype=np.intp)
        rank[present] = np.arange(len(present), dtype=np.intp)
        return present.astype(np.uint64), rank[slots], counts[present]
    combined, inverse, sizes = np.unique(key, return_inverse=True, return_counts=True)
    return combined, inverse.reshape(-1), sizes


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
