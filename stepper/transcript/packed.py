"""Packed runs of fixed-width field elements: the binary form of an element list.

A transcript stores a list of n elements as one msgpack ``bin`` of n *
``elem_bytes`` bytes, each element little endian, extension coefficients
constant term first (the same bytes as ``Field.encode`` of each element,
concatenated). Decoding here happens in one call per run, not per element:
``struct`` for 4- and 8-byte bases (31-bit and 64-bit primes), ``int.from_bytes``
slices otherwise.

Invariant: :func:`unpack_elements` returns canonical elements or raises
:class:`FieldError`; it never reduces a value modulo p.

:func:`pair_run` finds the bulk of a transcript in its bytes: rounds each followed by
their challenge, packed exactly as the writer packs them (a round's values in one
``bin 8``), so the reader's hot loop can decode a whole run of them in C before making
the records. :class:`GlueRun` does the same for the glue events after a run (a ``value``,
``squeeze`` or ``opening`` of one element, named in a fixstr, no ``table`` key): their
extent in one regular-expression pass, without a map per event (:func:`read_glue_columns`
then reads many such runs joined as numpy columns, no object per event but its name), and
:class:`InstanceHead` for an ``instance`` event in the writer's plainest form.
"""

from __future__ import annotations

import re
import struct
from functools import lru_cache
from typing import TYPE_CHECKING, Callable

from stepper.errors import FieldError, Where
from stepper.field.field import Element, Field

if TYPE_CHECKING:
    import numpy as np

__all__ = ["ROUND_HEAD", "instance_spans", "pack_elements", "unpack_elements", "decoder_for", "pair_run", "PairLayout", "GlueRun", "GLUE_KINDS", "GLUE_CODES", "read_glue_periods", "name_byte_tables",
           "GlueColumnsRead", "read_glue_columns"]

Decoder = Callable[[bytes], "tuple[Element, ...] | None"]


def pack_elements(field: Field, values: tuple[Element, ...] | list[Element]) -> bytes:
    """The packed bytes of a list of canonical elements."""
    if not field.is_extension and field.base_bytes in (4, 8):
        code = "I" if field.base_bytes == 4 else "Q"
        return struct.pack(f"<{len(values)}{code}", *values)
    encode = field.encode
    return b"".join([encode(v) for v in values])


@lru_cache(maxsize=64)
def decoder_for(field: Field) -> Decoder:
    """A function from packed bytes to the elements, or ``None`` when the input is
    not bytes, its length is not a multiple of ``elem_bytes`` or some value is not
    canonical (the caller then builds the precise error with :func:`unpack_elements`)."""
    p = field.p
    width = field.base_bytes
    k = field.degree
    code = {4: "I", 8: "Q"}.get(width)
    unpackers: dict[int, Callable[[bytes], tuple[int, ...]]] = {}

    def slices(blob: bytes) -> tuple[int, ...]:
        from_bytes = int.from_bytes
        return tuple([from_bytes(blob[i : i + width], "little") for i in range(0, len(blob), width)])

    def unpacker(size: int) -> Callable[[bytes], tuple[int, ...]] | None:
        if size % (width * k):
            return None
        if code is None:
            return slices
        return unpackers.setdefault(size, struct.Struct(f"<{size // width}{code}").unpack)

    def bases(blob: bytes) -> tuple[int, ...] | None:
        if blob.__class__ is not bytes:
            return None
        unpack = unpackers.get(len(blob)) or unpacker(len(blob))
        if unpack is None:
            return None
        values = unpack(blob)
        if values and max(values) >= p:
            return None
        return values

    if k == 1:
        return bases

    def extension(blob: bytes) -> tuple[Element, ...] | None:
        flat = bases(blob)
        if flat is None:
            return None
        return tuple([flat[i : i + k] for i in range(0, len(flat), k)])

    return extension


