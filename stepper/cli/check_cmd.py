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

HELP = "replay the verifier: which instance, which round, which check, and why"
DESCRIPTION = (
    "Replay every sumcheck instance of FILE (a stepper transcript or a JSON-lines event file) as an "
    "independent verifier: degree, sum, challenge, batch and final checks, the first failure in words, "
    "and the soundness error of the rounds. Exit 0 accept, 1 reject, 2 unusable input, 3 incomplete; with "
    "several files, one line each and the most severe code (70, 2, 1, 3, 0). "
    "A passing replay is evidence about one run, not a soundness proof of the protocol."
)

TABLE_ROWS = 20
CI_LINE_STYLES = ("github", "compiler")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("files", metavar="FILE", nargs="+",
                        help="transcript (.sumtr, msgpack) or JSON-lines event file; several may be given "
                             "(one line each and a summary); '-' reads one from standard input")
    parser.add_argument("--json", action="store_true", help="print one JSON object (the check contract)")
    parser.add_argument("--witness", metavar="W", help="witness file (JSON or msgpack): find the root cause")
    parser.add_argument("--engine", choices=("chunked", "memory", "dask"), default="chunked",
                        help="what recomputes the rounds for --witness: chunked (the default: each table read "
                             "once, --chunk entries at a time), memory (numpy on whole tables read into memory) "
                             "or dask (Dask's local threads or --scheduler)")
    parser.add_argument("--chunk", metavar="N", type=_entries, default=None,
                        help="with --witness: table entries read at once by the chunked engine (N or 2^K, at "
                             "least 2; default 2^17); memory grows with N, not with the table")
    parser.add_argument("--progress", action="store_true",
                        help="with --witness: report progress on stderr (throughput, time left) even when it "
                             "is not a terminal, one line every few seconds")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="with --engine dask: the address of a running Dask scheduler (tcp://HOST:PORT)")
    parser.add_argument(
        "--challenges", metavar="MODULE:FUNCTION",
        help="re-derive challenges with your own function (MODULE is a .py path or a dotted module name); "
             "also probes which messages the challenges depend on")
    parser.add_argument(
        "--challenges-exec", metavar="CMD",
        help="re-derive challenges with a program in any language: CMD is started once and sent one JSON "
             "line per event, answering one line per challenge (protocol in transcripts/EVENTS.md)")
    parser.add_argument("--detail", action="store_true",
                        help="under each instance shown, one line per round: sums, recovered values, g(r)")
    parser.add_argument("--rows", type=int, default=TABLE_ROWS, metavar="N",
                        help=f"instances shown in the table (default {TABLE_ROWS}; failures are always shown)")
    parser.add_argument("--strict", action="store_true",
                        help="also fail (exit 1) on challenges nobody re-derived, an incomplete transcript, "
                             "a weak soundness bound, unknown events or a high-severity finding")
    parser.add_argument("--junit", metavar="PATH",
                        help="write a JUnit XML report: a test case per file and instance")
    parser.add_argument("--force", action="store_true", help="replace the --junit file if it exists")
    parser.add_argument("--ci-lines", choices=CI_LINE_STYLES, metavar="STYLE",
                        help="also print one line per problem in a form CI logs pick up: "
                             "github (workflow commands) or compiler (FILE:1: error: ...)")
    parser.add_argument("--color", choices=("auto", "always", "never"), default="auto",
                        help="colour the text output: auto (a terminal, unless NO_COLOR is set), always, never")


def _entries(text: str) -> int:
    """A table entry count, as N or 2^K, at least 2 (argparse turns the ValueError into exit 2)."""
    base, caret, power = text.strip().partition("^")
    if caret and base == "2" and power.isdigit() and 1 <= int(power) <= 40:
        return 1 << int(power)
    if not caret and base.isdigit() and int(base) >= 2:
        return int(base)
    raise ValueError(text)


_entries.__name__ = "entry count (N or 2^K, at least 2)"


def run(args: argparse.Namespace) -> int:
    from stepper.errors import UsageError

    if args.rows < 0:
        raise UsageError(f"expected --rows a non-negative integer, found {args.rows}")
    if args.files.count("-") > 1:
        raise UsageError("expected '-' (standard input) at most once among the files, found it twice")
    if args.witness and len(args.files) > 1:
        raise UsageError(f"expected one FILE with --witness, found {len(args.files)} files")
    if args.engine == "dask" and not args.witness:
        raise UsageError("expected --engine dask only with --witness W (it recomputes the witness's rounds)")
    if args.scheduler and args.engine != "dask":
        raise UsageError("expected --scheduler ADDRESS only with --engine dask")
    if args.chunk is not None and (not args.witness or args.engine != "chunked"):
        raise UsageError("expected --chunk N only with --witness W and the chunked engine (the default)")
    if args.progress and not args.witness:
        raise UsageError("expected --progress only with --witness W (it reports the root cause's recomputation)")
    if args.force and not args.junit:
        raise UsageError("expected --force only with --junit PATH (the one file check writes)")
    if args.junit:  # before any work: a report that cannot be written is known now, not after the checks
        import os

        from stepper.transcript.store.output import refuse_existing

        refuse_existing(args.junit, args.force)
        folder = os.path.dirname(os.path.abspath(args.junit))
        if not os.path.isdir(folder):
            raise UsageError(f"expected --junit to name a file in an existing folder, found no folder {folder}")
    if len(args.files) > 1 or args.junit or args.ci_lines:
        from stepper.cli.check_many import check_many

        return check_many(args)
    from stepper.cli.check_file import check_file, colour_wanted

    checked = check_file(args.files[0], args, keep_all=False)
    if args.json:
        import json

        out = checked.to_json()
        if args.strict:
            out["strict"] = list(checked.strict)
        print(json.dumps(out, indent=2))
    else:
        from stepper.cli.check_text import render

        r = checked.report
        lines = render(r, checked.name, checked.notes, checked.note_count, colour_wanted(args.color), args.rows,
                       args.detail, checked.file_line)
        if checked.diagnosis is not None:
            lines += ["", "root cause (with the witness):", *("  " + s for s in checked.diagnosis.explain())]
        if checked.glue_findings:
            lines += ["", "glue probes (what known glue bug reproduces the failure exactly; evidence, not proof):",
                      *(f"  {f.probe}: {f.message}" for f in checked.glue_findings)]
        if checked.strict:
            lines += ["", "STRICT: failing (exit 1) because:", *(f"  - {reason}" for reason in checked.strict)]
        print("\n".join(lines))
    return checked.code


