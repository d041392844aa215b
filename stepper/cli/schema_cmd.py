"""`stepper schema NAME`: print one of the JSON Schemas (draft 2020-12) shipped in the package.

The schemas are package data under ``stepper/schemas/`` (``NAME.schema.json``); they describe
one line of the event stream and the JSON that ``check``, ``diff`` and ``info`` print.
"""

from __future__ import annotations

import argparse
import sys
from importlib import resources

HELP = "print a JSON Schema of stepper's inputs and outputs (event, check, check-files, diff, info)"
DESCRIPTION = (
    "Print the JSON Schema (draft 2020-12) of one event line (event), of `check --json` for one file "
    "(check) and for several (check-files), of `diff --json` (diff) or of `info --json` (info). --list names the schemas."
)

SCHEMAS: dict[str, str] = {
    "event": "one line of the JSON-lines event stream",
    "check": "`stepper check FILE --json` (one file)",
    "check-files": "`stepper check FILE... --json` with several files (each result is a `check` object)",
    "diff": "`stepper compare A B --json` (the command was called diff before)",
    "info": "`stepper info FILE --json`",
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", metavar="NAME", nargs="?", help=f"one of: {', '.join(SCHEMAS)}")
    parser.add_argument("--list", action="store_true", help="list the schemas and what each describes")


def schema_text(name: str) -> str:
    """The schema NAME as shipped (JSON text)."""
    from stepper.errors import UsageError

    if name not in SCHEMAS:
        raise UsageError(f"expected a schema name among {', '.join(SCHEMAS)}, found {name!r}")
    return (resources.files("stepper") / "schemas" / f"{name}.schema.json").read_text(encoding="utf-8")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import UsageError

    if args.list:
        for name, what in SCHEMAS.items():
            print(f"{name:<6} {what}")
        return 0
    if args.name is None:
        raise UsageError("expected a schema NAME or --list, found neither")
    sys.stdout.write(schema_text(args.name))
    return 0