def unpack_elements(field: Field, blob: bytes, what: str, where: Where | None = None) -> tuple[Element, ...]:
    """The elements of a packed run, or a :class:`FieldError` saying which one is bad."""
    values = decoder_for(field)(blob)
    if values is not None:
        return values
    size = field.elem_bytes
    if len(blob) % size:
        raise FieldError(
            f"expected {what} packed as a multiple of {size} bytes ({field.describe()}), found {len(blob)} bytes",
            where,
        )
    for i in range(0, len(blob), size):
        try:
            field.decode(blob[i : i + size], where)
        except FieldError as err:
            raise FieldError(f"{what}, element {i // size}: {err.message}", err.where) from None
    raise FieldError(f"expected {what} as canonical elements, found an undecodable run", where)


# A round event as the writer packs it, up to its values: a map of two entries, "type": "round",
# then "evals" and the values' bin header (msgpack's shortest forms; the writer's key order).
ROUND_HEAD = b"\x82\xa4type\xa5round\xa5evals"
_CHALLENGE_HEAD = b"\x82\xa4type\xa9challenge\xa5value"
_BIN8 = 0xC4


class PairLayout:
    """One round event and its challenge event of a prime field with 4- or 8-byte elements,
    ``values`` per round, as the writer packs them: ``stride`` bytes in all, ``pattern``
    matching any number of them back to back, ``pair`` reading one as (values..., challenge)."""

    __slots__ = ("values", "stride", "pattern", "pair")

    def __init__(self, values: int, width: int) -> None:
        size = values * width
        round_head = ROUND_HEAD + bytes((_BIN8, size))
        challenge_head = _CHALLENGE_HEAD + bytes((_BIN8, width))
        code = "I" if width == 4 else "Q"
        self.values = values
        self.stride = len(round_head) + size + len(challenge_head) + width
        self.pattern = re.compile(b"(?:" + re.escape(round_head) + b".{%d}" % size + re.escape(challenge_head)
                                  + b".{%d})*" % width, re.DOTALL)
        self.pair = struct.Struct(f"<{len(round_head)}x{values}{code}{len(challenge_head)}x{code}")


