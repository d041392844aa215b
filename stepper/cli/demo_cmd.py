"""`stepper demo`: write the Brackwater Ferries example proofs and open a failing one.

Writes every :data:`stepper.provers.catalogue.EXAMPLES` transcript and witness
into a fresh folder (``--dir`` to choose it; files there that differ from the demo's
are never replaced without ``--force``), says where, and opens the
terminal app on a failing proof with its witness; ``--no-view`` (or input or
output that is not a terminal) prints the check of an honest and of the failing
proof instead. :func:`write_example` is also what transcripts/regenerate.py uses.
"""

from __future__ import annotations

import argparse
import os
from typing import Any

HELP = "build the Brackwater Ferries example proofs in a fresh folder and open a failing one"
DESCRIPTION = (
    "Brackwater Ferries (an invented operator) proves, per sailing, that the gate scanner's boarding log "
    "is a permutation of the booking ledger and that every car-deck slot record is well formed. The demo "
    "writes honest, tampered and buggy proofs of one sailing to a fresh folder (printed), then opens the "
    "terminal app on a proof whose prover has a bug, with its witness for the root cause. --no-view prints "
    "the checks instead, as it does when input or output is not a terminal. Accepted proofs are evidence "
    "about one run, not a soundness proof."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--dir", metavar="DIR", help="write the examples here (created; default: a new temp folder)")
    parser.add_argument("--no-view", action="store_true", help="print the checks instead of opening the app")
    parser.add_argument("--force", action="store_true",
                        help="replace files in DIR that differ from what the demo writes (notes added to them "
                             "are lost)")


def run(args: argparse.Namespace) -> int:
    import tempfile

    from stepper.errors import InputError
    from stepper.provers.catalogue import DEMO_FAILING, DEMO_HONEST, EXAMPLES

    if args.dir:
        directory = args.dir
        try:
            os.makedirs(directory, exist_ok=True)
        except OSError as err:
            raise InputError(f"expected to create the folder {directory}, but {(err.strerror or str(err)).lower()}") from None
    else:
        directory = tempfile.mkdtemp(prefix="stepper-demo-")
    _write_examples(directory, EXAMPLES, force=args.force)
    print(f"stepper demo: wrote {len(EXAMPLES)} Brackwater Ferries proofs (sailing isle-of-quill-0740) to {directory}")
    for example in EXAMPLES:
        print(f"  {example.stem}.sumtr  {example.shows}")
    failing = os.path.join(directory, f"{DEMO_FAILING}.sumtr")
    witness = os.path.join(directory, f"{DEMO_FAILING}.witness.json")
    from stepper.cli.main import main

    if not args.no_view and _app_available():
        if _on_a_terminal():
            print(f"opening {failing} in the terminal app (quit the app to return)")
            return main(["view", failing, "--witness", witness])
        print("not on a terminal (input or output redirected): printing the checks instead of opening the app")

    honest = os.path.join(directory, f"{DEMO_HONEST}.sumtr")
    print(f"\n$ stepper check {honest}")
    main(["check", honest])
    print(f"\n$ stepper check {failing} --witness {witness}")
    main(["check", failing, "--witness", witness])
    print(f"\nnext: stepper view {failing} --witness {witness}")
    print(f"      stepper buckets {honest}")
    return 0


def _write_examples(directory: str, examples: Any, *, force: bool) -> None:
    """Write every example into a scratch folder inside ``directory``, then move each file into
    place. A file already there that differs from the demo's (notes added to it, the user's own
    file of that name) is refused before anything is moved, unless ``force``; identical ones are
    left alone. Each move is a rename, so a file is never half-written."""
    import filecmp
    import shutil
    import tempfile

    from stepper.errors import InputError
    from stepper.transcript.store.output import OutputExists

    try:
        scratch = tempfile.mkdtemp(prefix=".stepper-demo-", dir=directory)
    except OSError as err:
        raise InputError(f"expected to write into the folder {directory}, but {(err.strerror or str(err)).lower()}") \
            from None
    try:
        made = [name for example in examples
                for name in map(os.path.basename, write_example(example, scratch, reproducible=True))]
        differing = [name for name in made if os.path.lexists(os.path.join(directory, name))
                     and not (os.path.isfile(os.path.join(directory, name))
                              and filecmp.cmp(os.path.join(scratch, name), os.path.join(directory, name),
                                              shallow=False))]
        if differing and not force:
            more = f" (and {len(differing) - 1} more)" if len(differing) > 1 else ""
            raise OutputExists(f"expected --dir {directory} to hold no file the demo would change, found "
                               f"{os.path.join(directory, differing[0])}{more} differs from the demo's (notes added?); "
                               "nothing was written (add --force to replace them, or choose another --dir)")
        for name in made:
            os.replace(os.path.join(scratch, name), os.path.join(directory, name))
    except OSError as err:
        raise InputError(f"could not write the demo into {directory}: {(err.strerror or str(err)).lower()}") from None
    finally:
        shutil.rmtree(scratch, ignore_errors=True)


def _on_a_terminal() -> bool:
    """The app needs a terminal on both ends; piped or in CI it would hang drawing into a file."""
    import sys

    return sys.stdin.isatty() and sys.stdout.isatty()


def _app_available() -> bool:
    import importlib.util

    return importlib.util.find_spec("stepper.app.app") is not None


def write_example(example: Any, directory: str, *, reproducible: bool) -> tuple[str, str]:
    """Write ``<stem>.sumtr`` and ``<stem>.witness.json`` into ``directory``; with
    ``reproducible`` the header's `created` is fixed so the bytes depend only on the example."""
    from stepper.cli.prove_cmd import metadata, write_witness
    from stepper.provers.reference import parse_field, prove
    from stepper.transcript.store import TranscriptWriter

    field = parse_field(example.field)
    meta = metadata(example.spec, example.field)
    meta["shows"] = example.shows
    if reproducible:
        meta["created"] = "fixed for reproducible output (transcripts/regenerate.py)"  # no clock in the bytes
    path = os.path.join(directory, f"{example.stem}.sumtr")
    witness = os.path.join(directory, f"{example.stem}.witness.json")
    with TranscriptWriter(path, metadata=meta) as writer:
        proof = prove(example.spec, field, writer)
    write_witness(witness, field, proof, replace=True)  # transcripts/regenerate.py rewrites in place
    return path, witness
