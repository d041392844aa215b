"""The replay's streaming fast path (``stepper check`` without ``--json``; no I/O).

:func:`feed_stream` feeds a stream of records to a replay. A round and its challenge
that pass the degree, sum and challenge checks in a prime field, form ``evals``, with the
built-in schedule or none, are settled inline: the schedule's fused round-then-challenge
step (:meth:`~stepper.verify.fiatshamir.Sha256Schedule.round_stepper`) re-derives the
challenge, :func:`~stepper.field.lagrange.round_evaluator` carries the claim, and no result
record is made. Anything else, and any failure, goes through the replay's ``feed``, so
the report is exactly the one event-by-event feeding gives.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable, Iterable

from stepper.field.lagrange import round_evaluator
from stepper.transcript.records import ChallengeMsg, RoundMsg

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.transcript.model import Event
    from stepper.verify.fiatshamir import Sha256Schedule
    from stepper.verify.ledger import LiveInstance
    from stepper.verify.round_checks import RoundDesk

__all__ = ["feed_stream", "inline_setup", "InlineSetup"]

# the current instance, the field, its index, the most values a round may carry, p, and the
# fused round-then-challenge step (None when nothing re-derives); the instance is None when
# the inline path does not apply
InlineSetup = tuple["LiveInstance | None", "Field | None", int, int, int,
                    "Callable[[tuple[int, ...]], int] | None"]


def inline_setup(field: Field | None, live: LiveInstance | None, schedule: Sha256Schedule | None,
                 plugin: bool) -> InlineSetup:
    """What :func:`feed_stream`'s inline path needs for the current instance (see :data:`InlineSetup`)."""
    if live is None or field is None or field.degree != 1 or live.start.form != "evals" or plugin:
        return None, None, -1, 0, 1, None
    squeeze = schedule.round_stepper() if schedule is not None else None
    return live, field, live.start.index, min(live.start.degree + 1, field.p), field.p, squeeze  # type: ignore[return-value]


def feed_stream(records: Iterable[Event], feed: Callable[[Event], object], rounds: RoundDesk,
                setup: Callable[[], InlineSetup], on_other: Callable[[Event], object] | None) -> None:
    """``feed`` every record, taking the inline path where it applies; ``setup`` gives the
    current instance's :data:`InlineSetup` (asked again after every record that is not a
    round or challenge), ``on_other`` sees each such record."""
    round_cls, challenge_cls = RoundMsg, ChallengeMsg
    held: Any = None  # a round waiting for its challenge to take the inline path
    live: Any  # the instance's LiveInstance while the inline path applies, else None
    field: Any  # its field then
    live, field, index, limit, p, squeeze = setup()
    items: Iterable[Any] = records
    last_n, evaluate = -1, round_evaluator(2, 0)  # g(r) for rounds of last_n values
    try:
        for record in items:
            cls = record.__class__
            if cls is round_cls:
                if held is None and live is not None and record.instance == index and live.pending is None:
                    held = record
                    continue
            elif cls is challenge_cls and held is not None:
                round_msg, held = held, None
                values = round_msg.values
                n = len(values)
                if (0 < n <= limit and record.instance == index
                        and (values[0] + values[1 if n > 1 else 0]) % p == live.claim):
                    challenge = record.value
                    rederived = squeeze(values) if squeeze is not None else challenge
                    if rederived == challenge:
                        if n != last_n:
                            last_n, evaluate = n, round_evaluator(p, n - 1)
                        live.claim = evaluate(values, challenge)
                        live.challenges.append(challenge)
                        live.seen = k = round_msg.round
                        if live.failure is None:
                            live.passed = k
                        if k == live.start.num_vars and live.start.final_expr is not None:
                            rounds.evaluate_glue(field, live)
                    else:  # the schedule has absorbed the round: resolve with the challenge it derived
                        live.pending = (round_msg, values, None, None, None, None, None)
                        rounds.resolve(field, live, record, rederived)
                    continue
                feed(round_msg)
            if held is not None:
                round_msg, held = held, None
                feed(round_msg)
            feed(record)
            if cls is not round_cls and cls is not challenge_cls:
                if on_other is not None:
                    on_other(record)
                live, field, index, limit, p, squeeze = setup()
                last_n = -1
    finally:
        if held is not None:
            feed(held)
