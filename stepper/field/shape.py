"""What the low layers need to know about a field, without importing :class:`Field`.

:data:`Element` is the Python form of a field element (an int, or a k-tuple of
base ints for an extension, constant term first). :class:`FieldShape` is the
protocol that :class:`stepper.field.field.Field` satisfies and that the element
codec and the vector kernels are written against, so that ``field.py`` can
import them and they never import it back.
"""

from __future__ import annotations

from typing import Protocol, Union

__all__ = ["Element", "FieldShape"]

Element = Union[int, tuple[int, ...]]


class FieldShape(Protocol):
    """The read-only face of a field: modulus, degree, sizes and a few scalar operations."""

    p: int
    degree: int
    base_bytes: int
    elem_bytes: int
    irreducible: tuple[int, ...]

    @property
    def is_extension(self) -> bool: ...

    @property
    def base(self) -> FieldShape: ...

    @property
    def one(self) -> Element: ...

    def describe(self) -> str: ...

    def lift(self, e: Element) -> Element: ...

    def is_base(self, e: Element) -> bool: ...

    def is_zero(self, a: Element) -> bool: ...

    def inv(self, a: Element) -> Element: ...
