"""A JSON witness's large tables read by numpy from the text, not built as Python lists.

``json.loads`` turns a table of 2^20 extension elements (about 45 MB of text) into four million
Python ints in a million lists, and numpy then reads those back: most of the time and memory of
a JSON witness. :func:`split_tables` finds each large array of non-negative integers in the text
(one level, or rows of equal length) and reads it in whole-array passes; the rest of the text,
with a placeholder where each array stood, is left to ``json.loads``, and :func:`put_back` puts
the arrays in place of their placeholders.

An array is taken this way only when ``json.loads`` would certainly read it as the same integers:
it stands outside every string in a stretch of at least :data:`MIN_BYTES` between two strings,
and with its white space (JSON's four characters) removed it is exactly ``[n,n,...,n]`` or
``[[n,...,n],...,[n,...,n]]`` with rows of one length, each n a run of 1 to 19 digits without a
leading zero (so it fits an unsigned 64-bit word). The check needs no tokenizer: the characters
between the numbers, in order, must be exactly the separators that shape calls for, and so must
their counts before the first number, between each two and after the last. Anything else stays in the
text, as does every array of a text holding a backslash (an escape could hide a quote), and
``json.loads`` reads it as before, naming any error at its true line.

Memory follows :data:`BLOCK_BYTES`, not the file: the text is read a block at a time (an array
in blocks cut just before a number, so that no number and no separator is split), and when it
is a memory mapping (:func:`stepper.diagnose.witness.load_witness` maps large files) the pages of
each block are handed back once read. An array whose integers all fit 32 bits is kept as
``uint32`` (half the memory of ``uint64``; the witness fit converts a piece at a time). What is
held whole is the arrays and the text outside them.
Pure: bytes (or a mapping) in, arrays and bytes out.
"""

from __future__ import annotations

import mmap
import re
from dataclasses import dataclass
from typing import Any, Union

import numpy as np

__all__ = ["MIN_BYTES", "BLOCK_BYTES", "Text", "split_tables", "put_back"]

MIN_BYTES = 1 << 16  # smaller arrays cost json.loads little
BLOCK_BYTES = 1 << 20  # text read at once: the temporaries follow this, not the table

Text = Union[bytes, mmap.mmap]

_PLACEHOLDER = "\x00stepper-table-"  # a JSON string holding NUL comes only from an escape: none here
_JSON_SPACE = np.frombuffer(b" \t\r\n", dtype=np.uint8)
_OPEN, _CLOSE, _COMMA = ord("["), ord("]"), ord(",")
_BRACKETS_AS_SPACE = bytes.maketrans(b"[]", b"  ")
_ROW_BREAK = np.frombuffer(b"],[", dtype=np.uint8)
_DIGIT = re.compile(rb"[0-9]")
_MAX_GAP = 1 << 12  # separators and white space looked through for the next number at a block's end


def split_tables(data: Text) -> tuple[bytes, bytes, list[np.ndarray]]:
    """(text for ``json.loads``, the same text with each array as its nesting alone, for the
    depth guard, the arrays taken out in order); ``data`` itself (as bytes) and no arrays when
    none qualifies."""
    if len(data) < MIN_BYTES:
        return _whole(data)
    quotes, escaped = _quotes(data)
    if escaped or len(quotes) % 2:
        return _whole(data)
    # the stretches outside strings: before the first quote, between a closing and the next opening one, after the last
    starts = np.concatenate(([0], quotes[1::2] + 1))
    stops = np.concatenate((quotes[0::2], [len(data)]))
    long = stops - starts >= MIN_BYTES
    text: list[bytes] = []
    depth_text: list[bytes] = []
    arrays: list[np.ndarray] = []
    done = 0
    for start, stop in zip(starts[long].tolist(), stops[long].tolist()):
        found = _array_in(data, start, stop)
        if found is None:
            continue
        first, last, values = found
        text += [data[done:first], f'"\\u0000stepper-table-{len(arrays)}"'.encode()]
        depth_text += [data[done:first], b"[" * values.ndim + b"0" + b"]" * values.ndim]
        arrays.append(values)
        done = last
    if not arrays:
        return _whole(data)
    text.append(data[done:])
    depth_text.append(data[done:])
    return b"".join(text), b"".join(depth_text), arrays


