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
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field as dc_field
from typing import Any, Iterable, Literal, Mapping, Union

from stepper.field.field import Element, Field
from stepper.field.poly import ORDERS, ROUND_FORMS, RoundPoly

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

FORMAT_VERSION = 2  # the newest version read; 2: the glue events value, squeeze, opening, the glue instance keys
GLUE_VERSION = 2  # the first format version whose readers know the glue events
PLAIN_VERSION = 1  # what the writer declares for a file without glue (see stepper.transcript.store.writer)
GLUE_NAME = "letters, digits, '_' and '.', starting with a letter or '_', at most 128 characters"
GLUE_NAME_PATTERN = re.compile(r"[A-Za-z_][A-Za-z0-9_.]{0,127}")


def is_glue_name(name: object) -> bool:
    """Whether ``name`` may name a value, squeeze or opening (see ``GLUE_NAME``)."""
    return name.__class__ is str and GLUE_NAME_PATTERN.fullmatch(name) is not None  # type: ignore[arg-type]


def _need(ok: bool, record: str, message: str) -> None:
    """Constructor check: records are canonical once built (see the module docstring)."""
    if not ok:
        raise ValueError(f"{record}: expected {message}")


def _index(value: object) -> bool:
    return isinstance(value, int) and not isinstance(value, bool) and value >= 0


def _freeze(record: object, name: str) -> None:
    """Store a list given for a tuple field as a tuple (records are immutable)."""
    value = getattr(record, name)
    if isinstance(value, list):
        object.__setattr__(record, name, tuple(value))

Completeness = Literal["complete", "incomplete"]
DigestStatus = Literal["verified", "mismatch", "missing", "not-applicable"]


@dataclass(frozen=True, slots=True)
class Header:
    """What the file says about itself: format version, writer, free metadata
    (``label``, ``command``, ``created`` ... ; strings, numbers, lists, maps)."""

    format_version: int = PLAIN_VERSION
    tool_version: str = ""
    metadata: Mapping[str, Any] = dc_field(default_factory=dict)

    def __post_init__(self) -> None:
        _need(_index(self.format_version), "Header", "a non-negative format_version")
        _need(isinstance(self.tool_version, str), "Header", "tool_version as a string")
        _need(isinstance(self.metadata, Mapping), "Header", "metadata as a map")


@dataclass(frozen=True, slots=True)
class FieldDecl:
    """The field of every element that follows (``field`` event)."""

    field: Field

    def __post_init__(self) -> None:
        _need(isinstance(self.field, Field), "FieldDecl", "a Field")


@dataclass(frozen=True, slots=True)
class ScheduleDecl:
    """How the challenges were derived (``schedule`` event): ``name`` of a built-in
    schedule (see :mod:`stepper.verify.fiatshamir`), a domain-separation ``label``, and
    any ``params`` that schedule defines."""

    name: str
    label: str = ""
    params: Mapping[str, Any] = dc_field(default_factory=dict)

    def __post_init__(self) -> None:
        _need(isinstance(self.name, str) and bool(self.name), "ScheduleDecl", "a non-empty name")
        _need(isinstance(self.label, str), "ScheduleDecl", "label as a string")


@dataclass(frozen=True, slots=True)
class BatchDecl:
    """The next instance's claim is sum_i coefficient^i * terms[i] (``batch`` event);
    ``sources`` optionally says where each term came from (free text)."""

    coefficient: Element
    terms: tuple[Element, ...]
    sources: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        _freeze(self, "terms")
        _freeze(self, "sources")
        _need(isinstance(self.terms, tuple), "BatchDecl", "terms as a tuple of elements")
        _need(len(self.sources) <= len(self.terms), "BatchDecl", "at most one source per term")


