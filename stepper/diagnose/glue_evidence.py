"""The evidence the glue probes look at, gathered from a transcript and its first failure.

:func:`glue_findings` takes a folded transcript, the replay's first failure and,
optionally, the witness tables of the failing instance, and asks the probes of
:mod:`stepper.diagnose.glue_probes` that fit the failed check:

* ``link`` (round 0): ``stale-coefficient``, the claim against ``claim_expr``
  with each squeeze it names replaced by an earlier one;
* ``evaluation`` (last round): ``final-without-eq``, the reduced claim against
  ``final_expr`` times eq(a, the instance's point) for every named point a of
  the right length (list values, list squeezes, the instance's ``eq_point``);
* ``sum`` in an ``eq-factored`` instance: ``eq-factor``, the round's sum against
  the running claim times or over the eq factor of the rounds before it;
* ``opening`` or ``evaluation`` with witness tables: ``opening-point`` and
  ``opening-table`` for every opening of the instance that differs from its
  table's multilinear extension at the instance's point.

The running claims of an eq-factored instance are recomputed here from what was
sent (g_k(X) = prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X)), so the probes do not
depend on how the replay stores them. Pure: no I/O.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping

from stepper.diagnose.glue_probes import (
    probe_eq_factor, probe_final_without_eq, probe_opening_point, probe_opening_table, probe_stale_coefficient,
)
from stepper.errors import StepperError
from stepper.field.poly import RoundPoly, eq_eval, lagrange_at, mle_eval, point_from_challenges

if TYPE_CHECKING:
    import numpy as np

    from stepper.diagnose.probe_evidence import ProbeFinding
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceRecord, Transcript
    from stepper.verify.results import Failure

__all__ = ["glue_findings", "glue_before", "running_claims", "instance_point"]


def glue_before(transcript: Transcript, index: int) -> list[Any]:
    """Every value, squeeze and opening sent before instance ``index`` starts, in stream order."""
    out = list(transcript.glue)
    for inst in transcript.instances[:index]:
        out.extend(inst.glue)
    return out


def instance_point(inst: InstanceRecord) -> tuple[Element, ...] | None:
    """The instance's challenge point in variable order x_1..x_mu (None when incomplete)."""
    challenges = [r.challenge for r in inst.rounds]
    if len(challenges) != inst.start.num_vars or any(c is None for c in challenges):
        return None
    return tuple(point_from_challenges(challenges, inst.start.order))  # type: ignore[arg-type]


def _scope_values(glue: list[Any]) -> dict[str, object]:
    values: dict[str, object] = {}
    for event in glue:
        values[event.name] = event.value if type(event).__name__ == "Opening" else (
            list(event.value) if event.listed else event.value)  # a point is a list in a GlueScope
    return values


def eq_point_of(inst: InstanceRecord, values: Mapping[str, object]) -> tuple[Element, ...] | None:
    point = inst.start.eq_point
    if point is None:
        return None
    if isinstance(point, str):
        found = values.get(point)
        return tuple(found) if isinstance(found, (list, tuple)) else None
    return tuple(point)


def running_claims(field: Field, inst: InstanceRecord, w: tuple[Element, ...] | None
                   ) -> list[tuple[Element, Element, Element]]:
    """Per round k (from 1): (claim entering it, its sum g(0) + g(1), the eq factor before it),
    recomputed from the values sent; rounds without a challenge end the list."""
    s = inst.start
    claim: Element = s.claim
    out: list[tuple[Element, Element, Element]] = []
    prefix = field.one
    mu = s.num_vars
    for k, rnd in enumerate(inst.rounds, start=1):
        if s.form == "eq-factored":
            if w is None or len(w) != mu or not rnd.values:
                return out
            wk = w[k - 1] if s.order == "low-first" else w[mu - k]
            q = [field.lift(v) for v in rnd.values]
            q1 = q[1] if len(q) > 1 else q[0]
            total = field.mul(prefix, field.add(field.mul(field.sub(field.one, wk), q[0]), field.mul(wk, q1)))
            out.append((claim, total, prefix))
            if rnd.challenge is None:
                return out
            r = rnd.challenge
            prefix = field.mul(prefix, eq_eval(field, [wk], [r]))
            claim = field.mul(prefix, lagrange_at(field, q, r))
        else:
            evals = RoundPoly.from_form(field, s.form, rnd.values, claim).evals
            total = field.add(evals[0], evals[1]) if len(evals) > 1 else field.add(evals[0], evals[0])
            out.append((claim, total, field.one))
            if rnd.challenge is None:
                return out
            claim = lagrange_at(field, list(evals), rnd.challenge)
    return out