@lru_cache(maxsize=64)
def _pair_layout(size: int, width: int) -> PairLayout | None:
    if size == 0 or size % width:
        return None
    return PairLayout(size // width, width)


def pair_run(data: bytes, at: int, width: int, most: int) -> tuple[int, PairLayout] | None:
    """How many round-then-challenge pairs packed as the writer packs them (see
    :class:`PairLayout`; ``width`` 4 or 8) lie whole in ``data`` from offset ``at``, at most
    ``most``, and their layout; None when the bytes at ``at`` do not start a round so packed.
    Nothing is judged but the layout: the values may still be non-canonical."""
    head = at + len(ROUND_HEAD)
    if len(data) < head + 2 or data[head] != _BIN8 or not data.startswith(ROUND_HEAD, at):
        return None
    layout = _pair_layout(data[head + 1], width)
    if layout is None:
        return None
    stride = layout.stride
    match = layout.pattern.match(data, at, min(len(data), at + most * stride))
    assert match is not None  # the pattern matches the empty string too
    return (match.end() - at) // stride, layout


# A glue event of one element as the writer packs it: a map of three entries, "type" (one of the
# three kinds), "name" (a fixstr of glue-name characters: the name cannot hold the \xa5 after it)
# and "value" (one element in a bin 8 of the element's width).
GLUE_KINDS = {b"value": "value", b"squeeze": "squeeze", b"opening": "opening"}
GLUE_CODES = ("value", "squeeze", "opening")  # the glue kinds by code (GlueColumnsRead.codes)
_GLUE_HEAD = b"\x83\xa4type"


@lru_cache(maxsize=64)
def _glue_patterns(width: int) -> tuple[re.Pattern[bytes], re.Pattern[bytes]]:
    """The pattern of a run of glue events of ``width``-byte elements, and that of one (groups: kind,
    the name's fixstr head, the name, the element's bytes)."""
    kinds = b"|".join(re.escape(bytes((0xA0 + len(kind),)) + kind) for kind in GLUE_KINDS)
    one = (re.escape(_GLUE_HEAD) + b"(?:" + kinds + b")" + re.escape(b"\xa4name")
           + b"[\xa1-\xbf][A-Za-z0-9_.]{1,31}" + re.escape(b"\xa5value" + bytes((_BIN8, width))) + b".{%d}" % width)
    capture = (re.escape(_GLUE_HEAD) + b"[\xa5\xa7](" + b"|".join(GLUE_KINDS) + b")" + re.escape(b"\xa4name")
               + b"([\xa1-\xbf])([A-Za-z0-9_.]{1,31})" + re.escape(b"\xa5value" + bytes((_BIN8, width)))
               + b"(.{%d})" % width)
    return re.compile(b"(?:" + one + b")*", re.DOTALL), re.compile(capture, re.DOTALL)


class GlueRun:
    """Finds the glue events of one ``width``-byte element packed as the writer packs them (see
    ``GLUE_KINDS``) that lie whole in a chunk from an offset: call it with the chunk and the offset
    to get how many bytes they fill, and :meth:`rows` reads them (any number of such runs joined).
    Nothing is judged but the layout: the caller checks each head against its name's length,
    the names against the glue name rules and the elements' values."""

    __slots__ = ("_one", "match")

    def __init__(self, width: int) -> None:
        run, one = _glue_patterns(width)
        self._one = one.findall
        self.match = run.match  # (data, at) -> the match of the events from ``at`` (never None)

    def __call__(self, data: bytes, at: int) -> int:
        """How many bytes the glue events from ``at`` fill (0: none there)."""
        return self.match(data, at).end() - at  # type: ignore[union-attr]  # the pattern matches the empty string too

    def rows(self, data: bytes) -> list[tuple[bytes, bytes, bytes, bytes]]:
        """Per event of ``data`` (bytes this object measured, any number of runs joined): (kind,
        the name's fixstr head, name, element bytes)."""
        return self._one(data)  # type: ignore[no-any-return]


# the bytes a name may hold, and those it may start with (stepper.transcript.glue_records.GLUE_NAME_PATTERN)
_NAME_BYTES = frozenset(b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.")
_NAME_FIRST = frozenset(b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz_")


@lru_cache(maxsize=1)
def name_byte_tables() -> tuple[np.ndarray, np.ndarray]:
    """Which bytes a name may hold, and which it may start with, as look-up tables over byte values
    (read-only)."""
    import numpy as np

    allowed, starting = np.zeros(256, dtype=bool), np.zeros(256, dtype=bool)
    allowed[list(_NAME_BYTES)] = True
    starting[list(_NAME_FIRST)] = True
    allowed.flags.writeable = starting.flags.writeable = False
    return allowed, starting


class GlueColumnsRead:
    """Glue events of one element packed as the writer packs them (what :class:`GlueRun` measures),
    read from their joined bytes as columns with numpy, no object per event but each name:
    ``codes`` (0 value, 1 squeeze, 2 opening), ``names``, ``elements`` (one row of the
    element's bytes per event) and ``ends`` (the byte offset where each event ends). See
    :func:`read_glue_columns`. ``spelled`` holds the names' lengths and their bytes, each name followed
    by a newline; ``periods`` the stretches read as blobs alike (:func:`read_glue_periods`): (the index
    of its first name, its names' bytes as rows, a row per blob, and the lengths of a blob's names)."""

    __slots__ = ("codes", "_names", "elements", "ends", "spelled", "periods")

    def __init__(self, codes: np.ndarray, names: list[str] | None, elements: np.ndarray, ends: np.ndarray,
                 spelled: tuple[np.ndarray, bytes], periods: list[tuple[int, np.ndarray, list[int]]] | None = None
                 ) -> None:
        self.codes = codes
        self._names = names  # None: made from ``spelled`` when asked for
        self.elements = elements
        self.ends = ends
        self.spelled = spelled
        self.periods = periods or []

    @property
    def names(self) -> list[str]:
        """The names, as strings (made once, when first asked for)."""
        if self._names is None:
            self._names = self.spelled[1].decode("ascii").split("\n")[:-1]
        return self._names


@lru_cache(maxsize=1)
def _kind_tables() -> tuple[np.ndarray, np.ndarray]:
    """The letters of each kind by its code (:data:`GLUE_CODES`), padded to 7, and where the padding is."""
    import numpy as np

    words = [kind.encode() for kind in GLUE_CODES]
    letters = np.array([list(word.ljust(7, b"\x00")) for word in words], dtype=np.uint8)
    spare = np.array([[j >= len(word) for j in range(7)] for word in words])
    return letters, spare


def read_glue_columns(data: bytes, width: int) -> GlueColumnsRead | None:
    """The events of ``data`` (glue events of ``width``-byte elements joined, each packed as the writer
    packs them), or None when ``data`` is not exactly such events read as msgpack reads them: each
    event's length follows from its kind's and its name's fixstr heads, so the events are found
    where their first bytes (a map of three, "type") stand and every one must end where the next
    starts, with every fixed byte, name byte and head where that reading puts it. (Element bytes
    that happen to hold an event's first bytes make the answer None: the caller then reads the
    events another way.)"""
    import numpy as np

    u8 = np.frombuffer(data, dtype=np.uint8)
    size = len(u8)
    if size == 0:
        return GlueColumnsRead(np.zeros(0, dtype=np.int8), [], np.zeros((0, width), dtype=np.uint8),
                               np.zeros(0, dtype=np.int64), (np.zeros(0, dtype=np.int64), b""))
    head = np.frombuffer(_GLUE_HEAD, dtype=np.uint8)
    starts = np.flatnonzero(u8[:size - len(head) + 1] == head[0]) if size >= len(head) else np.zeros(0, np.int64)
    for j in range(1, len(head)):
        starts = starts[u8[starts + j] == head[j]]
    if not len(starts) or starts[0] != 0:
        return None
    if int(starts[-1]) + 27 + width > size:  # the shortest event: a kind of 5 letters, a name of one
        return None
    kind_head = u8[starts + len(head)]
    seven = kind_head == 0xA7
    if not np.all(seven | (kind_head == 0xA5)):
        return None
    kind_len = np.where(seven, 7, 5)
    at = starts + len(head) + 1  # the kind's text
    first = u8[at]
    codes = np.where(seven, np.where(first == ord("s"), 1, 2), 0).astype(np.int8)
    name_key = at + kind_len  # "\xa4name"
    name_len = u8[name_key + 5].astype(np.int64) - 0xA0
    if not np.all((name_len >= 1) & (name_len <= 31)):
        return None
    name_at = name_key + 6
    value_key = name_at + name_len  # "\xa5value" and the bin 8 head
    ends = value_key + 8 + width
    if int(ends[-1]) != size or not np.array_equal(ends[:-1], starts[1:]):
        return None
    # the kind's letters (value: 5, squeeze or opening: 7; a value's two bytes after them are its name key,
    # checked below), then the fixed bytes of the name key and the value key: each one gather and one compare
    letters, spare = _kind_tables()
    if not ((u8[at[:, None] + np.arange(7)] == letters[codes]) | spare[codes]).all():
        return None
    for place, text in ((name_key, b"\xa4name"), (value_key, b"\xa5value" + bytes((_BIN8, width)))):
        if not (u8[place[:, None] + np.arange(len(text))] == np.frombuffer(text, dtype=np.uint8)).all():
            return None
    # the names and the byte after each (0xa5, checked above) turned into a newline: joined, decoded, split
    spans = name_len + 1
    out_at = np.cumsum(spans) - spans
    picked = u8[np.repeat(name_at - out_at, spans) + np.arange(int(out_at[-1] + spans[-1]))]
    allowed, starting = name_byte_tables()
    allowed = allowed.copy()
    allowed[0xA5] = True
    if not allowed[picked].all() or not starting[picked[out_at]].all():
        return None
    picked[out_at + name_len] = 0x0A
    joined = picked.tobytes()
    names = joined[:-1].decode("ascii").split("\n")
    elements = u8[(ends - width)[:, None] + np.arange(width)]
    return GlueColumnsRead(codes, names, elements, ends, (name_len, joined))


def read_glue_periods(data: bytes, width: int, size: int) -> GlueColumnsRead | None:
    """:func:`read_glue_columns` of ``data`` made of blobs of ``size`` bytes alike (the glue after each of
    many runs, every run followed by events of the same kinds and name lengths): the first blob read by
    :func:`read_glue_columns`, every other one found to hold the first's bytes but where its names and
    elements stand (all compared at once), its names holding only what a name may hold. Then every blob
    reads as the first one does, event for event, with its own names and elements. None when ``data`` is
    not so (the caller reads it otherwise)."""
    import numpy as np

    count = len(data) // size if size else 0
    if count < 2 or count * size != len(data):
        return None
    first = read_glue_columns(data[:size], width)
    if first is None or not first.names:
        return None
    lengths = list(map(len, first.names))
    element_at = (first.ends - width).tolist()
    name_at = [at - 8 - length for at, length in zip(element_at, lengths)]  # before "\xa5value" and the bin 8 head
    varying = np.zeros(size, dtype=bool)
    for at, length, element in zip(name_at, lengths, element_at):
        varying[at:at + length] = True
        varying[element:element + width] = True
    blobs = np.frombuffer(data, dtype=np.uint8).reshape(count, size)
    same = np.equal(blobs, blobs[0])
    same |= varying  # in place (an expression's temporaries cost several times as much)
    if not same.all():
        return None
    name_columns = np.concatenate([np.arange(at, at + length) for at, length in zip(name_at, lengths)])
    picked = blobs[:, name_columns]
    allowed, starting = name_byte_tables()
    heads = np.cumsum([0, *lengths[:-1]])
    if not allowed[picked].all() or not starting[picked[:, heads]].all():
        return None
    rows = np.full((count, len(name_columns) + len(lengths)), 0x0A, dtype=np.uint8)  # each name, then a newline
    rows[:, np.arange(len(name_columns)) + np.repeat(np.arange(len(lengths)), lengths)] = picked
    joined = rows.tobytes()  # the names as strings only when asked for (GlueColumnsRead.names)
    laid = np.empty((count, len(lengths), width), dtype=np.uint8)  # a slice per event: half a gather's time
    for e, at in enumerate(element_at):
        laid[:, e] = blobs[:, at:at + width]
    elements = laid.reshape(count * len(lengths), width)
    ends = (np.arange(count, dtype=np.int64)[:, None] * size + first.ends).ravel()
    return GlueColumnsRead(np.tile(first.codes, count), None, elements, ends,
                           (np.tile(np.array(lengths, dtype=np.int64), count), joined), [(0, picked, lengths)])


# An instance event as the writer packs one with no optional key: a map of five entries, "type":
# "instance", "name" (a fixstr), "num_vars" and "degree" (positive fixints: below 128), "claim" (one
# element in a bin 8 of the element's width); to_payload's key order. A map of six or seven holds
# "claim_expr" and/or "final_expr" after them, in that order, each a str.
_INSTANCE_HEAD = b"\x85\xa4type\xa8instance\xa4name"
_TEXT_KEYS = (b"\xaaclaim_expr", b"\xaafinal_expr")
_CLAIM_KEY, _FINAL_KEY = _TEXT_KEYS


class InstanceHead:
    """Finds an ``instance`` event of ``width``-byte elements packed as the writer packs one without
    ``order``, ``form``, a batch or an eq point (see ``_INSTANCE_HEAD``; ``claim_expr`` and
    ``final_expr`` may follow) at an offset of a chunk, in one regular-expression match: call it
    with the chunk and the offset to get (the event's end, the name's UTF-8 bytes, num_vars,
    degree, the claim's bytes, the claim_expr's and the final_expr's UTF-8 bytes or None), or
    None. Nothing is judged but the layout: the caller gives the same payload to the Sequencer,
    which checks the values."""

    __slots__ = ("_width", "_patterns")

    def __init__(self, width: int) -> None:
        self._width = width
        self._patterns: dict[int, Callable[[bytes, int], re.Match[bytes] | None]] = {}  # by the name's length

    def _pattern(self, length: int) -> Callable[[bytes, int], re.Match[bytes] | None]:
        pattern = re.compile(re.escape(_INSTANCE_HEAD[1:] + bytes((0xA0 + length,))) + b"(.{%d})" % length
                             + re.escape(b"\xa8num_vars") + b"([\x00-\x7f])" + re.escape(b"\xa6degree")
                             + b"([\x00-\x7f])" + re.escape(b"\xa5claim" + bytes((_BIN8, self._width)))
                             + b"(.{%d})" % self._width, re.DOTALL)
        self._patterns[length] = pattern.match
        return pattern.match

    def __call__(self, data: bytes, at: int
                 ) -> tuple[int, bytes, int, int, bytes, bytes | None, bytes | None] | None:
        head = at + len(_INSTANCE_HEAD)
        if head >= len(data) or not 0xA0 <= data[head] < 0xC0 or not 0x85 <= data[at] <= 0x87:
            return None
        length = data[head] - 0xA0
        match = (self._patterns.get(length) or self._pattern(length))(data, at + 1)
        if match is None:
            return None
        name, num_vars, degree, claim = match.groups()
        end = match.end()
        extra = data[at] - 0x85
        if extra == 2:  # the usual glued instance: both texts, each a fixstr, read inline
            claim_at = end + len(_CLAIM_KEY) + 1
            if claim_at < len(data) and 0xA0 <= data[claim_at - 1] < 0xC0 and data.startswith(_CLAIM_KEY, end):
                final_key = claim_at + data[claim_at - 1] - 0xA0
                final_at = final_key + len(_FINAL_KEY) + 1
                if final_at <= len(data) and 0xA0 <= data[final_at - 1] < 0xC0 \
                        and data.startswith(_FINAL_KEY, final_key):
                    final_end = final_at + data[final_at - 1] - 0xA0
                    if final_end <= len(data):
                        return (final_end, name, num_vars[0], degree[0], claim, data[claim_at:final_key],
                                data[final_at:final_end])
        texts: list[bytes | None] = [None, None]
        for j, key in enumerate(_TEXT_KEYS):
            if not extra:
                break
            if not data.startswith(key, end):
                if j == 0:
                    continue  # no claim_expr: the final_expr alone
                return None
            end, text = _str_at(data, end + len(key))
            if text is None:
                return None
            texts[j] = text
            extra -= 1
        if extra:
            return None
        return end, name, num_vars[0], degree[0], claim, texts[0], texts[1]


def instance_spans(found: tuple[int, bytes, int, int, bytes, bytes | None, bytes | None], at: int
                   ) -> list[tuple[int, int]]:
    """The byte spans, from ``at``, of what may differ between instance events laid out alike, in an
    event :class:`InstanceHead` found at ``at``: the name, the degree, the claim, and the texts of its
    ``claim_expr`` and ``final_expr`` (each without its head; an absent one has no span). Every other
    byte of the event is a key, a head or num_vars."""
    end, name, _, _, claim, claim_expr, final_expr = found
    name_at = len(_INSTANCE_HEAD) + 1
    degree_at = name_at + len(name) + len(b"\xa8num_vars") + 1 + len(b"\xa6degree")
    claim_at = degree_at + 1 + len(b"\xa5claim") + 2
    spans = [(name_at, name_at + len(name)), (degree_at, degree_at + 1), (claim_at, claim_at + len(claim))]
    texts_end = end - at
    if final_expr is not None:
        spans.append((texts_end - len(final_expr), texts_end))
        texts_end -= len(final_expr) + _str_head(len(final_expr)) + len(_FINAL_KEY)
    if claim_expr is not None:
        spans.insert(3, (texts_end - len(claim_expr), texts_end))
    return spans


def _str_head(size: int) -> int:
    """Bytes of the msgpack head of a str of ``size`` bytes (fixstr, str 8, str 16)."""
    return 1 if size < 32 else 2 if size < 256 else 3


def _str_at(data: bytes, at: int) -> tuple[int, bytes | None]:
    """The msgpack str at ``at`` (fixstr, str 8 or str 16) whole in ``data``: its end and bytes, or
    (at, None)."""
    if at >= len(data):
        return at, None
    marker = data[at]
    if 0xA0 <= marker < 0xC0:
        start, size = at + 1, marker - 0xA0
    elif marker == 0xD9 and at + 1 < len(data):
        start, size = at + 2, data[at + 1]
    elif marker == 0xDA and at + 2 < len(data):
        start, size = at + 3, int.from_bytes(data[at + 1:at + 3], "big")
    else:
        return at, None
    if start + size > len(data):
        return at, None
    return start + size, data[start:start + size]
