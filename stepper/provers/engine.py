"""The round loop shared by the reference provers that fold multilinear tables.

:func:`run_tables` proves ``sum over the hypercube of summand(tables) = claim``
for multilinear tables (index bit j of an entry = variable x_(j+1)): in each
round it restricts every table to the next variable = X for X = 0..d (lo +
X * (hi - lo), additions only), evaluates the summand entry by entry, sums,
sends g(0..d) through the :class:`~stepper.provers.channel.ProofChannel`,
and folds every table by the challenge. A summand is a product of tables
(:class:`ProductSummand`) or a `combine` expression (:class:`ExprSummand`).

Faults of the folding kind act here: ``flip-order`` (bind the other end from
round K on), ``stale-challenge`` (fold round K with the previous challenge),
``product-of-sums`` (round K multiplies per-table sums). Records of a run
(:class:`InstanceRun`, :class:`WitnessInstance`, :class:`ProofRun`) are frozen.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import TYPE_CHECKING, Any, Mapping, Protocol, Sequence

import numpy as np

from stepper.field.poly import mle_eval, point_from_challenges
from stepper.provers.counting import MulCounter, blocks, halves

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.field import Element, Field
    from stepper.provers.channel import ProofChannel

__all__ = [
    "Summand",
    "ProductSummand",
    "ExprSummand",
    "InstanceRun",
    "WitnessInstance",
    "ProofRun",
    "run_tables",
    "final_point",
    "witness_payload",
]


class Summand(Protocol):
    degree: int
    names: tuple[str, ...]

    def evaluate(self, counter: MulCounter, env: Mapping[str, np.ndarray]) -> np.ndarray: ...

    def at_point(self, counter: MulCounter, values: Mapping[str, Element]) -> Element: ...


@dataclass(frozen=True, slots=True)
class ProductSummand:
    """The entry-wise product of the named tables (degree = their number)."""

    names: tuple[str, ...]

    @property
    def degree(self) -> int:
        return len(self.names)

    def evaluate(self, counter: MulCounter, env: Mapping[str, np.ndarray]) -> np.ndarray:
        return counter.product([env[n] for n in self.names])

    def at_point(self, counter: MulCounter, values: Mapping[str, Element]) -> Element:
        acc = values[self.names[0]]
        for n in self.names[1:]:
            acc = counter.mul(acc, values[n])
        return acc

    def combine(self) -> str:
        return " * ".join(self.names)


@dataclass(frozen=True, slots=True)
class ExprSummand:
    """A `combine` expression over tables; products counted per node and entry."""

    expr: Expr
    names: tuple[str, ...] = ()
    degree: int = 0
    products: int = 0

    @classmethod
    def of(cls, expr: Expr) -> ExprSummand:
        return cls(expr, expr.names(), expr.degree(), _products(expr.root))

    def evaluate(self, counter: MulCounter, env: Mapping[str, np.ndarray]) -> np.ndarray:
        n = len(next(iter(env.values()))) if env else 1
        counter.add(self.products * n)
        return self.expr.evaluate(counter.field, {k: env[k] for k in self.names})

    def at_point(self, counter: MulCounter, values: Mapping[str, Element]) -> Element:
        counter.add(self.products)
        return self.expr.evaluate_scalar(counter.field, values)

    def combine(self) -> str:
        return self.expr.text


def _products(node: Any) -> int:
    """Products the evaluator performs per entry: one per `*` node whose operands
    are not both constants (constant folding is free)."""
    from stepper.field.expr import Add, Const, Mul, Neg, Sub

    if isinstance(node, Const) or not isinstance(node, (Add, Sub, Mul, Neg)):
        return 0
    if isinstance(node, Neg):
        return _products(node.operand)
    inner = _products(node.left) + _products(node.right)
    if isinstance(node, Mul) and not (_constant(node.left) and _constant(node.right)):
        inner += 1
    return inner


def _constant(node: Any) -> bool:
    from stepper.field.expr import Const, Neg, Table

    if isinstance(node, Const):
        return True
    if isinstance(node, Table):
        return False
    if isinstance(node, Neg):
        return _constant(node.operand)
    return _constant(node.left) and _constant(node.right)


@dataclass(frozen=True, slots=True)
class InstanceRun:
    """What one instance of a run did: claim, challenges, final value and the
    multiplications of each round (index 0 = round 1; set-up is separate)."""

    name: str
    claim: Element
    challenges: tuple[Element, ...]
    final: Element
    round_mults: tuple[int, ...]


@dataclass(frozen=True, slots=True)
class WitnessInstance:
    """One instance's witness (transcripts/EVENTS.md witness format): tables and `combine`."""

    name: str
    tables: Mapping[str, np.ndarray]
    combine: str
    order: str = "low-first"


@dataclass(frozen=True, slots=True)
class ProofRun:
    """A finished reference proof: its instances, witness and multiplication tally."""

    instances: tuple[InstanceRun, ...]
    witness: tuple[WitnessInstance, ...]
    mults: Mapping[str, int] = dc_field(default_factory=dict)

    @property
    def total_mults(self) -> int:
        return sum(self.mults.values())


def final_point(challenges: Sequence[Element], order: str, channel: ProofChannel) -> tuple[Element, ...]:
    """The point the final value is taken at (read backwards under ``reverse-point``)."""
    point = point_from_challenges(challenges, order)
    fault = channel.fault
    if fault is not None and fault.hits(channel.instance, "reverse-point"):
        point = tuple(reversed(point))
    return point


