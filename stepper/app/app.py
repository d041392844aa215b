"""The stepper terminal app: one proof, stepped round by round.

:class:`StepperApp` owns the model (what was read and what the replay said),
the file it came from (for following and notes) and the optional witness
diagnosis; the screens own presentation. With ``follow`` a timer reads what the
file gained since the last look (only the appended bytes) and the screens
repaint; a half-written tail is not an event yet, so it waits for the next tick.
With ``compare`` the compare screen (:mod:`stepper.app.compare_screen`) opens on
top, when present.
"""

from __future__ import annotations

import asyncio
import errno
import importlib.util
import time
from pathlib import Path
from typing import Any

from textual.app import App

try:  # asked every TERMINAL_LOOK_SECONDS whether the terminal is still there
    import fcntl
    import termios
except ImportError:  # Windows
    fcntl = termios = None  # type: ignore[assignment]

from stepper.app.proof_model import Position, ProofModel
from stepper.app.proof_screen import ProofScreen
from stepper.app.source import TranscriptSource
from stepper.app.whole_file import WholeFileCheck
from stepper.transcript.model import Note

__all__ = ["StepperApp", "compare_available", "READ_SLICE"]

READ_SLICE = 600  # events fed between two chances for the app to handle a key
REPAINT_SECONDS = 1.0  # summary and strip repaint this often during the first read


def compare_available() -> bool:
    """Whether the compare screen module is installed."""
    return importlib.util.find_spec("stepper.app.compare_screen") is not None


TERMINAL_LOOK_SECONDS = 2.0  # how often the app looks whether its terminal is still there


def terminal_gone(fd: int = 0) -> bool:
    """True when ``fd`` is a terminal that has hung up: asking it how many bytes wait fails
    with an I/O error once the other end of a pseudo-terminal is closed (Linux, macOS). False
    for a live terminal, for anything else, and where the question cannot be asked."""
    if fcntl is None or termios is None:  # no termios (Windows): never judged gone
        return False
    try:
        fcntl.ioctl(fd, termios.FIONREAD, b"\0\0\0\0")
    except OSError as err:
        return err.errno in (errno.EIO, errno.ENXIO)
    return False


