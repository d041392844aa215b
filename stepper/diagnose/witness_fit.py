"""Fitting a witness to a transcript: which witness instance is which transcript instance, and
its tables as field vectors.

:func:`fit_witness` matches witness instances to transcript instances (by name, else by
position) and checks every table the combine expression or an opening names: its length,
and that every entry is canonical. A table given as entries (JSON, msgpack) becomes a
canonical field vector at once (whole arrays at a time, the element parser only for odd
entries); a table given as an integer array over a prime below 2^64 (a binary witness
folder, an ``.npy`` file, an ``.npz`` member) is checked in row ranges and kept as stored,
a :class:`stepper.diagnose.stored_table.StoredTable`, so that a memory-mapped table is never
held whole. Raises :class:`WitnessError` saying what was expected, what was found, where.
Pure: the only files read are the mappings the loader opened.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from stepper.errors import FieldError, WitnessError, Where
from stepper.diagnose.stored_table import stored_table
from stepper.diagnose.witness import RawTable

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.field import Field
    from stepper.transcript.model import InstanceRecord, Transcript
    from stepper.diagnose.witness import Witness, WitnessInstance

__all__ = ["FittedInstance", "fit_witness"]


@dataclass(frozen=True, slots=True)
class FittedInstance:
    """A witness instance checked against transcript instance ``index``: tables of length
    2^num_vars, each a canonical field vector (1-D base, or (n, k) extension) or, for an
    integer array (memory-mapped or not) over a prime below 2^64, a :class:`StoredTable` that
    reads its rows canonical on demand (read it whole with :func:`whole_table`)."""

    index: int
    name: str
    tables: Mapping[str, Any]
    combine: Expr
    witness_name: str = ""  # the witness instance's own name (differs when matched by position)



def fit_witness(witness: Witness, transcript: Transcript) -> dict[int, FittedInstance]:
    """Transcript instance index -> its witness, matched by name (first unclaimed
    instance of that name), else by position; instances without a witness are absent."""
    claimed: dict[int, WitnessInstance] = {}
    by_name: dict[str, list[int]] = {}
    for inst in transcript.instances:
        by_name.setdefault(inst.name, []).append(inst.start.index)
    unmatched: list[tuple[int, WitnessInstance]] = []
    for pos, winst in enumerate(witness.instances):
        free = [i for i in by_name.get(winst.name, []) if i not in claimed]
        if free:
            claimed[free[0]] = winst
        else:
            unmatched.append((pos, winst))
    for pos, winst in unmatched:
        if pos < len(transcript.instances) and pos not in claimed:
            claimed[pos] = winst
        else:
            names = ", ".join(repr(i.name) for i in transcript.instances[:8]) or "none"
            raise WitnessError(
                f"expected witness instance {winst.name!r} to match a transcript instance by name or position, "
                f"found no free one (transcript instances: {names})", Where(file=witness.source or None))
    field = transcript.field
    return {
        index: _fit_one(field, transcript.instances[index], winst, Where(file=witness.source or None, instance=winst.name))
        for index, winst in sorted(claimed.items())
    }


def _fit_one(field: Field, inst: InstanceRecord, winst: WitnessInstance, where: Where) -> FittedInstance:
    start = inst.start
    expr = winst.combine
    missing = [n for n in expr.names() if n not in winst.tables]
    if missing:
        have = ", ".join(sorted(winst.tables)) or "none"
        raise WitnessError(f"expected tables named in combine {expr.text!r}; missing {', '.join(missing)} "
                           f"(tables given: {have})", where)
    if expr.degree() > start.degree:
        raise WitnessError(
            f"expected a combine of degree at most the instance's degree {start.degree}, "
            f"found {expr.text!r} of degree {expr.degree()}", where)
    n = 1 << start.num_vars
    tables: dict[str, Any] = {}
    opened = [o.table for o in inst.openings if o.table in winst.tables and o.table not in expr.names()]
    for tname in (*expr.names(), *dict.fromkeys(opened)):  # the combine's tables, then tables only opened
        if len(winst.tables[tname]) != n:  # before any conversion allocates
            raise WitnessError(
                f"expected table {tname!r} with 2^{start.num_vars} = {n} entries (num_vars {start.num_vars}), "
                f"found {len(winst.tables[tname])}", where)
        arr = _to_field_array(field, winst.tables[tname], tname, where)
        if len(arr) != n:
            raise WitnessError(
                f"expected table {tname!r} with 2^{start.num_vars} = {n} entries (num_vars {start.num_vars}), "
                f"found {len(arr)}", where)
        tables[tname] = arr
    return FittedInstance(start.index, start.name, tables, expr, winst.name)


def _to_field_array(field: Field, raw: RawTable, table: str, where: Where) -> Any:
    """Canonical field vector: 1-D base-field array when every entry is a base
    element, else an (n, k) extension array; an integer array over a prime below 2^64 is
    checked and kept as stored (a :class:`StoredTable`). A JSON list of integers, of decimal text,
    or of k-lists of them is converted by numpy as a whole; anything else (0x text,
    odd entries) goes element by element through the field's parser, which names
    the first bad entry."""
    if isinstance(raw, np.ndarray):
        if field.p < 2**64:
            return stored_table(field, raw, table, where)
        return _numpy_table(field, raw, table, where)
    values = list(raw)
    whole = _whole_array(field, values) if values else None
    if whole is not None:
        return _numpy_table(field, whole, table, where)
    elements = []
    for i, v in enumerate(values):
        try:
            elements.append(field.parse(v))
        except FieldError as err:
            raise WitnessError(f"table {table!r} entry {i}: {err.message}", where) from None
    if field.is_extension and any(not field.is_base(e) for e in elements):
        return field.vec(elements)
    return field.base.vec([e if isinstance(e, int) else e[0] for e in elements])


_TO_INT = np.frompyfunc(int, 1, 1)


def _whole_array(field: Field, values: list[Any]) -> np.ndarray | None:
    """``values`` as one integer array (shape (n,) or (n, k)) when numpy can read them all at
    once: machine integers, or plain decimal digits (text); None otherwise."""
    try:
        arr = np.array(values)
    except (ValueError, OverflowError, TypeError):
        if field.p < 2**64:
            return None
        try:  # integers past 2^64 (BN254, BLS12-381): numpy keeps them as Python ints
            arr = np.array(values, dtype=object)
        except (ValueError, TypeError):
            return None
    if arr.ndim not in (1, 2):
        return None
    if arr.dtype.kind in "iu":
        return arr
    if arr.dtype.kind == "U" and arr.size and bool(np.char.isdigit(arr).all()):
        if field.p < 2**64:
            try:
                return arr.astype(np.uint64)
            except (ValueError, OverflowError):
                return None
        if int(np.char.str_len(arr).max()) > len(str(field.p)):
            return None  # longer than any canonical element: the parser names the entry
        return _TO_INT(arr).astype(object)  # type: ignore[no-any-return]
    if arr.dtype.kind == "O" and field.p >= 2**64:
        if not all(v.__class__ is int for v in arr.reshape(-1)[:1]):
            return None
        kinds = np.frompyfunc(lambda v: v.__class__ is int, 1, 1)(arr).astype(bool)
        return arr if bool(kinds.all()) else None
    return None


def _numpy_table(field: Field, arr: np.ndarray, table: str, where: Where) -> np.ndarray:
    k = field.degree
    if arr.ndim == 2 and (not field.is_extension or arr.shape[1] != k):
        raise WitnessError(
            f"expected table {table!r} as shape (n,) or (n, {k}) over {field.describe()}, found shape {arr.shape}",
            where)
    p = field.p
    bad = np.less(arr, 0).astype(bool)
    if p < 2**64:
        bad = bad | (arr.astype(np.uint64) >= np.uint64(p))
    elif arr.dtype == object:
        bad = bad | np.greater_equal(arr, p).astype(bool)
    if bool(np.any(bad)):
        index = int(np.argwhere(bad)[0][0])
        raise WitnessError(
            f"expected canonical entries 0 <= v < p = {p} in table {table!r}, found {arr[index]} at entry {index}",
            where)
    if p >= 2**64:  # object arrays of Python ints for the big fields, shape (n,) or (n, k)
        out = arr if arr.dtype == object else arr.astype(object)
        return np.array(out, dtype=object)
    out = np.ascontiguousarray(arr, dtype=np.uint64)
    return out if out.ndim == 1 else field.vec(out)
