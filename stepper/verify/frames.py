"""The frames the built-in Fiat-Shamir schedules absorb, built for many records at once.

:mod:`stepper.verify.fiatshamir` absorbs one record at a time. The whole-file check reads
thousands of instance and glue events straight from bytes and hands the schedule their frames
in one buffer; the functions here build those buffers with numpy, byte for byte what absorbing
the records one at a time absorbs (transcripts/FIAT-SHAMIR.md, "What is absorbed, in order").

Rules kept here: a frame is ``u8(len(tag)) || tag || u64le(len(body)) || body``; ``u64`` packs
an integer as 8 bytes little-endian; ``text`` is a string's UTF-8 bytes after their length.
Nothing is hashed here: bytes and arrays in, bytes and offsets out.
"""

from __future__ import annotations

import struct
from functools import lru_cache
from typing import TYPE_CHECKING, Sequence

if TYPE_CHECKING:
    import numpy as np

__all__ = ["frame", "u64", "text", "INSTANCE_HEAD", "VALUE_HEAD", "OPENING_HEAD", "DRAW_HEAD", "instance_frames",
           "glue_stream", "flat_glue_stream"]

INSTANCE_HEAD = bytes([8]) + b"instance"
OPENING_HEAD = bytes([7]) + b"opening"
VALUE_HEAD = bytes([5]) + b"value"
DRAW_HEAD = bytes([4]) + b"draw"

u64 = struct.Struct("<Q").pack  # an integer of a frame body: 8 bytes little-endian


def frame(tag: bytes, body: bytes) -> bytes:
    """One absorbed item: tag length (1 byte), tag, body length (8 bytes LE), body."""
    return bytes([len(tag)]) + tag + len(body).to_bytes(8, "little") + body


def text(s: str) -> bytes:
    """A string in a frame body: its UTF-8 bytes after their length."""
    raw = s.encode("utf-8")
    return u64(len(raw)) + raw


def instance_frames(width: int, shape: bytes, names: Sequence[str], num_vars: Sequence[int],
                    degrees: Sequence[int], claims: bytes) -> tuple[bytes, list[int]]:
    """The ``instance`` frames of several instance events without a batch, one after another, and
    the offset where each ends: instance i has name ``names[i]``, ``num_vars[i]``, ``degrees[i]``,
    the order and form whose ``text`` bytes are ``shape``, and its claim's ``width`` canonical bytes
    at ``claims[i * width:]``."""
    import numpy as np

    count = len(names)
    if len(claims) != count * width or len(num_vars) != count or len(degrees) != count:
        raise ValueError(f"expected {count} claims of {width} bytes, num_vars and degrees, one per name")
    head = len(INSTANCE_HEAD) + 16  # the tag, the body's length, the name's length
    after = 16 + len(shape) + width  # num_vars, degree, order and form, claim
    joined = "\n".join(names).encode("utf-8")
    size = (len(joined) + 1) // count - 1 if count else 0
    if count and len(joined) == count * (size + 1) - 1 and joined.count(b"\n") == count - 1 \
            and joined[size::size + 1].count(b"\n") == count - 1:  # names of one length in bytes
        return _alike_frames(width, shape, joined, size, num_vars, degrees, claims)
    encoded = [name.encode("utf-8") for name in names]
    lengths = np.fromiter(map(len, encoded), dtype=np.int64, count=count)
    sizes = head + lengths + after
    ends = np.cumsum(sizes)
    starts = ends - sizes
    u8 = np.uint8
    before = np.empty((count, head), dtype=u8)
    before[:, :len(INSTANCE_HEAD)] = np.frombuffer(INSTANCE_HEAD, dtype=u8)
    before[:, len(INSTANCE_HEAD):].view("<u8")[:, 0] = lengths + 8 + after  # the body's length
    before[:, len(INSTANCE_HEAD):].view("<u8")[:, 1] = lengths
    rest = np.empty((count, after), dtype=u8)
    rest[:, :16].view("<u8")[:, 0] = num_vars
    rest[:, :16].view("<u8")[:, 1] = degrees
    rest[:, 16:16 + len(shape)] = np.frombuffer(shape, dtype=u8)
    rest[:, 16 + len(shape):] = np.frombuffer(claims, dtype=u8).reshape(count, width)
    out = np.empty(int(ends[-1]) if count else 0, dtype=u8)
    out[starts[:, None] + np.arange(head)] = before
    named = int(lengths.sum())
    if named:
        out[np.repeat(starts + head - (np.cumsum(lengths) - lengths), lengths) + np.arange(named)] = \
            np.frombuffer(b"".join(encoded), dtype=u8)
    out[(starts + head + lengths)[:, None] + np.arange(after)] = rest
    return out.tobytes(), ends.tolist()


