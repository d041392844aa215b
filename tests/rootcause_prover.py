"""A small sumcheck prover with one injectable fault, built on stepper.diagnose.honest, for the
root-cause and probe tests. Challenges are drawn up front (no Fiat-Shamir): the tests
care about what the prover sends, not how the challenges were derived."""

from __future__ import annotations

import random
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from stepper.field.expr import parse
from stepper.field.field import Element, Field
from stepper.diagnose.honest import fold, honest_round, tables_at
from stepper.field.poly import RoundPoly, lagrange_at, point_from_challenges
from stepper.transcript.model import (
    ChallengeMsg, FieldDecl, FinalValue, InstanceStart, RoundMsg, Transcript, fold_events,
)
from stepper.diagnose.witness import Witness, WitnessInstance


@dataclass(frozen=True)
class Fault:
    """``kind`` names the fault; ``round`` the round it hits (1-based); ``arg`` a detail."""

    kind: str
    round: int = 1
    arg: Any = None


def prove(field: Field, tables: Mapping[str, np.ndarray], combine: str, *, degree: int,
          order: str = "low-first", form: str = "evals", fault: Fault | None = None, seed: int = 1,
          name: str = "boarding-permutation", challenges: list[Element] | None = None,
          with_final: bool = True) -> tuple[Transcript, Witness]:
    expr = parse(combine)
    n = len(next(iter(tables.values())))
    mu = n.bit_length() - 1
    rng = random.Random(seed)
    chal = list(challenges) if challenges is not None else [field.random(rng) for _ in range(mu)]
    kind = fault.kind if fault else ""
    other = "high-first" if order == "low-first" else "low-first"

    def order_of(k: int) -> str:  # "other-order" binds the other end from fault.round on
        return other if kind == "other-order" and k >= fault.round else order

    cur = dict(tables)
    g1 = honest_round(field, cur, expr, degree + 1, order_of(1))
    claim = field.add(g1[0], g1[1])
    if kind == "negate-claim":
        claim = field.neg(claim)
    if kind == "product-of-sums-claim":
        sums = {k: field.lift(field.base.vsum(v)) for k, v in tables.items()}
        claim = expr.evaluate_scalar(field, sums)
    if kind == "montgomery-claim":
        claim = field.mul(claim, pow(2, fault.arg, field.p))
    events: list[Any] = [FieldDecl(field), InstanceStart(0, name, mu, degree, claim, order, form)]
    running = claim
    for k in range(1, mu + 1):
        use_order = order_of(k)
        evals = list(honest_round(field, cur, expr, degree + 1, use_order))
        if fault and fault.round == k:
            evals = _corrupt(field, cur, expr, evals, fault, use_order, degree)
        poly = RoundPoly(tuple(evals))
        values = list(poly.to_form(field, form))
        if fault and fault.round == k and kind in ("negate-value", "unreduced"):
            j = fault.arg
            v = field.lift(values[j])
            if kind == "negate-value":
                values[j] = field.neg(v)
            elif isinstance(v, int):
                values[j] = (v + field.p) % 2**64
            else:  # the constant coefficient left unreduced
                values[j] = ((v[0] + field.p) % 2**64, *v[1:])
        if fault and fault.round == k and kind == "montgomery":
            values = [field.mul(field.lift(v), pow(2, fault.arg, field.p)) for v in values]
        events.append(RoundMsg(0, k, tuple(values)))
        events.append(ChallengeMsg(0, k, chal[k - 1]))
        sent = RoundPoly.from_form(field, form, values, running)
        running = sent.at(field, chal[k - 1])
        fold_with = chal[k - 1]
        if kind == "challenge-ahead" and k == fault.round - 1:
            fold_with = chal[k]
        if kind == "challenge-behind" and k == fault.round - 1:
            fold_with = chal[k - 2]
        cur = fold(field, cur, fold_with, use_order)
    # the final value from the tables as this prover folded them
    final = expr.evaluate_scalar(field, {n: _entry(field, t) for n, t in cur.items()})
    if kind == "reversed-final":
        point = tuple(reversed(point_from_challenges(chal, order)))
        final = expr.evaluate_scalar(field, tables_at(field, tables, point))
    if kind == "negate-final":
        final = field.neg(final)
    if with_final:
        events.append(FinalValue(0, final))
    witness = Witness((WitnessInstance(name, dict(tables), expr),), "memory")
    return fold_events(events), witness


def _entry(field: Field, arr: np.ndarray) -> Element:
    return field.lift(int(arr[0])) if arr.ndim == 1 else tuple(int(c) for c in arr[0])


def _corrupt(field: Field, cur: Mapping[str, np.ndarray], expr: Any, evals: list[Element], fault: Fault,
             order: str, degree: int) -> list[Element]:
    kind = fault.kind
    if kind == "sum-consistent":
        # add delta * t * (t - 1): zero at 0 and 1, so g(0) + g(1) still matches the claim
        delta = fault.arg
        return [field.add(v, field.embed(delta * t * (t - 1))) for t, v in enumerate(evals)]
    if kind == "drop-point":
        return evals[:-1]
    if kind == "extra-point":
        return [*evals, lagrange_at(field, evals, field.embed(len(evals)))]
    if kind == "duplicate-point":
        j = fault.arg
        return (evals[: j + 1] + evals[j:])[: len(evals)]
    if kind == "product-of-sums":
        from stepper.diagnose.honest import table_round_sums

        sums = table_round_sums(field, cur, expr.names(), degree + 1, order)
        return [expr.evaluate_scalar(field, {n: s[t] for n, s in sums.items()}) for t in range(degree + 1)]
    return evals
