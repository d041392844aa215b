"""A witness table kept as stored: integer words on disk, read as field vectors a row range at a time.

A binary witness (or a ``.npy`` table a JSON witness names) is memory-mapped by the loader.
Converting a whole table to the kernels' canonical form (C-contiguous ``uint64``, shape (n,)
or (n, k)) would hold it in memory, at twice its stored size for 32-bit words, and every fold
after it too. A :class:`StoredTable` keeps the stored words instead and converts only the rows
asked for (:meth:`StoredTable.rows`); once a row range is read, the pages of the mapping that
held it are handed back to the operating system (``madvise(MADV_DONTNEED)``: the file is
unchanged and a page read again comes back from the page cache), so the resident memory of a
pass over a table stays that of one range, not of the table.

Invariant: the words were checked canonical (0 <= v < p, in row ranges of :data:`SCAN_ROWS`)
when the table was made by :func:`stored_table`, so a row range converts without checks. Only
primes below 2^64 are kept this way (their elements are machine words); wider fields are
converted whole by the witness fit. No file is opened here: the mapping is the loader's.
"""

from __future__ import annotations

import mmap
from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import WitnessError, Where

if TYPE_CHECKING:
    from stepper.field.field import Field

__all__ = ["StoredTable", "stored_table", "bit_reversed", "table_rows", "whole_table", "SCAN_ROWS"]

SCAN_ROWS = 1 << 18  # rows checked at once when a table is admitted


class StoredTable:
    """Rows [start, stop) of stored integer words (shape (n,) or (n, k)) read as canonical field
    vectors; ``len`` and ``shape`` are those of the canonical table."""

    __slots__ = ("words", "field", "name", "_pages")

    def __init__(self, field: Field, words: np.ndarray, name: str) -> None:
        self.field = field
        self.words = words
        self.name = name
        self._pages = _mapping_of(words)

    def __len__(self) -> int:
        return int(self.words.shape[0])

    def __repr__(self) -> str:
        return f"StoredTable({self.name!r}, {self.words.shape[0]} rows of {self.words.dtype.str})"

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(self.words.shape)

    @property
    def ndim(self) -> int:
        return int(self.words.ndim)

    @property
    def dtype(self) -> np.dtype[Any]:
        return np.dtype(np.uint64)

    @property
    def nbytes(self) -> int:
        """The canonical size in memory (8 bytes per coefficient), not the stored size."""
        return int(np.prod(self.words.shape)) * 8

    def part(self, start: int, stop: int) -> StoredTable:
        """Rows [start, stop) as a table of their own, still unread."""
        return StoredTable(self.field, self.words[start:stop], self.name)

    def rows(self, start: int, stop: int) -> np.ndarray:
        """Rows [start, stop) as a new C-contiguous ``uint64`` array; their mapped pages are released."""
        out = np.array(self.words[start:stop], dtype=np.uint64, order="C")
        self._release(start, stop)
        return out

    def rows_bit_reversed(self, start: int, stop: int, bits: int) -> np.ndarray:
        """Rows [start, stop) laid out as :func:`bit_reversed` lays them out, converted on the way
        (one copy); their mapped pages are released."""
        out = bit_reversed(self.words[start:stop], bits, np.uint64)
        self._release(start, stop)
        return out

    def whole(self) -> np.ndarray:
        """Every row in memory (what the in-memory engine and the probes work on)."""
        n = len(self)
        out = np.empty(self.shape, dtype=np.uint64)
        for start in range(0, n, SCAN_ROWS):
            stop = min(start + SCAN_ROWS, n)
            out[start:stop] = self.rows(start, stop)
        return out

    def _release(self, start: int, stop: int) -> None:
        if self._pages is None or stop <= start:
            return
        mapping, origin = self._pages
        row = self.words.strides[0]
        first = self.words.ctypes.data - origin + start * row
        last = first + (stop - start) * row
        first -= first % mmap.PAGESIZE
        try:
            mapping.madvise(mmap.MADV_DONTNEED, first, min(last, len(mapping)) - first)
        except (OSError, ValueError):  # a mapping that refuses the advice keeps its pages: only memory is lost
            self._pages = None


def _mapping_of(words: np.ndarray) -> tuple[mmap.mmap, int] | None:
    """The memory mapping under ``words`` and the address it starts at, or None (in memory, or no
    ``madvise`` on this platform)."""
    base: Any = words
    while isinstance(base, np.ndarray):
        base = base.base
    if not isinstance(base, mmap.mmap) or not hasattr(base, "madvise") or not hasattr(mmap, "MADV_DONTNEED"):
        return None
    probe = np.frombuffer(base, dtype=np.uint8, count=1)
    origin = int(probe.ctypes.data)
    del probe
    return base, origin


def stored_table(field: Field, words: np.ndarray, table: str, where: Where) -> StoredTable:
    """``words`` (unsigned or non-negative signed integers, p < 2^64) checked canonical for ``field``
    in row ranges, kept as stored; raises :class:`WitnessError` naming the first bad entry."""
    k = field.degree
    if words.ndim == 2 and (not field.is_extension or words.shape[1] != k):
        raise WitnessError(
            f"expected table {table!r} as shape (n,) or (n, {k}) over {field.describe()}, found shape {words.shape}",
            where)
    result = StoredTable(field, words, table)
    p = field.p
    signed = words.dtype.kind == "i"
    limit = np.iinfo(words.dtype).max
    for start in range(0, len(result), SCAN_ROWS):
        stop = min(start + SCAN_ROWS, len(result))
        piece = words[start:stop]
        low = int(piece.min()) if signed and piece.size else 0
        high = int(piece.max()) if piece.size else 0
        if low < 0 or (p <= limit and high >= p):
            bad = np.less(piece, 0) | (piece.astype(np.uint64) >= np.uint64(p))
            index = start + int(np.argwhere(bad)[0][0])
            raise WitnessError(
                f"expected canonical entries 0 <= v < p = {p} in table {table!r}, found {words[index]} at entry "
                f"{index}", where)
        result._release(start, stop)
    return result


def bit_reversed(rows: np.ndarray, bits: int, dtype: Any = None) -> np.ndarray:
    """A new C-contiguous array (of ``dtype``, default that of ``rows``) whose row rev(s) R + r is
    row 2^bits r + s of ``rows`` (s < 2^bits, R = len(rows) / 2^bits), rev(s) being s with its
    ``bits`` bits reversed. One copy: with s split into its bits as axes of length 2, reversing
    them is a transposition."""
    groups = rows.reshape(len(rows) >> bits, *([2] * bits), *rows.shape[1:])  # axes r, s_(bits-1), ..., s_0
    axes = (*range(bits, 0, -1), 0, *range(bits + 1, groups.ndim))  # s_0, ..., s_(bits-1), r
    out = np.empty(groups.transpose(axes).shape, dtype=rows.dtype if dtype is None else dtype)
    out[...] = groups.transpose(axes)
    return out.reshape(rows.shape)


def table_rows(table: Any, start: int, stop: int) -> np.ndarray:
    """Rows [start, stop) of a stored table or of an in-memory field vector."""
    if isinstance(table, StoredTable):
        return table.rows(start, stop)
    return table[start:stop]  # type: ignore[no-any-return]


def whole_table(table: Any) -> np.ndarray:
    """A stored table read whole, or an in-memory field vector as it is."""
    return table.whole() if isinstance(table, StoredTable) else table
