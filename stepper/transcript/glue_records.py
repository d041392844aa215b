"""The glue records: named public values (``value``), verifier randomness drawn outside the
rounds (``squeeze``) and the prover's openings of committed tables (``opening``).

Their names are identifiers (:data:`GLUE_NAME`), unique in the proof (the Sequencer keeps
that rule); like every record they are canonical once built.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Union

from stepper.field.field import Element

from stepper.transcript.records import _freeze, _index, _need

__all__ = ["GLUE_NAME", "GLUE_NAME_PATTERN", "is_glue_name", "NamedValue", "Squeeze", "Opening", "GlueDraft",
           "OpeningDraft", "Glue"]

GLUE_NAME = "letters, digits, '_' and '.', starting with a letter or '_', at most 128 characters"
GLUE_NAME_PATTERN = re.compile(r"[A-Za-z_][A-Za-z0-9_.]{0,127}")


def is_glue_name(name: object) -> bool:
    """Whether ``name`` may name a value, squeeze or opening (see ``GLUE_NAME``)."""
    return name.__class__ is str and GLUE_NAME_PATTERN.fullmatch(name) is not None  # type: ignore[arg-type]


@dataclass(frozen=True, slots=True)
class NamedValue:
    """A named public value of the statement (``value`` event): one element, or a
    tuple of elements when ``listed`` (a point). ``instance`` is the instance it
    follows (None before the first)."""

    name: str
    value: Any
    listed: bool = False
    instance: int | None = None

    def __post_init__(self) -> None:
        _check_named(self, "NamedValue")

    def items(self) -> tuple[Element, ...]:
        """The elements: the list, or the one element alone."""
        return self.value if self.listed else (self.value,)  # type: ignore[no-any-return]


def _check_named(record: NamedValue | Squeeze, kind: str) -> None:
    """The checks a named value and a squeeze share: an identifier name, a tuple when listed."""
    _freeze(record, "value")
    _need(is_glue_name(record.name), kind, f"a name of {GLUE_NAME}, found {record.name!r}"[:200])
    _need(not record.listed or isinstance(record.value, tuple), kind, "a tuple of elements when listed")
    _need(record.instance is None or _index(record.instance), kind, "instance None or >= 0")


@dataclass(frozen=True, slots=True)
class Squeeze:
    """Named verifier randomness drawn outside the rounds (``squeeze`` event): a
    coefficient or a point; the built-in schedule re-derives it."""

    name: str
    value: Any
    listed: bool = False
    instance: int | None = None

    def __post_init__(self) -> None:
        _check_named(self, "Squeeze")

    def items(self) -> tuple[Element, ...]:
        """The elements: the list, or the one element alone."""
        return self.value if self.listed else (self.value,)  # type: ignore[no-any-return]


@dataclass(frozen=True, slots=True)
class Opening:
    """The prover's claimed value of the multilinear extension of witness table
    ``table`` at the challenge point of instance ``instance`` (``opening`` event)."""

    name: str
    value: Element
    table: str
    instance: int

    def __post_init__(self) -> None:
        _need(is_glue_name(self.name), "Opening", f"a name of {GLUE_NAME}, found {self.name!r}"[:200])
        _need(isinstance(self.table, str) and bool(self.table), "Opening", "a table name")
        _need(_index(self.instance), "Opening", "instance >= 0")


class GlueDraft:
    """The same for :class:`NamedValue` and :class:`Squeeze` (see :class:`RoundMsgDraft`): the
    Sequencer has checked the name and made a list value a tuple; 4 or more per instance in a
    glued proof."""

    __slots__ = NamedValue.__slots__  # type: ignore[attr-defined]


class OpeningDraft:
    """The same for :class:`Opening` (see :class:`RoundMsgDraft`)."""

    __slots__ = Opening.__slots__  # type: ignore[attr-defined]


Glue = Union[NamedValue, Squeeze, Opening]
