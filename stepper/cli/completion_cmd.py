"""`stepper completion SHELL`: a completion script for bash, zsh or fish, generated from the
argument parser itself (by the shtab library, imported only here), so it always offers exactly
the commands and options this version has."""

from __future__ import annotations

import argparse
import sys

HELP = "print a shell completion script (bash, zsh or fish) for stepper's commands and options"
DESCRIPTION = (
    "Print a completion script generated from stepper's own argument parser. bash: "
    "`stepper completion bash > ~/.local/share/bash-completion/completions/stepper`; zsh: "
    "`stepper completion zsh > ~/.zfunc/_stepper` (with ~/.zfunc on fpath); fish: "
    "`stepper completion fish > ~/.config/fish/completions/stepper.fish`."
)

SHELLS = ("bash", "zsh", "fish")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("shell", choices=SHELLS, metavar="SHELL", help=f"one of: {', '.join(SHELLS)}")


def run(args: argparse.Namespace) -> int:
    from stepper.cli.main import build_parser
    from stepper.errors import InputError

    try:
        import shtab
    except ImportError as err:  # a broken install, not bad input
        raise InputError(f"expected the shtab library to generate completions, found none ({err}); "
                         "reinstall stepper with its dependencies") from None
    parser, _ = build_parser()
    sys.stdout.write(shtab.complete(parser, shell=args.shell))
    return 0
