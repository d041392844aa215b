"""`stepper view`: open a transcript in the terminal app, step through it round by round.

Reads the file before the app starts, so a file that cannot be used at all
(unreadable, not a transcript, a hostile or unknown field in its first event)
ends with one line and exit code 2 instead of an empty screen. A file that
breaks part-way opens showing everything before the break and where it broke.
Textual and the replay load inside ``run`` only.
"""

from __future__ import annotations

import argparse

HELP = "open a transcript in the terminal app and step through it round by round"
DESCRIPTION = (
    "Open FILE (a stepper transcript or a JSON-lines event file) in a terminal app: proof summary, "
    "a status strip of every round, the round table of one instance, the detail of one round, bucket "
    "occupancy charts and notes. Press k or F1 inside for the keys. A passing replay is evidence about "
    "one run, not a soundness proof of the protocol."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript or JSON-lines event file")
    parser.add_argument("--witness", metavar="W", help="witness file (JSON or msgpack): show the root cause")
    parser.add_argument("--follow", action="store_true",
                        help="keep watching FILE while a prover writes it; new rounds appear and are checked")
    parser.add_argument("--compare", metavar="B", help="open the comparison of FILE against transcript B")
    parser.add_argument("--exports", metavar="DIR", default=".",
                        help="directory for SVG screenshots and text reports (default: the current one)")


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from stepper.errors import EXIT_OK, InputError, UsageError

    exports = Path(args.exports)
    if not exports.is_dir():
        raise UsageError(f"expected --exports to name a directory, found {args.exports!r}")
    if args.compare is not None and not Path(args.compare).is_file():
        raise InputError(f"expected --compare to name a readable file, found {args.compare!r}")
    if args.follow and not Path(args.file).exists():
        raise InputError(f"{args.file}: expected a file to follow, found none (start the prover first)")

    import sys

    from stepper.app.launch import open_app

    # every round's check starts here, before Textual is imported, and runs beside the start-up
    app = open_app(args.file, witness=args.witness, follow=args.follow, export_dir=exports, compare=args.compare)
    if not (sys.stdin.isatty() and sys.stdout.isatty()):  # the app would draw into a pipe and wait forever
        if app.whole_file_check is not None:
            app.whole_file_check.stop()  # the check started with the app has nobody to report to
        raise UsageError("expected a terminal on standard input and output, found a redirect or pipe "
                         "(use `stepper check` for text output)")
    app.run()
    if app.model.digest_problem is not None:  # the same line and exit code as check and info
        raise app.model.digest_problem
    return EXIT_OK
