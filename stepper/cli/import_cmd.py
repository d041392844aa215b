"""`stepper import EVENTS -o OUT`: turn a saved event file into a transcript.

EVENTS is a JSON-lines event file (transcripts/EVENTS.md), such as a
prover wrote to ``STEPPER_EVENTS`` or ``stepper export`` printed; a stepper
transcript is accepted too (re-sealing it). Every event is validated on the
way in. A partial last line (a crash mid-write) is dropped and OUT is left
unsealed ("incomplete"); a malformed line stops the import with one error
naming its line, and OUT keeps the events before it, unsealed.
"""

from __future__ import annotations

import argparse
import os
import sys
from itertools import chain

HELP = "convert a JSON-lines event file into a transcript (validated, sealed with a digest)"
DESCRIPTION = (
    "Read EVENTS (one JSON event per line, as a prover writes for `stepper record`, or the output of "
    "`stepper export`) and write the transcript OUT. A partial last line is dropped and OUT is marked "
    "incomplete; a malformed line is an error naming the line."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("events", metavar="EVENTS", help="JSON-lines event file (or a transcript)")
    parser.add_argument("-o", "--output", required=True, metavar="OUT", help="transcript file to write")
    parser.add_argument("--label", metavar="TEXT", help="a label stored in the transcript header")
    parser.add_argument("--force", action="store_true",
                        help="replace OUT if it exists (without this, an existing OUT is refused and left as it was)")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import TranscriptError, UsageError, Where
    from stepper.transcript.jsonl import oversized_integer, refuse_reserved
    from stepper.transcript.store import TranscriptWriter, open_events
    from stepper.transcript.records import UnknownEvent

    if os.path.exists(args.output) and os.path.samefile(args.events, args.output):
        raise UsageError("expected EVENTS and -o OUT to be different files, found the same file twice")
    with open_events(args.events) as stream:
        records = iter(stream)
        first = next(records, None)  # reading the first event also reads an exported header line
        meta = dict(stream.header.metadata)
        meta.setdefault("imported_from", os.path.basename(args.events))
        if args.label:
            meta["label"] = args.label
        writer = TranscriptWriter(args.output, metadata=meta, atomic=True, replace=args.force)
        written = 0  # counted here: the writer also counts an event its packing then refused
        try:
            for record in chain([] if first is None else [first], records):
                if isinstance(record, UnknownEvent):
                    refuse_reserved(record.kind, Where(file=args.events, event=written))
                try:
                    writer.write(record)
                except OverflowError:
                    raise oversized_integer(Where(file=args.events, event=written)) from None
                written += 1
        except TranscriptError as err:
            writer.close()
            raise TranscriptError(f"{err.message}; {args.output} keeps the {written} event{'' if written == 1 else 's'} before it, "
                                  "marked incomplete", err.where) from None
        except BaseException:
            writer.discard()  # interrupted or a bug: no output, and an existing OUT stays as it was
            raise
        complete = stream.completeness == "complete"
        if complete:
            writer.finish()
        else:
            writer.close()
    if complete:
        print(f"stepper import: {args.output}: {writer.events} events, sealed", file=sys.stderr)
    else:
        where = f"line {stream.truncated_at}" if stream.kind == "events" else f"byte {stream.truncated_at}"
        cut = f"; the cut-off event at {where} was dropped" if stream.truncated_at is not None else ""
        print(f"stepper import: {args.output}: {writer.events} events, incomplete{cut}", file=sys.stderr)
    return 0
