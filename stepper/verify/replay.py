"""The verifier replay: one event record in, result values out (no I/O).

:class:`Replay` keeps, per instance with claim c_0 and for rounds k = 1..num_vars:

* ``degree``: at most degree+1 evaluations, counted in full form;
* ``sum``: g_k(0) + g_k(1) == c_(k-1) (holds by construction in the compressed
  forms, where g(1) or c1 is recovered from the claim);
* ``challenge``: the recorded r_k equals the one the schedule re-derives (when a
  built-in schedule is declared or a plug-in is given); then c_k = g_k(r_k);
* ``final``: c_mu equals the final value when one is given;
* ``batch``: a batched claim equals sum_i coefficient^i * terms[i];
* ``shape``: a round carries at least one value;
* the glue (:mod:`stepper.verify.glue`): ``link`` (claim vs ``claim_expr``, round 0),
  ``evaluation`` (reduced claim vs ``final_expr``, last round, once the values it
  names have arrived), ``squeeze`` (a squeeze equals the one the schedule derives),
  and eq-factored rounds rebuilt into g_k before the checks above.

Replay goes on after a failure: later rounds are evaluated against the claim
actually carried and marked ``after_failure``; ``first_failure`` is the first in
stream order. Memory per instance is constant unless ``keep_rounds`` is set;
``keep_instances`` caps the kept instance summaries (counts cover every instance).

The replay drives the instances (statement, batch, final value, closing) and the
challenge source, and hands the rest to its parts: a round's checks to
:mod:`stepper.verify.round_checks`, the glue to :mod:`stepper.verify.glue`, the
instance bookkeeping to :mod:`stepper.verify.ledger`. ``feed_all`` is the streaming
fast path (``stepper check`` without ``--json``, :mod:`stepper.verify.streaming`):
rounds that pass in a prime field are settled inline, anything else, and any failure,
goes through ``feed``, so the report is exactly the same.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping, Sequence

from stepper.verify.binding import Challenger
from stepper.verify.challenges import ChallengeSource
from stepper.errors import InputError, Where
from stepper.verify.ledger import InstanceLedger, LiveInstance, combine_batch
from stepper.transcript.records import (
    BatchDecl, ChallengeMsg, FieldDecl, FinalValue, InstanceStart, RoundMsg, ScheduleDecl, UnknownEvent,
)
from stepper.transcript.glue_records import NamedValue, Opening, Squeeze
from stepper.verify.glue import GlueDesk, passing_evaluation, passing_link
from stepper.verify.verdict import FinalResult, Report
from stepper.verify.verdict import PASSING_REPLAY_WARNING as PASSING_REPLAY_WARNING
from stepper.verify.text import batch_text, final_text
from stepper.verify.round_checks import NOT_REDERIVED, RoundDesk
from stepper.verify.streaming import InlineSetup, feed_stream, inline_setup

if TYPE_CHECKING:
    from stepper.verify.verdict import Result
    from stepper.verify.fiatshamir import Sha256Schedule
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event, Transcript

__all__ = ["Replay", "replay_transcript", "transcript_events", "FinalResult", "Report"]


class Replay:
    """Steppable verifier: ``feed(record)`` returns the results it resolved, ``report()`` the verdict.

    ``schedule`` (a declaration or a schedule name) applies when the stream declares none;
    ``challenger`` a plug-in (see :mod:`stepper.verify.binding`) that overrides it.
    ``probe_instances`` is how many instances (from the first) the binding probe covers;
    with ``emit_passing=False`` (and no ``keep_rounds``) ``feed`` returns only failed or
    open rounds, which is the fast path for streaming summaries."""

    def __init__(self, field: Field | None = None, schedule: ScheduleDecl | str | None = None,
                 challenger: Challenger | None = None, *, keep_rounds: bool = False,
                 keep_instances: int | None = None, probe_instances: int = 4, emit_passing: bool = True) -> None:
        self.field = field
        self.emit_passing = emit_passing or keep_rounds
        self.keep_rounds = keep_rounds
        self.keep_instances = keep_instances
        self.challenger = challenger
        self._source = ChallengeSource(challenger, schedule, probe_instances)
        self._live: LiveInstance | None = None
        self._pending_batch: BatchDecl | None = None
        self._ledger = InstanceLedger(keep_instances)
        self._dispatch = {RoundMsg: self._on_round, ChallengeMsg: self._on_challenge,
                          InstanceStart: self._on_instance, FinalValue: self._on_final,
                          NamedValue: self._on_glue, Squeeze: self._on_glue, Opening: self._on_glue}
        self._glue = GlueDesk()
        self._rounds = RoundDesk(self._source, self._glue, self._ledger, emit_passing=self.emit_passing,
                                 plugin=challenger is not None)
        self._finished = False
        # what settling an unkept instance still does once no summary is kept and nothing else would
        # happen on opening its statement: the schedule absorbs the statement (None: the full path)
        self._quiet_statement: Callable[[InstanceStart], None] | None = None
        if field is not None:
            self._source.set_field(field)

    @property
    def challenges(self) -> str:
        """How challenges are checked, in words."""
        return self._source.describe()

    # ----- feeding ----------------------------------------------------------------
    def feed(self, record: Event) -> list[Result]:
        """Advance by one event record; returns the results this event resolved."""
        handler = self._dispatch.get(record.__class__)
        if handler is not None:
            return handler(record)  # type: ignore[operator]
        if isinstance(record, BatchDecl):
            self._source.before_statement()
            self._pending_batch = record
            self._source.observe(record)
        elif isinstance(record, FieldDecl):
            self._source.set_field(record.field)
            self.field = record.field
        elif isinstance(record, ScheduleDecl):
            self._source.declare(record)
        elif isinstance(record, UnknownEvent):
            self._source.log(record)
        return []

    def feed_all(self, records: Iterable[Event], on_other: Callable[[Event], object] | None = None) -> None:
        """``feed`` every record, discarding the returned results (for summaries and
        reports, not per-round output); ``on_other`` sees each record that is not a
        round or challenge. A round and its challenge that pass the degree, sum and
        challenge checks in a prime field, form ``evals``, built-in or no schedule,
        take an inline path with the same effect; everything else goes through ``feed``."""
        if self.keep_rounds:
            for record in records:
                self.feed(record)
                if on_other is not None and record.__class__ not in (RoundMsg, ChallengeMsg):
                    on_other(record)
            return
        feed_stream(records, self.feed, self._rounds, self._inline_setup, on_other)

    def _inline_setup(self) -> InlineSetup:
        return inline_setup(self.field, self._live, self._source.schedule, self.challenger is not None)

    def settle(self, start: InstanceStart, final: Element) -> bool:
        """Account for an instance checked in bulk and found passing (:mod:`stepper.verify.roundblock`):
        every round passed the degree, sum and challenge checks and ``final`` equals the
        reduced claim. The effect is that of feeding its instance, rounds, challenges and
        final, except that the schedule absorbs only the statement here: the caller absorbs
        the rounds and challenges (:meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_rows`)
        right after, and replays event by event instead if the block turns out not to pass.
        The same holds for its glue keys: a kept summary gets passing ``link`` and ``evaluation``
        results, and the caller checks them by the block (:mod:`stepper.verify.glue_block`).
        Returns whether the instance's summary is kept (its glue then goes to :meth:`settle_glue`;
        otherwise :meth:`settle_glue_values` will do)."""
        quiet = self._quiet_statement
        if quiet is not None and self._live is None and start.batch is None and self._pending_batch is None:
            quiet(start)  # all that _open_statement does here: no instance open, no plug-in history
            self._ledger.passed_unkept(start)
            return False
        if (self.field is None or self.challenger is not None or self.emit_passing or start.batch is not None
                or self._pending_batch is not None):
            raise ValueError("expected a summary replay with a field, no plug-in and no pending batch to settle "
                             "an instance in bulk")
        self._open_statement(start, False)
        ledger = self._ledger
        if not ledger.keeps_passing():
            ledger.passed_unkept(start)
            source = self._source  # summaries are kept no more: later unkept instances take the quiet path
            if source.history is None and source.stateful is None and (source.decl is not None or source.default is None):
                self._quiet_statement = source.schedule.observe if source.schedule is not None else _absorb_nothing
            return False
        live = LiveInstance(start, False)
        self._live = live
        ledger.opened(start)
        if start.claim_expr is not None:
            live.link = passing_link(self.field, start)
        if start.final_expr is not None:
            live.evaluation = passing_evaluation(self.field, start, final)
        live.claim, live.seen, live.passed = final, start.num_vars, start.num_vars
        self._on_final(FinalValue(start.index, final))
        return True

    def settles_quietly(self) -> bool:
        """Whether :meth:`settle` of a passing instance without a batch now only counts it, its
        statement absorbed by :attr:`schedule` (when there is one): no instance open, no summary kept,
        no plug-in history (see :meth:`settle_quietly`)."""
        return self._quiet_statement is not None and self._live is None and self._pending_batch is None

    def settle_quietly(self, count: int, rounds_degree: int) -> None:
        """:meth:`settle` of ``count`` passing instances without a batch whose num_vars times degree
        sum to ``rounds_degree``, while :meth:`settles_quietly`: they are counted, and the caller
        absorbs their statements into :attr:`schedule` (when there is one) with their rounds
        (:meth:`~stepper.verify.fiatshamir.Sha256Schedule.instance_frames`)."""
        if not self.settles_quietly():
            raise ValueError("expected a summary replay that keeps no more summaries to settle instances quietly")
        self._ledger.passed_unkept_many(count, rounds_degree)

    def settle_glue(self, records: Iterable[NamedValue | Squeeze | Opening]) -> None:
        """Account for values, squeezes and openings that follow an instance settled in bulk,
        in stream order: the schedule has absorbed them and every squeeze equals the derived
        one (the caller's doing). They are kept for later expressions, and an instance whose
        summary is kept lists its openings and settles its waiting evaluation."""
        live = self._live
        if live is None:
            self._glue.book.add_all(records)
            return
        field, ledger, take = self._need_field(), self._ledger, self._glue.take
        for record in records:
            take(field, record, None, "", live, ledger)

    def forget_points(self) -> None:
        """After instances settled in bulk (:meth:`settle`, :meth:`settle_quietly`): forget the points and
        finals of earlier instances that ``point(NAME)`` and ``final(NAME)`` read. The settled instances
        keep none of their own, so the replay can no longer tell which earlier ones the event-by-event path
        would still hold (it keeps ``MAX_POINT_ELEMENTS`` challenge elements of the last instances): an
        expression read later that names one then fails to evaluate, and the whole-file pass gives up."""
        self._glue.book.forget_points()

    def settle_glue_values(self, names: Sequence[str], values: Sequence[Any]) -> None:
        """:meth:`settle_glue` for glue after instances whose summaries are not kept, given as the
        names and the values the glue book keeps (an element, or a list of elements)."""
        if self._live is not None:
            raise ValueError("expected no open instance to settle glue values in bulk")
        self._glue.book.add_columns(names, values)

    def glue_values(self) -> Mapping[str, Any]:
        """The values, squeezes and openings received so far, by name (what glue expressions read),
        for a few look-ups (:meth:`~stepper.verify.glue.GlueBook.lookup`)."""
        return self._glue.book.lookup()

    @property
    def failed(self) -> bool:
        """Whether any check has failed so far (glue sent before the first instance included)."""
        return self._ledger.first is not None or bool(self._glue.held)

    @property
    def schedule(self) -> Sha256Schedule | None:
        """The built-in schedule re-deriving challenges, if any (None with a plug-in or no schedule)."""
        return self._source.schedule

    def _open_statement(self, start: InstanceStart, has_batch: bool) -> list[Result]:
        """Close the previous instance (its pending results) and let the challenge source see
        the new statement: the default schedule if none was declared, then the statement absorbed."""
        out = self._close()
        self._source.before_statement()
        self._source.start_instance(has_batch=has_batch)
        self._source.observe(start)
        return out

    def _need_field(self) -> Field:
        if self.field is None:
            raise InputError("expected a field event before the first instance, found none")
        return self.field

    def _need_live(self, kind: str, instance: int) -> LiveInstance:
        live = self._live
        if live is None or live.start.index != instance:
            raise InputError(f"expected a `{kind}` event inside the instance it names, found it outside",
                             Where(instance=instance))
        return live

    def _on_instance(self, start: InstanceStart) -> list[Result]:
        field = self._need_field()
        batch = start.batch or self._pending_batch
        self._pending_batch = None
        out = self._open_statement(start, batch is not None)
        live = LiveInstance(start, self.keep_rounds)
        self._live = live
        self._ledger.opened(start)
        if batch is not None:
            from stepper.verify.results import BatchResult, Failure  # batched claims only

            combined = combine_batch(field, batch)
            ok = combined == field.lift(start.claim)
            result = BatchResult(start.index, start.name, batch.coefficient, batch.terms, batch.sources, combined,
                                 start.claim, "pass" if ok else "fail", None if ok else "batch",
                                 batch_text(field, start, combined, ok))
            live.batch = result
            if not ok:
                self._ledger.fail(live, Failure(start.index, start.name, 0, "batch", combined, start.claim,
                                                result.explanation))
            out.append(result)
        self._glue.open_instance(field, live, self._ledger)
        return out

    def _on_glue(self, record: NamedValue | Squeeze | Opening) -> list[Result]:
        """A value, squeeze or opening (see :class:`stepper.verify.glue.GlueDesk`)."""
        live = self._live
        out = self._resolve_pending(None) if live is not None and live.pending is not None else []
        derived = None
        if isinstance(record, Squeeze):
            derived = self._source.squeeze(record, Where(instance=live.start.name) if live is not None else Where())
        self._source.observe(record)
        squeezed = self._glue.take(self._need_field(), record, derived, self._source.deriver(), live, self._ledger)
        if squeezed is not None and (self.emit_passing or squeezed.status == "fail"):
            out.append(squeezed)
        return out

    def _on_round(self, msg: RoundMsg) -> list[Result]:
        field = self.field
        live = self._live
        if field is None:
            field = self._need_field()
        if live is None or live.start.index != msg.instance:
            live = self._need_live("round", msg.instance)
        out = self._resolve_pending(None) if live.pending is not None else []
        self._rounds.open(field, live, msg)
        return out

    def _on_challenge(self, msg: ChallengeMsg) -> list[Result]:
        live = self._live
        if live is None or live.start.index != msg.instance:
            live = self._need_live("challenge", msg.instance)
        if live.pending is None:
            raise InputError("expected a round before its challenge, found a challenge alone",
                             Where(instance=live.start.name, round=msg.round))
        return self._resolve_pending(msg)

    def _resolve_pending(self, msg: ChallengeMsg | None, known: object = NOT_REDERIVED) -> list[Result]:
        """Resolve the pending round with its challenge (``known``: the challenge the
        schedule already re-derived for it)."""
        live, field = self._live, self.field
        assert live is not None and field is not None
        return self._rounds.resolve(field, live, msg, known)

    def _on_final(self, msg: FinalValue) -> list[Result]:
        live = self._need_live("final", msg.instance)
        field = self._need_field()
        out = self._resolve_pending(None) if live.pending is not None else []
        start = live.start
        reduced = live.claim if live.seen == start.num_vars else None
        ok = reduced is not None and field.lift(reduced) == field.lift(msg.value)
        check = None if ok else "final"
        result = FinalResult(start.index, start.name, start.num_vars, reduced, msg.value,
                             "pass" if ok else "fail", check, None if ok else msg.value, None if ok else reduced,
                             final_text(field, start, reduced, msg.value, ok))
        live.final = result
        if not ok:
            from stepper.verify.results import Failure  # a failing check only

            self._ledger.fail(live, Failure(start.index, start.name, start.num_vars, "final", msg.value, reduced,
                                            result.explanation))
        self._source.log(msg)
        out.append(result)
        return out

    # ----- closing ----------------------------------------------------------------
    def _close(self) -> list[Result]:
        live = self._live
        if live is None:
            return []
        out = self._resolve_pending(None) if live.pending is not None else []
        self._glue.close_instance(live)
        self._ledger.close(live, self.field)
        self._live = None
        return out

    def finish(self) -> list[Result]:
        """Resolve what is still pending (a round without its challenge) and close the last instance."""
        if self._finished:
            return []
        self._finished = True
        return self._close()

    def report(self, completeness: str = "complete") -> Report:
        """The verdict so far (finishes the replay); ``completeness`` is what the store says of the file."""
        self.finish()
        ledger = self._ledger
        self._glue.finish(ledger)
        return Report(self.field, ledger.verdict(completeness), ledger.first,  # type: ignore[arg-type]
                      tuple(ledger.summaries), dict(ledger.counts), ledger.soundness(self.field),
                      tuple(self._source.findings), self.challenges, completeness, PASSING_REPLAY_WARNING)


def _absorb_nothing(start: InstanceStart) -> None:
    """The statement of an instance settled with no schedule: nothing absorbs it."""


def transcript_events(transcript: Transcript) -> Iterable[Event]:
    """The records a folded transcript was made of, in stream order (notes and buckets left out;
    an instance's values, squeezes and openings after its final value)."""
    yield FieldDecl(transcript.field)
    if transcript.schedule is not None:
        yield transcript.schedule
    yield from transcript.glue
    for inst in transcript.instances:
        if inst.start.batch is not None:
            yield inst.start.batch
        yield inst.start
        for rnd in inst.rounds:
            yield RoundMsg(rnd.instance, rnd.number, rnd.values)
            if rnd.challenge is not None:
                yield ChallengeMsg(rnd.instance, rnd.number, rnd.challenge)
        if inst.final is not None:
            yield FinalValue(inst.start.index, inst.final)
        yield from inst.glue


def replay_transcript(transcript: Transcript, challenger: Challenger | None = None, *,
                      keep_rounds: bool = True) -> Report:
    """Replay a whole folded transcript with round detail kept."""
    replay = Replay(transcript.field, challenger=challenger, keep_rounds=keep_rounds)
    for record in transcript_events(transcript):
        replay.feed(record)
    return replay.report(transcript.completeness)
