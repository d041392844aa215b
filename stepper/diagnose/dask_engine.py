"""The Dask engine: the honest recomputation and the opening evaluation over chunked tables.

``check F --witness W --engine dask`` hands :func:`stepper.diagnose.rootcause.diagnose`
a :class:`DaskEngine` in place of the in-memory functions. Each table becomes a
``dask.array`` cut along its first axis into blocks of :data:`BLOCK` entries (from the
memory-mapped ``.npy`` of a binary witness, a block is read only when a task needs it).
Every round is a graph of per-block tasks that run the in-memory kernels of
:mod:`stepper.diagnose.honest` on one block (low-first: a block of pairs (2i, 2i + 1);
high-first: the matching blocks of the two halves, put side by side), so the values are
the in-memory path's by construction: the partial sums are added in the field, and the
fold by the round's challenge is kept (persisted) for the next round. The opening
evaluation folds the same way by the coordinates of its point.

The scheduler is Dask's local threaded one unless an ``ADDRESS`` of a running Dask
scheduler is given, which needs the ``distributed`` package (the ``dask`` extra).
Dask is imported only here, and this module only when the engine is asked for.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable, Iterator, Mapping, Sequence

import numpy as np

from stepper.errors import InputError
from stepper.diagnose.honest import HonestRound, _check_tables, _element_of, fold, honest_round
from stepper.diagnose.stored_table import StoredTable
from stepper.field.poly import check_point_length

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.field import Element, Field

__all__ = ["BLOCK", "DaskEngine"]

BLOCK = 1 << 16  # table entries per Dask block (2^16 BabyBear^4 entries are 1 MiB of raw words)


def _import_dask() -> Any:
    try:
        import dask
        import dask.array  # noqa: F401  (the array collection needs numpy and toolz)
    except ImportError:
        raise InputError("expected the 'dask' package for --engine dask, found it not installed "
                         "(install stepper with its 'dask' extra)") from None
    return dask


class DaskEngine:
    """Round polynomials and multilinear-extension values computed by Dask.

    ``scheduler`` is None for the local threaded scheduler, or the address of a running
    Dask scheduler (``tcp://host:8786``). ``block`` is the entries per block."""

    def __init__(self, scheduler: str | None = None, block: int = BLOCK) -> None:
        if block < 2 or block & (block - 1):
            raise InputError(f"expected a block size that is a power of two of at least 2, found {block}")
        self.dask = _import_dask()
        self.block = block
        self.client: Any = None
        if scheduler is not None:
            try:
                from distributed import Client
            except ImportError:
                raise InputError("expected the 'distributed' package for --scheduler, found it not installed "
                                 "(install stepper with its 'dask' extra)") from None
            try:
                self.client = Client(scheduler, timeout=10)
            except (OSError, TimeoutError, ValueError) as err:
                raise InputError(f"expected a running Dask scheduler at {scheduler!r}, found none "
                                 f"({str(err)[:100]})") from None

    # ----- running graphs --------------------------------------------------------------------
    def _compute(self, *items: Any) -> tuple[Any, ...]:
        if self.client is not None:
            return tuple(self.client.compute(list(items), sync=True))
        return tuple(self.dask.compute(*items, scheduler="threads"))

    def _persist(self, items: dict[str, Any]) -> dict[str, Any]:
        names = list(items)
        if self.client is not None:
            done = self.client.persist([items[n] for n in names])
        else:
            done = self.dask.persist(*(items[n] for n in names), scheduler="threads")
        return dict(zip(names, done))

    def close(self) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None

    # ----- tables as chunked arrays ----------------------------------------------------------
    def _chunked(self, arr: Any, size: int | None = None) -> Any:
        import dask.array as da

        size = min(size or self.block, len(arr))
        if isinstance(arr, da.Array):
            return arr.rechunk((size, *arr.shape[1:]))
        if isinstance(arr, StoredTable):  # the stored words, made canonical block by block
            words = da.from_array(arr.words, chunks=(size, *arr.shape[1:]), asarray=False)
            return words.map_blocks(_canonical, dtype=np.uint64)
        return da.from_array(arr, chunks=(size, *arr.shape[1:]), asarray=False)

    def _pairs(self, arr: Any, order: str) -> list[Any]:
        """The per-block operands of one table: [block] low-first, [lo, hi] high-first."""
        if order == "low-first":
            return [self._chunked(arr)]
        half = len(arr) // 2
        size = min(self.block // 2, half) or 1
        if isinstance(arr, StoredTable):
            return [self._chunked(arr.part(0, half), size), self._chunked(arr.part(half, len(arr)), size)]
        return [self._chunked(arr[:half], size), self._chunked(arr[half:], size)]

    def _round(self, field: Field, tables: Mapping[str, Any], expr: Expr, num_points: int,
               order: str) -> tuple[Element, ...]:
        import dask

        names = list(tables)
        operands = {name: [p.to_delayed().ravel() for p in self._pairs(tables[name], order)] for name in names}
        count = len(operands[names[0]][0])
        task = dask.delayed(_block_round, pure=True)
        parts = [task(field, expr, num_points, order, names, [[p[i] for p in operands[n]] for n in names])
                 for i in range(count)]
        results = self._compute(*parts)
        total = list(results[0])
        for part in results[1:]:  # one field addition per block and point: the blocks are few
            total = [field.add(a, b) for a, b in zip(total, part)]
        return tuple(total)

    def _fold(self, field: Field, tables: Mapping[str, Any], challenge: Element, order: str) -> dict[str, Any]:
        import dask.array as da

        out = {}
        for name, arr in tables.items():
            pairs = self._pairs(arr, order)
            sample = np.zeros((2, *arr.shape[1:]), dtype=arr.dtype)
            meta = fold(field, {name: sample}, challenge, order)[name]
            first = pairs[0].chunks[0]
            rows = tuple(c // 2 for c in first) if order == "low-first" else first
            extra = {"new_axis": list(range(arr.ndim, meta.ndim))} if meta.ndim > arr.ndim else {}
            out[name] = da.map_blocks(_block_fold, *pairs, field=field, challenge=challenge, order=order,
                                      dtype=meta.dtype, chunks=(rows, *meta.shape[1:]), meta=meta[:0], **extra)
        return self._persist(out)

    # ----- what the diagnosis asks for -------------------------------------------------------
    def honest_rounds(self, field: Field, tables: Mapping[str, Any], expr: Expr,
                      challenges: Sequence[Element], order: str, num_points: int, *,
                      on_round: Callable[[int], None] | None = None,
                      on_work: Callable[[int], None] | None = None) -> Iterator[HonestRound | dict[str, Element]]:
        """The same items as :func:`stepper.diagnose.honest.honest_rounds`, computed by Dask
        (progress after each round only: ``on_work`` is not called)."""
        names = expr.names()
        n = _check_tables({name: tables[name] for name in names}, expr)
        cur: dict[str, Any] = {name: tables[name] for name in names}
        for k in range(1, n.bit_length()):
            yield HonestRound(k, self._round(field, cur, expr, num_points, order))
            if on_round is not None:
                on_round(k)
            if k > len(challenges):
                return
            cur = self._fold(field, cur, challenges[k - 1], order)
        final = self._compute(*(cur[name] for name in names))
        yield {name: _element_of(field, np.asarray(arr)) for name, arr in zip(names, final)}

    def mle_eval(self, field: Field, table: Any, point: Sequence[Element], *,
                 on_work: Callable[[int], None] | None = None) -> Element:
        """The table's multilinear extension at (x_1, ..., x_mu), by Dask folds x_1 first."""
        size = len(table)
        check_point_length(size, point)
        cur: dict[str, Any] = {"t": table}
        for x in point:
            cur = self._fold(field, cur, x, "low-first")
        (last,) = self._compute(cur["t"]) if point else (np.asarray(table[0:1] if not isinstance(table, StoredTable)
                                                                   else table.rows(0, 1)),)
        return _element_of(field, np.asarray(last))


def _canonical(words: np.ndarray) -> np.ndarray:
    """A block of stored words (checked canonical when the witness was fitted) as the kernels' uint64."""
    return np.array(words, dtype=np.uint64, order="C")


def _block_round(field: Field, expr: Expr, num_points: int, order: str, names: list[str],
                 blocks: list[list[np.ndarray]]) -> tuple[Element, ...]:
    """One block's share of the round polynomial (the in-memory kernel on the block)."""
    tables = {name: np.concatenate([np.asarray(b) for b in parts]) if len(parts) > 1 else np.asarray(parts[0])
              for name, parts in zip(names, blocks)}
    return honest_round(field, tables, expr, num_points, order)


def _block_fold(*parts: np.ndarray, field: Field, challenge: Element, order: str) -> np.ndarray:
    """One block folded by ``challenge`` (the in-memory kernel on the block)."""
    table = np.concatenate([np.asarray(p) for p in parts]) if len(parts) > 1 else np.asarray(parts[0])
    return fold(field, {"t": table}, challenge, order)["t"]
