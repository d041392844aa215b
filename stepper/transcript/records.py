"""The event records: frozen, slotted dataclasses, canonical once built.

Every record's constructor checks what it holds (elements reduced, counts and positions
non-negative, lists stored as tuples), so a record can never be malformed; positions
(instance index, round number) are filled in by :class:`stepper.transcript.events.Sequencer`.
The ``*Draft`` classes share a record's slots so that the Sequencer's hot path can build a
record it has already checked without running the frozen constructor again. The glue
records are in :mod:`stepper.transcript.glue_records`; :mod:`stepper.transcript.model` is
the public face of both, with the folded :class:`~stepper.transcript.model.Transcript`.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import Any, Mapping

from stepper.field.field import Element, Field
from stepper.field.poly import ORDERS, ROUND_FORMS

__all__ = [
    "FORMAT_VERSION", "GLUE_VERSION", "PLAIN_VERSION", "Header", "FieldDecl", "ScheduleDecl", "BatchDecl",
    "InstanceStart", "RoundMsg", "ChallengeMsg", "FinalValue", "BucketStats", "Note", "UnknownEvent",
    "RoundMsgDraft", "ChallengeMsgDraft", "InstanceStartDraft",
]

FORMAT_VERSION = 2  # the newest version read; 2: the glue events value, squeeze, opening, the glue instance keys
GLUE_VERSION = 2  # the first format version whose readers know the glue events
PLAIN_VERSION = 1  # what the writer declares for a file without glue (see stepper.transcript.store.writer)


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
