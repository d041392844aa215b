"""The streaming reader of transcripts (msgpack) and event files (JSON lines).

:class:`EventStream` tells the two apart by content (the magic line, or a
first non-space byte ``{``) and hands out event records one at a time. It holds
at most one chunk (twice: the unpacker's copy, and the chunk itself, from which
the hot loop decodes packed runs of rounds), one event and a few hundred bytes
awaiting the digest in memory, and refuses anything above its :class:`ReadLimits`.
Every msgpack, JSON and OS failure becomes one :class:`TranscriptError` naming
the file, the byte offset (or line), the event index, instance and round.

Truncation: msgpack's ``Unpacker`` ends iteration silently when the data stops
inside an object, and its ``tell()`` then already points into that object
(it advances past each finished key and value; measured, see the tests).
At the end of the file the reader feeds one msgpack ``nil`` byte: a top-level
``None`` comes back only when no object was left half-read; anything else means
the last event was cut off. That event is dropped, the stream is "incomplete"
and ``truncated_at`` is its byte offset (found by re-skipping the file, which
happens only on this path and on errors).

Digest: the SHA-256 of every byte before the end event. Chunks are hashed as
the reader advances, always keeping back the last ``END_MAX_BYTES`` bytes so
that a cut-off end event is never hashed; the end event's start is its end
minus its (shortest-form) packed size.

The caps and the capped ``Unpacker`` are in :mod:`stepper.transcript.store.limits`, the held-back
digest in :mod:`stepper.transcript.store.digest`; both are re-exported here under their names.
"""

from __future__ import annotations

import itertools
import os
from types import TracebackType
from typing import TYPE_CHECKING, Any, BinaryIO, Callable, Iterator

import msgpack

from stepper.errors import TranscriptError, Where
from stepper.transcript.events import MAX_TEXT, Sequencer, plain_copy
from stepper.transcript.condition import DIGEST_MISMATCH
from stepper.transcript.store.pending import read_pending
from stepper.transcript.store.digest import HeldBackDigest
from stepper.transcript.store.limits import ReadLimits, make_unpacker, past_cap, unpacked
from stepper.transcript.store.writer import END_MAX_BYTES, MAGIC, oserror
from stepper.transcript.records import FORMAT_VERSION, GLUE_VERSION, Header, Note

if TYPE_CHECKING:
    from stepper.transcript.model import Completeness, DigestStatus, Event

__all__ = ["ReadLimits", "EventStream", "HeldBackDigest", "make_unpacker", "read_header", "appended_note",
           "unpacked"]


def appended_note(seq: Sequencer, payload: Any) -> Note:
    """The record of an event after the end event: a note (about no instance unless it names one)."""
    kind = payload.get("type") if isinstance(payload, dict) else type(payload).__name__
    if kind != "note":
        raise TranscriptError(f"expected only `note` events after the end event, found `{str(kind)[:40]}`",
                              seq.source.but(event=seq.count))
    record = seq.feed(payload)
    assert isinstance(record, Note)
    if "instance" not in payload:
        return Note(record.text, None, record.round)
    return record


