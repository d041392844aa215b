"""Caps on what one event payload may hold, and the checks of single payload values (no I/O).

The :class:`~stepper.transcript.events.Sequencer` applies these to every payload it turns
into a record, so a hostile file cannot cost unbounded memory: at most
``MAX_VALUES`` field elements and ``MAX_SIZES`` bucket sizes in one event, strings
of at most ``MAX_TEXT`` characters, free-form data nested at most ``MAX_DEPTH``
levels. Each check takes ``fail``, a function from a message to the exception to
raise (the Sequencer's, which adds the event, instance and round), and names the
value it found, clipped.
"""

from __future__ import annotations

from typing import Any, Callable, Mapping

from stepper.field.elements import clip_text

__all__ = ["MAX_VALUES", "MAX_SIZES", "MAX_TEXT", "MAX_NUM_VARS", "MAX_DEGREE", "MAX_DEPTH", "short",
           "checked_text", "checked_count", "plain"]

MAX_VALUES = 1 << 16  # field elements in one event
MAX_SIZES = 1 << 22  # bucket sizes in one event
MAX_TEXT = 1 << 16  # characters in one string
MAX_NUM_VARS = 64
MAX_DEGREE = 1 << 12
MAX_DEPTH = 16  # nesting of unknown payloads and metadata

Fail = Callable[[str], Exception]


def short(value: object) -> str:
    """A value as it appears in a message: its repr, clipped to 40 characters."""
    return clip_text(repr(value), 40)


def checked_text(value: object, what: str, fail: Fail) -> str:
    """``value`` if it is a string of at most ``MAX_TEXT`` characters."""
    if not isinstance(value, str):
        raise fail(f"expected {what} as a string, found {short(value)}")
    if len(value) > MAX_TEXT:
        raise fail(f"expected {what} of at most {MAX_TEXT} characters, found {len(value)}")
    return value


def checked_count(value: object, what: str, low: int, high: int, fail: Fail) -> int:
    """``value`` if it is an integer (not a bool) in ``low..high``."""
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        raise fail(f"expected {what} an integer in {low}..{high}, found {short(value)}")
    return value


def plain(value: Any, fail: Fail, depth: int = 0) -> Any:
    """A copy of free-form payload data (maps with string keys, lists, scalars), refusing
    nesting deeper than ``MAX_DEPTH`` and strings longer than ``MAX_TEXT``."""
    if depth > MAX_DEPTH:
        raise fail(f"expected payload nesting of at most {MAX_DEPTH} levels")
    if isinstance(value, Mapping):
        return {str(k)[:MAX_TEXT]: plain(v, fail, depth + 1) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v, fail, depth + 1) for v in value]
    if isinstance(value, str) and len(value) > MAX_TEXT:
        raise fail(f"expected strings of at most {MAX_TEXT} characters, found {len(value)}")
    return value
