"""`stepper info`: not built yet (PENDING: an open issue fills this in)."""

from __future__ import annotations

import argparse
import sys

HELP = "(info: not built yet)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)


def run(args: argparse.Namespace) -> int:
    print("stepper info: not built yet", file=sys.stderr)
    return 2