def _whole(data: Text) -> tuple[bytes, bytes, list[np.ndarray]]:
    """:func:`split_tables`'s answer when no array qualifies: one copy of ``data`` for both texts
    (``bytes`` of a memory mapping copies the whole file each time)."""
    whole = bytes(data)
    return whole, whole, []


def put_back(decoded: Any, arrays: list[np.ndarray]) -> Any:
    """``decoded`` (from the text of :func:`split_tables`) with each placeholder replaced by its
    array, walked level by level (no recursion)."""
    if not arrays:
        return decoded

    def swap(value: Any) -> Any:
        if isinstance(value, str) and value.startswith(_PLACEHOLDER):
            return arrays[int(value[len(_PLACEHOLDER):])]
        return value

    level = [decoded]
    while level:
        below = []
        for item in level:
            if not isinstance(item, (dict, list)):
                continue
            keys = list(item.keys()) if isinstance(item, dict) else range(len(item))
            for key in keys:
                item[key] = swap(item[key])
                below.append(item[key])
        level = below
    return swap(decoded)


def _block(data: Text, start: int, stop: int) -> np.ndarray:
    """Bytes [start, stop) as a new array; a mapping's pages that held them are handed back."""
    return np.frombuffer(_block_bytes(data, start, stop), dtype=np.uint8)


def _block_bytes(data: Text, start: int, stop: int) -> bytes:
    """Bytes [start, stop), copied; a mapping's pages that held them are handed back."""
    out = data[start:stop]
    if isinstance(data, mmap.mmap) and hasattr(mmap, "MADV_DONTNEED"):
        first = start - start % mmap.PAGESIZE
        try:
            data.madvise(mmap.MADV_DONTNEED, first, stop - first)
        except (OSError, ValueError):  # the advice refused: only memory is lost
            pass
    return out


def _quotes(data: Text) -> tuple[np.ndarray, bool]:
    """The offsets of every '"' in ``data``, and whether it holds a backslash, a block at a time."""
    found: list[np.ndarray] = []
    escaped = False
    for start in range(0, len(data), BLOCK_BYTES):
        block = _block(data, start, min(start + BLOCK_BYTES, len(data)))
        escaped = escaped or bool(np.any(block == ord("\\")))
        found.append(np.flatnonzero(block == ord('"')) + start)
    return np.concatenate(found), escaped


def _array_in(data: Text, start: int, stop: int) -> tuple[int, int, np.ndarray] | None:
    """(first byte, byte after, values) of the first array in the stretch [start, stop) outside
    strings, when it qualifies (module docstring); None otherwise. Its end is taken as the last
    "]" before the first "{", "}" or ":" after it (an array of integers holds none of them):
    where that guess is wrong, the text read is not exactly an array and stays with json.loads."""
    first = data.find(b"[", start, stop)
    if first < 0:
        return None
    limit = stop
    for block_start in range(first, stop, BLOCK_BYTES):  # a block at a time, handing pages back
        block_stop = min(block_start + BLOCK_BYTES, stop)
        block = _block_bytes(data, block_start, block_stop)
        others = [at for at in (block.find(char) for char in (b"{", b"}", b":")) if at >= 0]
        if others:
            limit = block_start + min(others)
            break
    end = data.rfind(b"]", first, limit) + 1
    if end <= first:
        return None
    values = _read(data, first, end)
    return None if values is None else (first, end, values)


@dataclass
class _Reading:
    """What the blocks of one array agree on so far."""

    width: int = 0  # numbers per row; 0 for a flat array (until the first block says)
    count: int = 0  # numbers read in the blocks before
    wide: bool = False  # a number past 2^32 was seen: the array is uint64


def _read(data: Text, first: int, end: int) -> np.ndarray | None:
    """The integers of one array's text (from the "[" at ``first`` to the "]" before ``end``),
    shape (n,) or (rows, k), or None when the text is not exactly such an array (module
    docstring); read in blocks of about :data:`BLOCK_BYTES`, each cut just before a number."""
    state = _Reading()
    parts: list[np.ndarray] = []
    start = first
    while start < end:
        stop = _cut(data, start + BLOCK_BYTES, end)
        values = _read_block(_block(data, start, stop), state, start == first, stop == end)
        if values is None:
            return None
        parts.append(values if state.wide else values.astype(np.uint32))
        state.count += len(values)
        start = stop
    if state.width and state.count % state.width:
        return None
    dtype = np.uint64 if state.wide else np.uint32
    out = np.concatenate([part.astype(dtype, copy=False) for part in parts])
    return out.reshape(-1, state.width) if state.width else out


