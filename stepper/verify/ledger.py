"""Instance bookkeeping of the verifier replay (no I/O).

:class:`LiveInstance` is the mutable state of the instance being replayed (its
claim, the round awaiting its challenge, rounds seen and passed, its first
failure); :class:`InstanceLedger` closes instances into
:class:`~stepper.verify.verdict.InstanceSummary` values and keeps the counts, the
first failure in stream order and the soundness inputs. Invariants: counts
cover every closed instance; at most ``keep_instances`` summaries are kept,
plus failed ones while fewer than ``keep_instances`` failures are kept; the
soundness bounds are those of the kept instances, the rounds-times-degree total
that of every instance started.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from stepper.verify.soundness import InstanceBound, SoundnessSummary
from stepper.verify.verdict import InstanceSummary

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import BatchDecl, InstanceStart, RoundMsg
    from stepper.verify.results import BatchResult, Failure, RoundResult
    from stepper.verify.verdict import FinalResult

__all__ = ["LiveInstance", "InstanceLedger", "combine_batch"]


class LiveInstance:
    """Mutable replay state of the current instance."""

    __slots__ = ("start", "claim", "pending", "seen", "passed", "failure", "final", "batch", "rounds", "challenges",
                 "eqf", "link", "evaluation", "openings", "awaiting")

    def __init__(self, start: InstanceStart, keep: bool) -> None:
        self.start = start
        self.claim: Element = start.claim
        # (round, evals, recovered, recovered_value, check, expected, found) of the round awaiting its challenge
        self.pending: tuple[RoundMsg, tuple[Element, ...], str | None, Element | None, str | None, object,
                            object] | None = None
        self.seen = 0
        self.passed = 0
        self.failure: Failure | None = None
        self.final: FinalResult | None = None
        self.batch: BatchResult | None = None
        self.rounds: list[RoundResult] | None = [] if keep else None
        self.challenges: list[Element] = []  # r_1, r_2, ... in round order (the instance's point)
        self.eqf: Any = None  # stepper.verify.glue.EqFactor of an eq-factored instance
        self.link: Any = None  # GlueResult of the `link` check
        self.evaluation: Any = None  # GlueResult of the `evaluation` check
        self.openings: list[Any] = []  # Opening records that follow this instance
        self.awaiting = False  # the evaluation waits for a value not sent yet


def combine_batch(field: Field, batch: BatchDecl) -> Element:
    """sum_i coefficient^i * terms[i], the claim a batch declaration promises."""
    combined = field.zero
    power = field.one
    for term in batch.terms:
        combined = field.add(combined, field.mul(power, field.lift(term)))
        power = field.mul(power, batch.coefficient)
    return combined


class InstanceLedger:
    """Counts, kept summaries, the first failure and the soundness inputs of a replay."""

    __slots__ = ("keep_instances", "summaries", "counts", "first", "_kept_failures", "_bounds", "_rounds_degree",
                 "_instances_seen")

    def __init__(self, keep_instances: int | None) -> None:
        self.keep_instances = keep_instances
        self.summaries: list[InstanceSummary] = []
        self.counts = {"pass": 0, "fail": 0, "incomplete": 0}
        self.first: Failure | None = None
        self._kept_failures = 0
        self._bounds: list[InstanceBound] = []  # of the kept instances only
        self._rounds_degree = 0
        self._instances_seen = 0

    def opened(self, start: InstanceStart) -> None:
        """Count a started instance in the soundness total."""
        self._instances_seen += 1
        self._rounds_degree += start.num_vars * start.degree

    def keeps_passing(self) -> bool:
        """Whether the next instance to close would keep its summary if it passed."""
        return self.keep_instances is None or len(self.summaries) < self.keep_instances

    def passed_unkept(self, start: InstanceStart) -> None:
        """Open and close a passing instance whose summary is not kept (``keeps_passing`` is False)."""
        self._instances_seen += 1  # what opened() counts, inline: a sweep settles 10^4 instances and more
        self._rounds_degree += start.num_vars * start.degree
        self.counts["pass"] += 1

    def passed_unkept_many(self, count: int, rounds_degree: int) -> None:
        """:meth:`passed_unkept` of ``count`` instances whose num_vars times degree sum to ``rounds_degree``."""
        self._instances_seen += count
        self._rounds_degree += rounds_degree
        self.counts["pass"] += count

    def fail_first(self, failure: Failure) -> None:
        """Record a failure that belongs to no instance's summary (glue before the first instance)."""
        if self.first is None:
            self.first = failure

    def fail(self, live: LiveInstance, failure: Failure) -> None:
        """Record a failure: the instance's first, and the replay's first in stream order."""
        if live.failure is None:
            live.failure = failure
        if self.first is None:
            self.first = failure

    def close(self, live: LiveInstance, field: Field | None) -> None:
        """Count the instance by status and keep its summary when the caps allow."""
        start = live.start
        status = "fail" if live.failure else (
            "pass" if live.passed == start.num_vars and not live.awaiting else "incomplete")
        self.counts[status] += 1
        keep = self.keep_instances is None or len(self.summaries) < self.keep_instances
        if not keep and status == "fail" and self._kept_failures < (self.keep_instances or 0):
            keep = True
        if keep:
            self._bounds.append(InstanceBound(start.index, start.name, start.num_vars, start.degree,
                                              field.order if field is not None else 0))
            self._kept_failures += status == "fail"
            self.summaries.append(InstanceSummary(
                start.index, start.name, start.num_vars, start.degree, start.order, start.form, start.claim,
                status, live.seen, live.passed, live.failure, live.final, live.batch,  # type: ignore[arg-type]
                tuple(live.rounds or ()), live.link, live.evaluation, tuple(live.openings)))

    def verdict(self, completeness: str) -> str:
        """"reject" on any failure, else "incomplete" when the file or an instance is, else "accept"."""
        if self.first is not None:
            return "reject"
        if completeness != "complete" or self.counts["incomplete"]:
            return "incomplete"
        return "accept"

    def soundness(self, field: Field | None) -> SoundnessSummary:
        order = field.order if field is not None else 0
        return SoundnessSummary(order, self._rounds_degree, self._instances_seen, tuple(self._bounds))
