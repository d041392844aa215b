"""Field multiplications counted where they happen.

A :class:`MulCounter` wraps a :class:`~stepper.field.field.Field` and performs the
vector and scalar products the reference provers need, adding the number of
base-or-extension field products each call really does to the tally of the
current phase (a round of an instance, or set-up work). Additions,
subtractions, table look-ups and bit work are free here: the counts compare
prover strategies by their multiplications, the cost that dominates them.

Invariants: every product a prover computes goes through this object (the
counts are honest, never estimated); a vector call on n entries counts n;
:meth:`phase` switches the tally bucket, :meth:`per_phase` reads it back.

Big tables are worked on in blocks of :data:`BLOCK` entries (:func:`blocks`):
each field operation then makes a temporary that stays in the cache and is
reused by the allocator, instead of one as long as the table that the system
must hand out page by page (at 2^24 entries that page work cost more than the
arithmetic). Blocks change neither the values (field sums are exact) nor the
counts (n entries in blocks still count n).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Iterator, Sequence

import numpy as np

if TYPE_CHECKING:
    from stepper.field.field import Element, Field

__all__ = ["BLOCK", "MulCounter", "blocks", "halves"]

BLOCK = 1 << 15  # entries per block: at least the compiled kernels' threshold (2^14), temporaries of 256 KB


class MulCounter:
    """Counting front for the products of one prover run."""

    __slots__ = ("field", "_tally", "_current")

    def __init__(self, field: Field) -> None:
        self.field = field
        self._tally: dict[str, int] = {}
        self._current = "setup"

    # ----- bookkeeping ---------------------------------------------------------------
    def phase(self, name: str) -> None:
        """Count the following products under ``name`` (e.g. ``perm/round 3``)."""
        self._current = name
        self._tally.setdefault(name, 0)

    def add(self, count: int) -> None:
        self._tally[self._current] = self._tally.get(self._current, 0) + count

    @property
    def total(self) -> int:
        return sum(self._tally.values())

    def per_phase(self) -> dict[str, int]:
        return dict(self._tally)

    # ----- products --------------------------------------------------------------------
    def mul(self, a: Element, b: Element) -> Element:
        self.add(1)
        return self.field.mul(a, b)

    def vmul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        self.add(max(len(a), len(b)))
        return self.field.vmul(a, b)

    def vscale(self, a: np.ndarray, s: Element) -> np.ndarray:
        self.add(len(a))
        return self.field.vscale(a, s)

    def product(self, factors: Sequence[np.ndarray]) -> np.ndarray:
        """Entry-wise product of equally long vectors: len - 1 products per entry."""
        acc = factors[0]
        for f in factors[1:]:
            acc = self.vmul(acc, f)
        return acc

    def fold(self, table: np.ndarray, challenge: Element, order: str, *, in_place: bool = False) -> np.ndarray:
        """The table with its next variable (per ``order``) bound to ``challenge``; with
        ``in_place`` the result overwrites the first half of ``table`` (a table the caller
        owns) and is returned as a view of it."""
        f = self.field
        lo, hi = halves(table, order)
        if len(lo) <= BLOCK and not in_place:
            return f.vadd(lo, self.vscale(f.vsub(hi, lo), challenge))
        # block b reads entries at or after its own output positions (2i and 2i + 1, or i and
        # half + i), and each block is computed whole before it is written
        out = table[: len(lo)] if in_place else np.empty(lo.shape, dtype=lo.dtype)
        for part in blocks(len(lo)):
            low = lo[part]
            out[part] = f.vadd(low, self.vscale(f.vsub(hi[part], low), challenge))
        return out

    def eq_table(self, point: Sequence[Element]) -> np.ndarray:
        """eq(point, b) for every b (index bit j = x_(j+1)), one product per entry made."""
        f = self.field
        table = f.vec([f.one])
        for x in point:
            high = self.vscale(table, x)
            table = np.concatenate([f.vsub(table, high), high])
        return table

    def mle(self, table: np.ndarray, point: Sequence[Element]) -> Element:
        """The multilinear extension of ``table`` at (x_1, ..., x_mu), folding x_1 first."""
        cur = self.field.vec(table) if self.field.is_extension and table.ndim == 1 else table
        for k, x in enumerate(point):
            cur = self.fold(cur, x, "low-first", in_place=k > 0)  # from the second fold on, cur is ours
        return self.field.vlist(cur)[0]


def blocks(n: int, size: int | None = None) -> Iterator[slice]:
    """Consecutive slices of ``size`` (default :data:`BLOCK`) covering range(n)."""
    step = size or BLOCK
    for start in range(0, n, step):
        yield slice(start, min(start + step, n))


def halves(table: np.ndarray, order: str) -> tuple[np.ndarray, np.ndarray]:
    """(entries with the next variable = 0, entries with it = 1)."""
    if order == "low-first":
        return table[0::2], table[1::2]
    half = len(table) // 2
    return table[:half], table[half:]
