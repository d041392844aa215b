"""The transcript writer: append-only, one unbuffered write per event.

Every event is validated through a :class:`Sequencer` before a byte is written
and stored in its canonical binary form (elements fixed-width little endian,
element lists packed into one blob), so whatever the writer accepts the reader
reads back identically. The file is never held in memory; a prover that dies
leaves a readable prefix (no end event: "incomplete"). ``finish`` appends the
``end`` event: the event count and the SHA-256 of every byte before it.

Durability: each event goes to the operating system in one ``write`` as it is
made, so a prover that crashes or is killed loses nothing written before. The
writer does not ``fsync`` each event: a machine that loses power may lose the last
events.

Two ways to write. *Live* (the default; recording): the file is written in place so
that others can follow it, and the writer holds an exclusive advisory lock on it
until it closes; notes made meanwhile wait beside it and are folded in when it closes
(:mod:`stepper.transcript.store.pending`). *Atomic* (``atomic=True``; import, prove,
demo): the events go to a temporary file beside the destination, renamed into place
when the writer closes (:mod:`stepper.transcript.store.output`). Either way an existing
file is refused unless ``replace`` is true.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import os
from types import TracebackType
from typing import TYPE_CHECKING, Any, BinaryIO, Mapping

import msgpack

from stepper import __version__
from stepper.errors import TranscriptError, Where
from stepper.transcript.events import Sequencer, to_payload
from stepper.transcript.records import GLUE_VERSION, PLAIN_VERSION, Header, InstanceStart, Note
from stepper.transcript.glue_records import NamedValue, Opening, Squeeze
from stepper.transcript.store.output import OutputExists, publish, refuse_existing, temp_beside, write_failed
from stepper.transcript.store.pending import take_pending, try_lock

if TYPE_CHECKING:
    from stepper.transcript.model import Event

__all__ = ["MAGIC", "END_MAX_BYTES", "TranscriptWriter", "header_bytes", "end_payload", "oserror",
           "whole_proof_note"]

MAGIC = b"stepper:sumcheck\n"
END_MAX_BYTES = 256  # an end event is about 60 bytes; readers refuse larger ones


def whole_proof_note(payload: dict[str, Any], record: Event, after_an_instance: bool) -> dict[str, Any]:
    """``payload`` with ``"instance": None`` for a note on the whole proof written after an instance
    started (without it, a reader would attach the note to that instance; before any instance the key
    is left out, as it always was)."""
    if after_an_instance and isinstance(record, Note) and record.instance is None:
        return {**payload, "instance": None}
    return payload


def end_payload(events: int, digest: bytes) -> dict[str, Any]:
    """The end event: keys in this order, packed in msgpack's shortest form."""
    return {"type": "end", "events": events, "sha256": digest}


def oserror(err: OSError, path: str, doing: str) -> TranscriptError:
    return TranscriptError(f"could not {doing}: {err.strerror or err}", Where(file=path))


def header_bytes(metadata: Mapping[str, Any], tool_version: str = __version__,
                 version: int = PLAIN_VERSION) -> bytes:
    """Magic, version and header map: the first bytes of every transcript."""
    header = {"tool": "stepper", "tool_version": tool_version, "metadata": dict(metadata)}
    return MAGIC + msgpack.packb(version) + msgpack.packb(header, use_bin_type=True)


def _uses_glue(record: Event) -> bool:
    """Whether a record needs format version 2 (the glue of contract 3)."""
    cls = record.__class__
    if cls is InstanceStart:
        return (record.claim_expr is not None or record.final_expr is not None  # type: ignore[union-attr]
                or record.eq_point is not None)  # type: ignore[union-attr]
    return cls is NamedValue or cls is Squeeze or cls is Opening


