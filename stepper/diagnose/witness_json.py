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
Pure: bytes in, arrays and bytes out.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["MIN_BYTES", "split_tables", "put_back"]

MIN_BYTES = 1 << 16  # smaller arrays cost json.loads little

_PLACEHOLDER = "\x00stepper-table-"  # a JSON string holding NUL comes only from an escape: none here
_JSON_SPACE = np.frombuffer(b" \t\r\n", dtype=np.uint8)
_OPEN, _CLOSE, _COMMA = ord("["), ord("]"), ord(",")
_BRACKETS_AS_SPACE = bytes.maketrans(b"[]", b"  ")


def split_tables(data: bytes) -> tuple[bytes, bytes, list[np.ndarray]]:
    """(text for ``json.loads``, the same text with each array as its nesting alone, for the
    depth guard, the arrays taken out in order); ``data`` itself and no arrays when none
    qualifies."""
    if len(data) < MIN_BYTES or b"\\" in data:
        return data, data, []
    raw = np.frombuffer(data, dtype=np.uint8)
    quotes = np.flatnonzero(raw == ord('"'))
    if len(quotes) % 2:
        return data, data, []
    # the stretches outside strings: before the first quote, between a closing and the next opening one, after the last
    starts = np.concatenate(([0], quotes[1::2] + 1))
    stops = np.concatenate((quotes[0::2], [len(raw)]))
    long = stops - starts >= MIN_BYTES
    text: list[bytes] = []
    depth_text: list[bytes] = []
    arrays: list[np.ndarray] = []
    done = 0
    for start, stop in zip(starts[long].tolist(), stops[long].tolist()):
        found = _array_in(data, raw, start, stop)
        if found is None:
            continue
        first, last, values = found
        text += [data[done:first], f'"\\u0000stepper-table-{len(arrays)}"'.encode()]
        depth_text += [data[done:first], b"[" * values.ndim + b"0" + b"]" * values.ndim]
        arrays.append(values)
        done = last
    if not arrays:
        return data, data, []
    text.append(data[done:])
    depth_text.append(data[done:])
    return b"".join(text), b"".join(depth_text), arrays


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


def _array_in(data: bytes, raw: np.ndarray, start: int, stop: int) -> tuple[int, int, np.ndarray] | None:
    """(first byte, byte after, values) of the first array in the stretch [start, stop) outside
    strings, when it qualifies (module docstring); None otherwise. Its end is taken as the last
    "]" before the first "{", "}" or ":" after it (an array of integers holds none of them):
    where that guess is wrong, the text read is not exactly an array and stays with json.loads."""
    first = data.find(b"[", start, stop)
    if first < 0:
        return None
    limit = min([stop] + [found for found in (data.find(c, first, stop) for c in (b"{", b"}", b":")) if found >= 0])
    end = data.rfind(b"]", first, limit) + 1
    if end <= first:
        return None
    values = _read(raw[first:end])
    return None if values is None else (first, end, values)


def _read(span: np.ndarray) -> np.ndarray | None:
    """The integers of one array's text (from a "[" to a "]"), shape (n,) or (rows, k), or None
    when the text is not exactly such an array (module docstring)."""
    low = span <= 32
    if bool(low.any()):
        if not bool(np.isin(span[low], _JSON_SPACE).all()):
            return None
        kept = span[~low]
        if _count_numbers(kept) != _count_numbers(span):  # white space alone between two numbers
            return None
        span = kept
    del low
    digit = (span - np.uint8(48)) < 10  # wraps below "0"
    if digit[0] or digit[-1]:
        return None
    # boundaries alternate: before each number's first digit, at its last digit
    bounds = np.flatnonzero(digit[1:] != digit[:-1])
    starts, ends = bounds[0::2] + 1, bounds[1::2]
    del bounds
    count = len(starts)
    if not count:
        return None
    lengths = ends - starts + 1
    if int(lengths.max()) > 19 or bool(np.any((span[starts] == ord("0")) & (lengths > 1))):
        return None
    separators = span[~digit]
    del digit
    gaps = starts[1:] - ends[:-1] - 1  # separators between one number and the next
    head, tail = int(starts[0]), len(span) - 1 - int(ends[-1])
    del starts, ends, lengths
    if len(separators) < 2 or separators[1] != _OPEN:  # [n,...,n]
        shape: tuple[int, ...] = (count,)
        want = np.full(count + 1, _COMMA, dtype=np.uint8)
        want[0], want[-1] = _OPEN, _CLOSE
        edges = (1, 1)
    else:  # [[n,...,n],...,[n,...,n]]: k from the first row
        k = int(np.argmax(separators == _CLOSE)) - 1
        if k < 1 or count % k:
            return None
        shape = (count // k, k)
        row = np.full(k + 2, _COMMA, dtype=np.uint8)
        row[0], row[k] = _OPEN, _CLOSE  # "[" k-1 commas "]" ","
        want = np.concatenate(([_OPEN], np.tile(row, count // k)[:-1], [_CLOSE])).astype(np.uint8)
        edges = (2, 2)
        if not bool(np.all(gaps[k - 1::k] == 3)):  # "],[" between rows
            return None
        gaps[k - 1::k] = 1
    if (head, tail) != edges or not bool(np.all(gaps == 1)) or not np.array_equal(separators, want):
        return None
    del gaps, separators, want
    values = np.fromstring(span.tobytes().translate(_BRACKETS_AS_SPACE),  # type: ignore[call-overload]
                           dtype=np.uint64, sep=",")
    if len(values) != count:
        return None
    return values.reshape(shape)  # type: ignore[no-any-return]


def _count_numbers(text: np.ndarray) -> int:
    digit = (text - np.uint8(48)) < 10
    return int(np.count_nonzero(digit[1:] & ~digit[:-1])) + int(bool(digit[0]))
