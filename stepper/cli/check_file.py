"""One file through `stepper check`: replay it as the flags say and hold the result.

Shared by the one-file output of :mod:`stepper.cli.check_cmd` and the many-file run of
:mod:`stepper.cli.check_many`. Imports the replay, the store and the witness code inside the
functions, so that `stepper --help` stays fast.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import os
import sys
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, TypeVar

from stepper.errors import EXIT_INCOMPLETE, EXIT_OK, EXIT_REJECT, StepperError, TranscriptError, UsageError

if TYPE_CHECKING:
    from stepper.transcript.records import Note
    from stepper.verify.verdict import Report

__all__ = ["Checked", "check_file", "load_challenger", "make_challenger", "strict_reasons", "exit_code",
           "colour_wanted"]

_T = TypeVar("_T")


def load_challenger(spec: str) -> Callable[..., Any]:
    """Import MODULE:FUNCTION; MODULE ending in .py (or containing a path separator) is a file."""
    module_part, sep, func_name = spec.rpartition(":")
    if not sep or not module_part or not func_name:
        raise UsageError(f"expected --challenges MODULE:FUNCTION, found {spec!r}")
    try:
        if module_part.endswith(".py") or os.sep in module_part or "/" in module_part:
            from pathlib import Path  # a plug-in file: a check without one has no use for pathlib

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
    if isinstance(func, type):  # a class: the stateful form, made once per check
        try:
            func = func()
        except Exception as err:
            raise UsageError(f"expected --challenges class {func_name!r} to be made with no arguments, but it "
                             f"raised {type(err).__name__}: {err}") from None
        if not (callable(getattr(func, "absorb", None)) and callable(getattr(func, "derive", None))):
            raise UsageError(f"expected --challenges class {func_name!r} to have absorb and derive methods")
        return func  # type: ignore[no-any-return]
    if func is not None and callable(getattr(func, "absorb", None)) and callable(getattr(func, "derive", None)):
        return func  # type: ignore[no-any-return]
    if not callable(func):
        raise UsageError(f"expected a function {func_name!r} in {module_part!r} for --challenges, found none")
    return func  # type: ignore[no-any-return]


@dataclass(frozen=True, slots=True)
class Checked:
    """One file's check: the replay's report, the witness diagnosis, notes, unknown event types
    seen, and the reasons ``--strict`` fails it (empty without the flag)."""

    name: str
    report: Report
    diagnosis: Any
    notes: list[Note]
    note_count: int
    unknown: dict[str, int]
    strict: tuple[str, ...]
    file_line: str = ""  # the file's condition in the words of stepper.transcript.condition
    glue_findings: tuple[Any, ...] = ()  # glue probes on a failed glue check, without a witness

    @property
    def code(self) -> int:
        if self.diagnosis is not None and self.diagnosis.root_cause is not None:
            return EXIT_REJECT  # the witness shows a lie, even where every transcript check passed
        code = exit_code(self.report)
        return EXIT_REJECT if self.strict and code in (EXIT_OK, EXIT_INCOMPLETE) else code

    def to_json(self) -> dict[str, Any]:
        """The check-contract object of transcripts/EVENTS.md for this file."""
        out = self.report.to_json()
        out["file"] = self.name
        out["notes"] = [{"text": n.text, "instance": n.instance, "round": n.round} for n in self.notes]
        if self.diagnosis is not None:
            out["root_cause"] = self.diagnosis.root_cause_json()
            out["witness_findings"] = self.diagnosis.findings_json()
            out["openings_unchecked"] = [o.to_json() for o in self.diagnosis.openings_unchecked]
        if self.glue_findings:
            out["glue_findings"] = [f.to_json() for f in self.glue_findings]
        return out


def make_challenger(args: argparse.Namespace) -> Any:
    """The --challenges plug-in (function or stateful object) or the --challenges-exec command,
    under guard, or None."""
    if getattr(args, "challenges_exec", None):
        if args.challenges:
            raise UsageError("expected one of --challenges and --challenges-exec, found both")
        from stepper.cli.exec_plugin import exec_challenger

        return exec_challenger(args.challenges_exec)
    if not args.challenges:
        return None
    from stepper.verify.challenges import GuardedPlugin, guard_stateful
    from stepper.verify.stateful import is_stateful

    plugin = load_challenger(args.challenges)
    if is_stateful(plugin):
        return guard_stateful(plugin, args.challenges)
    return GuardedPlugin(plugin, label=args.challenges)


def check_file(name: str, args: argparse.Namespace, keep_all: bool, challenger: Any = None) -> Checked:
    """Replay one file (``-``: standard input) as the flags say; StepperError for unusable input.
    A plug-in made here (from the flags) lives for this file only; a command is stopped after it."""
    own = challenger is None
    if own:
        challenger = make_challenger(args)
    try:
        if name == "-":
            return _check_stdin(args, keep_all, challenger)
        try:
            return _check_path(name, name, args, keep_all, challenger)
        except TranscriptError as err:  # found while replaying (an expression that cannot be evaluated): say where
            if err.where.file is None:
                raise err.at(file=name) from None
            raise
    finally:
        close = getattr(getattr(challenger, "plugin", None), "close", None)
        if own and callable(close):
            close()


def _check_stdin(args: argparse.Namespace, keep_all: bool, challenger: Any) -> Checked:
    import tempfile

    data = sys.stdin.buffer.read()
    with tempfile.TemporaryDirectory(prefix="stepper-stdin-") as folder:
        path = os.path.join(folder, "stdin")
        with open(path, "wb") as out:
            out.write(data)
        try:
            return _check_path(path, "-", args, keep_all, challenger)
        except StepperError as err:
            if err.where.file == path or (err.where.file is None and isinstance(err, TranscriptError)):
                raise err.at(file="<stdin>") from None
            raise


SWEEP_FROM_BYTES = 1 << 20  # stepper.verify.sweep.SMALL_FILE_BYTES (tests/cli/test_check_file.py pins the two equal)


def _sweep_may_take(path: str) -> bool:
    """Whether the whole-file pass could take the file: it declines one under SMALL_FILE_BYTES
    unless ``STEPPER_SWEEP`` says otherwise. Asked here first, so that checking a small file does
    not import the pass and its packed runs (about 4 ms of CPU) only to hear it decline."""
    if os.environ.get("STEPPER_SWEEP"):
        return True  # on or off: the sweep reads it itself
    try:
        return os.stat(path).st_size >= SWEEP_FROM_BYTES
    except OSError:
        return True  # the sweep declines, and the reader then names what is wrong


def _paused_collector(work: Callable[..., _T], *args: Any, **kwargs: Any) -> _T:
    """``work(*args, **kwargs)`` with Python's cyclic garbage collector paused (as it was after).
    The sweep makes many short-lived objects and no reference cycles: each collection the
    allocations set off walks every object the process holds, and found nothing to free (on
    ``python3 bench/glue.py`` such walks were about 12 ms of a plain check's 150 ms and 33 ms of
    a glued one's 270 ms). Reference counting still frees everything as usual."""
    import gc

    if not gc.isenabled():
        return work(*args, **kwargs)
    gc.disable()
    try:
        return work(*args, **kwargs)
    finally:
        gc.enable()


def _check_path(path: str, name: str, args: argparse.Namespace, keep_all: bool, challenger: Any) -> Checked:
    from stepper.transcript.records import Note, UnknownEvent
    from stepper.transcript.store import open_events
    from stepper.verify.replay import Replay

    detail = bool(args.json or args.witness or args.detail)
    every = bool(keep_all or args.json or args.witness)

    def new_replay() -> Replay:
        return Replay(challenger=challenger, keep_rounds=detail,
                      keep_instances=None if every else max(args.rows, 1),  # --rows 0 still shows a failure
                      emit_passing=detail)

    replay = new_replay()
    notes: list[Note] = []
    note_count = 0
    unknown: dict[str, int] = {}

    def keep_note(record: object) -> None:
        nonlocal note_count
        if isinstance(record, Note):
            note_count += 1
            if len(notes) < 50:
                notes.append(record)
        elif isinstance(record, UnknownEvent):
            unknown[record.kind] = unknown.get(record.kind, 0) + 1

    swept = None
    # --strict counts unknown events one by one
    if not detail and challenger is None and not args.strict and _sweep_may_take(path):
        from stepper.verify.sweep import SMALL_FILE_BYTES, sweep

        swept = _paused_collector(sweep, path, replay, keep_note, min_bytes=SMALL_FILE_BYTES)
        if swept is None:  # the sweep gave up: replay event by event, which names what it found
            replay, notes, note_count = new_replay(), [], 0
    events: list[Any] | None = [] if args.witness else None
    if swept is not None:
        completeness, header, digest, kind = swept.completeness, swept.header, swept.digest, "transcript"
        truncated_at = None  # the sweep gives up on a cut-off last event: the replay below reports it
    else:
        with open_events(path) as stream:
            if events is None:
                replay.feed_all(stream, on_other=keep_note)
            else:
                for record in stream:
                    keep_note(record)
                    events.append(record)
                    replay.feed(record)
            completeness = stream.completeness
            header, digest, kind = stream.header, stream.digest, stream.kind
            truncated_at = stream.truncated_at
    report = replay.report(completeness)
    diagnosis = None
    if args.witness:
        from stepper.cli.progress import terminal_progress
        from stepper.diagnose.rootcause import diagnose
        from stepper.diagnose.witness import load_witness
        from stepper.transcript.model import fold_events

        transcript = fold_events(events or [], header, completeness, digest)  # type: ignore[arg-type]
        witness = load_witness(args.witness)
        engine = _engine(args)
        try:
            with terminal_progress("root cause: recomputing rounds", always=bool(getattr(args, "progress", False)),
                                   unit="entries") as progress:
                diagnosis = diagnose(transcript, witness, report, progress=progress, engine=engine)
        finally:
            if hasattr(engine, "close"):
                engine.close()
    strict = strict_reasons(report, unknown) if args.strict else ()
    glue = glue_probes(path, report) if diagnosis is None and _glue_failure(report) else ()
    from stepper.transcript.condition import file_condition

    return Checked(name, report, diagnosis, notes, note_count, unknown, strict,
                   file_condition(kind, completeness, digest, truncated_at), glue)


def _engine(args: argparse.Namespace) -> Any:
    """The root cause's engine named by ``--engine`` (``--chunk`` for the chunked one)."""
    name = getattr(args, "engine", "chunked")
    if name == "dask":
        from stepper.diagnose.dask_engine import DaskEngine

        return DaskEngine(getattr(args, "scheduler", None))
    if name == "memory":
        from stepper.diagnose.rootcause import InMemory

        return InMemory()
    from stepper.diagnose.folding import CHUNK_ENTRIES, ChunkedFold

    return ChunkedFold(getattr(args, "chunk", None) or CHUNK_ENTRIES)


def _glue_failure(report: Report) -> bool:
    """Whether the first failure is one the glue probes can read without a witness: a
    ``link``, an ``evaluation``, or a ``sum`` of an eq-factored instance."""
    first = report.first_failure
    if first is None:
        return False
    if first.check in ("link", "evaluation"):
        return True
    summary = next((s for s in report.instances if s.index == first.instance), None)
    return first.check == "sum" and summary is not None and summary.form == "eq-factored"


def glue_probes(path: str, report: Report) -> tuple[Any, ...]:
    """The glue probes on the first failure: the file is read once more (only a failing
    file with glue pays for it), folded, and handed to stepper.diagnose.glue_evidence."""
    from stepper.diagnose.glue_evidence import glue_findings
    from stepper.transcript.model import fold_events
    from stepper.transcript.store import open_events

    with open_events(path) as stream:
        events = list(stream)
        transcript = fold_events(events, stream.header, stream.completeness, stream.digest)
    return glue_findings(transcript, report.first_failure)


def strict_reasons(report: Report, unknown: dict[str, int]) -> tuple[str, ...]:
    """What ``--strict`` fails a proof for, beyond the verifier's own checks (empty: nothing)."""
    reasons: list[str] = []
    if report.verdict == "incomplete":
        reasons.append("the transcript is incomplete: it stops before every round was sent")
    if report.challenges.startswith("not re-derived"):
        reasons.append(f"challenges unchecked: {report.challenges}")
    squeezes = next((f for f in report.findings if f.kind == "squeezes-unchecked"), None)
    if squeezes is not None:
        reasons.append(f"squeezes unchecked: {squeezes.message}")
    if report.soundness.weak:
        reasons.append(f"weak soundness bound: {report.soundness.describe()}")
    if unknown:
        kinds = ", ".join(f"{kind} x{n}" for kind, n in sorted(unknown.items()))
        reasons.append(f"unknown event types: {kinds}")
    high = sum(f.severity == "high" for f in report.findings)
    if high:
        reasons.append(f"{high} high-severity finding(s)")
    return tuple(reasons)


def exit_code(report: Report) -> int:
    return {"accept": EXIT_OK, "reject": EXIT_REJECT}.get(report.verdict, EXIT_INCOMPLETE)


def colour_wanted(choice: str = "auto") -> bool:
    """--color always/never decide; auto colours a terminal unless NO_COLOR is set (to anything
    but the empty string) or TERM is dumb."""
    if choice != "auto":
        return choice == "always"
    return sys.stdout.isatty() and not os.environ.get("NO_COLOR") and os.environ.get("TERM") != "dumb"
