"""`stepper writeup FILE [--witness W] -o OUT.md|OUT.html`: a write-up to paste or attach.

Thin edge: loads the transcript, replays it (:func:`stepper.verify.replay.replay_transcript`),
diagnoses it with the witness when one is given (:func:`stepper.diagnose.rootcause.diagnose`),
builds the document (:mod:`stepper.share.report`) and writes Markdown or one
self-contained HTML page, chosen by the output's suffix or ``--format``.
The file is written whole or not at all (temporary file, then rename).
Exit 0 when written, whatever the verdict; 2 when an input cannot be used.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HELP = "write a shareable write-up (Markdown, or self-contained HTML with charts) of one transcript"
DESCRIPTION = (
    "Replay FILE and write a write-up: summary, per-instance round tables, the first failure with its "
    "explanation, root cause and probe findings (with --witness), bucket occupancy charts, notes, and what "
    "the file reveals. The HTML page loads nothing from the network. A passing replay in a write-up is "
    "evidence about one run, not a soundness proof."
)

SUFFIXES = {".md": "md", ".markdown": "md", ".html": "html", ".htm": "html"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript or JSON-lines event file")
    parser.add_argument("-o", "--output", metavar="OUT", required=True,
                        help="where to write: OUT.md or OUT.html ('-' for standard output, with --format)")
    parser.add_argument("--witness", "-w", metavar="W", help="witness file for the root-cause section")
    parser.add_argument("--format", choices=("md", "html"), help="override the format implied by OUT's suffix")
    parser.add_argument("--force", action="store_true",
                        help="replace OUT if it exists (without this, an existing OUT is refused and left as it was)")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import TranscriptError, UsageError
    from stepper.share.report import build, to_markdown
    from stepper.transcript.store import load
    from stepper.verify.replay import replay_transcript

    kind = args.format or SUFFIXES.get(Path(args.output).suffix.lower())
    if kind is None:
        raise UsageError(f"expected -o to end in .md or .html (or --format md|html), found {args.output!r}")
    if args.output != "-":
        from stepper.transcript.store.output import refuse_existing

        refuse_existing(args.output, args.force)  # before the work, and again when the file is put in place
    transcript = load(args.file)
    try:
        report = replay_transcript(transcript)
    except TranscriptError as err:  # found while replaying (an expression that cannot be evaluated): say where
        raise (err.at(file=args.file) if err.where.file is None else err) from None
    diagnosis = None
    if args.witness:
        from stepper.diagnose.rootcause import diagnose
        from stepper.diagnose.witness import load_witness

        diagnosis = diagnose(transcript, load_witness(args.witness), report)
    doc = build(transcript, report, diagnosis, source=args.file)
    if kind == "md":
        text = to_markdown(doc)
    else:
        from stepper.share.report_html import to_html  # with the html module's entity tables: HTML only

        text = to_html(doc)
    if args.output == "-":
        sys.stdout.write(text)
        return 0
    _write_whole(Path(args.output), text, args.force)
    print(f"{args.output}: {kind} write-up of {args.file} ({report.verdict})", file=sys.stderr)
    return 0


def _write_whole(path: Path, text: str, replace: bool) -> None:
    from stepper.transcript.store.output import atomic_output

    with atomic_output(str(path), replace=replace, what="the write-up") as out:
        out.write(text)
