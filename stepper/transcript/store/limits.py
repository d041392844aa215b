"""The caps of the transcript reader (:class:`ReadLimits`) and the msgpack ``Unpacker`` that
enforces them, with msgpack's refusals put in words.

A hostile file must not cost unbounded memory or time: one event's bytes, the whole file's,
and the entries of one list or map are capped here; elements per event by the Sequencer.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Callable, Iterator

import msgpack

from stepper.transcript.events import MAX_SIZES, MAX_TEXT

__all__ = ["ReadLimits", "make_unpacker", "unpacked", "past_cap"]


@dataclass(frozen=True, slots=True)
class ReadLimits:
    """Caps that keep a hostile file from costing unbounded memory or time.
    Elements per event are capped by the Sequencer (``MAX_VALUES``) and, for a
    packed run, by ``max_event_bytes``."""

    max_event_bytes: int = 64 << 20
    max_total_bytes: int = 1 << 40
    max_items: int = MAX_SIZES  # entries of one msgpack array or map
    chunk_bytes: int = 1 << 20  # bytes read at a time


def make_unpacker(limits: ReadLimits, source: Any = None) -> msgpack.Unpacker:
    """A msgpack ``Unpacker`` refusing what ``limits`` refuse (feed mode when ``source`` is None)."""
    return msgpack.Unpacker(
        source,
        raw=False,
        max_buffer_size=limits.max_event_bytes + limits.chunk_bytes,
        max_bin_len=limits.max_event_bytes,
        max_str_len=4 * MAX_TEXT,
        max_array_len=limits.max_items,
        max_map_len=limits.max_items,
        max_ext_len=0,
    )


def unpacked(unpacker: msgpack.Unpacker, refill: Callable[[], bool]) -> Iterator[Any]:
    """Every object of a feed-mode ``unpacker``, calling ``refill`` (which feeds it) when it runs dry
    until ``refill`` returns False."""
    while True:
        yield from unpacker
        if not refill():
            return


_PAST_CAP = r"(\d+) exceeds max_(bin|str|array|map|ext)_len\((\d+)\)"  # compiled by re on the first refusal
_CAP_UNITS = {"bin": "bytes of binary data", "str": "bytes of text", "array": "entries in a list",
              "map": "entries in a map", "ext": "bytes of extension data"}


def past_cap(err: Exception) -> str | None:
    """msgpack's refusal of an object past a ReadLimits cap, in words (None for other errors)."""
    match = re.search(_PAST_CAP, str(err))
    if match is None:
        return None
    found, kind, cap = match.groups()
    return f"expected at most {cap} {_CAP_UNITS[kind]} in one object (a reading limit), found {found}"
