"""Glue probes: which known mistake between sumchecks reproduces a failed glue check exactly.

The glue of a proof (openings, named values, squeezes, an instance's
``claim_expr`` and ``final_expr``, the eq factor of an ``eq-factored`` round)
fails in a few ways real provers repeat. Each probe recomputes what one bug
would have produced and reports a :class:`ProbeFinding` only when that equals
what was sent, value for value:

* ``opening-point``: an opening equals its table's multilinear extension at the
  instance's challenge point read backwards, or at the challenge point of
  another instance (needs the witness);
* ``opening-table``: an opening equals another table's value at the right point
  (a table of the same instance's witness, or another opening of the instance);
* ``stale-coefficient``: a failed ``link`` (claim vs ``claim_expr``) holds once a
  squeeze the expression names is replaced by a squeeze drawn before it;
* ``eq-factor``: an eq-factored round's sum is off by exactly the eq factor
  prod_(i<k) eq(w_i, r_i) the verifier multiplies back (dropped: divided by it;
  doubled: multiplied by it);
* ``final-without-eq``: a failed ``evaluation`` holds once ``final_expr`` is
  multiplied by eq(a, this instance's point) for a named point a (the eq term
  the expression left out).

A finding is evidence that the bug explains this run, not proof that the prover
has it, and a proof whose glue passes every check is evidence about one run,
not a soundness proof. Pure: no I/O. The probes take the evidence as plain
arguments (elements, points, tables, an evaluator for an expression with some
names replaced), so any caller that has replayed the glue can ask them.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable, Mapping, Sequence

from stepper.diagnose.probe_evidence import ProbeFinding
from stepper.field.poly import eq_eval, mle_eval

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field

__all__ = [
    "GLUE_PROBES",
    "probe_opening_point",
    "probe_opening_table",
    "probe_stale_coefficient",
    "probe_eq_factor",
    "probe_final_without_eq",
    "eq_prefix",
]

Point = Sequence["Element"]
# an evaluator of one expression with some names bound to other values (None: the name is not in it)
Evaluator = Callable[[Mapping[str, object]], "Element | None"]


def _same(field: Field, a: Element, b: Element) -> bool:
    return field.lift(a) == field.lift(b)


def probe_opening_point(field: Field, name: str, sent: Element, table: np.ndarray, point: Point,
                        others: Mapping[str, Point], *, instance: int | None = None) -> ProbeFinding | None:
    """Opening ``name`` = the table's extension at ``point`` reversed, or at another
    instance's point (``others``: instance name -> its challenge point)?"""
    mu = len(point)
    if mu > 1 and list(point) != list(reversed(point)):
        if _same(field, mle_eval(field, table, tuple(reversed(point))), sent):
            return ProbeFinding(
                "opening-point", f"opening {name} equals its table at the challenge point read backwards "
                "(x_mu .. x_1): the prover evaluated with the coordinates in the wrong order",
                {"opening": name, "point": "reversed"}, instance)
    for other, at in others.items():
        if len(at) == mu and list(at) != list(point) and _same(field, mle_eval(field, table, at), sent):
            return ProbeFinding(
                "opening-point", f"opening {name} equals its table at the challenge point of instance "
                f"'{other}': the prover opened at the wrong instance's point",
                {"opening": name, "point": other}, instance)
    return None


def probe_opening_table(field: Field, name: str, table_name: str, sent: Element, values: Mapping[str, Element],
                        *, instance: int | None = None) -> ProbeFinding | None:
    """Opening ``name`` (of ``table_name``) = another table's value at the right point?
    ``values``: table name -> its value at the instance's point (from the witness, or
    the other openings of the instance)."""
    for other, value in values.items():
        if other != table_name and _same(field, value, sent):
            return ProbeFinding(
                "opening-table", f"opening {name} carries the value of table {other} at the same point, not "
                f"of table {table_name}: two tables' openings crossed",
                {"opening": name, "table": table_name, "matches": other}, instance)
    return None


def probe_stale_coefficient(field: Field, claim: Element, evaluate: Evaluator, named: Sequence[str],
                            squeezes: Sequence[tuple[str, object]], *, instance: int | None = None,
                            ) -> ProbeFinding | None:
    """The claim = ``claim_expr`` with a squeeze it names (in ``named``) replaced by one
    drawn before it? ``squeezes`` lists every squeeze in stream order (name, value)."""
    order = [n for n, _ in squeezes]
    for used in named:
        if used not in order:
            continue
        for earlier, value in squeezes[: order.index(used)][::-1]:
            got = evaluate({used: value})
            if got is not None and _same(field, got, claim):
                return ProbeFinding(
                    "stale-coefficient", f"the claim equals claim_expr with squeeze {earlier} in place of "
                    f"{used}: the claim was built with a coefficient drawn earlier",
                    {"expected_squeeze": used, "used_squeeze": earlier}, instance, 0)
    return None


def eq_prefix(field: Field, w: Point, r: Sequence[Element]) -> Element:
    """prod_(i<k) eq(w_i, r_i) for the k-1 challenges given (w in round order)."""
    return eq_eval(field, list(w[: len(r)]), list(r))


def probe_eq_factor(field: Field, expected: Element, found: Element, factor: Element, *,
                    instance: int | None = None, round_: int | None = None) -> ProbeFinding | None:
    """An eq-factored round whose sum ``found`` is ``expected`` times or over the eq
    factor of the rounds before it (``factor``)?"""
    if field.is_zero(factor) or _same(field, factor, field.one):
        return None
    if _same(field, field.mul(expected, factor), found):
        return ProbeFinding(
            "eq-factor", f"round {round_}'s sum is the running claim times the eq factor prod_(i<k) eq(w_i, r_i) "
            "the verifier multiplies back: the prover multiplied it in as well (eq factor doubled)",
            {"kind": "doubled", "factor": field.fmt(field.lift(factor))}, instance, round_)
    if _same(field, expected, field.mul(found, factor)):
        return ProbeFinding(
            "eq-factor", f"round {round_}'s sum is the running claim divided by the eq factor prod_(i<k) "
            "eq(w_i, r_i): the prover's round lacks the factor the verifier multiplies back (eq factor dropped)",
            {"kind": "dropped", "factor": field.fmt(field.lift(factor))}, instance, round_)
    return None


def probe_final_without_eq(field: Field, reduced: Element, value: Element, point: Point,
                           candidates: Mapping[str, Point], *, instance: int | None = None,
                           round_: int | None = None) -> ProbeFinding | None:
    """The reduced claim = ``final_expr``'s value times eq(a, point) for a named point a?"""
    for name, a in candidates.items():
        if len(a) != len(point):
            continue
        if _same(field, field.mul(value, eq_eval(field, list(a), list(point))), reduced):
            return ProbeFinding(
                "final-without-eq", f"the reduced claim equals final_expr times eq({name}): the expression "
                "leaves out the eq term the sumcheck carried",
                {"missing": f"eq({name})"}, instance, round_)
    return None


GLUE_PROBES: dict[str, Callable[..., ProbeFinding | None]] = {
    "opening-point": probe_opening_point,
    "opening-table": probe_opening_table,
    "stale-coefficient": probe_stale_coefficient,
    "eq-factor": probe_eq_factor,
    "final-without-eq": probe_final_without_eq,
}
