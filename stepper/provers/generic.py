"""Generic sumcheck over multilinear tables and a `combine` expression, and the
zero-check built on it.

:func:`prove_sum` proves sum over {0,1}^mu of combine(tables) = claim, the
claim being the true sum (faults aside), binding variables low-first or
high-first and sending any round form. :func:`prove_zero` proves that a
constraint vanishes on the whole hypercube: it draws a point tau and proves
sum_x eq(tau, x) * C(x) = 0, which a non-vanishing C fails except with
probability about mu / |F| over tau. Several constraints are mixed with powers
of a random gamma first (a fixed mix would let two constraints cancel).

The expression is parsed by :mod:`stepper.field.expr` (the witness grammar), so the
witness this writes is exactly what ``stepper check --witness`` reads back.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Mapping, Sequence

import numpy as np

from stepper.errors import UsageError
from stepper.field.expr import parse
from stepper.field.poly import point_from_challenges
from stepper.provers.engine import ExprSummand, ProofRun, WitnessInstance, run_tables
from stepper.provers.openings import send_openings

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["prove_sum", "prove_zero", "field_tables", "mix_constraints", "mix_witness", "renamed"]


def field_tables(field: Field, tables: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Tables in the field's vector form (base tables embedded in an extension), of one 2^mu length."""
    lengths = {len(t) for t in tables.values()}
    if len(lengths) != 1:
        raise UsageError(f"expected tables of one length, found lengths {sorted(lengths)}")
    n = lengths.pop()
    if n < 2 or n & (n - 1):
        raise UsageError(f"expected tables of 2^mu entries with mu >= 1, found {n}")
    return {name: field.vec(t) if field.is_extension and t.ndim == 1 else t for name, t in tables.items()}


def prove_sum(channel: ProofChannel, counter: MulCounter, name: str, tables: Mapping[str, np.ndarray],
              combine: str, *, order: str = "low-first", form: str = "evals") -> ProofRun:
    """Prove the true sum of ``combine`` over the tables in one instance."""
    field = counter.field
    summand = ExprSummand.of(parse(combine))
    missing = [n for n in summand.names if n not in tables]
    if missing:
        raise UsageError(f"expected a table for every name in {combine!r}, found none for {', '.join(missing)}")
    used = field_tables(field, {n: tables[n] for n in summand.names})
    counter.phase(f"{name}/setup")
    claim = field.vsum(summand.evaluate(counter, used))
    run, _ = run_tables(channel, counter, name, used, summand, claim, order=order, form=form)  # type: ignore[arg-type]
    return ProofRun((run,), (WitnessInstance(name, used, combine, order),), counter.per_phase())


