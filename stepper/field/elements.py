"""Field elements as text and bytes: parsing, the fixed-width encoding, and display.

:class:`ElementCodec` is the part of :class:`stepper.field.field.Field` that turns
outside values into canonical elements and back; it holds no state of its own
and relies on the field's ``p``, ``degree``, ``base_bytes``, ``elem_bytes``,
``base``, ``describe`` and ``lift``. Invariants: parsing rejects, never
reduces, a non-canonical input (ASCII decimal or 0x-hex text, ints and numpy
integers; never bools or floats); the byte encoding is fixed width, little
endian, ``base_bytes`` per base coefficient, constant term first.
"""

from __future__ import annotations

import functools
import operator
import re
from typing import TYPE_CHECKING

from stepper.errors import FieldError, Where

from stepper.field.shape import Element

if TYPE_CHECKING:
    from stepper.field.shape import FieldShape

__all__ = ["Element", "ElementCodec", "format_poly", "clip_text"]

_NUMBER_TEXT = r"(?P<sign>-)?(?:0[xX](?P<hex>[0-9a-fA-F]+)|(?P<dec>[0-9]+))"


@functools.cache
def _number_text() -> re.Pattern[str]:
    """:data:`_NUMBER_TEXT` compiled, on the first element given as text (a binary transcript has none)."""
    return re.compile(_NUMBER_TEXT, re.ASCII)


