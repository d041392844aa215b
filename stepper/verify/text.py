"""One-sentence explanations of replay results (pure text, no I/O).

Sentences name the round and the quantities compared, e.g. "round 3:
g(0)+g(1) = 42, but round 2 carried the claim g2(r2) = 37". Compressed forms
say that their local sum check holds by construction.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.field.poly import RoundPoly
    from stepper.transcript.model import InstanceStart

__all__ = ["round_text", "final_text", "batch_text", "carried_claim"]


def carried_claim(k: int) -> str:
    """How the claim entering round k is named: the instance claim or g_(k-1)(r_(k-1))."""
    return "the instance's claimed sum" if k == 1 else f"round {k - 1} carried the claim g{k - 1}(r{k - 1})"


def round_text(field: Field, start: InstanceStart, k: int, claim: Element, poly: RoundPoly, check: str | None,
               expected: object, found: object, challenge: Element | None, rederived: Element | None,
               claim_out: Element | None, challenges: str) -> str:
    """``challenges`` names what re-derives them, e.g. "the built-in schedule stepper-sha256/1"."""
    f = field.fmt
    if check == "shape":
        return f"round {k}: no values arrived; expected at least one in form {start.form}"
    if check == "degree":
        return (f"round {k}: {found} evaluations arrived (degree {int(found) - 1}), but the degree bound "  # type: ignore[call-overload]
                f"{start.degree} allows at most {expected}")
    if check == "sum":
        return f"round {k}: g(0)+g(1) = {f(found)}, but {carried_claim(k)} = {f(claim)}"  # type: ignore[arg-type]
    if check == "challenge":
        return (f"round {k}: the recorded challenge r{k} = {f(challenge)}, but {challenges} "  # type: ignore[arg-type]
                f"re-derives {f(rederived)}")  # type: ignore[arg-type]
    if challenge is None:
        return f"round {k}: g(0)+g(1) matches the carried claim; no challenge arrived, so the round stays open"
    if poly.recovered is not None:
        return (f"round {k}: {poly.recovered} = {f(poly.recovered_value)} was recovered from the claim, "  # type: ignore[arg-type]
                f"so the local sum check holds by construction (a wrong claim can only surface in a later "
                f"round or the final check); g{k}(r{k}) = {f(claim_out)} is carried on")  # type: ignore[arg-type]
    return f"round {k}: g(0)+g(1) = {f(claim)} matches the carried claim; g{k}(r{k}) = {f(claim_out)} is carried on"  # type: ignore[arg-type]


def final_text(field: Field, start: InstanceStart, reduced: Element | None, value: Element, ok: bool) -> str:
    f = field.fmt
    mu = start.num_vars
    if reduced is None:
        return f"the final value {f(value)} arrived before all {mu} rounds were resolved, so it cannot be checked"
    name = "the instance's claim" if mu == 0 else f"the reduced claim g{mu}(r{mu})"
    if ok:
        return f"{name} = {f(reduced)} equals the final value (the oracle at the challenge point)"
    return f"{name} = {f(reduced)}, but the final value (the oracle at the challenge point) is {f(value)}"


def batch_text(field: Field, start: InstanceStart, combined: Element, ok: bool) -> str:
    f = field.fmt
    if ok:
        return f"the claim {f(start.claim)} equals the batch combination sum coefficient^i * terms[i]"
    return (f"the claim {f(start.claim)} of instance '{start.name}' is not the batch combination "
            f"sum coefficient^i * terms[i] = {f(combined)}")
