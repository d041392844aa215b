"""Honest recomputation of sumcheck rounds by folding multilinear tables.

Given tables (index bit j of an entry = variable x_(j+1)) and a `combine`
expression, round k of an honest prover sends g_k(t) for t = 0, 1, ..., d:
the sum over the still-free variables of the expression, with the variable
bound in round k set to t and the earlier ones set to the recorded challenges.

* low-first binds x_1 first: the next variable pairs entries (2i, 2i + 1);
* high-first binds the top variable first: it pairs entries (i, i + n/2).

A table restricted to the next variable = t is lo + t * (hi - lo), so each
round costs O(n * d) vectorised work on the current length n, and folding by
the challenge r halves the tables: O(n * d) for all rounds together. Work is
done in chunks so temporaries stay small; base-field tables stay 1-D until a
fold by an extension challenge embeds them. Nothing here does I/O.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable, Iterator, Mapping, Sequence

import numpy as np

from stepper.errors import InternalError

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.field import Element, Field

__all__ = ["CHUNK", "honest_round", "round_share", "share_and_fold", "fold", "table_round_sums", "HonestRound", "honest_rounds", "tables_at"]

CHUNK = 1 << 14  # pairs of entries handled per vectorised pass
_SUM_ROWS = 256  # entries per row when the coefficients of an (n, k) array are summed


def _halves(arr: np.ndarray, order: str) -> tuple[np.ndarray, np.ndarray]:
    if order == "low-first":
        return arr[0::2], arr[1::2]
    half = len(arr) // 2
    return arr[:half], arr[half:]


def _is_ext(arr: np.ndarray) -> bool:
    return arr.ndim == 2


def _sum(field: Field, arr: np.ndarray) -> list[int]:
    """Per-coefficient integer sums (reduced or not) of a 1-D or (n, k) array."""
    if arr.ndim == 1:
        return [int(field.base.vsum(arr))]  # type: ignore[arg-type]
    if field.p < 2**32 and len(arr) <= 2**31:  # 2^31 entries below 2^32 sum below 2^63
        # numpy sums the columns of a narrow (n, k) array slowly (7x a flat sum); as rows of
        # 256 entries (1024 words for k = 4) it sums at nearly the flat speed, with no copies
        k = arr.shape[1]
        whole = len(arr) - len(arr) % _SUM_ROWS
        flat = np.ascontiguousarray(arr[:whole]).reshape(-1, _SUM_ROWS * k)
        total = flat.sum(axis=0, dtype=np.uint64).reshape(_SUM_ROWS, k).sum(axis=0, dtype=np.uint64)
        total += arr[whole:].sum(axis=0, dtype=np.uint64)
        return [int(c) for c in total]
    return [int(field.base.vsum(np.ascontiguousarray(arr[:, i]))) for i in range(arr.shape[1])]  # type: ignore[arg-type]


def _as_element(field: Field, coeffs: list[int]) -> Element:
    p = field.p
    if not field.is_extension:
        return coeffs[0] % p
    padded = coeffs + [0] * (field.degree - len(coeffs))
    return tuple(c % p for c in padded)


class _Ops:
    """Mixed base/extension vector operations on table slices."""

    def __init__(self, field: Field) -> None:
        self.field = field
        self.base = field.base

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (self.field if _is_ext(a) else self.base).vsub(a, b)

    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (self.field if _is_ext(a) else self.base).vadd(a, b)

    def scale(self, a: np.ndarray, r: Element) -> np.ndarray:
        """a * r where r is an element of ``field``; stays 1-D when both are base."""
        field = self.field
        if not field.is_extension:
            return field.vscale(a, r)
        r = field.lift(r)
        if field.is_base(r):
            return self.base.kernel.mul(a, self.base.vec([r[0]])[0])  # type: ignore[index]
        if _is_ext(a):
            return field.vscale(a, r)
        coeffs = self.base.vec(list(r))  # type: ignore[arg-type]
        return self.base.kernel.mul(a[:, None], coeffs[None, :])


def honest_round(
    field: Field,
    tables: Mapping[str, np.ndarray],
    expr: Expr,
    num_points: int,
    order: str = "low-first",
) -> tuple[Element, ...]:
    """g(0), ..., g(num_points - 1) for the next variable of ``order``."""
    n = _check_tables(tables, expr)
    if n < 2:
        raise InternalError(f"expected tables with at least 2 entries to run a round, found {n}")
    return round_share(field, tables, expr, num_points, order)


def round_share(
    field: Field,
    tables: Mapping[str, np.ndarray],
    expr: Expr,
    num_points: int,
    order: str = "low-first",
) -> tuple[Element, ...]:
    """The sums of :func:`honest_round` over the pairs ``tables`` hold, of any even length: a
    piece of the tables laid out as ``order`` pairs them (:mod:`stepper.diagnose.folding`)."""
    return _share(field, tables, expr, num_points, order, None)[0]


def share_and_fold(
    field: Field, tables: Mapping[str, np.ndarray], expr: Expr, num_points: int, challenge: Element
) -> tuple[tuple[Element, ...], dict[str, np.ndarray]]:
    """:func:`round_share` over the high-first pairs of ``tables`` (every table named by ``expr``)
    and the tables folded by ``challenge`` (as ``fold(..., "high-first", in_place=True)``), both
    from one pass: each pair's difference serves the round's points and the fold."""
    share, folded = _share(field, tables, expr, num_points, "high-first", challenge)
    assert folded is not None
    return share, folded


def _share(
    field: Field, tables: Mapping[str, np.ndarray], expr: Expr, num_points: int, order: str,
    challenge: Element | None,
) -> tuple[tuple[Element, ...], dict[str, np.ndarray] | None]:
    n = len(tables[expr.names()[0]])
    ops = _Ops(field)
    sums = [[0] for _ in range(num_points)]
    halves = {name: _halves(tables[name], order) for name in expr.names()}
    targets: dict[str, np.ndarray] = {}
    for start in range(0, n // 2, CHUNK):
        stop = min(start + CHUNK, n // 2)
        lo = {name: h[0][start:stop] for name, h in halves.items()}
        diff = {name: ops.sub(h[1][start:stop], lo[name]) for name, h in halves.items()}
        cur = lo
        for t in range(num_points):
            if t == 1:
                cur = {name: h[1][start:stop] for name, h in halves.items()}
            elif t >= 2:
                cur = {name: ops.add(cur[name], diff[name]) for name in cur}
            part = _sum(field, expr.evaluate(field, cur))
            acc = sums[t]
            for i, c in enumerate(part):
                if i < len(acc):
                    acc[i] += c
                else:
                    acc.append(c)
        if challenge is not None:
            for name, low in lo.items():
                _fold_into(field, ops, targets, name, tables[name], start, stop, low, diff[name], challenge, True)
    share = tuple(_as_element(field, s) for s in sums)
    if challenge is None:
        return share, None
    return share, {name: targets.get(name, tables[name][:0]) for name in expr.names()}


def _fold_into(field: Field, ops: _Ops, targets: dict[str, np.ndarray], name: str, arr: np.ndarray, start: int,
               stop: int, low: np.ndarray, diff: np.ndarray, challenge: Element, in_place: bool) -> None:
    """Pairs [start, stop) of ``arr`` folded by ``challenge`` (low + challenge * diff) into
    ``targets[name]``, made on the first chunk: the first half of ``arr`` itself when
    ``in_place`` and ``arr`` already has the result's shape, else a new array."""
    piece = ops.scale(diff, challenge)
    if _is_ext(piece) and not _is_ext(low):
        piece[:, 0] = field.base.vadd(piece[:, 0], low)
    else:
        piece = ops.add(piece, low)
    target = targets.get(name)
    if target is None:
        half = len(arr) // 2
        if in_place and piece.ndim == arr.ndim and arr.flags.writeable:
            target = arr[:half]
        else:
            target = np.empty((half, *piece.shape[1:]), dtype=piece.dtype)
        targets[name] = target
    # low-first writes [start, stop) after reading [2 start, 2 stop): never ahead of a read
    target[start:stop] = piece


