"""`stepper check` over several files (or with --junit / --ci-lines): one line per file, a summary,
the most severe exit code, and the optional CI outputs.

Each file is checked on its own; a file that cannot be used (exit 2) or trips a bug in stepper
(exit 70) is reported on its line and the others are still checked. The exit code is the most
severe of the files' codes: 70, then 2, then 1, then 3, then 0. Ctrl-C stops the whole run (130).
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from stepper.cli.check_file import check_file, colour_wanted
from stepper.cli.file_result import FileResult
from stepper.cli.debug import show_traceback_if_asked
from stepper.errors import EXIT_INCOMPLETE, EXIT_INPUT, EXIT_INTERNAL, EXIT_OK, EXIT_REJECT, StepperError

__all__ = ["check_many", "most_severe", "SEVERITY"]

# exit code -> rank; the run exits with the highest-ranked code among its files
SEVERITY = {EXIT_OK: 0, EXIT_INCOMPLETE: 1, EXIT_REJECT: 2, EXIT_INPUT: 3, EXIT_INTERNAL: 4}
_WORD = {EXIT_OK: ("accepted", "green"), EXIT_REJECT: ("REJECTED", "red"), EXIT_INCOMPLETE: ("INCOMPLETE", "yellow"),
         EXIT_INPUT: ("UNUSABLE", "red"), EXIT_INTERNAL: ("BUG", "red")}
_PAINT = {"green": "32", "red": "31", "yellow": "33", "dim": "2"}
CAUTION = "A passing replay is evidence about one run, not a soundness proof of the protocol."


def most_severe(codes: list[int]) -> int:
    return max(codes, key=lambda c: SEVERITY.get(c, 4), default=EXIT_OK)


def check_many(args: argparse.Namespace) -> int:
    results: list[FileResult] = []
    for name in args.files:
        try:
            checked = check_file(name, args, keep_all=True)  # a plug-in's state is per file
            results.append(FileResult(name, checked.code, checked, None))
        except StepperError as err:
            show_traceback_if_asked()
            results.append(FileResult(name, err.exit_code, None, str(err)))
        except (KeyboardInterrupt, BrokenPipeError):
            raise
        except Exception as err:  # a bug in stepper on this file: say so, check the others
            show_traceback_if_asked()
            results.append(FileResult(name, EXIT_INTERNAL, None, f"internal error ({type(err).__name__}: {err}); "
                                      "please report it with the input that caused it"))
        if not args.json:
            _print_line(results[-1], colour_wanted(args.color))
        if args.ci_lines:
            for line in ci_lines(results[-1], args.ci_lines):
                print(line)
    code = most_severe([r.code for r in results])
    if args.json:
        print(json.dumps(files_json(results, code, args.strict), indent=2))
    else:
        print(summary(results, code))
        print(CAUTION)
    if args.junit:
        from stepper.cli.junit_report import junit_xml
        from stepper.transcript.store.output import atomic_output

        with atomic_output(args.junit, replace=args.force, what="the JUnit report") as out:
            out.write(junit_xml(results, strict=args.strict))
    return code


def _print_line(result: FileResult, colour: bool) -> None:
    word, tint = _WORD.get(result.code, ("BUG", "red"))
    if result.checked is not None and result.checked.strict and result.code == EXIT_REJECT \
            and result.checked.report.verdict != "reject":
        word = "STRICT"
    text = f"{word:<10}"
    if colour:
        text = f"\x1b[{_PAINT[tint]}m{text}\x1b[0m"
    detail = result.detail()
    if result.checked is None and detail.startswith(result.name) and detail[len(result.name):][:1] in (":", ","):
        print(f"{text} {detail}", file=sys.stdout)  # the error already begins with the file's name
    else:
        print(f"{text} {result.name}: {detail}", file=sys.stdout)


def summary(results: list[FileResult], code: int) -> str:
    counts = {c: sum(r.code == c for r in results) for c in (EXIT_OK, EXIT_REJECT, EXIT_INCOMPLETE, EXIT_INPUT,
                                                             EXIT_INTERNAL)}
    parts = [f"{counts[EXIT_OK]} accepted", f"{counts[EXIT_REJECT]} failed", f"{counts[EXIT_INCOMPLETE]} incomplete",
             f"{counts[EXIT_INPUT]} unusable"]
    if counts[EXIT_INTERNAL]:
        parts.append(f"{counts[EXIT_INTERNAL]} hit a bug in stepper")
    return f"checked {len(results)} file(s): {', '.join(parts)}; exit {code}"


def ci_lines(result: FileResult, style: str) -> list[str]:
    """One line per problem of a file, in the form CI services pick up from a job's log."""
    if result.code == EXIT_OK:
        return []
    level = "warning" if result.code == EXIT_INCOMPLETE else "error"
    message = " ".join(result.detail().split())  # one line, whatever the detail held
    if style == "github":
        escaped = message.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")
        where = result.name.replace("%", "%25").replace(",", "%2C").replace(":", "%3A")
        return [f"::{level} file={where},title=stepper check::{escaped}"]
    return [f"{result.name}:1: {level}: {message}"]


def files_json(results: list[FileResult], code: int, strict: bool) -> dict[str, Any]:
    files = []
    for r in results:
        entry: dict[str, Any] = {"file": r.name, "exit_code": r.code, "error": r.error,
                                 "result": None if r.checked is None else r.checked.to_json()}
        if strict:
            entry["strict"] = [] if r.checked is None else list(r.checked.strict)
        files.append(entry)
    return {"files": files, "exit_code": code, "summary": summary(results, code), "warning": CAUTION}
