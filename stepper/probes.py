"""Bug-class probes: which known prover mistake reproduces the wrong value exactly.

Once :mod:`stepper.rootcause` has found the first wrong thing a prover sent (the
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

Pure: no I/O; the only heavy work is re-folding the witness tables.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

from stepper.honest import HonestRound, fold, honest_round, honest_rounds, table_round_sums
from stepper.poly import RoundPoly, lagrange_at, point_from_challenges

if TYPE_CHECKING:
    import numpy as np

    from stepper.expr import Expr
    from stepper.field import Element, Field
    from stepper.transcript import InstanceStart

__all__ = ["ProbeContext", "ProbeFinding", "PROBES", "run_probes", "first_difference", "MONTGOMERY_RADIX_BITS"]

MONTGOMERY_RADIX_BITS = (32, 64, 256)
WORD_BITS = (32, 64)


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


def _in_form(ctx: ProbeContext, evals: Sequence[Element]) -> tuple[Element, ...]:
    return tuple(ctx.field.lift(v) for v in RoundPoly(tuple(evals)).to_form(ctx.field, ctx.start.form))


def _same(ctx: ProbeContext, values: Sequence[Element], sent: Sequence[Element] | None = None) -> bool:
    f = ctx.field
    sent = ctx.sent if sent is None else sent
    return len(values) == len(sent) and all(f.lift(a) == f.lift(b) for a, b in zip(values, sent))


def _round_is(ctx: ProbeContext, k: int, evals: Sequence[Element]) -> bool:
    """Round k as sent equals a prover sending ``evals`` in the instance's form."""
    return k <= len(ctx.sent_rounds) and _same(ctx, _in_form(ctx, evals), ctx.sent_rounds[k - 1])


def _honest_values(ctx: ProbeContext) -> tuple[Element, ...]:
    """The honest counterpart of ``ctx.sent`` (in the instance's form for a round)."""
    if ctx.check in ("honest-poly", "degree"):
        return _in_form(ctx, ctx.honest)
    return ctx.honest


def _where(ctx: ProbeContext) -> str:
    if ctx.check == "claim":
        return "the claimed sum"
    if ctx.check == "final":
        return "the final value"
    return f"round {ctx.round}"


def _fmt_all(field: Field, values: Sequence[Element]) -> list[str]:
    return [field.fmt(field.lift(v)) for v in values]


def _tables_after(ctx: ProbeContext, challenges: Sequence[Element], order: str) -> dict[str, np.ndarray]:
    cur: Mapping[str, np.ndarray] = {n: ctx.tables[n] for n in ctx.expr.names()}
    for r in challenges:
        cur = fold(ctx.field, cur, r, order)
    return dict(cur)


def _tables_of_round(ctx: ProbeContext) -> dict[str, np.ndarray]:
    """The tables an honest prover starts round ``ctx.round`` with, folded once per context."""
    k = ctx.round
    if k not in ctx.folded:
        ctx.folded[k] = _tables_after(ctx, ctx.challenges[: k - 1], ctx.start.order)
    return ctx.folded[k]


# ----- the probes ---------------------------------------------------------------------------
def probe_variable_order(ctx: ProbeContext) -> ProbeFinding | None:
    """Rounds 1..k-1 bound in the declared order, rounds k.. at the other end of the table."""
    if ctx.check != "honest-poly" or ctx.start.num_vars < 2:
        return None  # a final value at the other order's point is the reversed-point probe
    k = ctx.round
    matched = _switched_rounds_matched(ctx, _tables_of_round(ctx), k)
    return None if matched is None else _variable_order_finding(ctx, k, matched)


def probe_earlier_order_switch(ctx: ProbeContext) -> ProbeFinding | None:
    """The switch of :func:`probe_variable_order` at a round s < k whose switched
    rounds s..k-1 happen to equal the declared order's (tables with a symmetry
    between the two variables). Tries s = 1..k-1, folding the declared prefix
    once: at most one more pass over the tables, so :func:`run_probes` runs it
    only when no other probe explains the round."""
    if ctx.check != "honest-poly" or ctx.start.num_vars < 2:
        return None
    tables = _tables_after(ctx, (), ctx.start.order)
    for switch in range(1, ctx.round):
        matched = _switched_rounds_matched(ctx, tables, switch)
        if matched is not None:
            return _variable_order_finding(ctx, switch, matched)
        tables = fold(ctx.field, tables, ctx.challenges[switch - 1], ctx.start.order)
    return None