def _alike_frames(width: int, shape: bytes, joined: bytes, size: int, num_vars: Sequence[int],
                  degrees: Sequence[int], claims: bytes) -> tuple[bytes, list[int]]:
    """:func:`instance_frames` of names of ``size`` bytes each, joined by newlines in ``joined``: every
    frame of one length, built as the rows of one array by slice assignments (no gather)."""
    import numpy as np

    count = (len(joined) + 1) // (size + 1)
    u8 = np.uint8
    head = len(INSTANCE_HEAD) + 16
    after = 16 + len(shape) + width
    said = head + size + after
    out = np.empty((count, said), dtype=u8)
    out[:, :len(INSTANCE_HEAD)] = np.frombuffer(INSTANCE_HEAD, dtype=u8)
    out[:, len(INSTANCE_HEAD):head] = np.frombuffer(u64(size + 8 + after) + u64(size), dtype=u8)
    if size:
        out[:, head:head + size] = np.frombuffer(joined + b"\n", dtype=u8).reshape(count, size + 1)[:, :size]
    rest = out[:, head + size:]
    rest[:, :8] = np.asarray(num_vars, dtype="<u8").reshape(count, 1).view(u8)
    rest[:, 8:16] = np.asarray(degrees, dtype="<u8").reshape(count, 1).view(u8)
    rest[:, 16:16 + len(shape)] = np.frombuffer(shape, dtype=u8)
    rest[:, 16 + len(shape):] = np.frombuffer(claims, dtype=u8).reshape(count, width)
    return out.tobytes(), list(range(said, said * count + 1, said))


def glue_stream(width: int, challenge_head: bytes, kinds: Sequence[str], names: Sequence[str], tables: Sequence[str],
                data: Sequence[bytes], counts: Sequence[int], listed: Sequence[bool]
                ) -> tuple[bytes, list[int], list[int]]:
    """:meth:`~stepper.verify.fiatshamir.Sha256Schedule.glue_stream` for events of ``width``-byte
    elements, each challenge's frame starting with ``challenge_head``, every opening's table given."""
    parts: list[bytes] = []
    ends: list[int] = []
    cuts: list[int] = []
    put = parts.extend
    at = 0
    for kind, name, table, packed, n, is_list in zip(kinds, names, tables, data, counts, listed):
        raw = name.encode()
        size = len(raw)
        if kind == "opening":
            label = table.encode()
            body = 16 + size + len(label) + width
            put((OPENING_HEAD, u64(body), u64(size), raw, u64(len(label)), label, packed))
            at += 16 + body
        elif kind == "value":
            body = 24 + size + n * width
            put((VALUE_HEAD, u64(body), u64(size), raw, u64(is_list), u64(n), packed))
            at += 14 + body
        else:
            put((DRAW_HEAD, u64(24 + size), u64(size), raw, u64(is_list), u64(n)))
            at += 37 + size
            for j in range(n):
                cuts.append(at)
                put((challenge_head, packed[j * width:(j + 1) * width]))
                at += len(challenge_head) + width
        ends.append(at)
    return b"".join(parts), ends, cuts


