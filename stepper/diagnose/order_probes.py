"""Bug-class probes of the binding and challenge order (no I/O).

* ``variable-order``: from round s <= the first wrong round k on, the prover binds the
  variable at the other end of the table (high-first instead of low-first or back);
  :func:`probe_earlier_order_switch` searches s < k when nothing else fits;
* ``reversed-point``: the final value is taken at the challenge point reversed;
* ``challenge-shift``: round k's tables folded with r_k (one ahead) or r_(k-2) (one
  behind) instead of r_(k-1).

Each returns a :class:`~stepper.diagnose.probe_evidence.ProbeFinding` only when the faulty
prover's values equal what was sent, value for value; the registry and the order
they run in are in :mod:`stepper.diagnose.probes`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Mapping

from stepper.diagnose.honest import HonestRound, fold, honest_round, honest_rounds
from stepper.field.poly import point_from_challenges
from stepper.diagnose.probe_evidence import (
    ProbeContext, ProbeFinding, first_entry, round_is, same_as_sent, tables_after, tables_of_round,
)

if TYPE_CHECKING:
    import numpy as np

__all__ = ["probe_variable_order", "probe_earlier_order_switch", "probe_reversed_point", "probe_challenge_shift"]


def probe_variable_order(ctx: ProbeContext) -> ProbeFinding | None:
    """Rounds 1..k-1 bound in the declared order, rounds k.. at the other end of the table."""
    if ctx.check != "honest-poly" or ctx.start.num_vars < 2:
        return None  # a final value at the other order's point is the reversed-point probe
    k = ctx.round
    matched = _switched_rounds_matched(ctx, tables_of_round(ctx), k)
    return None if matched is None else _variable_order_finding(ctx, k, matched)


def probe_earlier_order_switch(ctx: ProbeContext) -> ProbeFinding | None:
    """The switch of :func:`probe_variable_order` at a round s < k whose switched
    rounds s..k-1 happen to equal the declared order's (tables with a symmetry
    between the two variables). Tries s = 1..k-1, folding the declared prefix
    once: at most one more pass over the tables, so :func:`run_probes` runs it
    only when no other probe explains the round."""
    if ctx.check != "honest-poly" or ctx.start.num_vars < 2:
        return None
    tables = tables_after(ctx, (), ctx.start.order)
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
        if not round_is(ctx, switch + checked, run.evals):
            return None
        checked += 1
    return checked if switch + checked > ctx.round else None


def probe_reversed_point(ctx: ProbeContext) -> ProbeFinding | None:
    if ctx.check != "final" or ctx.start.num_vars < 2:
        return None
    f = ctx.field
    point = point_from_challenges(ctx.challenges, ctx.start.order)
    folded = tables_after(ctx, tuple(reversed(point)), "low-first")
    env = {n: first_entry(f, a) for n, a in folded.items()}
    value = ctx.expr.evaluate_scalar(f, env)
    if not same_as_sent(ctx, (value,)):
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
    before = tables_after(ctx, ctx.challenges[: k - 2], order)
    found: list[ProbeFinding] = []
    for shift, used in ((+1, k), (-1, k - 2)):
        if not 1 <= used <= len(ctx.challenges):
            continue
        tables = fold(f, before, ctx.challenges[used - 1], order)
        evals = honest_round(f, tables, ctx.expr, ctx.start.degree + 1, order)
        if round_is(ctx, k, evals):
            found.append(ProbeFinding(
                "challenge-shift",
                f"round {k} equals an honest round whose tables were folded with r_{used} instead of r_{k - 1} "
                f"(challenge one round {'ahead' if shift > 0 else 'behind'})",
                {"round": k, "expected_challenge": f"r_{k - 1}", "used_challenge": f"r_{used}", "shift": shift},
            ))
    return found[0] if found else None
