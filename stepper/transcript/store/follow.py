"""Reading a transcript or event file that a prover is still writing, incrementally.

:class:`FollowedStream` is an :class:`EventStream` that survives running dry.
Iterate it once as usual; when it stops, :meth:`FollowedStream.more` yields the
events completed since, reading only the bytes appended since the last read.

Invariants:

* Nothing destructive happens at the end of the data. A msgpack transcript's
  half-written last event stays buffered in the feed-mode ``Unpacker`` (the
  reader's nil-byte cut-off probe never runs); a JSON-lines file's unterminated
  last line stays in the :class:`LineSplitter` (never ``finish``-ed). A half-
  written tail is simply not an event yet, so ``truncated_at`` stays None.
* The same :class:`Sequencer` and the same hot loop (:meth:`Sequencer.stream`)
  carry on across calls, so the records, the completeness and the digest after
  the last :meth:`more` equal those of one fresh read of the finished file.
* Once a transcript's end event has been read the stream is final: ``more``
  yields the notes appended after it, if any, and nothing else.
* Until then ``completeness`` is "incomplete" and ``digest`` "missing" (a
  JSON-lines file: "complete" while it ends after a whole line).
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Iterator

import msgpack

from stepper.errors import InternalError, TranscriptError
from stepper.transcript.jsonl import LineSplitter, refuse_reserved
from stepper.transcript.store.reader import EventStream, ReadLimits

if TYPE_CHECKING:
    from stepper.transcript.model import Event

__all__ = ["FollowedStream"]


class FollowedStream(EventStream):
    """The records of a growing file: iterate once, then call :meth:`more` after each growth."""

    def __init__(self, path: str | os.PathLike[str], *, best_effort: bool = False,
                 limits: ReadLimits | None = None) -> None:
        self._dry = False  # the last iterator handed out has been read to its end
        self._ended = False  # a transcript's end event has been read
        self._open_line = False  # an event file's bytes end inside a line
        self._splitter: LineSplitter | None = None
        super().__init__(path, best_effort=best_effort, limits=limits)

    @property
    def bytes_read(self) -> int:
        """Bytes of the file read so far (a half-written tail included)."""
        return self._total

    def continues(self, now: os.stat_result) -> bool:
        """Whether ``now`` (a fresh ``os.stat`` of the path) is the file this stream reads,
        at least as long as what was read: False when it was replaced or rewritten shorter."""
        mine = os.fstat(self._file.fileno())
        return (now.st_dev, now.st_ino) == (mine.st_dev, mine.st_ino) and now.st_size >= self._total

    def more(self) -> Iterator[Event]:
        """The events completed since the stream last ran dry (read from the appended bytes only)."""
        if not self._dry:
            raise InternalError("expected a followed stream read to its end (or a previous `more()` exhausted) "
                                "before asking for more, found it part-way", self.where)
        self._dry = False
        if self.kind == "events":
            self._iter = self._lines(self._read())
        elif self._ended:
            self._iter = self._after_end()
        else:
            self._iter = self._events()
        return self._iter

    # ----- msgpack transcripts ---------------------------------------------------
    def _tail(self) -> Iterator[Event]:
        """Replaces the reader's tail: the end event's checks once it arrives, never the cut-off probe."""
        seq = self._seq
        if seq.stopped_at is not None:
            try:
                self._check_end(seq.stopped_at.payload, seq.count - 1)
            except (TranscriptError, ValueError, msgpack.UnpackException) as err:
                raise self._translate(err) from None
            self._ended = True
            yield from self._after_end()
        else:
            self._dry = True

    def _after_end(self) -> Iterator[Event]:
        """Notes appended after the end event, as far as they are written."""
        try:
            for payload in self._payloads():
                yield self._appended(payload)
        except (TranscriptError, ValueError, msgpack.UnpackException) as err:
            raise self._translate(err) from None
        self._dry = True

    # ----- JSON-lines event files ------------------------------------------------
    def _jsonl(self, first: bytes) -> Iterator[Event]:
        self._splitter = LineSplitter(self.where, self.limits.max_event_bytes)
        self._total = 0
        return self._lines(first)

    def _lines(self, chunk: bytes) -> Iterator[Event]:
        """Complete lines from ``chunk`` on, until the data stops; an unterminated line waits."""
        splitter = self._splitter
        assert splitter is not None
        while chunk:
            self._total += len(chunk)
            if self._total > self.limits.max_total_bytes:
                raise TranscriptError(f"expected a file of at most {self.limits.max_total_bytes} bytes, found more",
                                      self.where)
            newline = chunk.rfind(b"\n")
            if newline >= 0:
                self._open_line = bool(chunk[newline + 1:].strip())
            else:
                self._open_line = self._open_line or bool(chunk.strip())
            for item in splitter.feed(chunk):
                yield from self._json_event(item.line, item.payload, refuse_reserved)
            chunk = self._read()
        self.completeness = "incomplete" if self._open_line else "complete"
        self._dry = True
