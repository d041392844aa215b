"""Transcript files on disk: the writer, the streaming reader, and notes added later.

Layout (transcripts/FORMAT.md is the full description): the magic line
``MAGIC``, the format version as a msgpack integer, a header map, one msgpack
map per event (field elements as fixed-width little-endian bytes, element lists
packed into one blob), and an ``end`` event carrying the event count and the
SHA-256 of every byte before it. Notes appended later (:func:`append_note`)
follow the end event; the recorded part's digest still verifies.

A missing end event means "incomplete" (a clean prefix, not an error); a
digest that does not match means "corrupt": a :class:`TranscriptError`, or
``digest == "mismatch"`` when the caller asks for best effort.
"""

from __future__ import annotations

import contextlib
import os
from typing import TYPE_CHECKING, Any

import msgpack

from stepper.errors import TranscriptError, Where
from stepper.transcript.events import MAX_TEXT
from stepper.transcript.store.reader import EventStream, ReadLimits
from stepper.transcript.store.pending import add_pending, lock_within, take_pending, unlock
from stepper.transcript.store.writer import MAGIC, TranscriptWriter, header_bytes, oserror
from stepper.transcript.records import InstanceStart, Note

if TYPE_CHECKING:
    from stepper.transcript.model import Transcript

__all__ = [
    "MAGIC",
    "ReadLimits",
    "TranscriptWriter",
    "EventStream",
    "open_events",
    "load",
    "append_note",
    "header_bytes",
]


def open_events(path: str | os.PathLike[str], *, best_effort: bool = False,
                limits: ReadLimits | None = None) -> EventStream:
    """The event records of a transcript (msgpack) or event file (JSON lines),
    told apart by content. Iterate once; the stream is a context manager.
    With ``best_effort`` a digest mismatch sets ``digest = "mismatch"``
    instead of raising."""
    return EventStream(path, best_effort=best_effort, limits=limits)


def load(path: str | os.PathLike[str], *, best_effort: bool = False,
         limits: ReadLimits | None = None) -> Transcript:
    """The whole :class:`Transcript` of a file (see :func:`open_events`)."""
    from stepper.transcript.model import fold_events  # the fold: not needed to read events one by one

    with open_events(path, best_effort=best_effort, limits=limits) as stream:
        events = list(stream)
        try:
            return fold_events(events, stream.header, stream.completeness, stream.digest)
        except TranscriptError as err:
            raise err.at(file=stream.path) from None


def append_note(path: str | os.PathLike[str], note: Note, *, wait: float = 2.0) -> str | None:
    """Add a note after the end event of a transcript file. The recorded part
    (and so its digest) is untouched; readers report appended notes apart.

    The note is written into the file only under the file's lock. While a writer
    holds it (a recording in progress) the note goes to the pending-notes file
    beside it instead, shown by readers and folded in when the recording ends:
    returns that file's name then, None when the note went into the file."""
    where = Where(file=str(path))
    try:
        handle = os.fdopen(os.open(path, os.O_WRONLY | os.O_APPEND), "ab", buffering=0)
    except OSError as err:
        raise oserror(err, str(path), "open the transcript to add a note") from None
    with handle:
        if not lock_within(handle, wait):  # a writer holds it: keep the note beside the file
            payload = _note_payload(path, note, where, recording=True)
            if note.instance is None:  # folded in after an instance: say it is about the whole proof
                payload["instance"] = None
            return add_pending(path, payload)
        try:
            payload = _note_payload(path, note, where, recording=False)
            size = os.fstat(handle.fileno()).st_size
            try:
                with take_pending(path) as waiting:  # notes left by a writer that was killed
                    data = b"".join(msgpack.packb(p, use_bin_type=True) for p in [*waiting, payload])
                    handle.write(data)
                    handle.flush()
                    os.fsync(handle.fileno())
            except OSError as err:
                with contextlib.suppress(OSError):  # a short write (full disk) is taken back: no half note
                    os.ftruncate(handle.fileno(), size)
                raise oserror(err, str(path), "append to the transcript") from None
        finally:
            unlock(handle)
    return None


def _note_payload(path: str | os.PathLike[str], note: Note, where: Where, *, recording: bool) -> dict[str, Any]:
    """The note event for ``note``, checked against the file as it stands (a recording's
    instances so far)."""
    with open_events(path) as stream:
        if stream.kind != "transcript":
            raise TranscriptError("expected a stepper transcript to hold the note, found a JSON-lines event file "
                                  "(convert it first with `stepper import`)", where)
        instances = [record for record in stream if record.__class__ is InstanceStart]
        if stream.truncated_at is not None and not recording:
            raise TranscriptError("expected a file that ends after a whole event, found a partial event; "
                                  "refusing to append after it", where.but(offset=stream.truncated_at))
    if len(note.text) > MAX_TEXT:
        raise TranscriptError(f"expected a note of at most {MAX_TEXT} characters, found {len(note.text)}", where)
    payload: dict[str, Any] = {"type": "note", "text": note.text}
    if note.instance is not None:
        if not 0 <= note.instance < len(instances):
            raise TranscriptError(f"expected a note's instance among 0..{len(instances) - 1}, "
                                  f"found {note.instance}", where)
        payload["instance"] = note.instance
        if note.round is not None and not 0 <= note.round <= instances[note.instance].num_vars:
            raise TranscriptError(f"expected a note's round among 0..{instances[note.instance].num_vars}, "
                                  f"found {note.round}", where.but(instance=instances[note.instance].name))
    if note.round is not None:
        payload["round"] = note.round
    return payload
