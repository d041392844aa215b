"""`stepper record -o OUT [--label TEXT] -- CMD [ARGS...]`: record any prover.

The interop contract of transcripts/EVENTS.md: CMD runs with ``STEPPER_EVENTS`` naming a
file; the prover appends one JSON event per line to it. This module follows
that file while CMD runs and writes each complete line into the transcript at
OUT as it arrives (validated, flushed), so a crash loses nothing already
written. When CMD exits with status 0 the transcript is sealed (end event);
otherwise, or when the stream was cut mid-line, it is kept but left unsealed,
which readers report as "incomplete". The exit code is CMD's status (128 + N
when a signal N ended it), or 2 when the event stream itself is unusable.
"""

from __future__ import annotations

import argparse
import os
import sys
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import subprocess

    from stepper.errors import TranscriptError

HELP = "run a prover with STEPPER_EVENTS set and record its JSON-lines events into a transcript"
DESCRIPTION = (
    "Run CMD with the environment variable STEPPER_EVENTS set to a file path; the prover appends one JSON "
    "event per line to that file (see transcripts/FORMAT.md). Events are written into OUT as they arrive. "
    "If CMD exits with status 0 the transcript is sealed; if it fails or is killed, every complete line "
    "written before is kept and the transcript is marked incomplete. Exit code: CMD's status "
    "(128+N for signal N), or 2 if the event stream is malformed."
)

POLL_SECONDS = 0.02
READ_BYTES = 1 << 20


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("-o", "--output", required=True, metavar="OUT", help="transcript file to write")
    parser.add_argument("--label", metavar="TEXT", help="a label stored in the transcript header")
    parser.add_argument("--events", metavar="PATH",
                        help="keep the raw event file at PATH (default: a temporary file, removed afterwards)")
    parser.add_argument("--force", action="store_true",
                        help="replace OUT (and the --events file) if they exist; without this they are refused")
    parser.add_argument("prover_command", nargs=argparse.REMAINDER, metavar="-- CMD [ARGS...]",
                        help="the prover to run, after `--`")


def run(args: argparse.Namespace) -> int:
    import subprocess
    import tempfile

    from stepper.errors import TranscriptError, UsageError, Where
    from stepper.transcript.jsonl import LineSplitter
    from stepper.transcript.store import TranscriptWriter

    command = list(args.prover_command)
    if command[:1] == ["--"]:
        command = command[1:]
    if not command:
        raise UsageError("expected a command to run after `--`, found none (stepper record -o OUT -- CMD ...)")
    if args.events and os.path.abspath(args.events) == os.path.abspath(args.output):
        raise UsageError("expected --events and -o to name different files, found the same path twice")
    from stepper.transcript.store.output import refuse_existing

    refuse_existing(args.output, args.force)
    if args.events:
        refuse_existing(args.events, args.force)
    meta: dict[str, Any] = {"command": command, "recorded_by": "stepper record"}
    if args.label:
        meta["label"] = args.label
    with tempfile.TemporaryDirectory(prefix="stepper-record-") as scratch:
        events_path = args.events or os.path.join(scratch, "events.jsonl")
        try:
            open(events_path, "wb").close()
        except OSError as err:
            raise UsageError(f"expected a writable --events path, found {events_path}: {err.strerror}") from None
        splitter = LineSplitter(Where(file=events_path), 64 << 20)
        from stepper.cli.main import user_environment

        env = user_environment(STEPPER_EVENTS=events_path)  # not stepper's own process settings
        try:  # started before OUT is created, so a program that cannot start leaves an existing OUT alone
            child = subprocess.Popen(command, env=env)
        except OSError as err:
            raise UsageError(f"expected a program to run, found {command[0]!r} cannot be started: "
                             f"{err.strerror or err}") from None
        try:
            writer = TranscriptWriter(args.output, metadata=meta, replace=args.force)
        except TranscriptError:
            child.kill()
            child.wait()
            raise
        follower = _Follower(writer, splitter, events_path)
        try:
            returncode = follower.follow(child)
        except KeyboardInterrupt:
            _stop(child)
            writer.close()
            raise
        problem = follower.problem
        status = 128 - returncode if returncode < 0 else returncode
        sealed = status == 0 and problem is None and splitter.dropped is None
        if sealed:
            writer.finish()
        else:
            writer.close()
    shown = _status_text(returncode)
    if problem is not None:
        raise TranscriptError(
            f"{problem.message}; {args.output} keeps the {follower.written} event{'' if follower.written == 1 else 's'} before it, marked incomplete "
            f"({' '.join(command[:1])} {shown})", problem.where)
    state = "complete" if sealed else "incomplete"
    dropped = f"; the partial last line (line {splitter.dropped}) was dropped" if splitter.dropped is not None else ""
    count = f"{writer.events} event{'' if writer.events == 1 else 's'}"
    silent = ("; the program wrote no event (it should append JSON lines to the file named by "
              "STEPPER_EVENTS)") if writer.events == 0 else ""
    print(f"stepper record: {args.output}: {count}, {state}{dropped}; "
          f"{command[0]} {shown}{silent}", file=sys.stderr)
    return status


class _Follower:
    """Tails the event file while the child runs, feeding complete lines to the writer."""

    def __init__(self, writer: Any, splitter: Any, path: str) -> None:
        self.writer = writer
        self.splitter = splitter
        self.path = path
        self.problem: TranscriptError | None = None
        self.first = True
        self.written = 0  # counted here: the writer also counts an event its packing then refused

    def follow(self, child: subprocess.Popen[bytes]) -> int:
        import time

        with open(self.path, "rb") as source:
            while True:
                running = child.poll() is None
                got = self._drain(source)
                if not running:
                    break
                if not got:
                    time.sleep(POLL_SECONDS)
            if self.problem is None:
                self._take(self.splitter.finish())
        return int(child.returncode)

    def _drain(self, source: Any) -> bool:
        got = False
        while self.problem is None:
            chunk = source.read(READ_BYTES)
            if not chunk:
                break
            got = True
            self._take(self.splitter.feed(chunk))
        return got

    def _take(self, lines: Any) -> None:
        from stepper.errors import TranscriptError, Where
        from stepper.transcript.jsonl import oversized_integer, refuse_reserved

        try:
            for item in lines:
                if self.first and item.line == 1 and isinstance(item.payload, dict) \
                        and item.payload.get("type") == "header":
                    continue  # an exported header line: its metadata is the prover's, the header is ours
                self.first = False
                try:
                    if isinstance(item.payload, dict):
                        refuse_reserved(item.payload.get("type"), Where(file=self.path))
                    self.writer.write_payload(item.payload)
                    self.written += 1
                except OverflowError:
                    raise oversized_integer(Where(file=self.path, line=item.line)) from None
                except TranscriptError as err:
                    raise TranscriptError(err.message, err.where.but(line=item.line)) from None
        except TranscriptError as err:
            self.problem = err


def _stop(child: subprocess.Popen[bytes]) -> None:
    import signal
    import subprocess

    try:
        child.wait(timeout=2)
    except subprocess.TimeoutExpired:
        child.send_signal(signal.SIGTERM)
        child.wait()


def _status_text(returncode: int) -> str:
    import signal

    if returncode < 0:
        try:
            name = signal.Signals(-returncode).name
        except ValueError:
            name = f"signal {-returncode}"
        return f"was killed by {name} (status {128 - returncode})"
    return f"exited with status {returncode}"
