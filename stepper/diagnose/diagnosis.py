"""What the root cause found, as values and as words: :class:`RootCause` and :class:`Diagnosis`.

:func:`stepper.diagnose.rootcause.diagnose` builds a :class:`Diagnosis`; this module says it:
the ``root_cause`` object of ``check --json`` (transcripts/EVENTS.md), the probe findings,
and the sentences of the text output (where the prover first went wrong, and why the
verifier noticed only where it did). Agreement with the witness is evidence about this one
run, never a soundness proof, and the explanation says so. Pure: values in, values out.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from stepper.diagnose.probes import ProbeFinding

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.verify.results import Failure

__all__ = ["RootCause", "Diagnosis", "UncheckedOpening", "COMPRESSED_FORMS", "SOUNDNESS_CAVEAT"]

COMPRESSED_FORMS = ("evals-no-1", "coeffs-no-linear")
SOUNDNESS_CAVEAT = (
    "Agreement with the witness is evidence about this one run: it does not show that the protocol, "
    "its Fiat-Shamir transform or the verifier is sound."
)


@dataclass(frozen=True, slots=True)
class RootCause:
    """The first thing the prover sent that an honest prover with this witness would not.
    ``honest`` / ``sent`` are full evaluations g(0..) of the round (or the claim or
    final value alone); ``expected`` / ``found`` are at ``point`` (counts for ``degree``)."""

    instance: int
    instance_name: str
    round: int
    check: str
    point: int | None
    expected: Element
    found: Element
    honest: tuple[Element, ...]
    sent: tuple[Element, ...]
    form: str
    name: str | None = None  # the opening's name, for check ``opening``


@dataclass(frozen=True, slots=True)
class UncheckedOpening:
    """An opening the witness could not be compared with: it has no table ``table`` with the
    opened instance's 2^num_vars entries."""

    instance: int
    instance_name: str
    name: str
    table: str

    def to_json(self) -> dict[str, Any]:
        return {"instance": self.instance, "instance_name": self.instance_name, "name": self.name,
                "table": self.table}