def flat_glue_stream(kind: np.ndarray, names: Sequence[str], elements: bytes, width: int,
                     challenge_head: bytes, period: int = 0, spelled: tuple[np.ndarray, bytes] | None = None
                     ) -> tuple[bytes, np.ndarray, np.ndarray]:
    """:func:`glue_stream` of glue events of one element each (``kind`` 0 value, 1 squeeze, 2
    opening), every opening's table its own name, built with numpy: each frame is eight pieces (a head, two or three u64 numbers,
    the name once or twice, the challenge head of a squeeze, the element; an unused slot is empty)
    taken from one source buffer (the fixed heads, the u64 bytes of every number a frame holds,
    the names joined, the elements) by one gather. With ``period``, the events may come as groups
    of that many alike (:func:`_periodic_glue_stream`). ``spelled``, when the caller has them, holds the
    names' lengths and their ASCII bytes, each name followed by a newline (as :func:`_spelled` makes them)."""
    import numpy as np

    if period:
        periodic = _periodic_glue_stream(kind, names, elements, width, challenge_head, period, spelled)
        if periodic is not None:
            return periodic

    u8, n = np.uint8, len(names)
    lengths, joined = spelled if spelled is not None else _spelled(names)
    value, squeeze = kind == 0, kind == 1
    body = np.where(kind == 2, 16 + 2 * lengths + width, np.where(value, 24 + lengths + width, 24 + lengths))
    numbers = 1 << max(int(body.max()) if n else 0, 1).bit_length()  # u64 of 0 .. numbers - 1 in the table
    fixed = b"".join((VALUE_HEAD, DRAW_HEAD, OPENING_HEAD, challenge_head))
    value_head, draw_head, opening_head = 0, len(VALUE_HEAD), len(VALUE_HEAD) + len(DRAW_HEAD)
    chead = opening_head + len(OPENING_HEAD)
    u64_at = len(fixed)  # u64(v) at u64_at + 8 v
    source = np.concatenate((np.frombuffer(fixed, dtype=u8), _u64_table(numbers), np.frombuffer(joined, dtype=u8),
                             np.frombuffer(elements, dtype=u8)))
    name_at = np.cumsum(lengths + 1) - lengths - 1 + u64_at + 8 * numbers  # each name in the source
    element_at = u64_at + 8 * numbers + len(joined) + np.arange(n, dtype=np.int64) * width
    zero, one = np.full(n, u64_at), np.full(n, u64_at + 8)
    eight = np.full(n, 8)
    # the eight pieces of each frame: (where in the source, how long)
    src = np.stack((np.where(value, value_head, np.where(squeeze, draw_head, opening_head)), u64_at + 8 * body,
                    u64_at + 8 * lengths, name_at, np.where(kind == 2, u64_at + 8 * lengths, zero),
                    np.where(kind == 2, name_at, one), np.where(squeeze, chead, element_at),
                    element_at), axis=1)
    size = np.stack((np.where(value, len(VALUE_HEAD), np.where(squeeze, len(DRAW_HEAD), len(OPENING_HEAD))),
                     eight, eight, lengths, eight, np.where(kind == 2, lengths, 8),
                     np.where(squeeze, len(challenge_head), width), np.where(squeeze, width, 0)), axis=1)
    flat_size = size.ravel()
    ends_of_pieces = np.cumsum(flat_size)
    total = int(ends_of_pieces[-1]) if n else 0
    # each output byte's place in the source: 32-bit where it fits, summed in place (the 64-bit sum of two temporaries of the
    # stream's length took 2-3x as long: python3 bench/glue.py's flushes of 8192 events, 5.4-6.3 ms -> 1.7-2.6 ms)
    small = np.int32 if max(total, len(source)) < 1 << 31 else np.int64
    index = np.repeat((src.ravel() - (ends_of_pieces - flat_size)).astype(small), flat_size)
    index += np.arange(total, dtype=small)
    out = source.take(index)
    ends = ends_of_pieces[7::8]
    offsets = ends - size.sum(axis=1)
    cuts = (offsets + 37 + lengths)[squeeze]
    return out.tobytes(), ends, cuts