def table_round_sums(
    field: Field, tables: Mapping[str, np.ndarray], names: Sequence[str], num_points: int, order: str = "low-first"
) -> dict[str, tuple[Element, ...]]:
    """Per table T: sum over the free variables of T with the next variable = t,
    for t = 0..num_points-1 (the pieces a "product of sums" bug multiplies)."""
    out: dict[str, tuple[Element, ...]] = {}
    for name in names:
        lo, hi = _halves(tables[name], order)
        s0 = _as_element(field, _sum(field, lo))
        s1 = _as_element(field, _sum(field, hi))
        step = field.sub(s1, s0)
        vals = [s0]
        for _ in range(1, num_points):
            vals.append(field.add(vals[-1], step))
        out[name] = tuple(vals)
    return out


def fold(
    field: Field, tables: Mapping[str, np.ndarray], challenge: Element, order: str, *, in_place: bool = False
) -> dict[str, np.ndarray]:
    """The tables with the next variable of ``order`` bound to ``challenge``
    (half as long). With ``in_place`` an array already in the result's
    representation is overwritten and a view of its first half returned."""
    ops = _Ops(field)
    targets: dict[str, np.ndarray] = {}
    for name, arr in tables.items():
        n = len(arr)
        if n < 2:
            raise InternalError(f"expected table {name!r} with at least 2 entries to fold, found {n}")
        lo, hi = _halves(arr, order)
        half = n // 2
        for start in range(0, half, CHUNK):
            stop = min(start + CHUNK, half)
            l = lo[start:stop]
            _fold_into(field, ops, targets, name, arr, start, stop, l, ops.sub(hi[start:stop], l), challenge, in_place)
    return {name: targets.get(name, arr[:0]) for name, arr in tables.items()}