class EventStream:
    """The records of a transcript or event file, one at a time (iterate once).

    ``header`` is known on opening; ``completeness``, ``digest``, ``appended``
    (notes added after the end event), ``pending`` (notes made while a writer held
    the file, read from the pending-notes file beside it, after the file's events) and ``truncated_at`` (byte offset, or line
    number for an event file, of a cut-off last event that was dropped) are
    final once the stream is exhausted."""

    def __init__(self, path: str | os.PathLike[str], *, best_effort: bool = False,
                 limits: ReadLimits | None = None) -> None:
        self.path = str(path)
        self.limits = limits or ReadLimits()
        self.best_effort = best_effort
        self.where = Where(file=self.path)
        self.kind = "transcript"
        self.header = Header()
        self.completeness: Completeness = "incomplete"
        self.digest: DigestStatus = "missing"
        self.digest_problem: TranscriptError | None = None  # the mismatch, kept when best_effort reads on
        self.appended = 0
        self.pending = 0  # of the notes read, those from the pending-notes file beside it
        self.truncated_at: int | None = None
        self._seq = Sequencer(self.where)
        try:
            self._file: BinaryIO = open(self.path, "rb")
        except OSError as err:
            raise oserror(err, self.path, "open the file") from None
        try:
            self._iter = self._open(self._read())
        except BaseException:
            self._file.close()
            raise

    @property
    def instance_count(self) -> int:
        """How many instances were read so far (their records are not kept: see NameBook)."""
        return self._seq.instance_count

    @property
    def events(self) -> int:
        """Events read so far (the end event counts as one)."""
        return self._seq.count

    def __iter__(self) -> Iterator[Event]:
        return self._iter

    def __next__(self) -> Event:
        return next(self._iter)

    def close(self) -> None:
        self._file.close()

    def __enter__(self) -> EventStream:
        return self

    def __exit__(self, kind: type[BaseException] | None, err: BaseException | None, tb: TracebackType | None) -> None:
        self.close()

    # ----- plumbing ------------------------------------------------------------
    def _read(self) -> bytes:
        try:
            return self._file.read(self.limits.chunk_bytes)
        except OSError as err:
            raise oserror(err, self.path, "read the file") from None

    def _open(self, first: bytes) -> Iterator[Event]:
        if first.startswith(MAGIC):
            return self._transcript(first)
        if first.lstrip().startswith(b"{"):
            self.kind = "events"
            self.digest = "not-applicable"
            return self._jsonl(first)
        if not first:
            raise TranscriptError("expected a stepper transcript or a JSON-lines event file, found an empty file",
                                  self.where)
        if MAGIC.startswith(first):
            raise TranscriptError(f"expected the {len(MAGIC)}-byte magic line {MAGIC!r}, found the file ends "
                                  f"after {len(first)} bytes", self.where.but(offset=len(first)))
        raise TranscriptError(
            f"expected a stepper transcript (starting {MAGIC!r}) or a JSON-lines event file (starting '{{'), "
            f"found {first[:16]!r}", self.where.but(offset=0))

    # ----- msgpack transcripts ---------------------------------------------------
    def _unpacker(self, source: Any = None) -> msgpack.Unpacker:
        return make_unpacker(self.limits, source)

    def _transcript(self, first: bytes) -> Iterator[Event]:
        self._msgpack = self._unpacker()
        self._fed = 0  # bytes fed to the unpacker
        self._window = (b"", 0)
        self._total = len(first)
        self._hash = HeldBackDigest(first)
        self._feed(first[len(MAGIC):])
        version = self._object("format version")
        if isinstance(version, bool) or not isinstance(version, int) or version < 1:
            raise TranscriptError(f"expected a positive integer format version, found {version!r}"[:160],
                                  self.where.but(offset=len(MAGIC)))
        if version > FORMAT_VERSION:
            raise TranscriptError(
                f"expected format version {FORMAT_VERSION} (the newest this stepper reads), found version "
                f"{version}: a newer stepper wrote this file; upgrade stepper to read it",
                self.where.but(offset=len(MAGIC)))
        start = self._offset()
        self._seq.glue = version >= GLUE_VERSION  # version 1 files predate the glue events: unknown there
        self.header = read_header(self._object("header map"), version, self.where.but(offset=start))
        return self._events()

    def _offset(self) -> int:
        """Bytes of the file the unpacker has consumed (including a half-read object)."""
        return len(MAGIC) + self._msgpack.tell()

    def _feed(self, data: bytes) -> None:
        try:
            self._msgpack.feed(data)
        except msgpack.BufferFull:
            raise TranscriptError(f"expected events of at most {self.limits.max_event_bytes} bytes, "
                                  "found a larger one", self.where.but(offset=self._offset())) from None
        self._window = (data, self._fed)
        self._fed += len(data)

    def _last_fed(self) -> tuple[bytes, int]:
        """The bytes last fed to the unpacker and the unpacker offset of their first byte
        (the hot loop decodes packed runs of rounds from them: see :meth:`Sequencer.stream`)."""
        return self._window

    def _refill(self) -> bool:
        """Feed the next chunk; False at the end of the file."""
        chunk = self._read()
        if not chunk:
            return False
        self._total += len(chunk)
        if self._total > self.limits.max_total_bytes:
            raise TranscriptError(f"expected a file of at most {self.limits.max_total_bytes} bytes, found more",
                                  self.where.but(offset=self.limits.max_total_bytes))
        if self.digest == "missing":
            self._hash.add(chunk, self._offset() - END_MAX_BYTES)
        self._feed(chunk)
        return True

    def _object(self, what: str) -> Any:
        """One msgpack object of the preamble (version, header), reading as needed."""
        start = self._offset()
        while True:
            try:
                return self._msgpack.unpack()
            except msgpack.OutOfData:
                if not self._refill():
                    raise TranscriptError(f"expected the {what}, found the file ends inside it",
                                          self.where.but(offset=start)) from None
            except (ValueError, msgpack.UnpackException) as err:
                raise TranscriptError(f"expected the {what} as msgpack, found malformed bytes ({err})",
                                      self.where.but(offset=start)) from None

    def _payloads(self) -> Iterator[Any]:
        return unpacked(self._msgpack, self._refill)

    def _events(self) -> Iterator[Event]:
        """The hot loop (:meth:`Sequencer.stream`, refilling chunk by chunk), then the
        end event's checks; chained in C so no generator of ours sits between the
        consumer and the hot loop."""
        body = self._seq.stream(self._msgpack, until="end", refill=self._refill, on_error=self._translate,
                                window=self._last_fed)
        return itertools.chain(body, self._tail())

    def _tail(self) -> Iterator[Event]:
        seq = self._seq
        try:
            if seq.stopped_at is not None:
                self._check_end(seq.stopped_at.payload, seq.count - 1)
                for payload in self._payloads():
                    yield self._appended(payload)
        except (TranscriptError, ValueError, msgpack.UnpackException) as err:
            raise self._translate(err) from None
        if self._cut_off():
            self.truncated_at = self._offset_of_event(seq.count)
        if seq.stopped_at is None:
            self.completeness = "incomplete"
        for payload in read_pending(self.path):  # notes made while a writer held the file
            self.pending += 1
            yield self._appended(payload) if seq.stopped_at is not None else seq.feed(payload)

    def _translate(self, err: Exception) -> Exception:
        """The error to raise for one escaping the event loop: located, and msgpack's
        own failures as a :class:`TranscriptError` (anything else unchanged)."""
        if isinstance(err, TranscriptError):
            return self._locate(err)
        if isinstance(err, (ValueError, msgpack.UnpackException)):
            return self._locate(TranscriptError(past_cap(err) or f"expected a msgpack event map, found malformed "
                                                f"bytes ({err})", self.where.but(event=self._seq.count)))
        return err

    def _check_end(self, payload: Any, events: int) -> None:
        size = len(msgpack.packb(payload, use_bin_type=True))
        stop = self._offset()
        start = stop - size
        self.completeness = "complete"
        recorded = payload.get("sha256")
        count = payload.get("events")
        digest = self._hash.digest_upto(start) if size <= END_MAX_BYTES else b""
        self._hash.drop()
        if recorded == digest and count == events:
            self.digest = "verified"
            return
        self.digest = "mismatch"
        if size > END_MAX_BYTES:
            problem = f"an end event of at most {END_MAX_BYTES} bytes, found {size} bytes"
        elif recorded != digest:
            found = recorded.hex() if isinstance(recorded, bytes) else repr(recorded)[:70]
            problem = f"SHA-256 {digest.hex()} of bytes 0..{start}, found {found} in the end event"
        else:
            problem = f"the end event to record the {events} events before it, found it records {count!r}"
        self.digest_problem = TranscriptError(
            f"expected {problem}: {DIGEST_MISMATCH}, the file changed after it was written (corrupt)",
            self.where.but(offset=start, event=events))
        if not self.best_effort:
            raise self.digest_problem

    def _appended(self, payload: Any) -> Event:
        self.appended += 1
        return appended_note(self._seq, payload)

    def _cut_off(self) -> bool:
        """Whether the unpacker holds a half-read object (see the module docstring)."""
        try:
            self._msgpack.feed(b"\xc0")
            return self._msgpack.unpack() is not None
        except (msgpack.OutOfData, msgpack.BufferFull, ValueError, msgpack.UnpackException):
            return True

    def _offset_of_event(self, index: int) -> int | None:
        """Byte offset where event ``index`` starts (a second pass; error paths only)."""
        try:
            with open(self.path, "rb") as handle:
                handle.seek(len(MAGIC))
                unpacker = self._unpacker(handle)
                for _ in range(index + 2):  # version, header, then the events before it
                    unpacker.skip()
                return len(MAGIC) + unpacker.tell()
        except (OSError, ValueError, msgpack.OutOfData, msgpack.UnpackException):
            return None

    def _locate(self, err: TranscriptError) -> TranscriptError:
        if err.where.offset is None and err.where.line is None and err.where.event is not None:
            offset = self._offset_of_event(err.where.event)
            if offset is not None:
                return err.at(offset=offset)  # type: ignore[return-value]
        return err

    # ----- JSON-lines event files ------------------------------------------------
    def _jsonl(self, first: bytes) -> Iterator[Event]:
        from stepper.transcript.jsonl import LineSplitter, refuse_reserved  # only JSON-lines files need them

        splitter = LineSplitter(self.where, self.limits.max_event_bytes)
        chunk = first
        total = 0
        while chunk:
            total += len(chunk)
            if total > self.limits.max_total_bytes:
                raise TranscriptError(f"expected a file of at most {self.limits.max_total_bytes} bytes, found more",
                                      self.where)
            for item in splitter.feed(chunk):
                yield from self._json_event(item.line, item.payload, refuse_reserved)
            chunk = self._read()
        for item in splitter.finish():
            yield from self._json_event(item.line, item.payload, refuse_reserved)
        if splitter.dropped is not None:
            self.truncated_at = splitter.dropped
            self.completeness = "incomplete"
        else:
            self.completeness = "complete"

    def _json_event(self, line: int, payload: Any, refuse_reserved: Callable[[object, Where], None]
                    ) -> Iterator[Event]:
        where = self.where.but(line=line)
        if line == 1 and isinstance(payload, dict) and payload.get("type") == "header":
            self.header = read_header(payload, payload.get("format_version", FORMAT_VERSION), where)
            return
        if isinstance(payload, dict):
            refuse_reserved(payload.get("type"), where)  # `end` is the writer's: import and record refuse it too
        yield self._seq.feed(payload, where)


def read_header(raw: Any, version: Any, where: Where) -> Header:
    """The header record of a transcript's header map (``version`` read before it)."""
    if not isinstance(raw, dict):
        raise TranscriptError(f"expected the header as a map, found {type(raw).__name__}", where)
    if isinstance(version, bool) or not isinstance(version, int) or not 1 <= version <= FORMAT_VERSION:
        raise TranscriptError(f"expected format version {FORMAT_VERSION} (the newest this stepper reads), "
                              f"found {version!r}"[:160], where)
    tool = raw.get("tool_version", "")
    meta = raw.get("metadata", {})
    if not isinstance(tool, str) or not isinstance(meta, dict):
        raise TranscriptError("expected header `tool_version` as a string and `metadata` as a map", where)
    return Header(version, tool[:MAX_TEXT], plain_copy(meta, where))
