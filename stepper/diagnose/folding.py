"""The chunked fold: honest rounds and openings from tables read in row ranges, in one pass.

Every round of the root cause needs the challenges of the rounds before it, and all of them
are in the transcript before the recomputation starts. So the first L rounds need not wait
for whole folded tables: a piece of 2^L * R entries of the stored tables holds everything
that R entries of the tables folded L times depend on, and the first L rounds' polynomials
are sums over such pieces. :class:`ChunkedFold` therefore reads each table once, a piece at
a time, and on each piece runs round 1, folds by r_1, runs round 2, folds by r_2, ...,
round L, folds by r_L, adding each round's share into its polynomial and keeping the R
entries the piece leaves. Only the tables folded L times (n / 2^L entries) are ever held
whole; the rounds after L run on them in memory (:mod:`stepper.diagnose.honest`).

Which entries make a piece (n entries, W = n / 2^L, piece = rows [b, b + R) of the result):

* low-first pairs (2i, 2i + 1) in every round: entries [2^L b, 2^L (b + R)), one range;
* high-first pairs (i, i + n/2): for s = 0 .. 2^L - 1 the entries [s W + b, s W + b + R),
  side by side (2^L ranges); the high-first kernels on that piece pair exactly the
  entries the whole tables would pair, round after round.

A low-first piece is laid out once, as it is read, so that the half-pairing (high-first)
kernels pair exactly the low-first pairs in every one of its L rounds, with both halves
contiguous for the compiled kernels: entry 2^L r + s of the piece (r < R, s < 2^L) goes to
row rev(s) R + r, where rev reverses the L bits of s. Round 1 pairs s and s + 1 (s even),
whose rev differ in the top bit only, so they sit half the piece apart; the fold leaves
pair s / 2 at row rev(s) R + r of the first half, which is the same layout for L - 1 bits;
after L folds row r holds entry r of the tables folded L times, in order.

With ``chunk`` entries per piece (any count of at least 2; a piece need not divide n), L
and R are chosen so that a piece has at most ``chunk`` entries and the tables left after
the pass have at most ``chunk`` entries whenever chunk^2 >= n (with a smaller chunk, n /
2^floor(log2 chunk)): memory is bounded by the chunk, not by n. The kernels are those of
the in-memory path on smaller arrays, so the values are the same by construction (the
tests check it, and against Python integers). Reading a :class:`StoredTable` releases the
mapped pages of each range once read, so a memory-mapped witness is never resident whole.
Pure: no files are opened here.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, Iterator, Mapping, Sequence

import numpy as np

from stepper.errors import InputError
from stepper.diagnose.honest import HonestRound, _check_tables, fold, honest_rounds, round_share, share_and_fold
from stepper.diagnose.stored_table import StoredTable, bit_reversed, table_rows, whole_table
from stepper.field.poly import check_point_length, mle_eval

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.field import Element, Field

__all__ = ["CHUNK_ENTRIES", "PassPlan", "ChunkedFold"]

CHUNK_ENTRIES = 1 << 17  # entries per table per piece: 4 MiB of a BabyBear^4 table in memory


@dataclass(frozen=True, slots=True)
class PassPlan:
    """``levels`` rounds done inside the pass; each piece yields ``rows`` entries of the tables
    folded ``levels`` times (``levels`` 0: the tables fit one chunk and are read whole)."""

    levels: int
    rows: int

    @classmethod
    def of(cls, num_vars: int, chunk: int) -> PassPlan:
        bits = chunk.bit_length() - 1  # floor(log2 chunk)
        if num_vars <= bits:
            return cls(0, 1 << num_vars)
        levels = min(num_vars - bits, bits)
        return cls(levels, chunk >> levels)


class ChunkedFold:
    """The default engine of the root cause: the honest rounds and the openings' values,
    reading each table once in pieces of at most ``chunk`` entries (see the module docstring)."""

    def __init__(self, chunk: int = CHUNK_ENTRIES) -> None:
        if chunk < 2:
            raise InputError(f"expected a chunk of at least 2 table entries, found {chunk}")
        self.chunk = chunk

    def honest_rounds(self, field: Field, tables: Mapping[str, Any], expr: Expr, challenges: Sequence[Element],
                      order: str, num_points: int, *, on_round: Callable[[int], None] | None = None,
                      on_work: Callable[[int], None] | None = None) -> Iterator[HonestRound | dict[str, Element]]:
        """The items of :func:`stepper.diagnose.honest.honest_rounds`; ``on_work(units)`` hears how
        far the pass is, in the units of ``on_round`` (2n per instance: n + n/2 + ... table entries)."""
        cur = {name: tables[name] for name in expr.names()}
        n = _check_tables(cur, expr)
        plan = PassPlan.of(n.bit_length() - 1, self.chunk)
        if plan.levels == 0:
            yield from honest_rounds(field, {name: whole_table(t) for name, t in cur.items()}, expr, challenges,
                                     order, num_points, on_round=on_round)
            return
        sums, left = _one_pass(field, cur, expr, challenges, order, num_points, plan, on_work)
        for k, evals in enumerate(sums, start=1):
            yield HonestRound(k, evals)
        if left is None:  # the challenges ran out inside the pass
            return
        levels = plan.levels

        def later(k: int) -> None:
            if on_round is not None:
                on_round(k + levels)

        for item in honest_rounds(field, left, expr, challenges[levels:], order, num_points, on_round=later,
                                  overwrite=True):  # the pass's own arrays: folded in place
            yield HonestRound(item.round + levels, item.evals) if isinstance(item, HonestRound) else item

    def mle_eval(self, field: Field, table: Any, point: Sequence[Element], *,
                 on_work: Callable[[int], None] | None = None) -> Element:
        """The table's multilinear extension at (x_1, ..., x_mu): the first folds in one pass."""
        n = len(table)
        check_point_length(n, point)
        plan = PassPlan.of(len(point), self.chunk)
        if plan.levels == 0:
            return mle_eval(field, whole_table(table), point)
        _, left = _one_pass(field, {"t": table}, None, point, "low-first", 0, plan, on_work)
        assert left is not None  # a point has a coordinate for every fold of the pass
        return mle_eval(field, left["t"], point[plan.levels:])


