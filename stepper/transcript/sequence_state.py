"""What the event :class:`~stepper.transcript.events.Sequencer` knows at each point of a stream,
and the helpers every one of its rules uses.

:class:`SequenceState` holds the position (payloads fed, the current instance, its rounds,
the glue names defined so far) and reads elements, packed or as JSON, failing with the
location of the event (index, instance, round). The rules live beside it, one module per
part of the stream: the statement, rounds and challenges with the reader's hot loop in
:mod:`stepper.transcript.events`, the glue in :mod:`stepper.transcript.glue_rules`, buckets
and notes in :mod:`stepper.transcript.annotations`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from stepper.errors import FieldError, TranscriptError, Where
from stepper.field.field import Element, Field
from stepper.transcript.namebook import NameBook
from stepper.transcript.packed import unpack_elements
from stepper.transcript.payload_rules import MAX_VALUES, short
from stepper.transcript.records import BatchDecl, InstanceStart, UnknownEvent

if TYPE_CHECKING:
    from stepper.transcript.glue_names import GlueNames

__all__ = ["SequenceState"]


class SequenceState:
    """The Sequencer's position in the stream and the helpers its rules share."""

    def __init__(self, source: Where | None = None) -> None:
        self.source = source or Where()
        self.field: Field | None = None
        self.count = 0  # payloads fed
        self.current: InstanceStart | None = None  # the last instance read (earlier ones are not kept)
        self.names = NameBook()  # the names of all instances read, by position
        self.rounds_done = 0  # rounds of the current instance
        self.awaiting_challenge = False
        self.final_seen = False
        self.pending_batch: BatchDecl | None = None
        self._decode: Any = None  # packed-run decoder of the field, set by the field event
        self._elem_bytes = 0
        self._prime_modulus = 0  # p for a prime field, 0 for an extension
        self._one_extension: Any = None  # struct unpacker of one extension element (4- or 8-byte coefficients)
        self._runs: dict[int, Any] | None = None  # struct unpackers by run size (prime fields of 4/8 bytes)
        self._high_ones: bytes | None = None  # see _on_field
        self._num_vars = 0  # of the current instance (0 before any)
        self._index = -1
        self.stopped_at: UnknownEvent | None = None  # see stream()
        self.glue = True  # whether value/squeeze/opening are known (False for format version 1 files)
        # glue name -> list length (None for one element); the whole-file check puts a GlueNames here
        self.defined: dict[str, int | None] | GlueNames = {}
        self._late: tuple[InstanceStart, tuple[str, ...]] | None = None  # final_expr names still to come
        # When set, an instance's claim_expr and final_expr (without an eq point) are taken as text, unparsed:
        # the caller (stepper.verify.sweep) checks them by columns, or calls check_deferred.
        self.defer_glue = False

    # ----- position --------------------------------------------------------------
    @property
    def instance_count(self) -> int:
        return len(self.names)

    def where(self, round_: int | None = None) -> Where:
        cur = self.current
        return self.source.but(
            event=self.count,
            instance=cur.name if cur else None,
            round=round_,
        )

    def _fail(self, message: str, round_: int | None = None) -> TranscriptError:
        return TranscriptError(message, self.where(round_))

    def _close_instance(self) -> None:
        if self.pending_batch is not None:
            raise self._fail("expected an `instance` event right after `batch`")


    # ----- helpers -------------------------------------------------------------------
    def _need_instance(self, kind: str) -> InstanceStart:
        cur = self.current
        if cur is None:
            raise self._fail(f"expected an `instance` event before `{kind}`")
        return cur

    def _element(self, raw: Any, what: str, round_: int | None = None) -> Element:
        assert self.field is not None
        if raw.__class__ is bytes and len(raw) == self._elem_bytes:
            if self._prime_modulus:  # a prime field: the bytes are the value, little-endian
                value = int.from_bytes(raw, "little")
                if value < self._prime_modulus:
                    return value
            elif self._one_extension is not None:  # k coefficients, canonical when the largest is below p
                coefficients = self._one_extension(raw)
                if max(coefficients) < self.field.p:
                    return coefficients  # type: ignore[no-any-return]
            one = self._decode(raw)
            if one is not None:
                return one[0]  # type: ignore[no-any-return]
        if raw is None:
            raise self._fail(f"expected a {what}, found none", round_)
        try:
            return self.field.parse(raw)
        except FieldError as err:  # the location is built only when it is needed
            raise TranscriptError(f"{what}: {err.message}", self.where(round_)) from None

    def _elements(self, raw: Any, what: str, round_: int | None = None) -> tuple[Element, ...]:
        if isinstance(raw, (bytes, bytearray)) and self.field is not None:
            values = self._decode(bytes(raw))
            if values is None:
                try:
                    unpack_elements(self.field, bytes(raw), what, self.where(round_))
                except FieldError as err:
                    raise TranscriptError(err.message, err.where) from None
            if len(values) > MAX_VALUES:
                raise self._fail(f"expected at most {MAX_VALUES} {what}, found {len(values)}", round_)
            return values  # type: ignore[no-any-return]
        if not isinstance(raw, list):
            raise self._fail(f"expected {what} as a list, found {short(raw)}", round_)
        if len(raw) > MAX_VALUES:
            raise self._fail(f"expected at most {MAX_VALUES} {what}, found {len(raw)}", round_)
        return tuple(self._element(v, what, round_) for v in raw)
