"""What the bug-class probes look at and what they report, with the helpers they share.

Pure: no I/O. :class:`ProbeContext` carries the evidence (the field, the
instance, the witness tables, the combine expression, the challenges, the
values sent and the honest values of one check); :class:`ProbeFinding` is one
bug class that reproduces that evidence exactly. Invariant: values are
compared lifted into the field and in the form the instance sends, so a
compressed form's recovered value never hides or fakes a match. The probes
themselves live in :mod:`stepper.diagnose.probes` and :mod:`stepper.diagnose.order_probes`.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from stepper.diagnose.honest import fold
from stepper.field.poly import RoundPoly, lagrange_at

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.expr import Expr
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceStart

__all__ = ["ProbeFinding", "ProbeContext", "first_difference", "in_form", "same_as_sent", "round_is",
           "honest_values", "where_text", "fmt_all", "tables_after", "tables_of_round", "coeffs_of", "first_entry"]


@dataclass(frozen=True, slots=True)
class ProbeFinding:
    """One bug class that reproduces the evidence exactly."""

    probe: str
    message: str
    evidence: Mapping[str, Any] = dc_field(default_factory=dict)
    instance: int | None = None
    round: int | None = None

    def to_json(self) -> dict[str, Any]:
        return {"probe": self.probe, "instance": self.instance, "round": self.round, "message": self.message,
                "evidence": dict(self.evidence)}


@dataclass(frozen=True, slots=True)
class ProbeContext:
    """What the probes may look at. ``check`` is ``claim`` (round 0), ``honest-poly``
    or ``degree`` (round ``round``) or ``final``; ``sent`` are the values as sent
    in the instance's form (the claim or final value alone for those checks);
    ``sent_rounds`` every round's values as sent (bugs are compared in the form sent,
    so a compressed form's recovered value never hides or fakes a match);
    ``honest`` the honest evaluations 0..degree of the round (or the honest
    claim / final value as a 1-tuple). ``folded`` caches round ``round``'s starting
    tables (folded by r_1..r_(k-1) in the declared order) for the probes of one run."""

    field: Field
    start: InstanceStart
    tables: Mapping[str, np.ndarray]
    expr: Expr
    challenges: tuple[Element, ...]
    check: str
    round: int
    sent: tuple[Element, ...]
    honest: tuple[Element, ...]
    sent_rounds: tuple[tuple[Element, ...], ...] = ()
    folded: dict[int, dict[str, np.ndarray]] = dc_field(default_factory=dict, compare=False, repr=False)


def first_difference(field: Field, a: Sequence[Element], b: Sequence[Element]) -> int | None:
    """The first point t (0-based) where the polynomials through (i, a[i]) and
    (i, b[i]) differ, checking t = 0 .. max(len) - 1 (enough to decide equality
    of two polynomials of those degrees); None when they are equal."""
    for t in range(max(len(a), len(b))):
        x = field.embed(t)
        va = a[t] if t < len(a) else lagrange_at(field, a, x)
        vb = b[t] if t < len(b) else lagrange_at(field, b, x)
        if field.lift(va) != field.lift(vb):
            return t
    return None


def in_form(ctx: ProbeContext, evals: Sequence[Element]) -> tuple[Element, ...]:
    """Evaluations g(0..e) rewritten in the form the instance sends, lifted into the field."""
    return tuple(ctx.field.lift(v) for v in RoundPoly(tuple(evals)).to_form(ctx.field, ctx.start.form))


def same_as_sent(ctx: ProbeContext, values: Sequence[Element], sent: Sequence[Element] | None = None) -> bool:
    """``values`` equal ``sent`` (default: ``ctx.sent``) entry by entry, lifted into the field."""
    f = ctx.field
    sent = ctx.sent if sent is None else sent
    return len(values) == len(sent) and all(f.lift(a) == f.lift(b) for a, b in zip(values, sent))


def round_is(ctx: ProbeContext, k: int, evals: Sequence[Element]) -> bool:
    """Round k as sent equals a prover sending ``evals`` in the instance's form."""
    return k <= len(ctx.sent_rounds) and same_as_sent(ctx, in_form(ctx, evals), ctx.sent_rounds[k - 1])


def honest_values(ctx: ProbeContext) -> tuple[Element, ...]:
    """The honest counterpart of ``ctx.sent`` (in the instance's form for a round)."""
    if ctx.check in ("honest-poly", "degree"):
        return in_form(ctx, ctx.honest)
    return ctx.honest


def where_text(ctx: ProbeContext) -> str:
    """What the checked values are, in words: the claimed sum, the final value or round k."""
    if ctx.check == "claim":
        return "the claimed sum"
    if ctx.check == "final":
        return "the final value"
    return f"round {ctx.round}"


def fmt_all(field: Field, values: Sequence[Element]) -> list[str]:
    """Every value as display text (for finding evidence)."""
    return [field.fmt(field.lift(v)) for v in values]


def tables_after(ctx: ProbeContext, challenges: Sequence[Element], order: str) -> dict[str, np.ndarray]:
    cur: Mapping[str, np.ndarray] = {n: ctx.tables[n] for n in ctx.expr.names()}
    for r in challenges:
        cur = fold(ctx.field, cur, r, order)
    return dict(cur)


def tables_of_round(ctx: ProbeContext) -> dict[str, np.ndarray]:
    """The tables an honest prover starts round ``ctx.round`` with, folded once per context."""
    k = ctx.round
    if k not in ctx.folded:
        ctx.folded[k] = tables_after(ctx, ctx.challenges[: k - 1], ctx.start.order)
    return ctx.folded[k]


def coeffs_of(field: Field, e: Element) -> tuple[int, ...]:
    """The base coefficients of an element (one for a prime field)."""
    lifted = field.lift(e)
    return (lifted,) if isinstance(lifted, int) else tuple(lifted)


def first_entry(field: Field, arr: np.ndarray) -> Element:
    """Entry 0 of a table as an element (a fully folded table has one entry)."""
    if arr.ndim == 1:
        return field.lift(int(arr[0]))
    return tuple(int(c) for c in arr[0])
