"""Bug-class probes: which known prover mistake reproduces the wrong value exactly.

Once :mod:`stepper.diagnose.rootcause` has found the first wrong thing a prover sent (the
claim, a round polynomial, or the final value), each probe recomputes what one
known bug would have produced from the witness and reports a
:class:`ProbeFinding` only when that equals what was sent, value for value.
A finding is evidence that the bug explains this transcript, not proof that
the prover has it (two bugs may coincide on small inputs).

Probes (name: what the faulty prover does):

* ``variable-order``: from round s <= the first wrong round k on, binds the variable at
  the other end of the table (high-first instead of low-first or back); s < k (the first
  switched rounds coincide with the declared order's) is searched when nothing else fits;
* ``reversed-point``: the final value is taken at the challenge point reversed;
* ``challenge-shift``: the tables of round k were folded with r_k (one ahead) or
  r_(k-2) (one behind) instead of r_(k-1): challenges used one round off;
* ``montgomery``: values leave the prover still multiplied by a Montgomery
  radix R = 2^32, 2^64 or 2^256 mod p;
* ``product-of-sums``: a product's sum taken as the product of the factors' sums;
* ``point-count``: one evaluation point dropped (degree bound one too low),
  duplicated, or one too many sent (degree bound one too high);
* ``negated``: the claim, the final value, one evaluation or every evaluation negated;
* ``not-reduced``: sent = (v + p) mod 2^w for a 32- or 64-bit word, coefficient by
  coefficient (an unwrapped v + p >= p is rejected by the loader before any probe
  runs); possible only when p > 2^(w-1), e.g. Goldilocks with w = 64.

The glue probes (``opening-point``, ``opening-table``, ``stale-coefficient``,
``eq-factor``, ``final-without-eq``) are registered in :data:`GLUE_PROBES`
(:mod:`stepper.diagnose.glue_probes`); they explain a failed glue check rather
than a wrong round, and :mod:`stepper.diagnose.glue_evidence` runs them.

Pure: no I/O; the only heavy work is re-folding the witness tables. The binding- and
challenge-order probes live in :mod:`stepper.diagnose.order_probes`, the evidence they share in
:mod:`stepper.diagnose.probe_evidence`; this module holds the arithmetic probes and the registry.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable

from stepper.diagnose.honest import table_round_sums
from stepper.diagnose.order_probes import (
    probe_challenge_shift, probe_earlier_order_switch, probe_reversed_point, probe_variable_order,
)
from stepper.diagnose.glue_probes import GLUE_PROBES
from stepper.field.poly import lagrange_at
from stepper.diagnose.probe_evidence import (
    ProbeContext, ProbeFinding, coeffs_of, first_difference, first_entry, fmt_all, honest_values, in_form,
    round_is, same_as_sent, tables_of_round, where_text,
)

if TYPE_CHECKING:
    from stepper.field.field import Element

__all__ = ["ProbeContext", "ProbeFinding", "PROBES", "GLUE_PROBES", "run_probes", "first_difference", "MONTGOMERY_RADIX_BITS"]

MONTGOMERY_RADIX_BITS = (32, 64, 256)
WORD_BITS = (32, 64)


# ----- the arithmetic probes ------------------------------------------------------------------
def probe_montgomery(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    for bits in MONTGOMERY_RADIX_BITS:
        radix = pow(2, bits, f.p)
        if radix == 1:
            continue
        scaled = tuple(f.mul(f.lift(v), radix) for v in honest)
        if same_as_sent(ctx, scaled):
            return ProbeFinding(
                "montgomery",
                f"{where_text(ctx)} equals the honest value(s) times R = 2^{bits} mod p: Montgomery form leaked "
                "into the transcript (a missing conversion out of Montgomery form)",
                {"radix": f"2^{bits}", "R_mod_p": str(radix), "honest": fmt_all(f, honest)},
            )
    return None


def probe_product_of_sums(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    if ctx.expr.degree() < 2 or ctx.check not in ("claim", "honest-poly"):
        return None
    names = ctx.expr.names()
    if ctx.check == "claim":
        sums = table_round_sums(f, ctx.tables, names, 2, ctx.start.order) if ctx.start.num_vars else None
        if sums:
            env = {n: f.add(s[0], s[1]) for n, s in sums.items()}
        else:
            env = {n: first_entry(f, ctx.tables[n]) for n in names}
        value = ctx.expr.evaluate_scalar(f, env)
        if not same_as_sent(ctx, (value,)):
            return None
        return ProbeFinding(
            "product-of-sums", "the claimed sum equals the combine applied to each table's own sum "
            "(sum f * sum g instead of sum f*g)", {"value": f.fmt(value)})
    k = ctx.round
    tables = tables_of_round(ctx)
    points = ctx.start.degree + 1
    sums = table_round_sums(f, tables, names, points, ctx.start.order)
    evals = tuple(ctx.expr.evaluate_scalar(f, {n: s[t] for n, s in sums.items()}) for t in range(points))
    if not round_is(ctx, k, evals):
        return None
    return ProbeFinding(
        "product-of-sums", f"round {k} equals g(t) = combine(sum of each table at t): the product of the "
        "tables' sums instead of the sum of their products", {"evals": fmt_all(f, evals)})


def probe_point_count(ctx: ProbeContext) -> ProbeFinding | None:
    if ctx.check not in ("honest-poly", "degree"):
        return None
    f = ctx.field
    honest = list(ctx.honest)
    d = len(honest) - 1
    extended = [*honest, lagrange_at(f, honest, f.embed(d + 1))]
    candidates: list[tuple[str, list[Element], dict[str, Any]]] = [
        ("one evaluation point too many (degree bound one too high)", extended,
         {"kind": "extra", "sent_points": d + 2}),
        ("the last evaluation point dropped (degree bound one too low)", honest[:-1], {"kind": "dropped", "point": d}),
    ]
    for j in range(d):
        candidates.append((f"evaluation point {j} dropped", honest[:j] + honest[j + 1:],
                           {"kind": "dropped", "point": j}))
    for j in range(d + 1):
        dup = honest[: j + 1] + honest[j:]
        candidates.append((f"evaluation point {j} duplicated", dup, {"kind": "duplicated", "point": j}))
        candidates.append((f"evaluation point {j} duplicated, the last point lost", dup[: d + 1],
                           {"kind": "duplicated-shifted", "point": j}))
    for text, evals, evidence in candidates:
        if len(evals) >= 1 and same_as_sent(ctx, in_form(ctx, evals)):
            return ProbeFinding("point-count", f"round {ctx.round} is the honest polynomial with {text}",
                                {**evidence, "honest_points": d + 1, "sent_values": len(ctx.sent)})
    return None


def probe_negated(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    negated = tuple(f.neg(f.lift(v)) for v in honest)
    if same_as_sent(ctx, negated):
        what = "every value" if len(honest) > 1 else "the value"
        return ProbeFinding("negated", f"{where_text(ctx)}: {what} is the honest one negated", {"positions": "all"})
    for j in range(len(honest)):
        one = tuple(negated[i] if i == j else f.lift(honest[i]) for i in range(len(honest)))
        if same_as_sent(ctx, one):
            return ProbeFinding("negated", f"{where_text(ctx)}: value {j} as sent is the honest one negated",
                                {"positions": [j]})
    return None


def probe_not_reduced(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    for w in WORD_BITS:
        if f.p <= 1 << (w - 1) or f.p >= 1 << w:
            continue
        wrapped: list[int] = []
        ok = True
        for i, (h, s) in enumerate(zip(honest, ctx.sent)):
            hc, sc = coeffs_of(f, h), coeffs_of(f, s)
            if hc == sc:
                continue
            if all(b == a or b == (a + f.p) % (1 << w) for a, b in zip(hc, sc)):
                wrapped.append(i)
            else:
                ok = False
                break
        if ok and wrapped:
            return ProbeFinding(
                "not-reduced",
                f"{where_text(ctx)}: value(s) {wrapped} equal honest + p wrapped in a {w}-bit word "
                "(a sum left unreduced before it overflowed)",
                {"word_bits": w, "positions": wrapped},
            )
    return None


PROBES: dict[str, Callable[[ProbeContext], ProbeFinding | None]] = {
    "variable-order": probe_variable_order,
    "reversed-point": probe_reversed_point,
    "challenge-shift": probe_challenge_shift,
    "montgomery": probe_montgomery,
    "product-of-sums": probe_product_of_sums,
    "point-count": probe_point_count,
    "negated": probe_negated,
    "not-reduced": probe_not_reduced,
}


def run_probes(ctx: ProbeContext) -> tuple[ProbeFinding, ...]:
    """Every probe that explains the evidence exactly (in :data:`PROBES` order), tagged;
    when none does, the costlier search for an earlier binding-order switch. challenge-shift
    runs first so its folded tables are freed before the others share round k's tables."""
    found = {name: PROBES[name](ctx) for name in sorted(PROBES, key=lambda name: name != "challenge-shift")}
    ctx.folded.clear()
    results = [found[name] for name in PROBES]
    if not any(results):
        results.append(probe_earlier_order_switch(ctx))
    return tuple(ProbeFinding(f.probe, f.message, f.evidence, ctx.start.index, ctx.round)
                 for f in results if f is not None)
