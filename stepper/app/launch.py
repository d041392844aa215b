"""Opening the app on a file, with every round's check under way before Textual loads.

A fresh `stepper view` spends most of its start importing Textual and drawing the first
screen, while `stepper check`'s whole-file pass over the same file takes about as long
as a fresh `stepper check`. :func:`open_app` therefore starts that pass
(:func:`stepper.app.whole_file.start_check`: a forked child on Linux) before Textual or
any screen module is imported, so the pass runs on the other core while this process
imports and paints; the app shows the pass's outcome as soon as it has painted. The
child is forked from a small process (this module and ``whole_file`` import neither
Textual nor numpy), so it copies little and imports what the pass needs itself.

The start-up runs with the cyclic garbage collector off (it allocates much and frees
little: collections then cost CPU and find nothing) and ends by freezing what it made
(``gc.freeze``: modules, classes and the app live as long as the process, so later
collections skip them) and turning the collector back on if it was on. Measured on the
fresh app (`bench/app_fresh.py`, best of 7, loaded machine): its own CPU 0.40 -> 0.37 s
and 0.40 -> 0.35 s in two runs.

Stepping is unchanged: the app still reads and replays the file event by event after
the pass, for the round table and the detail.
"""

from __future__ import annotations

import gc
from pathlib import Path
from typing import TYPE_CHECKING

from stepper.app.whole_file import applies, start_check

if TYPE_CHECKING:
    from stepper.app.app import StepperApp

__all__ = ["open_app"]


def open_app(path: str | Path, *, witness: str | Path | None = None, follow: bool = False,
             compare: str | Path | None = None, export_dir: str | Path | None = None,
             strict: bool = True) -> StepperApp:
    """The app on ``path`` as `stepper view` opens it (the rest of the file read in slices once
    it runs), the whole-file check started before the app's modules are imported. A file that
    cannot be used raises as :meth:`StepperApp.from_file` does, and the check is stopped."""
    collecting = gc.isenabled()
    gc.disable()  # the start-up allocates much and frees little: no collections until the app exists
    try:
        if applies(follow=follow, witness=witness):
            # what both sides need (the reader and the replay; no numpy): imported once, before the fork
            import stepper.transcript.store  # noqa: F401
            import stepper.verify.replay  # noqa: F401
        checking = start_check(path, follow=follow, witness=witness)
        try:
            from stepper.app.app import StepperApp
        except BaseException:  # Ctrl-C during the import, or Textual missing: the child goes too
            if checking is not None:
                checking.stop()
            raise
        # from_file stops the check itself when the app cannot be made
        return StepperApp.from_file(path, witness=witness, progressive=True, strict=strict, follow=follow,
                                    export_dir=export_dir, compare=compare, whole_file_check=checking)
    finally:
        gc.freeze()  # modules, classes and the app live as long as the process: never walked again
        if collecting:
            gc.enable()