def _variable_order_finding(ctx: ProbeContext, switch: int, matched: int) -> ProbeFinding:
    k = ctx.round
    other = _other_order(ctx.start.order)
    since = "" if switch == 1 else f" from round {switch} on"
    hidden = "" if switch == k else (
        f"; {_span(switch, k - 1)} of the switched prover happen to equal the declared order's, so the switch "
        f"first shows in round {k}")
    return ProbeFinding(
        "variable-order",
        f"{_span(switch, switch + matched - 1)} equal an honest prover binding the variables {other}{since} "
        f"while the instance declares {ctx.start.order}{hidden}",
        {"declared": ctx.start.order, "used": other, "from_round": switch, "first_wrong_round": k,
         "rounds_matched": matched},
    )


def _span(first: int, last: int) -> str:
    return f"round {first}" if first == last else f"rounds {first}..{last}"


def _other_order(order: str) -> str:
    return "high-first" if order == "low-first" else "low-first"


def _switched_rounds_matched(ctx: ProbeContext, tables: Mapping[str, np.ndarray], switch: int) -> int | None:
    """``tables`` folded by rounds 1..switch-1 in the declared order: the number of sent
    rounds from ``switch`` on that equal honest rounds bound in the other order (reaching
    past the first wrong round), or None at the first mismatch. O(n d / 2^(switch-1))."""
    if switch > len(ctx.sent_rounds) or len(next(iter(tables.values()))) < 2:
        return None
    runs = honest_rounds(ctx.field, tables, ctx.expr, ctx.challenges[switch - 1:], _other_order(ctx.start.order),
                         ctx.start.degree + 1)
    checked = 0
    for run in runs:
        if not isinstance(run, HonestRound) or switch + checked > len(ctx.sent_rounds):
            break
        if not _round_is(ctx, switch + checked, run.evals):
            return None
        checked += 1
    return checked if switch + checked > ctx.round else None


def probe_reversed_point(ctx: ProbeContext) -> ProbeFinding | None:
    if ctx.check != "final" or ctx.start.num_vars < 2:
        return None
    f = ctx.field
    point = point_from_challenges(ctx.challenges, ctx.start.order)
    folded = _tables_after(ctx, tuple(reversed(point)), "low-first")
    env = {n: _scalar(f, a) for n, a in folded.items()}
    value = ctx.expr.evaluate_scalar(f, env)
    if not _same(ctx, (value,)):
        return None
    return ProbeFinding(
        "reversed-point",
        "the final value equals the combine at the challenge point taken in reverse order "
        f"(x_1 = r_{len(ctx.challenges)} ... instead of the {ctx.start.order} point)",
        {"value_at_reversed_point": f.fmt(value), "honest": f.fmt(ctx.honest[0])},
    )


def probe_challenge_shift(ctx: ProbeContext) -> ProbeFinding | None:
    if ctx.check != "honest-poly" or ctx.round < 2:
        return None
    f = ctx.field
    k = ctx.round
    order = ctx.start.order
    before = _tables_after(ctx, ctx.challenges[: k - 2], order)
    found: list[ProbeFinding] = []
    for shift, used in ((+1, k), (-1, k - 2)):
        if not 1 <= used <= len(ctx.challenges):
            continue
        tables = fold(f, before, ctx.challenges[used - 1], order)
        evals = honest_round(f, tables, ctx.expr, ctx.start.degree + 1, order)
        if _round_is(ctx, k, evals):
            found.append(ProbeFinding(
                "challenge-shift",
                f"round {k} equals an honest round whose tables were folded with r_{used} instead of r_{k - 1} "
                f"(challenge one round {'ahead' if shift > 0 else 'behind'})",
                {"round": k, "expected_challenge": f"r_{k - 1}", "used_challenge": f"r_{used}", "shift": shift},
            ))
    return found[0] if found else None