def _reduced(field: Field, inst: InstanceRecord, w: tuple[Element, ...] | None) -> Element | None:
    rows = running_claims(field, inst, w)
    if len(rows) != inst.start.num_vars or not inst.rounds or inst.rounds[-1].challenge is None:
        return None
    s = inst.start
    last = inst.rounds[-1]
    claim_in, _, prefix = rows[-1]
    if s.form == "eq-factored":
        assert w is not None
        wk = w[-1] if s.order == "low-first" else w[0]
        q = [field.lift(v) for v in last.values]
        return field.mul(field.mul(prefix, eq_eval(field, [wk], [last.challenge])), lagrange_at(field, q, last.challenge))  # type: ignore[arg-type, list-item]
    evals = RoundPoly.from_form(field, s.form, last.values, claim_in).evals
    return lagrange_at(field, list(evals), last.challenge)  # type: ignore[arg-type]


def glue_findings(transcript: Transcript, failure: Failure | None,
                  tables: Mapping[str, np.ndarray] | None = None) -> tuple[ProbeFinding, ...]:
    """The glue probes that explain ``failure`` exactly (empty when none does or the
    failure is not a glue check); ``tables`` are the failing instance's witness tables."""
    if failure is None or not 0 <= failure.instance < len(transcript.instances):
        return ()
    try:
        return _findings(transcript, failure, tables)
    except (StepperError, ArithmeticError, ValueError, IndexError):
        return ()  # evidence a probe cannot read (a malformed expression, a missing name) explains nothing


def _findings(transcript: Transcript, failure: Failure, tables: Mapping[str, np.ndarray] | None
              ) -> tuple[ProbeFinding, ...]:
    from stepper.field.expr import GlueScope, parse

    field = transcript.field
    index = failure.instance
    inst = transcript.instances[index]
    before = glue_before(transcript, index)
    values = _scope_values(before)
    points = {i.name: p for i in transcript.instances[:index] if (p := instance_point(i)) is not None}
    finals = {i.name: i.final for i in transcript.instances[:index] if i.final is not None}
    found: list[ProbeFinding] = []
    if failure.check == "link" and inst.start.claim_expr is not None:
        expr = parse(inst.start.claim_expr, "claim_expr")
        squeezes = [(e.name, list(e.value) if e.listed else e.value) for e in before
                    if type(e).__name__ == "Squeeze"]

        def evaluate(over: Mapping[str, object]) -> Element:
            return expr.evaluate_glue(field, GlueScope({**values, **over}, points, finals, None))

        hit = probe_stale_coefficient(field, inst.start.claim, evaluate, expr.references().values, squeezes,
                                      instance=index)
        found += [hit] if hit else []
    w = eq_point_of(inst, values)
    if failure.check == "sum" and inst.start.form == "eq-factored" and failure.round >= 1:
        rows = running_claims(field, inst, w)
        if failure.round <= len(rows):
            claim_in, total, prefix = rows[failure.round - 1]
            hit = probe_eq_factor(field, claim_in, total, prefix, instance=index, round_=failure.round)
            found += [hit] if hit else []
    point = instance_point(inst)
    if failure.check in ("evaluation", "opening") and point is not None:
        own = {**values, **_scope_values(list(inst.glue))}
        if failure.check == "evaluation" and inst.start.final_expr is not None:
            expr = parse(inst.start.final_expr, "final_expr")
            value = expr.evaluate_glue(field, GlueScope(own, points, finals, point))
            reduced = _reduced(field, inst, w)
            candidates = {n: tuple(v) for n, v in own.items() if isinstance(v, list) and len(v) == len(point)}
            if w is not None and isinstance(inst.start.eq_point, tuple):
                candidates["eq_point"] = w
            hit = None if reduced is None else probe_final_without_eq(
                field, reduced, value, point, candidates, instance=index, round_=inst.start.num_vars)
            found += [hit] if hit else []
        if tables:
            found += _opening_findings(field, inst, index, tables, point, points)
    return tuple(found)


def _opening_findings(field: Field, inst: InstanceRecord, index: int, tables: Mapping[str, np.ndarray],
                      point: tuple[Element, ...], points: Mapping[str, tuple[Element, ...]]) -> list[ProbeFinding]:
    """opening-point / opening-table for each opening that is not its table's value at ``point``."""
    true = {name: mle_eval(field, t, point) for name, t in tables.items() if len(t) == 1 << len(point)}
    out: list[ProbeFinding] = []
    for opening in inst.openings:
        table = tables.get(opening.table)
        if table is None or opening.table not in true or field.lift(true[opening.table]) == field.lift(opening.value):
            continue
        hit = probe_opening_point(field, opening.name, opening.value, table, point, points, instance=index) \
            or probe_opening_table(field, opening.name, opening.table, opening.value, true, instance=index)
        if hit is not None:
            out.append(hit)
    return out
