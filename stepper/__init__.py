"""stepper: a step-through debugger for sumcheck transcripts.

The public face is small on purpose; most users drive stepper from the
command line (``stepper --help``). Library users record with
:class:`stepper.transcript.recorder.Recorder` and replay with :mod:`stepper.verify.replay`.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