@dataclass(frozen=True, slots=True)
class InstanceStart:
    """One sumcheck instance (``instance`` event); ``index`` is 0-based in the proof."""

    index: int
    name: str
    num_vars: int
    degree: int
    claim: Element
    order: str = "low-first"
    form: str = "evals"
    batch: BatchDecl | None = None
    claim_expr: str | None = None  # the claim must equal it (check `link`)
    final_expr: str | None = None  # the reduced claim after the last round must equal it (check `evaluation`)
    eq_point: tuple[Element, ...] | str | None = None  # form eq-factored: the point w, or the name of a list value

    def __post_init__(self) -> None:
        _freeze(self, "eq_point")
        _need(_index(self.index), "InstanceStart", "a non-negative index")
        _need(isinstance(self.name, str), "InstanceStart", "name as a string")
        _need(_index(self.num_vars) and _index(self.degree), "InstanceStart", "non-negative num_vars and degree")
        if self.order not in ORDERS:  # the messages are built only when needed: instances are many
            _need(False, "InstanceStart", f"order among {', '.join(ORDERS)}, found {self.order!r}")
        if self.form not in ROUND_FORMS:
            _need(False, "InstanceStart", f"form among {', '.join(ROUND_FORMS)}, found {self.form!r}")
        if (self.form == "eq-factored") != (self.eq_point is not None):
            _need(False, "InstanceStart", "eq_point exactly when the form is eq-factored")


@dataclass(frozen=True, slots=True)
class RoundMsg:
    """A round polynomial as sent (``round`` event); ``values`` are in the instance's form."""

    instance: int
    round: int
    values: tuple[Element, ...]

    def __post_init__(self) -> None:
        _freeze(self, "values")
        _need(_index(self.instance) and _index(self.round), "RoundMsg", "instance >= 0 and round >= 0")
        _need(isinstance(self.values, tuple), "RoundMsg", "values as a tuple of elements")


@dataclass(frozen=True, slots=True)
class ChallengeMsg:
    """The verifier's challenge for the round just sent (``challenge`` event)."""

    instance: int
    round: int
    value: Element

    def __post_init__(self) -> None:
        _need(_index(self.instance) and _index(self.round), "ChallengeMsg", "instance >= 0 and round >= 0")


class RoundMsgDraft:
    """A blank with the slots of :class:`RoundMsg`, for the reader's hot loop.

    A frozen dataclass ``__init__`` sets each field through ``object.__setattr__``,
    which costs about as much as decoding the event. The Sequencer, once it has
    checked the values, fills a draft with plain attribute stores and then sets
    its ``__class__`` to :class:`RoundMsg` (CPython allows that between classes of
    identical layout). The result is an ordinary, frozen RoundMsg: same type,
    equality, hash and immutability."""

    __slots__ = RoundMsg.__slots__  # type: ignore[attr-defined]


class ChallengeMsgDraft:
    """The same for :class:`ChallengeMsg` (see :class:`RoundMsgDraft`)."""

    __slots__ = ChallengeMsg.__slots__  # type: ignore[attr-defined]


class InstanceStartDraft:
    """The same for :class:`InstanceStart` (see :class:`RoundMsgDraft`): the Sequencer has
    checked every field before it fills one; a proof may hold 10^4 instances and more."""

    __slots__ = InstanceStart.__slots__  # type: ignore[attr-defined]


@dataclass(frozen=True, slots=True)
class FinalValue:
    """The oracle's value of the summed polynomial at the challenge point (``final`` event)."""

    instance: int
    value: Element

    def __post_init__(self) -> None:
        _need(_index(self.instance), "FinalValue", "instance >= 0")


@dataclass(frozen=True, slots=True)
class BucketStats:
    """Bucket occupancy for one round and chunk (group) of a bucketing prover.
    ``bound_log2`` is log2 of the largest possible count, ``remaining`` the table
    entries still unbound; ``extra`` keeps any other keys the prover sent."""

    instance: int
    round: int
    chunk: int
    count: int
    sizes: tuple[int, ...] | None = None
    bound_log2: int | None = None
    remaining: int | None = None
    extra: Mapping[str, Any] = dc_field(default_factory=dict)

    def __post_init__(self) -> None:
        _freeze(self, "sizes")
        _need(all(_index(v) for v in (self.instance, self.round, self.chunk, self.count)), "BucketStats",
              "non-negative instance, round, chunk and count")
        _need(self.sizes is None or all(_index(v) for v in self.sizes), "BucketStats",
              "sizes as non-negative counts")


