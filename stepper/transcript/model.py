"""The in-memory transcript: event records and the proof they add up to.

A transcript is a sequence of events (the vocabulary of the event stream in
transcripts/EVENTS.md plus stepper's own ``schedule`` and ``batch``; the glue between
instances: ``value``, ``squeeze`` and ``opening``). Each event record is
a frozen, slotted dataclass whose constructor leaves it canonical: elements
are reduced field values, counts are checked, positions (instance index,
round number) are filled in by :class:`stepper.transcript.events.Sequencer`, never by
the sender. :class:`Transcript` is the folded view (instances with their
rounds, challenges, final values, buckets and notes) used by the app, diff and
reports; the verifier replay consumes events one by one and needs no fold.

The records are defined in :mod:`stepper.transcript.records` and
:mod:`stepper.transcript.glue_records`; this module is their public face and holds the fold.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Literal, Union

from stepper.field.field import Element, Field
from stepper.field.poly import RoundPoly

from stepper.transcript.glue_records import (
    GLUE_NAME, GLUE_NAME_PATTERN, Glue, GlueDraft, NamedValue, Opening, OpeningDraft, Squeeze, is_glue_name,
)
from stepper.transcript.records import (
    FORMAT_VERSION, GLUE_VERSION, PLAIN_VERSION, BatchDecl, BucketStats, ChallengeMsg, ChallengeMsgDraft, FieldDecl,
    FinalValue, Header, InstanceStart, InstanceStartDraft, Note, RoundMsg, RoundMsgDraft, ScheduleDecl, UnknownEvent,
)

__all__ = [
    "FORMAT_VERSION",
    "GLUE_VERSION",
    "GLUE_NAME_PATTERN",
    "PLAIN_VERSION",
    "Header",
    "FieldDecl",
    "ScheduleDecl",
    "BatchDecl",
    "InstanceStart",
    "RoundMsg",
    "ChallengeMsg",
    "FinalValue",
    "BucketStats",
    "Note",
    "UnknownEvent",
    "NamedValue",
    "Squeeze",
    "Opening",
    "GLUE_NAME",
    "is_glue_name",
    "Event",
    "Round",
    "InstanceRecord",
    "Transcript",
    "fold_events",
    "RoundMsgDraft",
    "ChallengeMsgDraft",
    "InstanceStartDraft",
    "GlueDraft",
    "OpeningDraft",
]

Completeness = Literal["complete", "incomplete"]
DigestStatus = Literal["verified", "mismatch", "missing", "not-applicable"]

Event = Union[
    FieldDecl, ScheduleDecl, BatchDecl, InstanceStart, RoundMsg, ChallengeMsg, FinalValue, BucketStats, Note,
    UnknownEvent, NamedValue, Squeeze, Opening
]


@dataclass(frozen=True, slots=True)
class Round:
    """One round of one instance as recorded: what was sent and the challenge, if any."""

    instance: int
    number: int
    values: tuple[Element, ...]
    challenge: Element | None = None

    def poly(self, field: Field, form: str, claim: Element) -> RoundPoly:
        return RoundPoly.from_form(field, form, self.values, claim)


@dataclass(frozen=True, slots=True)
class InstanceRecord:
    start: InstanceStart
    rounds: tuple[Round, ...] = ()
    final: Element | None = None
    buckets: tuple[BucketStats, ...] = ()
    notes: tuple[Note, ...] = ()
    unknown: tuple[UnknownEvent, ...] = ()
    glue: tuple[Glue, ...] = ()  # values, squeezes and openings that follow this instance, in order

    @property
    def name(self) -> str:
        return self.start.name

    @property
    def openings(self) -> tuple[Opening, ...]:
        return tuple(g for g in self.glue if isinstance(g, Opening))

    @property
    def complete(self) -> bool:
        """Every round present with its challenge."""
        rounds = self.rounds
        return len(rounds) == self.start.num_vars and all(r.challenge is not None for r in rounds)


@dataclass(frozen=True, slots=True)
class Transcript:
    """A whole proof: header, field, schedule, instances, proof-level notes and
    unknown events, whether the writer finished (``completeness``) and whether
    its digest verified."""

    header: Header
    field: Field
    instances: tuple[InstanceRecord, ...]
    schedule: ScheduleDecl | None = None
    notes: tuple[Note, ...] = ()
    unknown: tuple[UnknownEvent, ...] = ()
    completeness: Completeness = "complete"
    digest: DigestStatus = "not-applicable"
    glue: tuple[Glue, ...] = ()  # values and squeezes sent before the first instance

    @property
    def complete(self) -> bool:
        return self.completeness == "complete" and all(i.complete for i in self.instances)

    def all_notes(self) -> list[Note]:
        return [*self.notes, *(n for inst in self.instances for n in inst.notes)]


def fold_events(
    events: Iterable[Event],
    header: Header | None = None,
    completeness: Completeness = "complete",
    digest: DigestStatus = "not-applicable",
) -> Transcript:
    """The :class:`Transcript` that a valid (sequenced) event stream adds up to."""
    field: Field | None = None
    schedule: ScheduleDecl | None = None
    starts: list[InstanceStart] = []
    rounds: list[list[Round]] = []
    finals: list[Element | None] = []
    buckets: list[list[BucketStats]] = []
    inst_notes: list[list[Note]] = []
    inst_unknown: list[list[UnknownEvent]] = []
    inst_glue: list[list[Glue]] = []
    glue: list[Glue] = []
    notes: list[Note] = []
    unknown: list[UnknownEvent] = []
    for ev in events:
        if isinstance(ev, FieldDecl):
            field = ev.field
        elif isinstance(ev, ScheduleDecl):
            schedule = ev
        elif isinstance(ev, InstanceStart):
            starts.append(ev)
            rounds.append([])
            finals.append(None)
            buckets.append([])
            inst_notes.append([])
            inst_unknown.append([])
            inst_glue.append([])
        elif isinstance(ev, (NamedValue, Squeeze, Opening)):
            (inst_glue[ev.instance] if ev.instance is not None else glue).append(ev)
        elif isinstance(ev, RoundMsg):
            rounds[ev.instance].append(Round(ev.instance, ev.round, ev.values))
        elif isinstance(ev, ChallengeMsg):
            last = rounds[ev.instance][-1]
            rounds[ev.instance][-1] = Round(last.instance, last.number, last.values, ev.value)
        elif isinstance(ev, FinalValue):
            finals[ev.instance] = ev.value
        elif isinstance(ev, BucketStats):
            buckets[ev.instance].append(ev)
        elif isinstance(ev, Note):
            (inst_notes[ev.instance] if ev.instance is not None else notes).append(ev)
        elif isinstance(ev, UnknownEvent):
            (inst_unknown[ev.instance] if ev.instance is not None else unknown).append(ev)
    if field is None:
        from stepper.errors import TranscriptError

        raise TranscriptError("expected a field event before anything else, found none")
    instances = tuple(
        InstanceRecord(s, tuple(r), f, tuple(b), tuple(n), tuple(u), tuple(g))
        for s, r, f, b, n, u, g in zip(starts, rounds, finals, buckets, inst_notes, inst_unknown, inst_glue)
    )
    return Transcript(
        header or Header(), field, instances, schedule, tuple(notes), tuple(unknown), completeness, digest,
        tuple(glue)
    )