def probe_montgomery(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = _honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    for bits in MONTGOMERY_RADIX_BITS:
        radix = pow(2, bits, f.p)
        if radix == 1:
            continue
        scaled = tuple(f.mul(f.lift(v), radix) for v in honest)
        if _same(ctx, scaled):
            return ProbeFinding(
                "montgomery",
                f"{_where(ctx)} equals the honest value(s) times R = 2^{bits} mod p: Montgomery form leaked "
                "into the transcript (a missing conversion out of Montgomery form)",
                {"radix": f"2^{bits}", "R_mod_p": str(radix), "honest": _fmt_all(f, honest)},
            )
    return None


def probe_product_of_sums(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    if ctx.expr.degree() < 2 or ctx.check not in ("claim", "honest-poly"):
        return None
    names = ctx.expr.names()
    if ctx.check == "claim":
        sums = table_round_sums(f, ctx.tables, names, 2, ctx.start.order) if ctx.start.num_vars else None
        env = {n: f.add(s[0], s[1]) for n, s in sums.items()} if sums else {n: _scalar(f, ctx.tables[n]) for n in names}
        value = ctx.expr.evaluate_scalar(f, env)
        if not _same(ctx, (value,)):
            return None
        return ProbeFinding(
            "product-of-sums", "the claimed sum equals the combine applied to each table's own sum "
            "(sum f * sum g instead of sum f*g)", {"value": f.fmt(value)})
    k = ctx.round
    tables = _tables_of_round(ctx)
    points = ctx.start.degree + 1
    sums = table_round_sums(f, tables, names, points, ctx.start.order)
    evals = tuple(ctx.expr.evaluate_scalar(f, {n: s[t] for n, s in sums.items()}) for t in range(points))
    if not _round_is(ctx, k, evals):
        return None
    return ProbeFinding(
        "product-of-sums", f"round {k} equals g(t) = combine(sum of each table at t): the product of the "
        "tables' sums instead of the sum of their products", {"evals": _fmt_all(f, evals)})


def probe_point_count(ctx: ProbeContext) -> ProbeFinding | None:
    if ctx.check not in ("honest-poly", "degree"):
        return None
    f = ctx.field
    honest = list(ctx.honest)
    d = len(honest) - 1
    extended = [*honest, lagrange_at(f, honest, f.embed(d + 1))]
    candidates: list[tuple[str, list[Element], dict[str, Any]]] = [
        ("one evaluation point too many (degree bound one too high)", extended, {"kind": "extra", "sent_points": d + 2}),
        ("the last evaluation point dropped (degree bound one too low)", honest[:-1], {"kind": "dropped", "point": d}),
    ]
    for j in range(d):
        candidates.append((f"evaluation point {j} dropped", honest[:j] + honest[j + 1:], {"kind": "dropped", "point": j}))
    for j in range(d + 1):
        dup = honest[: j + 1] + honest[j:]
        candidates.append((f"evaluation point {j} duplicated", dup, {"kind": "duplicated", "point": j}))
        candidates.append((f"evaluation point {j} duplicated, the last point lost", dup[: d + 1],
                           {"kind": "duplicated-shifted", "point": j}))
    for text, evals, evidence in candidates:
        if len(evals) >= 1 and _same(ctx, _in_form(ctx, evals)):
            return ProbeFinding("point-count", f"round {ctx.round} is the honest polynomial with {text}",
                                {**evidence, "honest_points": d + 1, "sent_values": len(ctx.sent)})
    return None


def probe_negated(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = _honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    negated = tuple(f.neg(f.lift(v)) for v in honest)
    if _same(ctx, negated):
        what = "every value" if len(honest) > 1 else "the value"
        return ProbeFinding("negated", f"{_where(ctx)}: {what} is the honest one negated", {"positions": "all"})
    for j in range(len(honest)):
        one = tuple(negated[i] if i == j else f.lift(honest[i]) for i in range(len(honest)))
        if _same(ctx, one):
            return ProbeFinding("negated", f"{_where(ctx)}: value {j} as sent is the honest one negated",
                                {"positions": [j]})
    return None


def probe_not_reduced(ctx: ProbeContext) -> ProbeFinding | None:
    f = ctx.field
    honest = _honest_values(ctx)
    if len(honest) != len(ctx.sent):
        return None
    for w in WORD_BITS:
        if f.p <= 1 << (w - 1) or f.p >= 1 << w:
            continue
        wrapped: list[int] = []
        ok = True
        for i, (h, s) in enumerate(zip(honest, ctx.sent)):
            hc, sc = _coeffs(f, h), _coeffs(f, s)
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
                f"{_where(ctx)}: value(s) {wrapped} equal honest + p wrapped in a {w}-bit word "
                "(a sum left unreduced before it overflowed)",
                {"word_bits": w, "positions": wrapped},
            )
    return None


def _coeffs(field: Field, e: Element) -> tuple[int, ...]:
    lifted = field.lift(e)
    return (lifted,) if isinstance(lifted, int) else tuple(lifted)


def _scalar(field: Field, arr: np.ndarray) -> Element:
    if arr.ndim == 1:
        return field.lift(int(arr[0]))
    return tuple(int(c) for c in arr[0])


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