def _cut(data: Text, nominal: int, end: int) -> int:
    """Where the block from before ``nominal`` ends: just before the first number after the first
    comma at or past ``nominal`` (``end`` when there is none within reach)."""
    if nominal >= end:
        return end
    comma = data.find(b",", nominal, end)
    if comma < 0:
        return end
    number = _DIGIT.search(data[comma:min(comma + _MAX_GAP, end)])
    return end if number is None else comma + number.start()


def _read_block(span: np.ndarray, state: _Reading, opening: bool, closing: bool) -> np.ndarray | None:
    """The numbers of one block of an array's text, checked against the separators the shape
    calls for; the first block (``opening``) starts with the array's "[" and fixes the shape,
    every other one starts with a number; the last (``closing``) ends with the array's "]"."""
    if int(span.min()) <= 32:  # white space or control characters (compact text has none)
        low = span <= 32
        if not bool(np.isin(span[low], _JSON_SPACE).all()):
            return None
        kept = span[~low]
        if _count_numbers(kept) != _count_numbers(span):  # white space alone between two numbers
            return None
        span = kept
        del low
    digit = (span - np.uint8(48)) < 10  # wraps below "0"
    if digit[-1] or bool(digit[0]) == opening:
        return None
    # where digits begin and where they stop, alternately (the block ends on a separator)
    bounds = np.flatnonzero(np.diff(digit, prepend=False))
    starts, ends = bounds[0::2], bounds[1::2] - 1
    count = len(starts)
    if not count:
        return None
    lengths = ends - starts + 1
    if int(lengths.max()) > 19 or bool(np.any((span[starts] == ord("0")) & (lengths > 1))):
        return None
    separators = span[~digit]
    del digit, lengths
    head = int(starts[0])
    if opening:
        if head == 1:  # [n,...,n]
            state.width = 0
        elif head == 2 and separators[1] == _OPEN:  # [[n,...,n],...,[n,...,n]]: k from the first row
            closes = np.flatnonzero(separators == _CLOSE)
            if not len(closes):
                return None  # a first row longer than a block: left to json.loads
            state.width = int(closes[0]) - 1
            if state.width < 1:
                return None
        else:
            return None
    # the separators after each number: "," inside a row, "],[" after a row's last, the array's end last
    index = state.count + np.arange(1, count + 1)
    breaks = (index % state.width == 0) if state.width else np.zeros(count, dtype=bool)
    after = np.where(breaks, 3, 1)
    tail = 2 if state.width else 1
    if closing:
        after[-1] = tail
    gaps = np.empty(count, dtype=np.int64)
    gaps[:-1] = starts[1:] - ends[:-1] - 1
    gaps[-1] = len(span) - 1 - int(ends[-1])
    if not np.array_equal(gaps, after):
        return None
    want = np.full(head + int(after.sum()), _COMMA, dtype=np.uint8)
    want[:head] = _OPEN
    at = head + np.cumsum(after) - after  # where each number's separators start
    if closing:
        breaks[-1] = False  # the array's end, not a row's
    rows = at[breaks]
    for offset, char in enumerate(_ROW_BREAK.tolist()):
        want[rows + offset] = char
    if closing:
        want[len(want) - tail:] = _CLOSE
    if not np.array_equal(separators, want):
        return None
    values = np.fromstring(span[:int(ends[-1]) + 1].tobytes().translate(_BRACKETS_AS_SPACE),  # type: ignore[call-overload]
                           dtype=np.uint64, sep=",")
    if len(values) != count:
        return None
    if not state.wide and count and int(values.max()) >= 1 << 32:
        state.wide = True
    return values  # type: ignore[no-any-return]


def _count_numbers(text: np.ndarray) -> int:
    digit = (text - np.uint8(48)) < 10
    return int(np.count_nonzero(digit[1:] & ~digit[:-1])) + int(bool(digit[0]))