def prove_zero(channel: ProofChannel, counter: MulCounter, name: str, tables: Mapping[str, np.ndarray],
               constraints: Sequence[str], *, order: str = "low-first", form: str = "evals", prefix: str = "",
               earlier_points: Sequence[Sequence[Element]] = ()) -> ProofRun:
    """Prove every constraint vanishes on the hypercube: sum_x eq(tau, x) * C(x) = 0.

    Glue sent: the point as the ``value`` ``<prefix>tau`` (and the mixing
    coefficient as ``<prefix>gamma``) before the instance, the constraint tables'
    openings after it, and ``final_expr`` = eq(tau) * C over those openings."""
    field = counter.field
    if not constraints:
        raise UsageError("expected at least one constraint for a zero-check")
    if "eq" in tables:
        raise UsageError("expected no table named 'eq' in a zero-check (the prover adds eq(tau, x) under that name)")
    used = field_tables(field, dict(tables))
    num_vars = len(next(iter(used.values()))).bit_length() - 1
    statement: list[bytes | np.ndarray] = [name.encode(), *(c.encode() for c in constraints),
                                          *(used[n] for n in sorted(used))]
    counter.phase(f"{name}/setup")
    tau = channel.statement_challenges("zero-check-point", statement, num_vars)
    eq = counter.eq_table(tau)
    weights, gamma = mix_constraints(channel, counter, constraints, statement)
    combine, extra = mix_witness(counter, constraints, weights, eq)
    env = {**used, **extra}
    summand = ExprSummand.of(parse(combine))
    missing = [n for n in summand.names if n not in env]
    if missing:
        raise UsageError(f"expected a table for every name in the constraints, found none for {', '.join(missing)}")
    env = {n: env[n] for n in summand.names}
    opened = tuple(n for n in summand.names if n in used)
    tau_name, gamma_name = f"{prefix}tau", f"{prefix}gamma"
    channel.value(tau_name, list(tau))
    if gamma is not None:
        channel.value(gamma_name, gamma)
    inner = renamed(constraints, prefix, opened, gamma_name)
    fault = channel.fault
    without_eq = fault is not None and fault.name == "final-without-eq" and fault.instance == channel.instance + 1
    glue = {"final_expr": inner if without_eq else f"eq({tau_name}) * ({inner})"}
    run, folded = run_tables(channel, counter, name, env, summand, field.zero, order=order, form=form, glue=glue)  # type: ignore[arg-type]
    point = point_from_challenges(run.challenges, order)
    ends = {n: field.vlist(folded[n])[0] for n in opened}
    send_openings(channel, {n: used[n] for n in opened}, ends, point, prefix=prefix, earlier_points=earlier_points)
    return ProofRun((run,), (WitnessInstance(name, env, combine, order),), counter.per_phase())


def mix_constraints(channel: ProofChannel, counter: MulCounter, constraints: Sequence[str],
                    statement: Sequence[bytes | np.ndarray]) -> tuple[list[Element], Element | None]:
    """The weights 1, gamma, gamma^2 ... of the constraints and gamma (None for one
    constraint): a fixed mix would let two constraints cancel."""
    field = counter.field
    if len(constraints) == 1:
        return [field.one], None
    gamma = channel.statement_challenges("constraint-mix", statement, 1)[0]
    weights = [field.one]
    for _ in constraints[1:]:
        weights.append(counter.mul(weights[-1], gamma))
    return weights, gamma


def renamed(constraints: Sequence[str], prefix: str, names: Sequence[str], gamma_name: str) -> str:
    """C_1 + gamma * C_2 + gamma^2 * C_3 ... as expression text over the openings
    (each table name given the prefix the openings carry)."""
    import re

    wanted = set(names)

    def swap(match: re.Match[str]) -> str:
        word = match.group(0)
        return prefix + word if word in wanted else word

    parts = [f"({re.sub(r'[A-Za-z_][A-Za-z0-9_.]*', swap, c)})" for c in constraints]
    terms = [parts[0]]
    for j, part in enumerate(parts[1:], start=1):
        power = gamma_name if j == 1 else f"{gamma_name}^{j}"
        terms.append(f"{power} * {part}")
    return " + ".join(terms)


def mix_witness(counter: MulCounter, constraints: Sequence[str], weights: Sequence[Element],
         eq: np.ndarray) -> tuple[str, dict[str, np.ndarray]]:
    """eq * (C_1 + gamma * C_2 + gamma^2 * C_3 ...): gamma^j as an integer constant in a
    prime field; over an extension as tables ``eq_mix1``, ``eq_mix2`` ... = gamma^j * eq
    (so the combine's degree stays 1 + deg C)."""
    field = counter.field
    if len(constraints) == 1:
        return f"eq * ({constraints[0]})", {"eq": eq}
    inner = [f"({constraints[0]})"]
    outer: list[str] = []
    extra: dict[str, np.ndarray] = {"eq": eq}
    for j, (c, power) in enumerate(zip(constraints[1:], weights[1:]), start=1):
        if field.is_extension:
            extra[f"eq_mix{j}"] = counter.vscale(eq, power)
            outer.append(f"eq_mix{j} * ({c})")
        else:
            inner.append(f"{power} * ({c})")
    return " + ".join([f"eq * ({' + '.join(inner)})", *outer]), extra
