"""The app's I/O edge: read a transcript into a :class:`ProofModel` in slices, follow
it as it grows, save notes, and run the witness diagnosis.

Reading goes through :mod:`stepper.transcript.store` (msgpack transcripts and JSON-lines
event files alike). ``begin`` opens the file and ``pump`` feeds at most a given
number of events per call, so the app paints the first instance at once and
checks the rest between key presses. A file that breaks part-way is not fatal
here: the events before the break are shown and the break becomes ``problem``,
one line that says what was expected, what was found and where.

Following (``follow=True``) keeps the file open after the first read, as a
:class:`stepper.transcript.store.follow.FollowedStream`: each time the file grows, only the
appended bytes are read and their complete events fed (a half-written tail is
simply not an event yet). Only when the path names another file, or a file
shorter than what was read (rewritten from scratch), or the last read broke,
is the file read again from byte 0, feeding the events beyond those already fed.
Notes saved from the app are not fed a second time when the stream reaches them.
"""

from __future__ import annotations

import os
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator

from stepper.app.proof_model import ProofModel
from stepper.errors import InputError, StepperError, TranscriptError
from stepper.transcript.model import Event, Header, Note

if TYPE_CHECKING:
    from stepper.app.whole_file import WholeFile, WholeFileCheck

__all__ = ["TranscriptSource", "new_model"]


def new_model(source: str = "", header: Header | None = None) -> ProofModel:
    """A model wired to the core replay (round detail kept for the report)."""
    from stepper.verify.replay import Replay

    return ProofModel(partial(Replay, keep_rounds=True), header, source)