def tables_at(field: Field, tables: Mapping[str, np.ndarray], point: Sequence[Element]) -> dict[str, Element]:
    """Each table's multilinear extension at (x_1, ..., x_mu)."""
    cur: Mapping[str, np.ndarray] = tables
    for x in point:
        cur = fold(field, cur, x, "low-first")
    return {name: _element_of(field, arr) for name, arr in cur.items()}


def _element_of(field: Field, arr: np.ndarray) -> Element:
    if arr.ndim == 1:
        return field.lift(int(arr[0]))
    return tuple(int(c) for c in arr[0])


@dataclass(frozen=True, slots=True)
class HonestRound:
    """The honest polynomial of one round (evaluations at 0..len-1)."""

    round: int
    evals: tuple[Element, ...]


def honest_rounds(
    field: Field,
    tables: Mapping[str, np.ndarray],
    expr: Expr,
    challenges: Sequence[Element],
    order: str,
    num_points: int,
    *,
    on_round: Callable[[int], None] | None = None,
    overwrite: bool = False,
) -> Iterator[HonestRound | dict[str, Element]]:
    """Yield the honest round polynomials for the recorded ``challenges`` (one
    round more than challenges when a round is left without one, never more
    than the tables have variables), then, when every variable got a challenge,
    the tables' values at the challenge point (a dict name -> element). With
    ``overwrite`` the first fold overwrites ``tables`` (the caller's own arrays)
    instead of making half-size copies beside them."""
    names = expr.names()
    cur: dict[str, np.ndarray] = {name: tables[name] for name in names}
    n = _check_tables(cur, expr)
    num_vars = n.bit_length() - 1
    owned = overwrite
    for k in range(1, num_vars + 1):
        yield HonestRound(k, honest_round(field, cur, expr, num_points, order))
        if on_round is not None:
            on_round(k)
        if k > len(challenges):
            return
        cur = fold(field, cur, challenges[k - 1], order, in_place=owned)
        owned = True
    yield {name: _element_of(field, arr) for name, arr in cur.items()}


def _check_tables(tables: Mapping[str, np.ndarray], expr: Expr) -> int:
    if not expr.names():
        raise InternalError(f"expected a combine expression over at least one table, found {expr.text!r}")
    lengths = {len(tables[name]) for name in expr.names()}
    if len(lengths) != 1:
        raise InternalError(f"expected the tables of one instance to have one length, found {sorted(lengths)}")
    n = lengths.pop()
    if n & (n - 1):
        raise InternalError(f"expected a power-of-two table length, found {n}")
    return n
