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
name and element bytes in one regular-expression pass, without a map per event.
"""

from __future__ import annotations

import re
import struct
from functools import lru_cache
from typing import Callable

from stepper.errors import FieldError, Where
from stepper.field.field import Element, Field

__all__ = ["pack_elements", "unpack_elements", "decoder_for", "pair_run", "PairLayout", "GlueRun", "GLUE_KINDS"]

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
_ROUND_HEAD = b"\x82\xa4type\xa5round\xa5evals"
_CHALLENGE_HEAD = b"\x82\xa4type\xa9challenge\xa5value"
_BIN8 = 0xC4


class PairLayout:
    """One round event and its challenge event of a prime field with 4- or 8-byte elements,
    ``values`` per round, as the writer packs them: ``stride`` bytes in all, ``pattern``
    matching any number of them back to back, ``pair`` reading one as (values..., challenge)."""

    __slots__ = ("values", "stride", "pattern", "pair")

    def __init__(self, values: int, width: int) -> None:
        size = values * width
        round_head = _ROUND_HEAD + bytes((_BIN8, size))
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
    head = at + len(_ROUND_HEAD)
    if len(data) < head + 2 or data[head] != _BIN8 or not data.startswith(_ROUND_HEAD, at):
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

    __slots__ = ("_run", "_one")

    def __init__(self, width: int) -> None:
        run, one = _glue_patterns(width)
        self._run, self._one = run.match, one.findall

    def __call__(self, data: bytes, at: int) -> int:
        """How many bytes the glue events from ``at`` fill (0: none there)."""
        return self._run(data, at).end() - at  # type: ignore[union-attr]  # the pattern matches the empty string too

    def rows(self, data: bytes) -> list[tuple[bytes, bytes, bytes, bytes]]:
        """Per event of ``data`` (bytes this object measured, any number of runs joined): (kind,
        the name's fixstr head, name, element bytes)."""
        return self._one(data)  # type: ignore[no-any-return]
