"""The prover's side of a proof: records sent, challenges drawn.

A :class:`ProofChannel` turns a reference prover's messages into event records
(:mod:`stepper.transcript.model`) and hands each to a sink: anything with a
``write(record)`` method, such as :class:`stepper.transcript.store.TranscriptWriter`, the
in-memory :class:`ListSink`, or :class:`JsonLinesSink` for the event stream of
``stepper record``. Challenges come from a built-in Fiat-Shamir schedule chosen by name
(:func:`stepper.verify.schedules.schedule_for`; ``stepper-sha256/1`` unless told otherwise,
so what the provers write stays as it was), declared by a ``schedule`` event, which observes
exactly what is sent, so ``stepper check`` re-derives every one.

The faults that live on the wire are applied here, in one place: a negated
claim, a claim left out of the schedule, a Montgomery-scaled or truncated
round. Statement randomness (the permutation check's point, the zero-check's
point, the batching coefficient) is drawn by :meth:`ProofChannel.statement_challenges`
from a separate schedule seeded with the main schedule's state and a digest of
the statement, a stand-in for commitments this reference prover does not make.
"""

from __future__ import annotations

import hashlib
import json
from typing import IO, TYPE_CHECKING, Any, Protocol, Sequence

import numpy as np

from stepper.errors import UsageError
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.verify.schedules import schedule_for
from stepper.field.poly import RoundPoly
from stepper.provers.faults import Fault, montgomery_radix
from stepper.transcript.model import (
    BatchDecl,
    BucketStats,
    ChallengeMsg,
    FieldDecl,
    FinalValue,
    InstanceStart,
    NamedValue,
    Note,
    Opening,
    RoundMsg,
    ScheduleDecl,
    Squeeze,
)

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event, Transcript

__all__ = ["EventSink", "ListSink", "JsonLinesSink", "ProofChannel"]


class EventSink(Protocol):
    def write(self, record: Event) -> object: ...


class ListSink:
    """Keeps the records in memory, in order, as a reader would see them: each
    passes through a :class:`stepper.transcript.events.Sequencer` (order rules, batch
    attached to its instance)."""

    def __init__(self) -> None:
        from stepper.transcript.events import Sequencer

        self.records: list[Event] = []
        self._seq = Sequencer()

    def write(self, record: Event) -> Event:
        from stepper.transcript.events import to_payload

        sequenced = self._seq.feed(to_payload(record, self._seq.field, binary=False))
        self.records.append(sequenced)
        return sequenced

    def transcript(self) -> Transcript:
        """The folded transcript of the records so far."""
        from stepper.transcript.model import fold_events

        return fold_events(self.records)


class JsonLinesSink:
    """Appends one JSON object per record to a text stream (the event-stream contract)."""

    def __init__(self, stream: IO[str]) -> None:
        self.stream = stream
        self.field: Field | None = None

    def write(self, record: Event) -> Event:
        from stepper.transcript.events import to_payload

        if isinstance(record, FieldDecl):
            self.field = record.field
        self.stream.write(json.dumps(to_payload(record, self.field, binary=False), separators=(",", ":")) + "\n")
        self.stream.flush()
        return record


