"""The glue names of a proof, with names that differ only in a counter kept as templates (no I/O).

Glue names are unique in a proof: the Sequencer refuses a name sent a second time. Event by
event it asks a dictionary. The whole-file check (:mod:`stepper.verify.sweep`) reads the glue
after thousands of instances laid out alike at once; there the k-th name after each instance
is usually one text with a counter in it (``a17``, ``a18``, ...), and putting each such name
into a dictionary (a fresh string hashed, the table grown) cost more than the rest of their
reading. :class:`GlueNames` answers the same questions (``name in names``, its list length or
None, ``names[name] = length``) while holding such a column of names as one :class:`Counted`:
a prefix, a field of decimal digits of fixed width and a suffix, with the range of counter
values the names hold, one each, in a row.

* Reading a column as a template (:func:`counted_columns`) proves it: every name's bytes
  are the first's but in the field, the field holds digits only, and the values run
  low, low + 1, ..., so no two names of the column are equal.
* The field is a maximal run of digits (the prefix does not end with one, the suffix does
  not start with one), so a name belongs to a template only through one of its own maximal
  runs of digits: a question about one name parses those runs and looks each up
  (:meth:`GlueNames.__contains__`).
* A new template is refused (:meth:`GlueNames.add_counted` returns False) when some name it
  holds is held already: a template of the same prefix, width and suffix whose range meets
  its range; a template of another field of the same length (the one name both could hold,
  built and asked); a name set one by one (indexed by its runs of digits when templates come).
  The caller then gives up, and the event-by-event replay names the repeat.
"""

from __future__ import annotations

import re
from bisect import bisect_left, bisect_right, insort
from dataclasses import dataclass
from itertools import chain, islice, repeat
from typing import TYPE_CHECKING, Iterable, Iterator, Mapping, Sequence

if TYPE_CHECKING:
    import numpy as np

__all__ = ["Counted", "GlueNames", "counted_columns", "digit_runs"]

_DIGIT_RUNS = re.compile(r"[0-9]+")
_DIGITS = frozenset("0123456789")
MAX_FIELD = 18  # digits of a counter read by numpy (int64)
MAX_FIELDS_OF_A_LENGTH = 256  # templates of one name length compared with a new one before giving up
_MISSING = object()

Key = tuple[str, str, int]  # (prefix, suffix, width)


@dataclass(frozen=True, slots=True)
class Counted:
    """The names ``prefix + v + suffix`` for ``low <= v < high``, v written in ``width`` digits (zeros in
    front), in that order; the prefix does not end with a digit, the suffix does not start with one."""

    prefix: str
    suffix: str
    width: int
    low: int
    high: int

    @property
    def key(self) -> Key:
        return self.prefix, self.suffix, self.width

    def __len__(self) -> int:
        return self.high - self.low

    def name(self, value: int) -> str:
        return f"{self.prefix}{value:0{self.width}d}{self.suffix}"

    def names(self) -> Iterator[str]:
        return map(self.name, range(self.low, self.high))


def counted_columns(rows: np.ndarray, lengths: Sequence[int]) -> list[Counted] | None:
    """The names standing in ``rows`` as templates: row i (uint8, ASCII) holds one name of each of
    ``lengths`` one after another, and column j (the j-th name of every row) becomes one
    :class:`Counted` when its names are the first's but in one field of digits whose values count
    up by one from row to row. None when some column is not so (two rows alike included)."""
    import numpy as np

    count = len(rows)
    if count < 2:
        return None
    differs = (rows != rows[0]).any(axis=0)
    first = rows[0].tobytes().decode("ascii")
    out: list[Counted] = []
    at = 0
    for length in lengths:
        varying = np.flatnonzero(differs[at:at + length])
        if not len(varying):
            return None  # the same name after every instance
        begin, end = int(varying[0]), int(varying[-1]) + 1
        name = first[at:at + length]
        while begin > 0 and name[begin - 1] in _DIGITS:
            begin -= 1
        while end < length and name[end] in _DIGITS:
            end += 1
        width = end - begin
        field = rows[:, at + begin:at + end]
        if width > MAX_FIELD or not bool(((field >= 0x30) & (field <= 0x39)).all()):
            return None
        values = (field.astype(np.int64) - 0x30) @ (10 ** np.arange(width - 1, -1, -1, dtype=np.int64))
        low = int(values[0])
        if not np.array_equal(values, np.arange(low, low + count, dtype=np.int64)):
            return None
        out.append(Counted(name[:begin], name[end:], width, low, low + count))
        at += length
    return out


class _Ranges:
    """The ranges of counter values of one key's templates, sorted, none meeting another."""

    __slots__ = ("lows", "highs")

    def __init__(self) -> None:
        self.lows: list[int] = []
        self.highs: list[int] = []

    def holds(self, value: int) -> bool:
        i = bisect_right(self.lows, value) - 1
        return i >= 0 and value < self.highs[i]

    def meets(self, low: int, high: int) -> bool:
        i = bisect_right(self.lows, high - 1) - 1  # the last range starting before ``high``
        return i >= 0 and self.highs[i] > low

    def add(self, low: int, high: int) -> None:
        i = bisect_right(self.lows, low)
        self.lows.insert(i, low)
        self.highs.insert(i, high)


