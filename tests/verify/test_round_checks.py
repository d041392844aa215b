"""stepper.verify.round_checks: one round's shape, degree, sum and challenge checks, and its carry.

Each case drives a :class:`RoundDesk` directly with one round of a BabyBear instance; the
carried claim g(r) is recomputed with the textbook Lagrange formula in plain Python
integers (tests/plain_sumcheck.py), independent of stepper's evaluator.
"""

from __future__ import annotations

from plain_sumcheck import BABYBEAR, Plain, lagrange
from stepper.field.field import get_field
from stepper.transcript.model import ChallengeMsg, InstanceStart, RoundMsg
from stepper.verify.challenges import ChallengeSource
from stepper.verify.glue import GlueDesk
from stepper.verify.ledger import InstanceLedger, LiveInstance
from stepper.verify.round_checks import RoundDesk
from stepper.verify.results import RoundResult

FIELD = get_field(BABYBEAR)
PLAIN = Plain(BABYBEAR)
CLAIM = 12  # the claim of round 1 of every case below


def _desk(emit_passing: bool = True) -> tuple[RoundDesk, LiveInstance, InstanceLedger]:
    start = InstanceStart(0, "deck-slots-zero", num_vars=2, degree=2, claim=CLAIM)
    source = ChallengeSource(None, None, 4)
    source.set_field(FIELD)
    ledger = InstanceLedger(None)
    ledger.opened(start)
    return RoundDesk(source, GlueDesk(), ledger, emit_passing=emit_passing, plugin=False), \
        LiveInstance(start, keep=True), ledger


def _round(desk: RoundDesk, live: LiveInstance, values: tuple[int, ...], challenge: int | None,
           known: object | None = None) -> list:
    desk.open(FIELD, live, RoundMsg(0, 1, values))
    msg = ChallengeMsg(0, 1, challenge) if challenge is not None else None
    return desk.resolve(FIELD, live, msg) if known is None else desk.resolve(FIELD, live, msg, known)


def test_a_passing_round_carries_its_value_at_the_challenge():
    desk, live, ledger = _desk()
    (result,) = _round(desk, live, (5, 7, 30), 9)
    assert isinstance(result, RoundResult) and result.status == "pass" and result.check is None
    assert result.claim_out == live.claim == lagrange(PLAIN, [5, 7, 30], 9)
    assert (live.seen, live.passed, live.challenges) == (1, 1, [9])
    assert ledger.first is None


def test_without_emit_passing_a_passing_round_leaves_no_result_but_is_carried():
    desk, live, _ = _desk(emit_passing=False)
    assert _round(desk, live, (5, 7, 30), 9) == []
    assert live.claim == lagrange(PLAIN, [5, 7, 30], 9) and live.passed == 1 and live.pending is None


def test_a_round_that_does_not_sum_to_the_claim_fails_sum_and_is_still_carried():
    desk, live, ledger = _desk()
    (result,) = _round(desk, live, (5, 8, 30), 9)
    assert (result.check, result.expected, result.found) == ("sum", CLAIM, 13)
    assert ledger.first is not None and (ledger.first.round, ledger.first.check) == (1, "sum")
    assert live.claim == lagrange(PLAIN, [5, 8, 30], 9) and live.passed == 0


def test_more_values_than_degree_plus_one_fail_degree_counting_evaluations():
    desk, live, _ = _desk()
    (result,) = _round(desk, live, (5, 7, 30, 1), 9)
    assert (result.check, result.expected, result.found) == ("degree", 3, 4)


def test_an_empty_round_fails_shape_and_is_read_as_the_zero_polynomial():
    desk, live, _ = _desk()
    (result,) = _round(desk, live, (), 9)
    assert (result.check, result.expected, result.found) == ("shape", 1, 0)
    assert result.evals == (0,) and result.claim_out == 0


def test_a_challenge_other_than_the_re_derived_one_fails_challenge():
    desk, live, ledger = _desk()
    (result,) = _round(desk, live, (5, 7, 30), 9, known=10)
    assert (result.check, result.expected, result.found, result.rederived) == ("challenge", 10, 9, 10)
    assert ledger.first is not None and ledger.first.check == "challenge"


def test_a_round_without_its_challenge_is_pending_and_carries_nothing():
    desk, live, _ = _desk()
    (result,) = _round(desk, live, (5, 7, 30), None)
    assert result.status == "pending" and result.challenge is None and result.claim_out is None
    assert live.claim == CLAIM and live.seen == 1 and live.challenges == []