class ElementCodec:
    """Parsing, encoding and formatting of elements (a base of :class:`~stepper.field.field.Field`)."""

    __slots__ = ()

    if TYPE_CHECKING:
        p: int
        degree: int
        base_bytes: int
        elem_bytes: int

        @property
        def is_extension(self) -> bool: ...

        @property
        def base(self) -> FieldShape: ...

        def describe(self) -> str: ...

        def lift(self, e: Element) -> Element: ...

    def parse(self, value: object, where: Where | None = None) -> Element:
        """A canonical element from an int, a decimal or 0x-hex string, fixed-width
        bytes, or (extension) a list of k base values; a base value is accepted in an
        extension field as its embedding. Non-canonical values are refused."""
        if isinstance(value, (bytes, bytearray, memoryview)):
            return self.decode(bytes(value), where)
        if isinstance(value, (list, tuple)):
            if not self.is_extension:
                raise FieldError(f"expected one element of {self.describe()}, found a list of {len(value)}", where)
            if len(value) != self.degree:
                raise FieldError(
                    f"expected {self.degree} coefficients for an element of {self.describe()}, found {len(value)}",
                    where,
                )
            coeffs = []
            for index, item in enumerate(value):
                try:
                    coeffs.append(self._parse_base(item, where))
                except FieldError as err:
                    raise FieldError(f"coefficient {index} (X^{index}): {err.message}", where) from None
            return tuple(coeffs)
        return self.lift(self._parse_base(value, where))

    def _parse_base(self, value: object, where: Where | None) -> int:
        if isinstance(value, bool):
            raise FieldError(f"expected an element of {self._short()}, found the boolean {value!r}", where)
        if isinstance(value, str):
            n = self._parse_text(value, where)
        elif isinstance(value, (bytes, bytearray)):
            return self.base._decode_base(bytes(value), where)  # type: ignore[attr-defined]
        else:
            try:
                n = operator.index(value)  # type: ignore[arg-type]  # int and numpy integers; not float, not bool
            except TypeError:
                raise FieldError(
                    f"expected an element of {self._short()} (an integer, decimal or 0x-hex string), "
                    f"found {type(value).__name__} {clip_text(repr(value))}",
                    where,
                ) from None
        if not 0 <= n < self.p:
            raise FieldError(f"expected a canonical element 0 <= v < p = {self.p}, found {clip_int(n)}", where)
        return n

    def _parse_text(self, value: str, where: Where | None) -> int:
        """Decimal or 0x-hex digits, ASCII only, surrounding whitespace allowed; a
        leading minus sign is recognised only to say that negatives are not canonical."""
        text = value.strip()
        match = _number_text().fullmatch(text)
        if match is None:
            raise FieldError(
                f"expected a decimal or 0x-hex element of {self._short()}, found {clip_text(repr(value))}", where
            )
        sign, hex_digits, dec_digits = match.group("sign"), match.group("hex"), match.group("dec")
        if sign:
            raise FieldError(f"expected a canonical element 0 <= v < p = {self.p}, found {clip_text(text)}", where)
        digits = (hex_digits if hex_digits is not None else dec_digits).lstrip("0") or "0"
        limit = len(f"{self.p:x}") if hex_digits is not None else len(str(self.p))
        if len(digits) > limit:
            raise FieldError(
                f"expected a canonical element 0 <= v < p = {self.p}, found a number of {len(digits)} digits "
                f"({clip_text(text)})",
                where,
            )
        return int(digits, 16 if hex_digits is not None else 10)

    def _short(self) -> str:
        return self.base.describe() if self.is_extension else self.describe()

    def encode(self, e: Element) -> bytes:
        """Fixed-width little-endian bytes: ``elem_bytes`` long."""
        w = self.base_bytes
        coeffs = (e,) if isinstance(e, int) and not self.is_extension else self.lift(e)
        if len(coeffs) != self.degree or any(not 0 <= c < self.p for c in coeffs):  # type: ignore[arg-type, union-attr]
            raise FieldError(f"expected a canonical element of {self.describe()} to encode, found {clip_text(str(e))}")
        return b"".join(c.to_bytes(w, "little") for c in coeffs)  # type: ignore[union-attr]

    def decode(self, data: bytes, where: Where | None = None) -> Element:
        """Inverse of :meth:`encode`; refuses wrong lengths and non-canonical values."""
        if len(data) != self.elem_bytes:
            raise FieldError(
                f"expected {self.elem_bytes} bytes for an element of {self.describe()}, found {len(data)}", where
            )
        if not self.is_extension:
            return self._decode_base(data, where)
        w = self.base_bytes
        return tuple(self._decode_base(data[i : i + w], where) for i in range(0, len(data), w))

    def _decode_base(self, data: bytes, where: Where | None) -> int:
        n = int.from_bytes(data, "little")
        if n >= self.p:
            raise FieldError(f"expected a canonical element below p = {self.p}, found {n}", where)
        return n

    def fmt(self, e: Element) -> str:
        """Decimal text: ``42`` or ``[1, 0, 0, 7]``."""
        if isinstance(e, int):
            return str(e) if not self.is_extension else self.fmt(self.lift(e))
        return "[" + ", ".join(str(c) for c in e) + "]"

    def to_json(self, e: Element) -> int | str | list[int | str]:
        """JSON value per the event-stream contract (strings above 2^53 for portability)."""
        if isinstance(e, int) and not self.is_extension:
            return e if e < 2**53 else str(e)
        return [c if c < 2**53 else str(c) for c in self.lift(e)]  # type: ignore[union-attr]


def format_poly(coeffs: tuple[int, ...], p: int) -> str:
    """``X^4 - 11`` style text for a polynomial over F_p (constant first)."""
    terms: list[str] = []
    for i in range(len(coeffs) - 1, -1, -1):
        c = coeffs[i] % p
        if c == 0:
            continue
        neg = c > p // 2
        mag = p - c if neg else c
        mono = "" if i == 0 else ("X" if i == 1 else f"X^{i}")
        body = str(mag) if i == 0 else (mono if mag == 1 else f"{mag}*{mono}")
        sign = "-" if neg else "+"
        terms.append(("-" if neg else "") + body if not terms else f" {sign} {body}")
    return "".join(terms) or "0"


def clip_int(n: int, limit: int = 60) -> str:
    """An integer for an error message: its digits, or its size when it has too many to print
    (Python refuses to print integers of more than 4300 digits)."""
    if n.bit_length() > 4 * limit:
        return f"{'a negative' if n < 0 else 'an'} integer of {n.bit_length()} bits"
    return clip_text(str(n), limit)


def clip_text(text: str, limit: int = 60) -> str:
    """text, cut to ``limit`` characters with an ellipsis (for error messages)."""
    return text if len(text) <= limit else text[: limit - 3] + "..."