@dataclass(frozen=True, slots=True)
class Diagnosis:
    """The outcome of :func:`diagnose`: the root cause (None when the witness agrees
    with everything checked), the probe findings, where the verifier noticed, and
    which instances had no witness."""

    field: Field
    root_cause: RootCause | None
    findings: tuple[ProbeFinding, ...]
    first_failure: Failure | None
    checked: tuple[str, ...]
    unchecked: tuple[str, ...]
    rounds_checked: int
    by_position: tuple[tuple[str, str], ...] = ()  # (witness name, transcript name) matched by position
    probes_skipped: str = ""  # why the bug-class probes did not run (tables too big to read whole), or ""
    openings_unchecked: tuple[UncheckedOpening, ...] = ()  # openings of compared instances without a table

    def root_cause_json(self) -> dict[str, Any] | None:
        """The transcripts/EVENTS.md ``root_cause`` object, plus where the verifier noticed."""
        cause = self.root_cause
        if cause is None:
            return None
        fmt = self._fmt
        noticed = self.first_failure
        out: dict[str, Any] = {
            "instance": cause.instance,
            "instance_name": cause.instance_name,
            "round": cause.round,
            "check": cause.check,
            "point": cause.point,
            "expected": fmt(cause.expected, cause.check),
            "found": fmt(cause.found, cause.check),
            "honest": [self.field.fmt(self.field.lift(v)) for v in cause.honest],
            "sent": [self.field.fmt(self.field.lift(v)) for v in cause.sent],
            "form": cause.form,
            **({"name": cause.name} if cause.name is not None else {}),
            "noticed": None if noticed is None else {
                "instance": noticed.instance, "instance_name": noticed.instance_name,
                "round": noticed.round, "check": noticed.check},
            "probes": [f.probe for f in self.findings],
            **({"probes_skipped": self.probes_skipped} if self.probes_skipped else {}),
            "explanation": self.explain()[0],
        }
        return out

    def findings_json(self) -> list[dict[str, Any]]:
        return [f.to_json() for f in self.findings]

    def explain(self) -> list[str]:
        """Human sentences: where the prover erred, where the verifier noticed, why the
        gap, what the probes found, and the soundness caveat."""
        cause = self.root_cause
        lines: list[str] = []
        if cause is None:
            lines.append(
                f"The witness agrees with everything sent in {len(self.checked)} instance(s) "
                f"({self.rounds_checked} round(s)): claims, round polynomials and final values are the honest ones.")
            if self.first_failure is not None:
                ff = self.first_failure
                lines.append(
                    f"The verifier's rejection (instance {ff.instance} '{ff.instance_name}', round {ff.round}, "
                    f"check {ff.check}) is therefore not a wrong prover message for these tables: look at the "
                    "challenges, the batching, the declared degree or form, or the verifier's own expectations.")
        else:
            lines.append(self._cause_sentence(cause))
            lines.extend(self._gap_sentences(cause))
            if self.findings:
                lines.extend(f"Probe {f.probe}: {f.message}." for f in self.findings)
            elif self.probes_skipped:
                lines.append(f"The bug-class probes were not run: {self.probes_skipped}. The root cause above "
                             "does not depend on them.")
            else:
                lines.append("No known bug class (probes: variable order, reversed point, challenge shift, "
                             "Montgomery form, product of sums, point count, negation, reduction) reproduces "
                             "the sent values exactly.")
        for wname, tname in self.by_position:
            lines.append(f"Witness instance '{wname}' names no transcript instance; it was matched by position "
                         f"to '{tname}': make sure that is the instance you meant.")
        if self.openings_unchecked:
            shown = ", ".join(f"'{o.name}' (table '{o.table}') of instance '{o.instance_name}'"
                              for o in self.openings_unchecked[:5])
            more = f" and {len(self.openings_unchecked) - 5} more" if len(self.openings_unchecked) > 5 else ""
            lines.append(f"Opening(s) {shown}{more} not compared: the witness has no table of that name with "
                         "the instance's 2^num_vars entries.")
        if self.unchecked:
            names = ", ".join(f"'{n}'" for n in self.unchecked[:5])
            more = f" and {len(self.unchecked) - 5} more" if len(self.unchecked) > 5 else ""
            lines.append(f"No witness for instance(s) {names}{more}: not checked.")
        if cause is None:
            lines.append(SOUNDNESS_CAVEAT)
        return lines

    # ----- sentences ------------------------------------------------------------------------
    def _fmt(self, value: Element, check: str) -> str:
        if check == "degree":
            return str(value)
        return self.field.fmt(self.field.lift(value))

    def _cause_sentence(self, cause: RootCause) -> str:
        where = f"instance {cause.instance} '{cause.instance_name}'"
        exp, found = self._fmt(cause.expected, cause.check), self._fmt(cause.found, cause.check)
        if cause.check == "claim":
            return f"The prover first went wrong in {where} at the claimed sum (round 0): the tables sum to {exp}, " \
                   f"the claim is {found}."
        if cause.check == "opening":
            return f"The prover first went wrong in {where} at the opening {cause.name!r} after round " \
                   f"{cause.round}: it sent {found}, but its table's multilinear extension at the instance's " \
                   f"challenge point is {exp}."
        if cause.check == "final":
            return f"The prover first went wrong in {where} at the final value: every round is honest, but the " \
                   f"final value is {found} where the tables give {exp} at the challenge point."
        if cause.check == "degree":
            return f"The prover first went wrong in {where}, round {cause.round}: the honest polynomial, but sent " \
                   f"with {found} values where the degree allows {exp}."
        head = f"The prover first went wrong in {where}, round {cause.round}: its round polynomial differs from " \
               f"the honest one at point {cause.point}"
        if cause.point is not None and cause.point >= len(cause.sent):
            return f"{head} (honest g({cause.point}) = {exp}; the sent polynomial, given by {len(cause.sent)} " \
                   f"evaluation(s), extends to {found} there)."
        return f"{head} (honest g({cause.point}) = {exp}, sent {found})."

    def _gap_sentences(self, cause: RootCause) -> list[str]:
        ff = self.first_failure
        if ff is None:
            return ["The verifier accepted or did not reach a check that could notice: the lie went unseen "
                    "by the replay."]
        where = f"instance {ff.instance}, round {ff.round} (check {ff.check})"
        if (ff.instance, ff.round) == (cause.instance, cause.round) or (
                cause.check == "claim" and ff.instance == cause.instance and ff.round == 1 and ff.check == "sum"):
            return [f"The verifier noticed at once: {where}."]
        if ff.instance < cause.instance or (ff.instance == cause.instance and ff.round < cause.round):
            return [f"The verifier failed earlier, at {where}, for a reason the witness does not show "
                    "(an earlier message agrees with the honest prover)."]
        if ff.instance != cause.instance:
            return [f"The verifier noticed only in a later instance: {where}."]
        gap = ff.round - cause.round
        if cause.check == "claim" and cause.form in COMPRESSED_FORMS:
            why = (f"in the compressed form {cause.form} the left-out value is recovered from the claim, so every "
                   "sum check holds by construction and only the final check can expose a wrong claim")
        elif cause.check == "claim":
            why = "the first round was made to sum to the wrong claim, which moved the error into later rounds"
        elif cause.check == "final":
            why = "the final value is only checked at the end"
        elif cause.check == "opening":
            why = "an opening is only used where an expression names it"
        elif ff.check == "final" and cause.form in COMPRESSED_FORMS:
            why = (f"in the compressed form {cause.form} each round's left-out value is recovered from the claim "
                   "carried into it, so every sum check holds by construction and only the final check could "
                   "expose the wrong round")
        elif ff.check == "final":
            why = (f"every round from {cause.round} on summed to the claim carried into it (the prover stayed "
                   "consistent with its own tables as it had folded them), so only the final check against the "
                   "tables' value at the challenge point could expose it")
        else:
            why = (f"the wrong round {cause.round} polynomial still satisfied g(0) + g(1) = claim, so only its "
                   f"value at the challenge, carried into the next round's claim, could expose it")
        return [f"The verifier noticed only at {where}, {gap} round(s) later: {why}."]