def _one_pass(field: Field, tables: Mapping[str, Any], expr: Expr | None, challenges: Sequence[Element],
              order: str, num_points: int, plan: PassPlan, on_work: Callable[[int], None] | None
              ) -> tuple[list[tuple[Element, ...]], dict[str, np.ndarray] | None]:
    """The first ``plan.levels`` rounds (none without ``expr``; fewer when the challenges run
    out: then the round without one is the last) and the tables folded ``plan.levels`` times
    (None when a challenge is missing), from one read of every table, piece by piece."""
    levels = plan.levels
    n = len(next(iter(tables.values())))
    width = n >> levels
    folds = min(levels, len(challenges))
    rounds = 0 if expr is None else min(levels, len(challenges) + 1)
    sums: list[tuple[Element, ...]] = []
    left: dict[str, np.ndarray] | None = {} if folds == levels else None
    work = 2 * n - (n >> (levels - 1))  # the units of rounds 1..levels
    for start in range(0, width, plan.rows):
        stop = min(start + plan.rows, width)
        piece = {name: _piece(table, order, levels, width, start, stop) for name, table in tables.items()}
        for k in range(1, max(rounds, folds) + 1):
            share: tuple[Element, ...] | None = None
            if k <= rounds and k <= folds:
                assert expr is not None
                share, piece = share_and_fold(field, piece, expr, num_points, challenges[k - 1])
            elif k <= rounds:
                assert expr is not None
                share = round_share(field, piece, expr, num_points, "high-first")
            elif k <= folds:
                piece = fold(field, piece, challenges[k - 1], "high-first", in_place=True)
            if share is not None:
                if len(sums) < k:
                    sums.append(share)
                else:
                    sums[k - 1] = tuple(field.add(a, b) for a, b in zip(sums[k - 1], share))
        if left is not None:
            for name, arr in piece.items():
                if name not in left:
                    left[name] = np.empty((width, *arr.shape[1:]), dtype=arr.dtype)
                left[name][start:stop] = arr
        if on_work is not None:
            on_work(work * stop // width)
    return sums, left


def _piece(table: Any, order: str, levels: int, width: int, start: int, stop: int) -> np.ndarray:
    """The entries that rows [start, stop) of ``table`` folded ``levels`` times depend on, in the
    layout the half-pairing kernels fold (module docstring): low-first one range, its entry
    2^L r + s at row rev(s) R + r; high-first 2^L ranges side by side."""
    if order == "low-first":
        if isinstance(table, StoredTable):
            return table.rows_bit_reversed(start << levels, stop << levels, levels)
        return bit_reversed(table[start << levels:stop << levels], levels)
    return np.concatenate([table_rows(table, s * width + start, s * width + stop) for s in range(1 << levels)])
