"""The whole-file check behind the app's first screen: `stepper check`'s pass, run beside it.

While the app paints its first screen, every round of the file is checked through
:func:`stepper.verify.sweep.sweep`, the pass `stepper check` takes on a large file. The
app keeps only what it shows of that pass (:class:`WholeFile`): the replay's report
without its per-instance summaries, the number of rounds, and the proof's condition in
the words of :mod:`stepper.transcript.condition`. Stepping still reads and replays the
file event by event afterwards.

Where it runs: on Linux, in a process that has one thread, the pass runs in a forked
child process (on the other core, so it neither waits for the paint nor slows it) and
sends back the :class:`WholeFile` pickled through a pipe, a few hundred bytes whatever
the size of the file; the child's standard output and error go to the null device (a
stray line would land in the middle of the app's screen) and it leaves with
``os._exit``. The child first freezes what it inherited (``gc.freeze``): its collector then
never walks the parent's objects, so their pages stay shared instead of being copied (a
child forked after Textual's import spent 0.27 s of CPU instead of 0.31, best of 5 on a
loaded machine; forked before it, as :mod:`stepper.app.launch` does, it inherits little).
Elsewhere (no ``fork``, another platform, threads already running, a fork refused) it
runs in a thread of this process. Either way, a pass that declines (a file
still being written, a failing block, notes waiting beside the file, anything odd) or a
child that dies gives None, and the event-by-event read checks the file as before and
names any failure. An outcome nobody waits for any more (the app closed first) is
dropped quietly.
"""

from __future__ import annotations

import gc
import os
import pickle
import signal
import sys
import threading
from concurrent.futures import Future, InvalidStateError
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

from stepper.transcript.condition import proof_condition

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.verify.verdict import Report

__all__ = ["WholeFile", "WholeFileCheck", "check_whole_file", "summarise", "child_possible", "applies",
           "start_check"]


@dataclass(frozen=True, slots=True)
class WholeFile:
    """What the app shows of the whole-file pass. ``report`` is the replay's report with no
    instance summaries and no per-instance soundness bounds (its counts, verdict, first
    failure, findings and proof-wide bound are whole); ``rounds`` counts every round the
    file holds; ``proof`` is :func:`stepper.transcript.condition.proof_condition` of every
    instance."""

    report: Report
    rounds: int
    proof: str

    def with_field(self, field: Field | None) -> WholeFile:
        """The same, its report formatting values in ``field`` (a child sends none back)."""
        return replace(self, report=replace(self.report, field=field))


def summarise(report: Report) -> WholeFile:
    """The :class:`WholeFile` of a report that kept every instance summary (pure). The
    field is left out: it travels badly between processes and the app already has it."""
    summaries = report.instances
    rounds = sum(s.rounds_seen for s in summaries)
    proof = proof_condition((s.index, s.name, s.rounds_seen if s.failure is not None else s.rounds_passed,
                             s.num_vars) for s in summaries)
    light = replace(report, field=None, instances=(), soundness=replace(report.soundness, per_instance=()))
    return WholeFile(light, rounds, proof)


def check_whole_file(path: str | Path) -> WholeFile | None:
    """Every round of ``path`` checked by the whole-file pass, or None when the pass declines."""
    from stepper.verify.replay import Replay
    from stepper.verify.sweep import sweep

    replay = Replay(keep_rounds=False, keep_instances=None, emit_passing=False)
    swept = sweep(path, replay)
    return None if swept is None else summarise(replay.report(swept.completeness))


def applies(*, follow: bool, witness: object) -> bool:
    """Whether the app takes the pass at all: not for a file followed while a prover writes
    it, nor for a run with a witness (whose diagnosis reads the whole file first)."""
    return not follow and witness is None


def start_check(path: str | Path, *, follow: bool = False, witness: object = None,
                child: bool | None = None) -> WholeFileCheck | None:
    """The pass over ``path`` under way, or None where it does not :func:`apply <applies>`.
    Imports nothing heavy, so a caller can start it before Textual loads."""
    return WholeFileCheck(path, child=child) if applies(follow=follow, witness=witness) else None