def round_evals(counter: MulCounter, tables: Mapping[str, np.ndarray], summand: Summand, order: str,
                sums_first: bool = False) -> list[Element]:
    """g(0), ..., g(d) of the next variable; ``sums_first`` multiplies per-table sums.
    Entry pairs go in blocks (:func:`~stepper.provers.counting.blocks`); the block sums add up."""
    f = counter.field
    parts = {n: halves(tables[n], order) for n in summand.names}
    if sums_first:
        return _block_evals(counter, parts, summand, True)
    totals: list[Element] | None = None
    for part in blocks(len(next(iter(parts.values()))[0])):
        sums = _block_evals(counter, {n: (lo[part], hi[part]) for n, (lo, hi) in parts.items()}, summand, False)
        totals = sums if totals is None else [f.add(t, s) for t, s in zip(totals, sums)]
    assert totals is not None  # a table has at least one pair
    return totals


def _block_evals(counter: MulCounter, parts: Mapping[str, tuple[np.ndarray, np.ndarray]], summand: Summand,
                 sums_first: bool) -> list[Element]:
    f = counter.field
    diffs = {n: f.vsub(hi, lo) for n, (lo, hi) in parts.items()}
    cur = {n: lo for n, (lo, _) in parts.items()}
    out: list[Element] = []
    for x in range(summand.degree + 1):
        if x == 1:
            cur = {n: hi for n, (_, hi) in parts.items()}
        elif x >= 2:
            cur = {n: f.vadd(cur[n], diffs[n]) for n in cur}
        if sums_first:
            sums = {n: f.vec([f.vsum(v)]) for n, v in cur.items()}
            out.append(f.vlist(summand.evaluate(counter, sums))[0])
        else:
            out.append(f.vsum(summand.evaluate(counter, cur)))
    return out


def run_tables(channel: ProofChannel, counter: MulCounter, name: str, tables: dict[str, np.ndarray],
               summand: Summand, claim: Element, *, order: str = "low-first", form: str = "evals",
               label: str | None = None, glue: Mapping[str, Any] | None = None
               ) -> tuple[InstanceRun, dict[str, np.ndarray]]:
    """Prove one instance over ``tables``; returns its run and the tables as
    folded to one entry each (their values at the challenge point). ``glue``
    holds the instance's ``claim_expr`` / ``final_expr`` when it has them."""
    num_vars = len(next(iter(tables.values()))).bit_length() - 1
    index = channel.start_instance(name, num_vars, summand.degree, claim, order=order, form=form, **(glue or {}))
    fault = channel.fault
    tag = label or name
    challenges: list[Element] = []
    mults: list[int] = []
    cur = {n: tables[n] for n in summand.names}
    for k in range(1, num_vars + 1):
        counter.phase(f"{tag}/round {k}")
        before = counter.total
        bind = order
        if fault is not None and fault.hits(index, "flip-order", k):
            bind = "high-first" if order == "low-first" else "low-first"
        sums_first = fault is not None and fault.hits(index, "product-of-sums", k)
        evals = round_evals(counter, cur, summand, bind, sums_first)
        r = channel.send_round(evals)
        fold_by = r
        if fault is not None and fault.hits(index, "stale-challenge", k):
            fold_by = challenges[-1]
        challenges.append(r)
        cur = {n: counter.fold(t, fold_by, bind, in_place=k > 1) for n, t in cur.items()}  # after round 1: ours
        mults.append(counter.total - before)
    cur = {n: t.copy() for n, t in cur.items()}  # one entry each: let the folded-in-place tables go
    counter.phase(f"{tag}/final")
    point = final_point(challenges, order, channel)
    if point == tuple(point_from_challenges(challenges, order)) and all(
        fault is None or not fault.hits(index, kind, k)
        for kind in ("flip-order", "stale-challenge") for k in range(1, num_vars + 1)
    ):
        values = {n: counter.field.vlist(t)[0] for n, t in cur.items()}
    else:  # the tables were folded wrongly: ask the oracle (the verifier's work, not counted)
        values = {n: mle_eval(counter.field, tables[n], point) for n in summand.names}
    final = summand.at_point(counter, values)
    channel.final(final)
    return InstanceRun(name, claim, tuple(challenges), final, tuple(mults)), cur


def _json_table(table: np.ndarray) -> list[Any]:
    """A kernel array as JSON values, as ``Field.to_json`` gives them one by one (ints below
    2^53, decimal text above), converted by numpy for the whole table at once."""
    if table.dtype == object:
        values = np.asarray(table, dtype=object)
        big = np.greater_equal(values, 2**53).astype(bool)
        if big.any():
            values = values.copy()
            values[big] = values[big].astype(str)
        return values.tolist()  # type: ignore[no-any-return]
    big = table >= np.uint64(2**53)
    if not big.any():
        return table.tolist()  # type: ignore[no-any-return]
    values = table.astype(object)
    values[big] = table[big].astype(str)
    return values.tolist()  # type: ignore[no-any-return]


def witness_payload(field: Field, witness: Sequence[WitnessInstance]) -> dict[str, Any]:
    """The transcripts/EVENTS.md witness document: ``{"instances": [{name, tables, combine}]}``."""
    out = []
    for inst in witness:
        tables = {n: _json_table(t) for n, t in inst.tables.items()}
        entry: dict[str, Any] = {"name": inst.name, "tables": tables, "combine": inst.combine}
        if inst.order != "low-first":
            entry["order"] = inst.order
        out.append(entry)
    return {"instances": out}