class ProofChannel:
    """Sends one proof's records to ``sink`` and draws its challenges from the built-in schedule
    ``schedule`` (a name of :data:`~stepper.verify.fiatshamir.BUILTIN_SCHEDULES`)."""

    def __init__(self, field: Field, sink: EventSink, *, label: str = "", fault: Fault | None = None,
                 schedule: str = SCHEDULE_NAME) -> None:
        self.field = field
        self.sink = sink
        self.fault = fault
        self.schedule = schedule_for(schedule)
        self.instance = -1
        self.round = 0
        self.form = "evals"
        self._emit(FieldDecl(field))
        self._emit(ScheduleDecl(schedule, label))

    def _emit(self, record: Event) -> None:
        self.schedule.observe(record)
        self.sink.write(record)

    # ----- statement randomness ---------------------------------------------------------
    def statement_challenges(self, purpose: str, statement: Sequence[bytes | np.ndarray], count: int) -> list[Element]:
        """``count`` challenges bound to the proof so far and to ``statement`` (bytes, or
        tables of this field, taken as :meth:`table_bytes`)."""
        digest = hashlib.sha256(self.schedule.state_digest())
        for item in statement:
            part = item if isinstance(item, bytes) else self.table_bytes(item)
            digest.update(len(part).to_bytes(8, "little"))
            digest.update(part)
        side = Sha256Schedule()  # stepper-sha256/1 under either main schedule: a stand-in, never re-derived
        side.observe(FieldDecl(self.field))
        side.observe(ScheduleDecl(SCHEDULE_NAME, f"{purpose}:{digest.hexdigest()}"))
        return [side.challenge() for _ in range(count)]

    def table_bytes(self, table: np.ndarray) -> bytes:
        """A table's entries as bytes that depend only on their values: the array's own
        bytes for fixed-width entries; for Python-int entries (primes above 2^64) each
        entry as little-endian 64-bit words, as many as the modulus needs. (The bytes of
        an object array are pointers, which differ from run to run.)"""
        if table.dtype != object:
            return table.tobytes()
        flat = table.reshape(-1)
        words = []
        for _ in range((self.field.p.bit_length() + 63) // 64):
            words.append((flat & 0xFFFFFFFFFFFFFFFF).astype(np.uint64))
            flat = flat >> 64
        return np.stack(words, axis=1).tobytes()

    # ----- messages -----------------------------------------------------------------------
    def batch(self, coefficient: Element, terms: Sequence[Element], sources: Sequence[str] = ()) -> None:
        self._emit(BatchDecl(coefficient, tuple(terms), tuple(sources)))

    def value(self, name: str, v: Element | Sequence[Element]) -> None:
        """Announce a named public value (a list is a point); absorbed by the schedule.
        In an extension field an element is a tuple, so a point is a list of tuples."""
        listed = isinstance(v, list) or (isinstance(v, tuple) and not self._is_element(v))
        self._emit(NamedValue(name, tuple(v) if listed else v, listed, self._here()))  # type: ignore[arg-type]

    def squeeze(self, name: str, count: int | None = None) -> Element | tuple[Element, ...]:
        """Draw named verifier randomness from the schedule: one element, or ``count`` of them."""
        drawn = self.schedule.squeeze(name, count)
        self.sink.write(Squeeze(name, drawn, count is not None, self._here()))
        return drawn

    def opening(self, name: str, v: Element, table: str | None = None) -> None:
        """The claimed value of ``table`` (default ``name``) at the current instance's point."""
        self._emit(Opening(name, v, table or name, self.instance))

    def _here(self) -> int | None:
        return self.instance if self.instance >= 0 else None

    def _is_element(self, v: tuple[Any, ...]) -> bool:
        return self.field.is_extension and len(v) == self.field.degree and all(isinstance(c, int) for c in v)

    def start_instance(self, name: str, num_vars: int, degree: int, claim: Element, *,
                       order: str = "low-first", form: str = "evals", claim_expr: str | None = None,
                       final_expr: str | None = None, eq_point: Sequence[Element] | str | None = None) -> int:
        """Announce an instance; returns its 0-based index. ``claim_expr``/``final_expr``
        tie it to the glue; ``eq_point`` goes with form eq-factored."""
        f = self.field
        nxt = self.instance + 1
        fault = self.fault
        if fault is not None and fault.instance == nxt and fault.name in ("negate-claim", "unbound-claim") \
                and f.is_zero(claim):
            raise UsageError(f"fault {fault.name} needs a non-zero claim; instance {name!r} claims 0")
        if fault is not None and fault.instance == nxt and fault.name == "negate-claim":
            claim = f.neg(claim)
        point = eq_point if eq_point is None or isinstance(eq_point, str) else tuple(eq_point)
        start = InstanceStart(nxt, name, num_vars, degree, claim, order, form, None, claim_expr, final_expr, point)
        if fault is not None and fault.instance == nxt and fault.name == "unbound-claim":
            self.schedule.observe(InstanceStart(nxt, name, num_vars, degree, f.zero, order, form))
        else:
            self.schedule.observe(start)
        self.sink.write(start)
        self.instance = nxt
        self.round = 0
        self.form = form
        return nxt

    def send_round(self, evals: Sequence[Element]) -> Element:
        """Send g(0..e) for the next round (in the instance's form); returns the challenge."""
        f = self.field
        self.round += 1
        sent = list(evals)
        fault = self.fault
        if fault is not None and fault.hits(self.instance, "montgomery", self.round):
            radix = montgomery_radix(f)
            sent = [f.mul(v, radix) for v in sent]
        if fault is not None and fault.hits(self.instance, "drop-eval", self.round):
            sent = sent[:-1]
        poly = RoundPoly(tuple(sent))
        values = poly.to_form(f, self.form)
        self._emit(RoundMsg(self.instance, self.round, tuple(values)))
        challenge = self.schedule.challenge()
        self.sink.write(ChallengeMsg(self.instance, self.round, challenge))
        return challenge

    def final(self, value: Element) -> None:
        self.sink.write(FinalValue(self.instance, value))

    def buckets(self, round_: int, chunk: int, count: int, sizes: Sequence[int] | None, bound_log2: int,
                remaining: int, **extra: Any) -> None:
        self.sink.write(BucketStats(self.instance, round_, chunk, count,
                                    None if sizes is None else tuple(sizes), bound_log2, remaining, extra))

    def note(self, text: str, round_: int | None = None) -> None:
        self.sink.write(Note(text, self.instance if self.instance >= 0 else None, round_))