class TranscriptWriter:
    """Writes a transcript event by event; ``finish`` (or a clean ``with`` exit)
    appends the end event. An exception inside the ``with`` leaves a live file
    without an end event (readable, and read back as "incomplete") and an atomic
    one unwritten."""

    def __init__(self, path: str | os.PathLike[str], *, metadata: Mapping[str, Any] | None = None,
                 tool_version: str = __version__, atomic: bool = False, replace: bool = True,
                 replace_hint: str = "--force") -> None:
        self.path = str(path)
        self._replace_hint = replace_hint  # how the caller asks to replace an existing file
        self.atomic = atomic
        self._replace = replace
        self._temp: str | None = None
        meta = dict(metadata or {})
        meta.setdefault("created", _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"))
        self.header = Header(PLAIN_VERSION, tool_version, meta)
        self._seq = Sequencer(Where(file=self.path))
        self._hasher = hashlib.sha256()
        self._packer = msgpack.Packer(use_bin_type=True)
        self._finished = False
        self._broken: str | None = None  # why the writer stopped accepting events, if it did
        try:
            head = header_bytes(meta, tool_version)
        except (TypeError, ValueError, OverflowError) as err:
            raise TranscriptError(f"expected metadata of strings, numbers (integers within -2^63 .. 2^64 - 1), "
                                  f"lists and maps, found {err}", Where(file=self.path)) from None
        self._file: BinaryIO = self._open_temp() if atomic else self._open_live()
        self._write_failed = False
        try:
            self._emit(head)
        except TranscriptError:
            self.discard()
            raise

    def _open_temp(self) -> BinaryIO:
        refuse_existing(self.path, self._replace, self._replace_hint)
        try:
            handle, self._temp = temp_beside(self.path)
        except OSError as err:
            raise oserror(err, self.path, "create the transcript") from None
        return handle  # type: ignore[return-value]

    def _open_live(self) -> BinaryIO:
        flags = os.O_RDWR | os.O_CREAT | (0 if self._replace else os.O_EXCL)  # read: see _declare_glue
        try:
            handle = os.fdopen(os.open(self.path, flags, 0o666), "wb", buffering=0)
        except FileExistsError:
            refuse_existing(self.path, False, self._replace_hint)
            raise
        except OSError as err:
            raise oserror(err, self.path, "create the transcript") from None
        if not try_lock(handle):  # truncating now would destroy another writer's recording
            handle.close()
            raise TranscriptError("expected a file no other process is writing, found another writer holds its "
                                  "lock (a recording in progress?); it was left as it was", Where(file=self.path))
        try:
            handle.truncate(0)
        except OSError as err:
            handle.close()
            raise oserror(err, self.path, "create the transcript") from None
        return handle

    @property
    def events(self) -> int:
        """Events written so far (the end event not counted)."""
        return self._seq.count

    @property
    def awaiting_challenge(self) -> bool:
        """Whether the last round written still waits for its challenge."""
        return self._seq.awaiting_challenge

    @property
    def field(self) -> object:
        """The field declared so far (None before the field event)."""
        return self._seq.field

    def _emit(self, data: bytes) -> None:
        self._hasher.update(data)
        try:
            self._file.write(data)
        except OSError as err:
            self._write_failed = True  # what reached the file is unknown: an atomic file is never published
            raise oserror(err, self.path, "write the transcript") from None

    def write(self, record: Event) -> Event:
        """Validate and append one event record; returns the record as sequenced."""
        if self._finished:
            raise TranscriptError("expected no events after finish(), found one", Where(file=self.path))
        field = self._seq.field
        payload = to_payload(record, field, binary=field is not None, packed=True)
        return self.write_payload(whole_proof_note(payload, record, self._seq.current is not None))

    def write_payload(self, payload: Mapping[str, Any]) -> Event:
        """Validate an event payload (JSON or binary values) and append it in
        the file's canonical binary form; returns the record."""
        if self._finished:
            raise TranscriptError("expected no events after finish(), found one", Where(file=self.path))
        if self._broken is not None:
            raise TranscriptError(self._broken, Where(file=self.path, event=self._seq.count))
        if isinstance(payload, Mapping) and payload.get("type") == "end":
            raise TranscriptError("expected an event type other than `end`, which only the writer writes when it "
                                  "seals the file", Where(file=self.path, event=self._seq.count))
        record = self._seq.feed(payload)
        if self.header.format_version < GLUE_VERSION and _uses_glue(record):
            self._declare_glue()
        field = self._seq.field
        try:
            data = self._packer.pack(whole_proof_note(to_payload(record, field, binary=True, packed=True), record,
                                                      self._seq.current is not None))
        except (OverflowError, TypeError, ValueError) as err:
            # the Sequencer has already counted this event: stop here, so a wrong count is never sealed
            self._broken = (f"expected no more events after event {self._seq.count - 1}, which could not be stored "
                            f"({err}); the file keeps the events before it and reads as incomplete")
            raise TranscriptError(
                "expected free-form integers between -2^63 and 2^64 - 1 (what msgpack stores), found a value "
                f"msgpack cannot store ({err}); send it as a decimal string",
                Where(file=self.path, event=self._seq.count - 1)) from None
        self._emit(data)
        return record

    def _declare_glue(self) -> None:
        """Change the version byte to 2 (the file holds glue from here on) and hash the bytes
        written so far again, once; the byte follows the magic line (both versions are
        one-byte msgpack integers)."""
        try:
            fd = self._file.fileno()
            size = os.fstat(fd).st_size
            os.pwrite(fd, bytes([GLUE_VERSION]), len(MAGIC))
            hasher = hashlib.sha256()
            offset = 0
            while offset < size:
                chunk = os.pread(fd, min(1 << 20, size - offset), offset)
                if not chunk:
                    break
                hasher.update(chunk)
                offset += len(chunk)
        except OSError as err:
            raise oserror(err, self.path, "mark the transcript as format version 2") from None
        self._hasher = hasher
        self.header = Header(GLUE_VERSION, self.header.tool_version, self.header.metadata)

    def finish(self) -> None:
        """Append the end event (event count and SHA-256 of every byte so far) and close."""
        if self._finished:
            return
        if self._broken is not None:
            self.close()
            raise TranscriptError(f"the transcript was left unsealed: {self._broken}", Where(file=self.path))
        self._emit(self._packer.pack(end_payload(self._seq.count, self._hasher.digest())))
        self._finished = True
        self.close()

    def close(self) -> None:
        """Close; without a ``finish`` first the file has no end event and reads as incomplete.
        Live: notes made while the file was being written are folded in, then the lock is
        released. Atomic: the file is renamed into place."""
        self._finished = True
        if self._file.closed:
            return
        if self._temp is None:
            try:
                self._fold_pending()
            finally:
                self._file.close()  # releases the lock
            return
        if self._write_failed:
            self.discard()
            return
        temp, self._temp = self._temp, None
        try:
            os.fsync(self._file.fileno())
            self._file.close()
            publish(temp, self.path, self._replace)
        except OutputExists:
            raise
        except OSError as err:
            self._file.close()
            raise write_failed(err, self.path, "the transcript") from None

    def discard(self) -> None:
        """Atomic: close and remove the unfinished file (the destination is left as it was).
        Live: the same as :meth:`close` (what was recorded stays)."""
        if self._temp is None:
            self.close()
            return
        self._finished = True
        self._file.close()
        temp, self._temp = self._temp, None
        try:
            os.unlink(temp)
        except OSError:
            pass

    def _fold_pending(self) -> None:
        """Append the notes made while this writer held the file (it still holds the lock)."""
        try:
            with take_pending(self.path) as notes:
                for payload in notes:
                    self._file.write(self._packer.pack(payload))
                if notes:
                    os.fsync(self._file.fileno())
        except (OSError, TranscriptError):
            pass  # the pending-notes file stays; readers still show its notes, and the next note folds them

    def __enter__(self) -> TranscriptWriter:
        return self

    def __exit__(self, kind: type[BaseException] | None, err: BaseException | None, tb: TracebackType | None) -> None:
        if kind is None:
            self.finish()
        elif self.atomic:
            self.discard()  # an exception means no output: the destination stays as it was
        else:
            self.close()