class TranscriptSource:
    """One transcript file (and optionally a witness) feeding one model."""

    def __init__(self, path: str | Path, witness: str | Path | None = None, *, follow: bool = False) -> None:
        self.path = Path(path)
        self.witness_path = Path(witness) if witness is not None else None
        self.follow = follow
        self.problem: str | None = None
        self.diagnosis: Any = None
        self._size = -1
        self._fed = 0
        self._stream: Any = None
        self._records: Iterator[Event] | None = None
        self._own_notes: list[Note] = []  # saved here, not yet met again by the followed stream
        self._skip = 0  # records of the followed stream still to pass over (fed from an earlier read)

    # ----- first read, in slices ----------------------------------------------------
    def begin(self) -> ProofModel:
        """A fresh, empty model and the file opened for :meth:`pump`."""
        from stepper.transcript.store import open_events

        model = new_model(str(self.path))
        self._fed = 0
        self.problem = None
        model.loading = True
        try:
            self._size = os.stat(self.path).st_size
            self._stream = self._open_stream() if self.follow else open_events(self.path, best_effort=True)
            self._records = iter(self._stream)
            model.header = self._stream.header
            model.kind = self._stream.kind
        except StepperError as err:
            self._fail(model, str(err))
        except OSError as err:
            self._fail(model, _unreadable(err, self.path))
        return model

    def whole_file_check(self) -> WholeFile | None:
        """Every round checked through the same whole-file pass as `stepper check`
        (:func:`stepper.app.whole_file.check_whole_file`), or None when it does not apply (a
        file still being written, a JSON-lines stream, notes waiting beside it, anything odd:
        the event-by-event read then checks as before). Opens the file on its own and
        touches no model."""
        from stepper.app.whole_file import applies, check_whole_file

        return check_whole_file(self.path) if applies(follow=self.follow, witness=self.witness_path) else None

    def start_whole_file_check(self, *, child: bool | None = None) -> WholeFileCheck | None:
        """Start :meth:`whole_file_check` beside the app's start-up (a child process where
        possible, else a thread: :class:`stepper.app.whole_file.WholeFileCheck`); None when it
        does not apply."""
        from stepper.app.whole_file import start_check

        return start_check(self.path, follow=self.follow, witness=self.witness_path, child=child)

    def pump(self, model: ProofModel, limit: int) -> bool:
        """Feed up to ``limit`` more events; True once the file is exhausted (or broke)."""
        records = self._records
        if records is None:
            return True
        try:
            for _ in range(limit):
                record = next(records, None)
                if record is None:
                    stream = self._stream
                    if self.follow:
                        self._records = None  # the stream stays open for `refresh`
                    else:
                        self._close()
                    model.loading = False
                    model.digest_problem = stream.digest_problem
                    model.finish(stream.completeness, stream.digest, _final(stream))
                    return True
                if self._own_notes and record == self._own_notes[0]:
                    self._own_notes.pop(0)  # saved from the app while reading: already shown
                    continue
                model.feed(record)
                self._fed += 1
        except StepperError as err:
            self._fail(model, str(_in_file(err, self.path)))
            return True
        return False

    def open(self, strict: bool = True) -> ProofModel:
        """A model with every event the file holds now. When not even the field can be
        read, ``strict`` raises :class:`InputError`; otherwise ``problem`` says why."""
        model = self.begin()
        while not self.pump(model, 1 << 16):
            pass
        self.check_usable(model, strict)
        return model

    def open_start(self, strict: bool = True) -> ProofModel:
        """A model with the first events read (enough to know the field); the rest is
        left for :meth:`pump`."""
        model = self.begin()
        while model.field is None and not self.pump(model, 8):
            pass
        self.check_usable(model, strict)
        return model

    def check_usable(self, model: ProofModel, strict: bool) -> None:
        if strict and model.field is None and self.problem is not None:
            raise InputError(self.problem)

    def _fail(self, model: ProofModel, problem: str) -> None:
        self.problem = problem
        self._close()
        model.loading = False
        model.finish("incomplete", "missing", final=False)

    def close(self) -> None:
        """Let go of the file kept open for following (a later :meth:`refresh` reads it from byte 0)."""
        self._close()

    def _close(self) -> None:
        if self._stream is not None:
            self._stream.close()
        self._stream = None
        self._records = None
        self._own_notes.clear()
        self._skip = 0

    def _open_stream(self) -> Any:
        from stepper.transcript.store.follow import FollowedStream

        return FollowedStream(self.path, best_effort=True)

    # ----- following ---------------------------------------------------------------
    def refresh(self, model: ProofModel) -> int:
        """Feed the events written since the last look; returns how many arrived."""
        if model.loading:
            return 0
        try:
            now = os.stat(self.path)
        except OSError as err:
            self.problem = _unreadable(err, self.path)
            return 0
        if now.st_size == self._size:
            return 0
        self._size = now.st_size
        before = self._fed
        try:
            stream = self._stream
            if stream is not None and stream.continues(now):
                self._feed_new(model, stream.more())
            else:
                self._reread(model)
            stream = self._stream
            model.digest_problem = stream.digest_problem
            model.finish(stream.completeness, stream.digest, _final(stream))
            self.problem = None
        except StepperError as err:
            self._close()
            self.problem = str(_in_file(err, self.path))
            model.generation += 1
        except OSError as err:
            self._close()
            self.problem = _unreadable(err, self.path)
        return self._fed - before

    def _feed_new(self, model: ProofModel, records: Iterator[Event]) -> None:
        """Feed the records not fed before: after a read from byte 0 the first ``_skip``
        were; a note saved here is met again in the file."""
        own = self._own_notes
        for record in records:
            if self._skip:
                self._skip -= 1
            elif own and record == own[0]:
                own.pop(0)
            else:
                model.feed(record)
                self._fed += 1

    def _reread(self, model: ProofModel) -> None:
        """Read the file again from byte 0, feeding the events beyond those already fed, and
        keep it open for the next look."""
        self._close()
        self._stream = stream = self._open_stream()
        if model.events_seen == 0:
            model.header = stream.header
        self._skip = self._fed
        self._feed_new(model, stream)

    # ----- notes and witness -------------------------------------------------------
    def save_note(self, model: ProofModel, note: Note) -> None:
        """Append the note to the file (the recorded part's digest stays intact) and show it."""
        from stepper.transcript.store import append_note

        append_note(self.path, note, wait=0.2)  # a recording holds the file: the note waits beside it at once
        self._fed += 1
        if self._stream is not None:
            self._own_notes.append(note)
        try:
            self._size = os.stat(self.path).st_size
        except OSError:
            self._size = -1
        model.add_note(note)

    def diagnose(self, model: ProofModel) -> Any:
        """Root cause against the witness, if one was given (None otherwise)."""
        if self.witness_path is None:
            return None
        from stepper.diagnose.rootcause import diagnose
        from stepper.transcript.store import load
        from stepper.diagnose.witness import load_witness

        witness = load_witness(self.witness_path)
        self.diagnosis = diagnose(load(self.path), witness, model.report())
        return self.diagnosis


def _final(stream: Any) -> bool:
    """No checked event can follow: a transcript whose end event was read. A JSON-lines
    event file has no end marker, so a prover may always append to it."""
    return bool(stream.kind == "transcript" and stream.completeness == "complete")


def _in_file(err: StepperError, path: Path) -> StepperError:
    """A replay's refusal (an expression that cannot be evaluated) located in the file, as `check` says it."""
    return err.at(file=str(path)) if err.where.file is None and isinstance(err, TranscriptError) else err


def _unreadable(err: OSError, path: Path) -> str:
    """The line `stepper check` and `info` give for a file the system will not let us read."""
    from stepper.transcript.store.writer import oserror  # only on this path: the writer is not needed to view

    return str(oserror(err, str(path), "open the file"))