@dataclass(frozen=True, slots=True)
class Note:
    """Free text a person attaches, to a round, an instance or the proof."""

    text: str
    instance: int | None = None
    round: int | None = None

    def __post_init__(self) -> None:
        _need(isinstance(self.text, str), "Note", "text as a string")
        _need(self.instance is None or _index(self.instance), "Note", "instance None or >= 0")
        _need(self.round is None or _index(self.round), "Note", "round None or >= 0")


@dataclass(frozen=True, slots=True)
class UnknownEvent:
    """An event of a type stepper does not know: kept and shown, never rejected."""

    kind: str
    payload: Mapping[str, Any]
    instance: int | None = None

    def __post_init__(self) -> None:
        _need(isinstance(self.kind, str), "UnknownEvent", "kind as a string")


@dataclass(frozen=True, slots=True)
class NamedValue:
    """A named public value of the statement (``value`` event): one element, or a
    tuple of elements when ``listed`` (a point). ``instance`` is the instance it
    follows (None before the first)."""

    name: str
    value: Any
    listed: bool = False
    instance: int | None = None

    def __post_init__(self) -> None:
        _check_named(self, "NamedValue")

    def items(self) -> tuple[Element, ...]:
        """The elements: the list, or the one element alone."""
        return self.value if self.listed else (self.value,)  # type: ignore[no-any-return]


def _check_named(record: NamedValue | Squeeze, kind: str) -> None:
    """The checks a named value and a squeeze share: an identifier name, a tuple when listed."""
    _freeze(record, "value")
    _need(is_glue_name(record.name), kind, f"a name of {GLUE_NAME}, found {record.name!r}"[:200])
    _need(not record.listed or isinstance(record.value, tuple), kind, "a tuple of elements when listed")
    _need(record.instance is None or _index(record.instance), kind, "instance None or >= 0")


@dataclass(frozen=True, slots=True)
class Squeeze:
    """Named verifier randomness drawn outside the rounds (``squeeze`` event): a
    coefficient or a point; the built-in schedule re-derives it."""

    name: str
    value: Any
    listed: bool = False
    instance: int | None = None

    def __post_init__(self) -> None:
        _check_named(self, "Squeeze")

    def items(self) -> tuple[Element, ...]:
        """The elements: the list, or the one element alone."""
        return self.value if self.listed else (self.value,)  # type: ignore[no-any-return]


@dataclass(frozen=True, slots=True)
class Opening:
    """The prover's claimed value of the multilinear extension of witness table
    ``table`` at the challenge point of instance ``instance`` (``opening`` event)."""

    name: str
    value: Element
    table: str
    instance: int

    def __post_init__(self) -> None:
        _need(is_glue_name(self.name), "Opening", f"a name of {GLUE_NAME}, found {self.name!r}"[:200])
        _need(isinstance(self.table, str) and bool(self.table), "Opening", "a table name")
        _need(_index(self.instance), "Opening", "instance >= 0")


class GlueDraft:
    """The same for :class:`NamedValue` and :class:`Squeeze` (see :class:`RoundMsgDraft`): the
    Sequencer has checked the name and made a list value a tuple; 4 or more per instance in a
    glued proof."""

    __slots__ = NamedValue.__slots__  # type: ignore[attr-defined]


class OpeningDraft:
    """The same for :class:`Opening` (see :class:`RoundMsgDraft`)."""

    __slots__ = Opening.__slots__  # type: ignore[attr-defined]


Glue = Union[NamedValue, Squeeze, Opening]

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