class StepperApp(App[int]):
    """Proof view (summary, strip, rounds, detail) plus the bucket, key and question screens."""

    CSS_PATH = "stepper.tcss"
    TITLE = "stepper"
    ENABLE_COMMAND_PALETTE = False

    def __init__(
        self,
        model: ProofModel,
        *,
        source: TranscriptSource | None = None,
        follow: bool = False,
        poll_seconds: float = 0.4,
        export_dir: str | Path | None = None,
        compare: str | Path | None = None,
        diagnosis: Any = None,
    ) -> None:
        super().__init__()
        self.model = model
        self.source = source
        self.follow = follow and source is not None
        self.poll_seconds = poll_seconds
        self.export_dir = Path(export_dir) if export_dir is not None else Path.cwd()
        self.compare = compare
        self.diagnosis = diagnosis
        self.proof_screen = ProofScreen(model)
        self.whole_file_check: WholeFileCheck | None = None  # the whole-file pass under way (see from_file)

    @classmethod
    def from_file(cls, path: str | Path, *, witness: str | Path | None = None, progressive: bool = False,
                  strict: bool = False, whole_file_check: WholeFileCheck | None = None,
                  **options: Any) -> StepperApp:
        """An app on ``path``. A file that breaks part-way shows what came before the
        break and says where it broke; ``strict`` raises instead when not even the
        field can be read. ``progressive`` reads only the start now and the rest in
        slices once the app runs (the first screen paints at once); otherwise the
        whole file is read and checked first. A witness implies a full first read.
        ``whole_file_check`` is the pass over ``path`` when the caller started it already
        (:func:`stepper.app.launch.open_app`, before Textual was imported); otherwise a
        progressive app starts it here. Either way it is stopped if the app cannot be made."""
        source = TranscriptSource(path, witness, follow=bool(options.get("follow", False)))
        if progressive and witness is None:
            checking = whole_file_check if whole_file_check is not None else source.start_whole_file_check()
            try:
                model = source.open_start(strict)
                app = cls(model, source=source, **options)
            except BaseException:
                if checking is not None:
                    checking.stop()  # nobody will wait for it
                raise
            app.whole_file_check = checking
            return app
        if whole_file_check is not None:
            whole_file_check.stop()  # a full first read checks every round itself
        model = source.open(strict)
        diagnosis = source.diagnose(model) if witness is not None and model.field is not None else None
        return cls(model, source=source, diagnosis=diagnosis, **options)

    @property
    def problem(self) -> str | None:
        return self.source.problem if self.source is not None else None

    def on_mount(self) -> None:
        self.push_screen(self.proof_screen)
        if self.model.loading:
            self.run_worker(self._read_rest(), name="first read", exclusive=True)
        if self.follow:
            self.set_interval(self.poll_seconds, self.poll_file, name="follow")
        if self.compare is not None:
            self.open_compare(self.compare)
        if not self.is_headless:
            self.set_interval(TERMINAL_LOOK_SECONDS, self.leave_if_terminal_gone, name="terminal")

    def leave_if_terminal_gone(self) -> bool:
        """Exit when the terminal behind standard input has gone (its pseudo-terminal closed
        without a hang-up signal reaching this process); Textual's input loop would otherwise
        keep polling it, a core busy until someone kills the process. True if it had gone."""
        if not terminal_gone():
            return False
        self.exit()
        return True

    def on_unmount(self) -> None:
        if self.whole_file_check is not None:
            self.whole_file_check.stop()  # closed before every round was checked: the child goes too
        if self.source is not None and not self.model.loading:
            self.source.close()  # the file kept open for following

    def open_compare(self, other: str | Path) -> None:
        """Push the compare screen for this file against ``other``, or say it is missing."""
        if not compare_available() or self.source is None:
            self.notify("comparing needs the compare screen (stepper.app.compare_screen), not installed",
                        severity="warning", markup=False)
            return
        from stepper.app.compare_screen import CompareScreen  # type: ignore[import-not-found]

        self.push_screen(CompareScreen(self.source.path, Path(other)))

    async def _read_rest(self) -> None:
        """Feed the rest of the file in slices, yielding to key presses between them
        and repainting the summary and strip a few times a second."""
        assert self.source is not None
        # every round checked first, through stepper check's whole-file pass (beside the app, so
        # keys keep working); then the events are read in slices for stepping, round by round
        if self.whole_file_check is not None:
            swept = await asyncio.wrap_future(self.whole_file_check.future)
        else:
            swept = await asyncio.to_thread(self.source.whole_file_check)
        if swept is not None and self.model.loading:
            self.model.take_whole_file(swept)
            self.proof_screen.model_changed()
        # the first screen (and the pass's outcome) is drawn before the slices start: a slice takes
        # the event loop for some milliseconds, and a dozen of them would hold back the first paint
        await self.repainted()
        painted = time.monotonic()
        while not self.source.pump(self.model, READ_SLICE):
            if not self.is_running:
                return  # the app is closing: nobody will step through the rest
            if time.monotonic() - painted > REPAINT_SECONDS:
                self.proof_screen.model_changed()
                painted = time.monotonic()
            await asyncio.sleep(0)
        self.proof_screen.model_changed()

    async def repainted(self) -> None:
        """Return once the proof screen has drawn what was pending (at once if it cannot be asked)."""
        drawn: asyncio.Future[None] = asyncio.get_running_loop().create_future()

        def done() -> None:
            if not drawn.done():
                drawn.set_result(None)

        if self.proof_screen.call_after_refresh(done):
            await drawn

    def poll_file(self) -> int:
        """Feed whatever the file gained since the last look; repaint if anything did."""
        if self.source is None:
            return 0
        before = (self.source.problem, self.model.generation)
        arrived = self.source.refresh(self.model)
        if (self.source.problem, self.model.generation) != before:  # events, an end event, or a break
            self.proof_screen.model_changed()
        return arrived

    def save_note(self, note: Note) -> None:
        if self.source is not None:
            self.source.save_note(self.model, note)
        else:
            self.model.add_note(note)

    def export_path(self, suffix: str, position: Position) -> Path:
        """Where an export of the view at ``position`` goes (never overwriting an older one)."""
        stem = Path(self.model.source).stem if self.model.source else "proof"
        base = f"{stem}.i{position[0]}.r{position[1]}"
        path = self.export_dir / f"{base}.{suffix}"
        serial = 1
        while path.exists():
            serial += 1
            path = self.export_dir / f"{base}.{serial}.{suffix}"
        return path