def _spelled(names: Sequence[str]) -> tuple[np.ndarray, bytes]:
    """The names' lengths and their UTF-8 bytes, each name followed by a newline."""
    import numpy as np

    return (np.fromiter(map(len, names), dtype=np.int64, count=len(names)),
            "".join([name + "\n" for name in names]).encode())


def _periodic_glue_stream(kind: np.ndarray, names: Sequence[str], elements: bytes, width: int, challenge_head: bytes,
                          period: int, spelled: tuple[np.ndarray, bytes] | None = None
                          ) -> tuple[bytes, np.ndarray, np.ndarray] | None:
    """:func:`flat_glue_stream` of events that come in groups of ``period`` (the glue after each run of a
    block, every run followed by as many), when every group has the first's kinds and name lengths: every
    group's frames are then the first's with other names and elements at the same offsets, so they are the
    rows of one array, the first group's frames copied down and the names and elements put in by slice
    assignments (no gather of every byte). None when the events are not so (or the names not ASCII)."""
    import numpy as np

    count = len(names)
    if count < 2 * period or count % period:
        return None
    groups = count // period
    lengths, joined = spelled if spelled is not None else _spelled(names)
    if len(joined) != int(lengths.sum()) + count:
        return None  # a name that is not ASCII: its characters are not its bytes
    shapes = (lengths * 4 + kind).reshape(groups, period)
    changes = np.flatnonzero((shapes[1:] != shapes[:-1]).any(axis=1)) + 1
    if len(changes):  # names one character longer from some group on: each stretch of groups alike apart
        if len(changes) > 64:
            return None
        parts = []
        name_ends = np.cumsum(lengths + 1)
        for low, high in zip([0, *changes.tolist()], [*changes.tolist(), groups]):
            cut = slice(low * period, high * period)
            begin = int(name_ends[cut.start - 1]) if cut.start else 0
            parts.append(flat_glue_stream(kind[cut], names[cut], elements[cut.start * width:cut.stop * width], width,
                                          challenge_head, period if high - low > 1 else 0,
                                          (lengths[cut], joined[begin:int(name_ends[cut.stop - 1])])))
        sizes = np.cumsum([0, *(len(part[0]) for part in parts)])
        return (b"".join(part[0] for part in parts), np.concatenate([part[1] + at for part, at in zip(parts, sizes)]),
                np.concatenate([part[2] + at for part, at in zip(parts, sizes)]))
    first_end = int(lengths[:period].sum()) + period
    first, ends, cuts = flat_glue_stream(kind[:period], names[:period], elements[:period * width], width, challenge_head,
                                         0, (lengths[:period], joined[:first_end]))
    size = len(first)
    rows = np.empty((groups, size), dtype=np.uint8)
    rows[:] = np.frombuffer(first, dtype=np.uint8)
    named = np.frombuffer(joined, dtype=np.uint8).reshape(groups, -1)
    values = np.frombuffer(elements, dtype=np.uint8).reshape(groups, period * width)
    heads = (len(VALUE_HEAD), len(DRAW_HEAD), len(OPENING_HEAD))
    frame_at, name_at = 0, 0
    for j, (code, length, end) in enumerate(zip(kind[:period].tolist(), lengths[:period].tolist(), ends.tolist())):
        at = frame_at + heads[code] + 16  # the name, after the head, the body's length and the name's
        rows[:, at:at + length] = named[:, name_at:name_at + length]
        if code == 2:  # an opening names its table, its own name, again
            rows[:, at + length + 8:at + 2 * length + 8] = named[:, name_at:name_at + length]
        rows[:, end - width:end] = values[:, j * width:(j + 1) * width]  # every frame ends with the element
        frame_at, name_at = end, name_at + length + 1
    offsets = np.arange(groups, dtype=np.int64)[:, None] * size
    return rows.tobytes(), (offsets + ends).ravel(), (offsets + cuts).ravel()


@lru_cache(maxsize=8)
def _u64_table(numbers: int) -> np.ndarray:
    """The u64 bytes of 0 .. numbers - 1, one after another."""
    import numpy as np

    return np.arange(numbers, dtype="<u8").view(np.uint8)
