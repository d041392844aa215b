"""`stepper note FILE [--instance I] [--round K] TEXT`: attach a note to a transcript.

Thin edge over :func:`stepper.transcript.store.append_note`: the note is appended after
the recorded part, whose digest therefore still verifies; ``info``, ``check``,
``writeup`` and the app show it. While another process records into the file (it
holds the file's lock) the note waits in ``FILE.pending-notes`` and is folded in
when the recording ends. ``--instance`` takes a name or a 0-based
index; with one instance it may be left out, and with neither flag the note
is about the whole proof.
"""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stepper.transcript.model import Transcript

HELP = "append a note to a round, an instance or the whole proof (the recorded digest still verifies)"
DESCRIPTION = (
    "Append a note event to a transcript file without touching what was recorded: the digest of the recorded "
    "part still verifies, and the note shows in `stepper info`, `stepper check`, `stepper writeup` and the app. "
    "A note is public text stored in the file; do not paste secrets or witness values into it."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="a stepper transcript (msgpack)")
    parser.add_argument("text", metavar="TEXT", help="the note (quote it)")
    parser.add_argument("--round", "-k", type=int, metavar="K", help="round number (1-based; 0 means the claim)")
    parser.add_argument("--instance", "-i", metavar="I", help="instance name or 0-based index")


def run(args: argparse.Namespace) -> int:
    from stepper.errors import UsageError
    from stepper.transcript.store import append_note, load
    from stepper.transcript.model import Note

    text = args.text.strip()
    if not text:
        raise UsageError("expected a non-empty note TEXT, found only whitespace")
    if args.round is not None and args.round < 0:
        raise UsageError(f"expected --round to be 0 (the claim) or a round number 1, 2, ..., found {args.round}")
    transcript = load(args.file)
    instance = _instance_index(transcript, args.instance, args.round)
    kept = append_note(args.file, Note(text, instance, args.round))
    place = "the proof" if instance is None else f"instance '{transcript.instances[instance].name}'"
    if args.round is not None:
        place += f", round {args.round}"
    if kept is not None:
        print(f"{args.file}: note on {place} kept in {kept}: another process is writing the file (it holds its "
              "lock); the note shows in info, check, export, report and the app, and is folded into the file "
              "when the recording ends")
        return 0
    after = load(args.file)
    print(f"{args.file}: note added to {place}; recorded digest {after.digest}")
    return 0


def _instance_index(transcript: Transcript, chosen: str | None, round_: int | None) -> int | None:
    from stepper.errors import UsageError

    names = [inst.name for inst in transcript.instances]
    if chosen is None:
        if round_ is None:
            return None
        if len(names) == 1:
            return 0
        listed = _listed(names)
        raise UsageError(f"expected --instance with --round: the file has {len(names)} instances ({listed})")
    if chosen in names:
        return names.index(chosen)
    if chosen.isdigit() and int(chosen) < len(names):
        return int(chosen)
    listed = _listed(names)
    raise UsageError(f"expected --instance to name an instance or give its index, found {chosen!r} "
                     f"(instances: {listed})")


def _listed(names: list[str], shown: int = 8) -> str:
    """The first instances as "index: name", and how many more: one readable line for any proof."""
    listed = ", ".join(f"{k}: {n}" for k, n in enumerate(names[:shown])) or "none"
    return listed + (f", ... {len(names) - shown} more" if len(names) > shown else "")
