"""Packed runs of fixed-width field elements: the binary form of an element list.

A transcript stores a list of n elements as one msgpack ``bin`` of n *
``elem_bytes`` bytes, each element little endian, extension coefficients
constant term first (the same bytes as ``Field.encode`` of each element,
concatenated). Decoding here happens in one call per run, not per element:
``struct`` for 4- and 8-byte bases (31-bit and 64-bit primes), ``int.from_bytes``
slices otherwise.

Invariant: :func:`unpack_elements` returns canonical elements or raises
:class:`FieldError`; it never reduces a value modulo p.
"""

from __future__ import annotations

import struct
from functools import lru_cache
from typing import Callable

from stepper.errors import FieldError, Where
from stepper.field.field import Element, Field

__all__ = ["pack_elements", "unpack_elements", "decoder_for"]

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
