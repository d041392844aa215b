"""`stepper` entry point: one subcommand per module in :mod:`stepper.cli`.

Each command module defines ``HELP`` (one line), ``add_arguments(parser)`` and
``run(args) -> int`` and imports nothing heavy at module level (galois, numpy
kernels and Textual load inside ``run``), so ``stepper --help`` and
``stepper check`` start fast. Errors from the core arrive as
:class:`stepper.errors.StepperError` and leave as one line on stderr with the
error's exit code; nothing here prints a traceback for bad input.
"""

from __future__ import annotations

import argparse
import gc
import importlib
import os
import sys
from typing import NoReturn, Sequence

from stepper import __version__
from stepper.cli.debug import show_traceback_if_asked

__all__ = ["main", "COMMANDS", "RETIRED"]

# name -> module under stepper.cli (the module's HELP is the summary line)
COMMANDS: dict[str, str] = {
    "check": "check_cmd",
    "info": "info_cmd",
    "record": "record_cmd",
    "import": "import_cmd",
    "export": "export_cmd",
    "view": "view_cmd",
    "compare": "compare_cmd",
    "note": "note_cmd",
    "writeup": "writeup_cmd",
    "prove": "prove_cmd",
    "buckets": "buckets_cmd",
    "plan": "plan_cmd",
    "demo": "demo_cmd",
    "schema": "schema_cmd",
    "completion": "completion_cmd",
}


# Earlier command names, kept for one release: they run the new command after one
# line on stderr, and are listed nowhere (not in --help).
RETIRED: dict[str, str] = {"report": "writeup", "diff": "compare"}


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and exit code 2."""

    def error(self, message: str) -> NoReturn:
        from stepper.errors import EXIT_INPUT

        self.exit(EXIT_INPUT, f"{self.prog}: {message} (see {self.prog} --help)\n")


def _build_parser(only: str | None = None, *, arguments: bool = True) -> tuple[_Parser, dict[str, object]]:
    """The parser with every subcommand, or with ``only`` that one (the command being run:
    importing and describing the other fourteen would cost every run some 15 ms). Without
    ``arguments`` the subcommands are listed with their summaries but take no arguments: enough
    for ``stepper --help``, ``--version`` and an unknown command, which never enter a subcommand."""
    parser = _Parser(
        prog="stepper",
        description="Step through sumcheck transcripts: replay the verifier, find the failing "
        "round and check, trace it to its root cause, compare runs.",
        epilog="A passing replay is evidence about one run, not a soundness proof of a protocol.",
    )
    parser.add_argument("--version", action="version", version=f"stepper {__version__} (sumcheck-stepper)")
    subs = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    modules: dict[str, object] = {}
    for name, module_name in COMMANDS.items():
        if only is not None and name != only:
            continue
        module = importlib.import_module(f"stepper.cli.{module_name}")
        modules[name] = module
        sub = subs.add_parser(name, help=module.HELP, description=getattr(module, "DESCRIPTION", module.HELP))
        if arguments:
            module.add_arguments(sub)
    return parser, modules


def build_parser() -> tuple[_Parser, dict[str, object]]:
    """The full parser, every subcommand included (for generated shell completion)."""
    return _build_parser()


def _refuse_a_dash(args: argparse.Namespace) -> None:
    """Only `check` reads standard input (`-`); elsewhere a `-` with no file of that name is a usage
    error, said as such rather than as a missing file."""
    from stepper.errors import UsageError

    for key in ("file", "a", "b", "events"):
        if getattr(args, key, None) == "-" and not os.path.exists("-"):
            raise UsageError("expected a file name, found '-' (only `stepper check` reads standard input)")


def main(argv: Sequence[str] | None = None) -> int:
    words = list(sys.argv[1:] if argv is None else argv)
    if words and words[0] in RETIRED:
        new = RETIRED[words[0]]
        print(f"stepper: `stepper {words[0]}` is now `stepper {new}`; the old name goes in the next release",
              file=sys.stderr)
        words[0] = new
    # argparse enters a subcommand only at a word that names it: with no such word (`stepper --help`,
    # `stepper`, an unknown command) no subcommand's arguments are needed, and adding them (with the
    # imports some of them make for their choices) would be most of `stepper --help`'s own time
    named = [word for word in words if word in COMMANDS]
    parser, modules = _build_parser(words[0] if words and words[0] in COMMANDS else None, arguments=bool(named))
    args, unknown = parser.parse_known_args(words)
    # imported once the parse is over: `stepper --help` and `--version` end inside it, and need neither
    # the error tree nor the dataclasses (and inspect) it is made of
    from stepper.errors import EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED, StepperError

    if args.command == "check" and unknown and all(w == "-" or not w.startswith("-") for w in unknown):
        args.files += unknown  # files after a flag (`check a.sumtr --strict b.sumtr`): argparse stops at the flag
        unknown = []
    if unknown:  # name the subcommand whose help lists the flags it takes
        where = "stepper" if args.command is None else f"stepper {args.command}"
        parser.exit(EXIT_INPUT, f"{where}: unrecognized arguments: {' '.join(unknown)} (see {where} --help)\n")
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    try:
        _refuse_a_dash(args)
        return int(modules[args.command].run(args))  # type: ignore[attr-defined]
    except StepperError as err:
        show_traceback_if_asked()
        print(f"stepper {args.command}: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        print(f"stepper {args.command}: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        return 0
    except Exception as err:  # a bug: one line plus a request, exit 70
        show_traceback_if_asked()
        if isinstance(err.__cause__, KeyboardInterrupt):  # Ctrl-C inside a compiled kernel
            print(f"stepper {args.command}: interrupted", file=sys.stderr)
            return EXIT_INTERRUPTED
        print(
            f"stepper {args.command}: internal error ({type(err).__name__}: {err}); "
            "please report it with the input that caused it",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


# Environment settings the `stepper` command makes for its own process only (see entry); the
# commands that start a user's program (`record`) hand it the environment without them.
PROCESS_SETTINGS = {
    # stepper's numpy work is elementwise and never calls BLAS; OpenBLAS would start one thread
    # per core at numpy's import (about 60 ms of CPU on two cores, measured) for nothing.
    "OPENBLAS_NUM_THREADS": "1",
    # the compiled kernels load numba without its optional SciPy and cffi (stepper.field.kernels.base)
    "STEPPER_LEAN_NUMBA": "1",
}
_set_here: list[str] = []


def entry() -> None:
    for name, value in PROCESS_SETTINGS.items():
        if name not in os.environ:
            os.environ[name] = value
            _set_here.append(name)
    code = main()
    # The process ends now, and everything still alive (stepper's and numpy's modules, classes
    # and functions, the report) goes with it. The interpreter's shutdown would first run the
    # cyclic collector over all of it and take apart the cycles it finds, work the exit does for
    # free: about 0.01 s of CPU after a check, small or large (numpy loaded), measured side by
    # side in fresh processes. Frozen objects are left out of it;
    # reference counting, atexit handlers and weakref finalizers (the --challenges-exec child)
    # work as before, and every output is closed by the command itself before this. freeze() does
    # not collect first: cycles already unreachable are simply not finalized at exit (none holds
    # an open output).
    gc.freeze()
    sys.exit(code)


def user_environment(**extra: str) -> dict[str, str]:
    """The environment for a user's program started by a command: this process's, without the
    settings :func:`entry` made for stepper itself, plus ``extra``."""
    env = {name: value for name, value in os.environ.items() if name not in _set_here}
    env.update(extra)
    return env
