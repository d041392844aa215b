"""The app's I/O edge: read a transcript into a :class:`ProofModel`, follow it as it
grows, save notes, and run the witness diagnosis.

Reading goes through :mod:`stepper.store` (msgpack transcripts and JSON-lines
event files alike). A file that breaks part-way is not fatal here: the events
before the break are shown and the break becomes ``problem``, one line that
says what was expected, what was found and where. Following re-opens the file
when its size changes and feeds only the events not seen before; a half-written
tail is simply not an event yet.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from stepper.app.proof_model import ProofModel
from stepper.errors import InputError, StepperError
from stepper.transcript import Header, Note

__all__ = ["TranscriptSource", "new_model"]


def new_model(source: str = "", header: Header | None = None) -> ProofModel:
    """A model wired to the core replay."""
    from functools import partial

    from stepper.verify import Replay

    return ProofModel(partial(Replay, keep_rounds=True), header, source)


class TranscriptSource:
    """One transcript file (and optionally a witness) feeding one model."""

    def __init__(self, path: str | Path, witness: str | Path | None = None) -> None:
        self.path = Path(path)
        self.witness_path = Path(witness) if witness is not None else None
        self.problem: str | None = None
        self._size = -1
        self._fed = 0
        self.diagnosis: Any = None

    def open(self, strict: bool = True) -> ProofModel:
        """A fresh model with every event the file holds now. When not even the field
        can be read, ``strict`` raises :class:`InputError`; otherwise the model stays
        empty and ``problem`` says why."""
        model = new_model(str(self.path))
        self._fed = 0
        self._size = -1
        self.problem = None
        self.refresh(model)
        if strict and model.field is None and self.problem is not None:
            raise InputError(self.problem)
        return model

    def refresh(self, model: ProofModel) -> int:
        """Feed the events written since the last call; returns how many arrived."""
        from stepper.store import open_events

        try:
            size = os.stat(self.path).st_size
        except OSError as err:
            self.problem = f"{self.path}: cannot read ({err.strerror or err})"
            return 0
        if size == self._size:
            return 0
        self._size = size
        before = self._fed
        seen = 0
        try:
            with open_events(self.path) as events:
                if model.events_seen == 0:
                    model.header = getattr(events, "header", None) or model.header
                for record in events:
                    seen += 1
                    if seen > self._fed:
                        model.feed(record)
                        self._fed = seen
                model.finish(getattr(events, "completeness", "complete"), getattr(events, "digest", "missing"))
            self.problem = None
        except StepperError as err:
            self.problem = str(err)
            model.generation += 1
        except OSError as err:
            self.problem = f"{self.path}: cannot read ({err.strerror or err})"
        return self._fed - before

    def save_note(self, model: ProofModel, note: Note) -> None:
        """Append the note to the file (the recorded part's digest stays intact) and show it."""
        from stepper.store import append_note

        append_note(self.path, note)
        self._fed += 1
        try:
            self._size = os.stat(self.path).st_size
        except OSError:
            self._size = -1
        model.add_note(note)

    def diagnose(self, model: ProofModel) -> Any:
        """Root cause against the witness, if one was given (None otherwise)."""
        if self.witness_path is None:
            return None
        from stepper.rootcause import diagnose
        from stepper.store import load
        from stepper.witness import load_witness

        witness = load_witness(self.witness_path)
        self.diagnosis = diagnose(load(self.path), witness, model.report())
        return self.diagnosis
