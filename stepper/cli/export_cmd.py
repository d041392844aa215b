"""`stepper export FILE [-o OUT]`: a transcript as JSON lines.

Prints one header line (``{"type": "header", ...}``: format version, writer
version, metadata) and then one JSON object per event, elements as JSON
integers (decimal strings above 2^53) or lists of them for an extension
field: the event-stream form of transcripts/EVENTS.md, so ``stepper import`` turns it
back into the same events. Appended notes are exported as ordinary notes.
Streaming: the transcript is never held in memory. With ``-o OUT`` the lines
go to a file beside OUT that replaces it only once the export succeeded, so an
unusable FILE never costs an existing OUT its contents.
"""

from __future__ import annotations

import argparse
import os
import sys
from itertools import chain
from typing import IO

HELP = "print a transcript as JSON lines (the event-stream form; `stepper import` reads it back)"
DESCRIPTION = (
    "Print FILE as JSON lines: a header line, then one event per line with field elements as integers or "
    "decimal strings. `stepper import` turns the output back into the same transcript events."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript (or JSON-lines event file)")
    parser.add_argument("-o", "--output", metavar="OUT", help="write to OUT instead of standard output")
    parser.add_argument("--force", action="store_true",
                        help="replace OUT if it exists (without this, an existing OUT is refused and left as it was)")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import UsageError
    from stepper.transcript.store.output import atomic_output

    if args.output is None:
        return _export(args.file, sys.stdout)
    if os.path.exists(args.output) and os.path.exists(args.file) and os.path.samefile(args.file, args.output):
        raise UsageError("expected FILE and -o OUT to be different files, found the same file twice")
    # written beside OUT and renamed at the end, so an unusable FILE leaves an existing OUT as it was
    with atomic_output(args.output, replace=args.force, what="the export") as out:
        code = _export(args.file, out)
    return code


def _export(path: str, out: IO[str]) -> int:
    import json

    from stepper.transcript.events import to_payload
    from stepper.transcript.store import open_events
    from stepper.transcript.records import FieldDecl, InstanceStart
    from stepper.transcript.store.writer import whole_proof_note

    with open_events(path) as stream:
        records = iter(stream)
        first = next(records, None)
        header = {"type": "header", "format_version": stream.header.format_version,
                  "tool_version": stream.header.tool_version, "metadata": dict(stream.header.metadata)}
        write = out.write
        write(json.dumps(header, default=_jsonable) + "\n")
        field = None
        started = False  # an instance seen: a note on the whole proof must then say so (see whole_proof_note)
        for record in chain([] if first is None else [first], records):
            if isinstance(record, FieldDecl):
                field = record.field
            started = started or isinstance(record, InstanceStart)
            payload = whole_proof_note(to_payload(record, field, binary=False), record, started)
            write(json.dumps(payload, default=_jsonable) + "\n")
    if stream.completeness != "complete":
        print(f"stepper export: {path} is incomplete (the writer did not finish); exported the events present",
              file=sys.stderr)
    return 0


def _jsonable(value: object) -> object:
    """Free-form data from a transcript (unknown events, metadata) as JSON: bytes as hex."""
    if isinstance(value, (bytes, bytearray)):
        return "0x" + bytes(value).hex()
    raise TypeError(f"cannot export a {type(value).__name__}")
