"""The JSON-lines side of the event stream (transcripts/EVENTS.md).

:class:`LineSplitter` takes bytes as they arrive (a file read in chunks, or a
file a running prover is still appending to) and hands out one decoded JSON
object per complete line, numbered from 1. Blank lines are skipped. A line
longer than the cap is refused. At the end, :meth:`LineSplitter.finish`
keeps a last line that lacks its newline only if it is valid JSON: a prover
killed mid-write leaves a partial line, which is dropped and reported.

An optional first line ``{"type": "header", ...}`` carries the header of an
exported transcript (format version, tool version, metadata); see FORMAT.md.

No I/O here: callers feed bytes.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any, Iterator

from stepper.errors import TranscriptError, Where

__all__ = ["LineSplitter", "JsonLine", "decode_line", "refuse_reserved", "oversized_integer"]

# types of the transcript file itself: a prover's event stream may not carry them
RESERVED_TYPES = frozenset({"end"})


@dataclass(frozen=True, slots=True)
class JsonLine:
    """One decoded line: its 1-based number and the JSON value on it."""

    line: int
    payload: Any


def refuse_reserved(kind: object, where: Where) -> None:
    """Refuse an event of a reserved type: the end event (with the digest) is
    written only by the transcript writer when it seals the file; copied from a
    stream it would make the file read as corrupt."""
    if isinstance(kind, str) and kind in RESERVED_TYPES:  # any other `type` is the Sequencer's to refuse
        raise TranscriptError(f"expected an event-stream type, found `{kind}`, which only the transcript writer "
                              "writes when it seals the file", where)


def oversized_integer(where: Where) -> TranscriptError:
    """The error for a free-form integer (unknown event, extra key) that msgpack cannot store."""
    return TranscriptError("expected free-form integers between -2^63 and 2^64 - 1 (what msgpack stores), found a "
                           "larger one; send it as a decimal string", where)


def decode_line(text: bytes, where: Where) -> Any:
    """The JSON value of one line, or a :class:`TranscriptError` naming the line."""
    try:
        return json.loads(text)
    except UnicodeDecodeError as err:
        raise TranscriptError(f"expected UTF-8 text, found byte {text[err.start]:#04x} at column {err.start + 1}",
                              where) from None
    except RecursionError:
        raise TranscriptError("expected JSON nested at most a few hundred levels deep, found deeper nesting",
                              where) from None
    except ValueError as err:
        reason = getattr(err, "msg", None) or str(err)
        column = getattr(err, "colno", None)
        place = f" at column {column}" if column is not None else ""
        found = text[:40].decode("utf-8", "replace") + ("..." if len(text) > 40 else "")
        raise TranscriptError(f"expected one JSON object per line, found invalid JSON ({reason}{place}): {found!r}",
                              where) from None


class LineSplitter:
    """Complete lines out of a byte stream that may arrive in arbitrary pieces."""

    def __init__(self, source: Where, max_line_bytes: int) -> None:
        self.source = source
        self.max_line_bytes = max_line_bytes
        self.line = 0  # number of the last line handed out (or skipped)
        self.dropped: int | None = None  # number of a partial last line that was dropped
        self._rest = b""

    def feed(self, chunk: bytes) -> Iterator[JsonLine]:
        """Decoded complete lines in ``chunk`` (together with any carried-over piece)."""
        data = self._rest + chunk if self._rest else chunk
        start = 0
        while True:
            stop = data.find(b"\n", start)
            if stop < 0:
                break
            self.line += 1
            text = data[start:stop]
            start = stop + 1
            if len(text) > self.max_line_bytes:
                raise self._too_long(len(text), self.line)
            if text.strip():
                yield JsonLine(self.line, decode_line(text, self.source.but(line=self.line)))
        self._rest = data[start:]
        if len(self._rest) > self.max_line_bytes:
            raise self._too_long(len(self._rest), self.line + 1)

    def finish(self) -> Iterator[JsonLine]:
        """The last line if it has no newline but is whole; a partial one is dropped."""
        text, self._rest = self._rest, b""
        if not text.strip():
            return
        number = self.line + 1
        self.line = number
        try:
            payload = json.loads(text)
        except (ValueError, RecursionError):
            self.dropped = number
            return
        yield JsonLine(number, payload)

    def _too_long(self, size: int, number: int) -> TranscriptError:
        return TranscriptError(
            f"expected event lines of at most {self.max_line_bytes} bytes, found one of {size} bytes or more",
            self.source.but(line=number),
        )
