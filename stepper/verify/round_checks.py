"""The checks of one round of the verifier replay (no I/O).

:class:`RoundDesk` holds the replay's side of a round, from its message to its result,
for rounds k = 1..num_vars of an instance with carried claim c_(k-1):

* when the round arrives (:meth:`RoundDesk.open`): its values are decoded from the
  instance's form (an eq-factored round is rebuilt into g_k first), then ``shape`` (at
  least one value), ``degree`` (at most degree+1 evaluations, counted in full form) and
  ``sum`` (g_k(0) + g_k(1) == c_(k-1)); the outcome waits in ``LiveInstance.pending``;
* when its challenge arrives (:meth:`RoundDesk.resolve`): ``challenge`` (the recorded
  r_k against the re-derived one), then c_k = g_k(r_k) is carried, a failure goes to the
  ledger, and the instance's ``evaluation`` is checked after its last round.

The first failing check of a round is the one reported; a round that fails is still
carried, so later rounds are checked against the claim actually sent. With
``emit_passing`` off a passing round leaves no result record.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from stepper.errors import InputError, Where
from stepper.field.lagrange import evaluate_round
from stepper.field.poly import RoundPoly
from stepper.verify.text import round_text

if TYPE_CHECKING:
    from stepper.verify.results import RoundResult
    from stepper.verify.verdict import Result
    from stepper.field.field import Element, Field
    from stepper.transcript.model import ChallengeMsg, RoundMsg
    from stepper.verify.challenges import ChallengeSource
    from stepper.verify.glue import GlueDesk
    from stepper.verify.ledger import InstanceLedger, LiveInstance

__all__ = ["RoundDesk", "NOT_REDERIVED"]

NOT_REDERIVED = object()  # the challenge of a round the schedule has not re-derived yet


class RoundDesk:
    """The round checks of one replay, called by :class:`stepper.verify.replay.Replay`."""

    __slots__ = ("_source", "_glue", "_ledger", "_emit_passing", "_plugin")

    def __init__(self, source: ChallengeSource, glue: GlueDesk, ledger: InstanceLedger, *, emit_passing: bool,
                 plugin: bool) -> None:
        self._source = source
        self._glue = glue
        self._ledger = ledger
        self._emit_passing = emit_passing
        self._plugin = plugin  # a --challenges plug-in sees each challenge too

    def open(self, field: Field, live: LiveInstance, msg: RoundMsg) -> None:
        """Check a round as it arrives (shape, degree, sum) and keep it pending for its challenge."""
        start = live.start
        values = msg.values
        recovered = recovered_value = None
        if values and start.form == "evals" and field.degree == 1:
            evals = values  # the hot path: canonical ints, nothing to decode
        else:
            try:
                poly = RoundPoly.from_form(field, start.form, values, live.claim) if values else None
            except InputError:
                poly = None
            evals = poly.evals if poly is not None else ()
            if poly is not None:
                recovered, recovered_value = poly.recovered, poly.recovered_value
        if live.eqf is not None and evals:
            evals = live.eqf.expand(evals, msg.round)
        check: str | None = None
        expected: object = None
        found: object = None
        if not evals:
            check, expected, found = "shape", 1, 0
            evals = (field.zero,)
        elif len(evals) > start.degree + 1:
            check, expected, found = "degree", start.degree + 1, len(evals)
        elif field.degree == 1:
            total = (evals[0] + evals[1 if len(evals) > 1 else 0]) % field.p  # type: ignore[operator]
            if total != live.claim:
                check, expected, found = "sum", live.claim, total
        else:
            g0 = evals[0]
            total = field.add(g0, evals[1] if len(evals) > 1 else g0)
            if total != field.lift(live.claim):
                check, expected, found = "sum", live.claim, total
        live.pending = (msg, evals, recovered, recovered_value, check, expected, found)
        self._source.observe(msg)

    def evaluate_glue(self, field: Field, live: LiveInstance) -> None:
        """The instance's last round is carried: its ``evaluation`` check (see :mod:`stepper.verify.glue`)."""
        self._glue.evaluate(field, live, self._ledger)

    def resolve(self, field: Field, live: LiveInstance, msg: ChallengeMsg | None,
                known: object = NOT_REDERIVED) -> list[Result]:
        """Resolve the pending round with its challenge (``msg`` None: the round never got one;
        ``known``: the challenge the schedule already re-derived for it)."""
        assert live.pending is not None
        round_msg, evals, recovered, recovered_value, check, expected, found = live.pending
        live.pending = None
        k = round_msg.round
        start = live.start
        challenge = rederived = claim_out = None
        if msg is not None:
            challenge = msg.value
            rederived = self._source.rederive(start, k) if known is NOT_REDERIVED else known
            if check is None and rederived is not None and rederived != challenge:
                check, expected, found = "challenge", rederived, challenge
            try:
                claim_out = evaluate_round(field, evals, challenge)
            except InputError as err:
                raise InputError(err.message, Where(instance=start.name, round=k)) from None
            if self._plugin:
                self._source.observe(msg)
        after = live.failure is not None
        live.seen = k
        if challenge is not None:
            live.challenges.append(challenge)
            if live.eqf is not None:
                live.eqf.advance(k, challenge)
        if check is None and msg is not None:
            if not after:
                live.passed = k
            if not self._emit_passing:
                live.claim = claim_out  # type: ignore[assignment]
                if k == start.num_vars and start.final_expr is not None:
                    self._glue.evaluate(field, live, self._ledger)
                return []
        result = self._result(field, live, round_msg, evals, recovered, recovered_value, check, expected, found,
                              challenge, rederived, claim_out, after)  # type: ignore[arg-type]
        if check is not None:
            from stepper.verify.results import Failure  # imported with RoundResult by _result

            failure = Failure(start.index, start.name, k, check, expected, found,  # type: ignore[arg-type]
                              result.explanation)
            self._ledger.fail(live, failure)
        if claim_out is not None:
            live.claim = claim_out
        if live.rounds is not None:
            live.rounds.append(result)
        if claim_out is not None and k == start.num_vars and start.final_expr is not None:
            self._glue.evaluate(field, live, self._ledger)
        return [result]

    def _result(self, field: Field, live: LiveInstance, msg: RoundMsg, evals: tuple[Element, ...],
                recovered: str | None, recovered_value: Element | None, check: str | None, expected: object,
                found: object, challenge: Element | None, rederived: Element | None, claim_out: Element | None,
                after: bool) -> RoundResult:
        from stepper.verify.results import RoundResult  # a failed round, or every round with detail kept

        start, k = live.start, msg.round
        g0 = evals[0]
        g1 = evals[1] if len(evals) > 1 else evals[0]
        status = "fail" if check is not None else ("pass" if challenge is not None else "pending")
        poly = RoundPoly(tuple(evals), recovered, recovered_value)
        text = round_text(field, start, k, live.claim, poly, check, expected, found, challenge, rederived,
                          claim_out, self._source.deriver())
        return RoundResult(
            start.index, start.name, k, start.form, live.claim, msg.values, tuple(evals), recovered,
            recovered_value, g0, g1, field.add(g0, g1), len(evals) - 1, start.degree, challenge, rederived,
            claim_out, status, check, expected, found, text, after,  # type: ignore[arg-type]
        )
