"""Zero-check with the eq factor taken out of every round (the ``eq-factored`` form).

Statement: every constraint C_j vanishes on {0,1}^mu. As in
:func:`stepper.provers.generic.prove_zero` the prover draws a point w (the
``value`` ``tau``) and proves sum_x eq(w, x) * C(x) = 0 with
C = C_1 + gamma * C_2 + gamma^2 * C_3 ... (gamma a ``value`` when there are
several constraints). The summand has degree d = 1 + deg C, but its round
polynomial factors as

    g_k(X) = prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X),
    q_k(X) = sum over the unbound x' of eq(w_(>k), x') * C(r_(<k), X, x'),

where w_k is the coordinate of w bound in round k. Round k sends q_k(0..d-1)
(degree d-1, one value fewer than g_k) and the verifier multiplies the eq
factor back; the prover never multiplies by eq(w_k, X) at all. After the last
round the reduced claim is eq(w, r) * C(r): the prover opens C's tables at r and
``final_expr`` says so.

Faults acting here: ``drop-eq@K`` / ``double-eq@K`` (round K's q sent divided,
or multiplied, by the eq factor prod_(i<K) eq(w_i, r_i) the verifier multiplies
back itself, so the round sum is off by exactly that factor; K >= 2), the opening
faults of :mod:`stepper.provers.openings` and ``final-without-eq``. Pure apart
from the channel.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Mapping, Sequence

import numpy as np

from stepper.errors import UsageError
from stepper.field.expr import parse
from stepper.field.poly import point_from_challenges
from stepper.provers.counting import halves
from stepper.provers.engine import ExprSummand, InstanceRun, ProofRun, WitnessInstance
from stepper.provers.generic import field_tables, mix_constraints, mix_witness, renamed
from stepper.provers.openings import send_openings

if TYPE_CHECKING:
    from stepper.field.field import Element
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["prove_zero_factored", "factored_round"]


def eq1(counter: MulCounter, w: Element, x: Element) -> Element:
    """eq(w, x) = w*x + (1-w)*(1-x) for single elements (one product)."""
    f = counter.field
    wx = counter.mul(w, x)
    return f.add(f.sub(f.sub(f.one, w), x), f.add(wx, wx))


def factored_round(counter: MulCounter, tables: Mapping[str, np.ndarray], parts: Sequence[ExprSummand],
                   weights: Sequence[Element], eq_rest: np.ndarray, count: int, order: str) -> list[Element]:
    """q(0), ..., q(count-1): sum over the unbound variables of eq_rest * C at the next variable = X."""
    f = counter.field
    split = {n: halves(t, order) for n, t in tables.items()}
    diffs = {n: f.vsub(hi, lo) for n, (lo, hi) in split.items()}
    cur = {n: lo for n, (lo, _) in split.items()}
    out: list[Element] = []
    for x in range(count):
        if x == 1:
            cur = {n: hi for n, (_, hi) in split.items()}
        elif x >= 2:
            cur = {n: f.vadd(cur[n], diffs[n]) for n in cur}
        combined = mixed(counter, cur, parts, weights)
        out.append(f.vsum(counter.vmul(eq_rest, combined)))
    return out


def mixed(counter: MulCounter, env: Mapping[str, np.ndarray], parts: Sequence[ExprSummand],
          weights: Sequence[Element]) -> np.ndarray:
    """C_1 + gamma * C_2 + ... entry by entry (weights[0] is one and costs nothing)."""
    f = counter.field
    acc = f.vec(parts[0].evaluate(counter, env))
    for part, weight in zip(parts[1:], weights[1:]):
        acc = f.vadd(acc, counter.vscale(f.vec(part.evaluate(counter, env)), weight))
    return acc


def prove_zero_factored(channel: ProofChannel, counter: MulCounter, name: str, tables: Mapping[str, np.ndarray],
                        constraints: Sequence[str], *, order: str = "low-first", prefix: str = "",
                        earlier_points: Sequence[Sequence[Element]] = ()) -> ProofRun:
    """Prove every constraint vanishes on the hypercube, rounds in the eq-factored form."""
    field = counter.field
    if not constraints:
        raise UsageError("expected at least one constraint for a zero-check")
    parts = [ExprSummand.of(parse(c)) for c in constraints]
    names = tuple(dict.fromkeys(n for p in parts for n in p.names))
    missing = [n for n in names if n not in tables]
    if missing:
        raise UsageError(f"expected a table for every name in the constraints, found none for {', '.join(missing)}")
    used = field_tables(field, {n: tables[n] for n in names})
    mu = len(next(iter(used.values()))).bit_length() - 1
    fault = channel.fault
    statement: list[bytes | np.ndarray] = [name.encode(), *(c.encode() for c in constraints),
                                          *(used[n] for n in sorted(used))]
    counter.phase(f"{name}/setup")
    tau = channel.statement_challenges("zero-check-point", statement, mu)
    weights, gamma = mix_constraints(channel, counter, constraints, statement)
    tau_name, gamma_name = f"{prefix}tau", f"{prefix}gamma"
    channel.value(tau_name, list(tau))
    if gamma is not None:
        channel.value(gamma_name, gamma)
    degree = 1 + max(p.degree for p in parts)
    inner = renamed(constraints, prefix, names, gamma_name)
    without_eq = fault is not None and fault.name == "final-without-eq" and fault.instance == channel.instance + 1
    final_expr = inner if without_eq else f"eq({tau_name}) * ({inner})"
    index = channel.start_instance(name, mu, degree, field.zero, order=order, form="eq-factored",
                                   eq_point=tau_name, final_expr=final_expr)
    prefix_eq = field.one  # prod_(i<k) eq(w_i, r_i)
    challenges: list[Element] = []
    mults: list[int] = []
    cur = dict(used)
    for k in range(1, mu + 1):
        counter.phase(f"{name}/round {k}")
        before = counter.total
        j = k - 1 if order == "low-first" else mu - k
        rest = tau[k:] if order == "low-first" else tau[: mu - k]
        q = factored_round(counter, cur, parts, weights, counter.eq_table(rest), degree, order)
        if fault is not None and fault.instance == index and fault.round == k \
                and fault.name in ("drop-eq", "double-eq"):
            scale = prefix_eq if fault.name == "double-eq" else field.inv(prefix_eq)
            q = [counter.mul(v, scale) for v in q]
        r = channel.send_round(q)
        challenges.append(r)
        prefix_eq = counter.mul(prefix_eq, eq1(counter, tau[j], r))
        cur = {n: counter.fold(t, r, order) for n, t in cur.items()}
        mults.append(counter.total - before)
    counter.phase(f"{name}/final")
    ends = {n: field.vlist(t)[0] for n, t in cur.items()}
    env = {n: field.vec([v]) for n, v in ends.items()}
    final = counter.mul(prefix_eq, field.vlist(mixed(counter, env, parts, weights))[0])
    channel.final(final)
    point = point_from_challenges(challenges, order)
    send_openings(channel, used, ends, point, prefix=prefix, earlier_points=earlier_points)
    combine, extra = mix_witness(counter, constraints, weights, counter.eq_table(tau))
    witness = WitnessInstance(name, {**used, **extra}, combine, order)
    run = InstanceRun(name, field.zero, tuple(challenges), final, tuple(mults))
    return ProofRun((run,), (witness,), counter.per_phase())
