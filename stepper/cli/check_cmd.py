"""`stepper check FILE`: replay the verifier over a transcript or event file.

Thin edge over :mod:`stepper.verify.replay`: reads events with :func:`stepper.transcript.store.open_events`
(streaming; per-round detail is kept only for ``--json`` or ``--witness``), imports a
``--challenges`` plug-in only when that flag is given, asks
:mod:`stepper.diagnose.rootcause` only when ``--witness`` is given, and prints either the JSON
object of the check contract or a compact table. Exit codes: 0 accept, 1 reject,
2 unusable input, 3 incomplete with every present round passing.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import json
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable

from stepper.errors import EXIT_INCOMPLETE, EXIT_OK, EXIT_REJECT, UsageError

if TYPE_CHECKING:
    from stepper.transcript.model import Note
    from stepper.verify.verdict import Report

HELP = "replay the verifier: which instance, which round, which check, and why"
DESCRIPTION = (
    "Replay every sumcheck instance of FILE (a stepper transcript or a JSON-lines event file) as an "
    "independent verifier: degree, sum, challenge, batch and final checks, the first failure in words, "
    "and the soundness error of the rounds. Exit 0 accept, 1 reject, 2 unusable input, 3 incomplete. "
    "A passing replay is evidence about one run, not a soundness proof of the protocol."
)

TABLE_ROWS = 20


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript (.sumtr, msgpack) or JSON-lines event file")
    parser.add_argument("--json", action="store_true", help="print one JSON object (the check contract)")
    parser.add_argument("--witness", metavar="W", help="witness file (JSON or msgpack): find the root cause")
    parser.add_argument(
        "--challenges", metavar="MODULE:FUNCTION",
        help="re-derive challenges with your own function (MODULE is a .py path or a dotted module name); "
             "also probes which messages the challenges depend on")
    parser.add_argument("--detail", action="store_true",
                        help="under each instance shown, one line per round: sums, recovered values, g(r)")
    parser.add_argument("--rows", type=int, default=TABLE_ROWS, metavar="N",
                        help=f"instances shown in the table (default {TABLE_ROWS}; failures are always shown)")


def load_challenger(spec: str) -> Callable[..., Any]:
    """Import MODULE:FUNCTION; MODULE ending in .py (or containing a path separator) is a file."""
    module_part, sep, func_name = spec.rpartition(":")
    if not sep or not module_part or not func_name:
        raise UsageError(f"expected --challenges MODULE:FUNCTION, found {spec!r}")
    try:
        if module_part.endswith(".py") or os.sep in module_part or "/" in module_part:
            path = Path(module_part)
            if not path.is_file():
                raise UsageError(f"expected a Python file for --challenges, found no file {module_part!r}")
            loader_spec = importlib.util.spec_from_file_location(f"stepper_challenges_{path.stem}", path)
            if loader_spec is None or loader_spec.loader is None:
                raise UsageError(f"expected an importable Python file for --challenges, found {module_part!r}")
            module = importlib.util.module_from_spec(loader_spec)
            loader_spec.loader.exec_module(module)
        else:
            module = importlib.import_module(module_part)
    except UsageError:
        raise
    except Exception as err:  # user code failing at import time
        raise UsageError(f"expected --challenges module {module_part!r} to import, but it raised "
                         f"{type(err).__name__}: {err}") from None
    func = getattr(module, func_name, None)
    if not callable(func):
        raise UsageError(f"expected a function {func_name!r} in {module_part!r} for --challenges, found none")
    return func  # type: ignore[no-any-return]


def run(args: argparse.Namespace) -> int:
    from stepper.transcript.store import open_events
    from stepper.transcript.model import Note, fold_events
    from stepper.verify.replay import Replay

    if args.rows < 0:
        raise UsageError(f"expected --rows a non-negative integer, found {args.rows}")
    challenger = None
    if args.challenges:
        from stepper.verify.challenges import GuardedPlugin

        challenger = GuardedPlugin(load_challenger(args.challenges), label=args.challenges)
    detail = bool(args.json or args.witness or args.detail)

    def new_replay() -> Replay:
        return Replay(challenger=challenger, keep_rounds=detail,
                      keep_instances=None if args.json or args.witness else args.rows, emit_passing=detail)

    replay = new_replay()
    notes: list[Note] = []
    note_count = 0

    def keep_note(record: object) -> None:
        nonlocal note_count
        if isinstance(record, Note):
            note_count += 1
            if len(notes) < 50:
                notes.append(record)

    swept = None
    if not detail and challenger is None:
        from stepper.verify.sweep import SMALL_FILE_BYTES, sweep

        swept = sweep(args.file, replay, keep_note, min_bytes=SMALL_FILE_BYTES)
        if swept is None:  # the sweep gave up: replay event by event, which names what it found
            replay, notes, note_count = new_replay(), [], 0
    events: list[Any] | None = [] if args.witness else None
    if swept is not None:
        completeness, header, digest = swept.completeness, swept.header, swept.digest
    else:
        with open_events(args.file) as stream:
            if events is None:
                replay.feed_all(stream, on_other=keep_note)
            else:
                for record in stream:
                    keep_note(record)
                    events.append(record)
                    replay.feed(record)
            completeness = stream.completeness
            header, digest = stream.header, stream.digest
    report = replay.report(completeness)
    diagnosis = None
    if args.witness:
        from stepper.diagnose.rootcause import diagnose
        from stepper.diagnose.witness import load_witness

        transcript = fold_events(events or [], header, completeness, digest)  # type: ignore[arg-type]
        from stepper.cli.progress import terminal_progress

        witness = load_witness(args.witness)
        with terminal_progress("root cause: recomputing rounds") as progress:
            diagnosis = diagnose(transcript, witness, report, progress=progress)
    if args.json:
        out = report.to_json()
        out["file"] = args.file
        out["notes"] = [{"text": n.text, "instance": n.instance, "round": n.round} for n in notes]
        if diagnosis is not None:
            out["root_cause"] = diagnosis.root_cause_json()
            out["witness_findings"] = diagnosis.findings_json()
        print(json.dumps(out, indent=2))
    else:
        from stepper.cli.check_text import render

        lines = render(report, args.file, notes, note_count, _colour(), args.rows, args.detail)
        if diagnosis is not None:
            lines += ["", "root cause (with the witness):", *("  " + s for s in diagnosis.explain())]
        print("\n".join(lines))
    if diagnosis is not None and diagnosis.root_cause is not None:
        return EXIT_REJECT  # the witness shows a lie, even where every transcript check passed
    return exit_code(report)


def exit_code(report: Report) -> int:
    return {"accept": EXIT_OK, "reject": EXIT_REJECT}.get(report.verdict, EXIT_INCOMPLETE)


def _colour() -> bool:
    return sys.stdout.isatty() and "NO_COLOR" not in os.environ and os.environ.get("TERM") != "dumb"
