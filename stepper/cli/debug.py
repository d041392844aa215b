"""STEPPER_DEBUG: the traceback behind an error message, for someone debugging stepper itself."""

from __future__ import annotations

import os
import sys

__all__ = ["DEBUG_ENV", "show_traceback_if_asked"]

DEBUG_ENV = "STEPPER_DEBUG"


def show_traceback_if_asked() -> None:
    """With STEPPER_DEBUG set (to anything but empty or 0), print the traceback of the exception
    being handled to stderr, before the one-line message; never by default."""
    if os.environ.get(DEBUG_ENV, "") not in ("", "0"):
        import traceback

        traceback.print_exc(file=sys.stderr)