def child_possible() -> bool:
    """Whether the pass may run in a forked child: Linux, and no other thread of this
    process that could hold a lock the child would then wait for forever."""
    return sys.platform.startswith("linux") and hasattr(os, "fork") and threading.active_count() == 1


class WholeFileCheck:
    """The pass over one file, under way from construction: ``future`` holds the
    :class:`WholeFile` or None. ``child`` None chooses a child process when
    :func:`child_possible`; True or False decide (tests)."""

    def __init__(self, path: str | Path, *, child: bool | None = None) -> None:
        self.path = Path(path)
        self.future: Future[WholeFile | None] = Future()
        self.pid: int | None = None  # the child's process id (None: a thread)
        self._reaped = False
        self._lock = threading.Lock()
        thread = None
        if child_possible() if child is None else child:
            thread = self._start_child()  # the thread waiting for the child; None if no child could start
        if thread is None:
            thread = threading.Thread(target=self._in_thread, name="stepper whole-file check", daemon=True)
            thread.start()
        self.thread = thread

    def _settle(self, result: WholeFile | None = None, error: BaseException | None = None) -> None:
        """Hand over the outcome, unless whoever awaited it has given up (the app closed and
        cancelled the future): then there is nobody to tell, and nothing to raise."""
        try:
            if error is not None:
                self.future.set_exception(error)
            else:
                self.future.set_result(result)
        except InvalidStateError:
            pass  # cancelled

    def _in_thread(self) -> None:
        try:
            self._settle(check_whole_file(self.path))
        except BaseException as err:  # noqa: BLE001 - handed to whoever awaits the future
            self._settle(error=err)

    def _start_child(self) -> threading.Thread | None:
        try:
            read_end, write_end = os.pipe()
        except OSError:
            return None  # out of file descriptors: the thread checks instead
        try:
            pid = os.fork()
        except OSError:  # no more processes or memory for one: the thread checks instead
            os.close(read_end)
            os.close(write_end)
            return None
        if pid == 0:  # the child: check, send the summary, leave without the parent's clean-up
            code = 1
            try:
                gc.freeze()  # the parent's objects: never walked here, so their pages are never copied
                gc.enable()  # whatever the parent's start-up had turned off: the pass may make cycles
                os.close(read_end)
                quiet = os.open(os.devnull, os.O_WRONLY)  # nothing of the child reaches the app's terminal
                os.dup2(quiet, 1)
                os.dup2(quiet, 2)
                sys.stdout = sys.stderr = open(quiet, "w", closefd=False)  # whatever sys.stdout was
                data = pickle.dumps(check_whole_file(self.path), protocol=pickle.HIGHEST_PROTOCOL)
                with open(write_end, "wb") as pipe:
                    pipe.write(data)
                code = 0
            finally:
                os._exit(code)  # noqa: B012 - nothing of the parent's (atexit, buffers) runs twice
        os.close(write_end)
        self.pid = pid
        thread = threading.Thread(target=self._collect, args=(pid, read_end), name="stepper whole-file check",
                                  daemon=True)
        thread.start()
        return thread

    def _collect(self, pid: int, read_end: int) -> None:
        """Read the child's answer to the end, reap the child, and settle the future: None when
        the child sent nothing usable (it died, or was stopped), so the app never waits for ever."""
        result: object = None
        try:
            with open(read_end, "rb") as pipe:
                data = pipe.read()
            result = pickle.loads(data) if data else None  # our own child's bytes, never a file's
        except Exception:  # noqa: BLE001 - cut short: the event-by-event read checks instead
            result = None
        finally:
            with self._lock:
                try:
                    os.waitpid(pid, 0)
                except ChildProcessError:
                    pass  # already reaped by someone waiting for any child
                self._reaped = True
            self._settle(result if isinstance(result, WholeFile) else None)

    def stop(self) -> None:
        """End a child still checking (the app closed first); a thread is left to finish."""
        with self._lock:
            if self.pid is not None and not self._reaped:
                os.kill(self.pid, signal.SIGKILL)  # it only reads: nothing to leave half done
