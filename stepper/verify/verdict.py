"""What a verifier replay returns: the final result of each instance, the proof-level
:class:`Report`, and its JSON form (transcripts/EVENTS.md, check contract). What a passing
check without kept detail never makes lives elsewhere, so that such a check never loads it:
the results of single rounds and batched claims and the first failure in
:mod:`stepper.verify.results`, the results of glue checks and squeezes in
:mod:`stepper.verify.glue_results`, findings in :mod:`stepper.verify.findings`.

Every record is frozen and holds canonical field elements; JSON turns each
element into a decimal string (``"42"``; an extension element as its
coefficients, constant first: ``"[1, 0, 0, 7]"``). A rejected proof is an
ordinary :class:`Report` with verdict ``reject``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal, Union

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Opening
    from stepper.verify.findings import Finding
    from stepper.verify.glue_results import GlueResult, SqueezeResult
    from stepper.verify.results import BatchResult, Failure, RoundResult, Status, Value
    from stepper.verify.soundness import SoundnessSummary

    Result = Union[RoundResult, "FinalResult", BatchResult, SqueezeResult]  # what Replay.feed returns

__all__ = [
    "Verdict",
    "FinalResult",
    "InstanceSummary",
    "Report",
    "PASSING_REPLAY_WARNING",
]

Verdict = Literal["accept", "reject", "incomplete"]

PASSING_REPLAY_WARNING = (
    "A passing replay is evidence about this one run only: it proves nothing about "
    "the soundness of the protocol's design, its Fiat-Shamir transform, or other inputs."
)


@dataclass(frozen=True, slots=True)
class FinalResult:
    """The final check of one instance: ``reduced`` is c_mu, ``value`` the final value sent."""

    instance: int
    instance_name: str
    round: int
    reduced: Element | None
    value: Element
    status: Status
    check: str | None = None
    expected: Value = None
    found: Value = None
    explanation: str = ""


@dataclass(frozen=True, slots=True)
class InstanceSummary:
    """One instance after replay; ``rounds`` is empty unless the replay kept round detail."""

    index: int
    name: str
    num_vars: int
    degree: int
    order: str
    form: str
    claim: Element
    status: Literal["pass", "fail", "incomplete"]
    rounds_seen: int
    rounds_passed: int
    failure: Failure | None
    final: FinalResult | None
    batch: BatchResult | None
    rounds: tuple[RoundResult, ...] = ()
    link: GlueResult | None = None
    evaluation: GlueResult | None = None
    openings: tuple[Opening, ...] = ()

    @property
    def has_glue(self) -> bool:
        return self.link is not None or self.evaluation is not None or bool(self.openings)


@dataclass(frozen=True, slots=True)
class Report:
    """The replay of a whole proof. ``instances`` holds the kept summaries (all of
    them unless the replay was told to keep fewer); ``counts`` counts every instance
    by status; ``challenges`` says how challenges were checked."""

    field: Field | None
    verdict: Verdict
    first_failure: Failure | None
    instances: tuple[InstanceSummary, ...]
    counts: dict[str, int]
    soundness: SoundnessSummary
    findings: tuple[Finding, ...]
    challenges: str
    completeness: str
    warning: str = PASSING_REPLAY_WARNING

    @property
    def instance_count(self) -> int:
        return sum(self.counts.values())

    def fmt(self, value: Value) -> str | None:
        """Decimal text of an element or count (None stays None)."""
        if value is None:
            return None
        if self.field is None:
            return str(value)
        return self.field.fmt(value)

    def to_json(self) -> dict[str, Any]:
        """The check-contract object of transcripts/EVENTS.md, plus stepper's extra keys."""
        f = self.fmt
        glue = any(s.has_glue for s in self.instances)  # files without glue keep their JSON byte for byte
        return {
            "verdict": self.verdict,
            "first_failure": None if self.first_failure is None else _failure_json(self.first_failure, f),
            "instances": [_instance_json(s, f, glue) for s in self.instances],
            "field": None if self.field is None else self.field.describe(),
            "completeness": self.completeness,
            "challenges": self.challenges,
            "counts": dict(self.counts),
            "soundness": self.soundness.to_json(),
            "findings": [x.to_json() for x in self.findings],
            "warning": self.warning,
        }


COUNT_CHECKS = ("degree", "shape")  # checks whose expected/found are counts, not field elements


def _compared(check: str | None, value: Value, f: Any) -> str | None:
    if value is None:
        return None
    return str(value) if check in COUNT_CHECKS else f(value)


def _failure_json(x: Failure, f: Any) -> dict[str, Any]:
    return {"instance": x.instance, "instance_name": x.instance_name, "round": x.round, "check": x.check,
            "expected": _compared(x.check, x.expected, f), "found": _compared(x.check, x.found, f),
            "explanation": x.explanation}


def _round_json(r: RoundResult, f: Any) -> dict[str, Any]:
    return {
        "round": r.round, "status": r.status, "check": r.check,
        "claim_in": f(r.claim_in), "values": [f(v) for v in r.values], "evals": [f(v) for v in r.evals],
        "recovered": r.recovered, "recovered_value": f(r.recovered_value),
        "g0": f(r.g0), "g1": f(r.g1), "sum01": f(r.sum01),
        "degree_seen": r.degree_seen, "degree_bound": r.degree_bound,
        "challenge": f(r.challenge), "rederived": f(r.rederived), "claim_out": f(r.claim_out),
        "expected": _compared(r.check, r.expected, f), "found": _compared(r.check, r.found, f),
        "explanation": r.explanation,
        "after_failure": r.after_failure,
    }


def _glue_json(g: GlueResult | None, f: Any) -> dict[str, Any] | None:
    if g is None:
        return None
    return {"round": g.round, "check": g.check, "status": g.status, "expr": g.expr, "expected": f(g.expected),
            "found": f(g.found), "explanation": g.explanation}


def _instance_json(s: InstanceSummary, f: Any, glue: bool = False) -> dict[str, Any]:
    out: dict[str, Any] = {
        "index": s.index, "name": s.name, "num_vars": s.num_vars, "degree": s.degree, "order": s.order,
        "form": s.form, "claim": f(s.claim), "status": s.status, "rounds_seen": s.rounds_seen,
        "rounds_passed": s.rounds_passed,
        "failure": None if s.failure is None else _failure_json(s.failure, f),
        "rounds": [_round_json(r, f) for r in s.rounds],
        "final": None,
        "batch": None,
    }
    if s.final is not None:
        out["final"] = {"round": s.final.round, "status": s.final.status, "reduced": f(s.final.reduced),
                        "value": f(s.final.value), "explanation": s.final.explanation}
    if s.batch is not None:
        b = s.batch
        out["batch"] = {"status": b.status, "coefficient": f(b.coefficient), "terms": [f(t) for t in b.terms],
                        "sources": list(b.sources), "combined": f(b.combined), "claim": f(b.claim),
                        "explanation": b.explanation}
    if glue:
        out["openings"] = [{"name": o.name, "table": o.table, "value": f(o.value)} for o in s.openings]
        out["link"] = _glue_json(s.link, f)
        out["evaluation"] = _glue_json(s.evaluation, f)
    return out