def digit_runs(name: str) -> Iterator[tuple[Key, int]]:
    """Each maximal run of digits of ``name`` as the key of the template that would hold it there, and
    the run's value."""
    for found in _DIGIT_RUNS.finditer(name):
        begin, end = found.span()
        yield (name[:begin], name[end:], end - begin), int(found.group())


class GlueNames(Mapping[str, "int | None"]):
    """Glue names sent so far, each with its list's length (None for one element): one by one in a
    dictionary, columns of counted names as templates (see the module's notes)."""

    __slots__ = ("_one", "_ranges", "_templates", "_by_length", "_indexed", "_one_runs")

    def __init__(self) -> None:
        self._one: dict[str, int | None] = {}  # names set one by one, or added as a column not counted
        self._ranges: dict[Key, _Ranges] = {}
        self._templates: list[Counted] = []
        self._by_length: dict[int, list[Key]] = {}  # the keys of templates, by the length of their names
        self._indexed = 0  # how many of _one's names (in the order set) _one_runs holds
        self._one_runs: dict[Key, list[int]] = {}  # _one's names by the keys of their runs of digits: values, sorted

    # ----- one name ------------------------------------------------------------------------
    def _counted(self, name: str) -> bool:
        """Whether a template holds ``name``."""
        if not self._ranges or name.__class__ is not str:
            return False
        ranges = self._ranges
        for key, value in digit_runs(name):
            found = ranges.get(key)
            if found is not None and found.holds(value):
                return True
        return False

    def __contains__(self, name: object) -> bool:
        return name in self._one or self._counted(name)  # type: ignore[arg-type]

    def get(self, name: str, default: object = None) -> int | None | object:  # type: ignore[override]
        found = self._one.get(name, _MISSING)
        if found is not _MISSING:
            return found
        return None if self._counted(name) else default

    def __getitem__(self, name: str) -> int | None:
        found = self.get(name, _MISSING)
        if found is _MISSING:
            raise KeyError(name)
        return found  # type: ignore[return-value]

    def __setitem__(self, name: str, length: int | None) -> None:
        """Record a name sent one by one (the caller has found it new)."""
        self._one[name] = length

    def __len__(self) -> int:
        return len(self._one) + sum(map(len, self._templates))

    def __iter__(self) -> Iterator[str]:
        return chain(self._one, *(template.names() for template in self._templates))

    # ----- many names ----------------------------------------------------------------------
    def add_names(self, names: Sequence[str], lengths: Iterable[int | None] | None = None) -> bool:
        """Record ``names`` (with their list lengths, None for one element; all None when not given), or
        return False when one is held already or comes twice (some may then be recorded)."""
        one = self._one
        if not self._ranges:  # no template yet: the dictionary alone says whether a name repeats
            before = len(one)
            one.update(zip(names, repeat(None) if lengths is None else lengths))
            return len(one) == before + len(names)
        for name, length in zip(names, repeat(None) if lengths is None else lengths):
            if name in one or self._counted(name):
                return False
            one[name] = length
        return True

    def add_counted(self, template: Counted) -> bool:
        """Record the names of ``template`` (one element each), or return False when one of them is held
        already (nothing recorded then)."""
        key = template.key
        low, high = template.low, template.high
        ranges = self._ranges.get(key)
        if ranges is not None and ranges.meets(low, high):
            return False
        values = self._runs_of_ones(key)
        i = bisect_left(values, low)
        if i < len(values) and values[i] < high:  # a name set one by one
            return False
        length = len(template.prefix) + template.width + len(template.suffix)
        others = self._by_length.setdefault(length, [])
        if any(self._shared(template, other) for other in others if other != key):
            return False
        if key not in others:
            if len(others) >= MAX_FIELDS_OF_A_LENGTH:
                return False
            others.append(key)
        if ranges is None:
            ranges = self._ranges[key] = _Ranges()
        ranges.add(low, high)
        self._templates.append(template)
        return True

    def _runs_of_ones(self, key: Key) -> list[int]:
        """The values, sorted, of the names set one by one that a template of ``key`` would hold there
        (the names set since the last call indexed first)."""
        one = self._one
        if self._indexed < len(one):
            runs = self._one_runs
            for name in islice(one, self._indexed, None):
                for name_key, value in digit_runs(name):
                    insort(runs.setdefault(name_key, []), value)
            self._indexed = len(one)
        return self._one_runs.get(key, [])

    def _shared(self, template: Counted, other: Key) -> bool:
        """Whether a name of ``template`` is held by a template of ``other`` (names of the same length,
        another field): the one name both could hold, if any, is ``template``'s with its field spelled
        as ``other``'s text there, which must be digits; it is asked of the templates held."""
        prefix, suffix, width = other
        begin, end = len(template.prefix), len(template.prefix) + template.width
        shape = prefix + "?" * width + suffix  # the other's text, its field unknown
        if not begin >= len(prefix) + width and not end <= len(prefix):
            return False  # the fields meet: one name's maximal runs of digits cannot be both
        field = shape[begin:end]
        if not field.isdigit() or not field.isascii():
            return False
        value = int(field)
        if not template.low <= value < template.high:
            return False
        return self._counted(template.prefix + field + template.suffix)
