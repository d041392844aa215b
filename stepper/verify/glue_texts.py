"""The glue texts of instances laid out alike, read by template from their bytes (no I/O).

The whole-file pass (:mod:`stepper.verify.sweep`) takes instances whose events are laid out
alike as one block of bytes and compares them with numpy. Their ``claim_expr`` and
``final_expr`` usually differ only in the names they read (``a7 + beta7*b7``,
``a8 + beta8*b8``), and those names are usually the glue names sent right after the same
instance's run or the run before. So:

* :func:`holes_of` finds, in the first text, its template
  (:func:`stepper.field.expr_syntax.template_of`) and the byte span of every name; the sweep
  compares every other byte of the texts with the first's, as it compares the rest of the events;
* :func:`placed_names` reads each hole's names, instance by instance, as bytes: it checks that
  the tokenizer reads each as it reads the first text's (a name's characters, a name's first
  character, no call word), so every text's tree is the first's with other names, and finds
  where the names stand among the glue after the runs (:class:`PlacedNames`): the same name in
  every text, or the name of the glue event at a fixed place after the instance's own run or the
  run before (compared as bytes, all at once);
* :class:`PlacedNames` is the column of a hole's names as strings, made only where something reads
  them; :func:`placed_rows` gives, for the rules of expressions, each name's row among a block's
  glue from its place alone.

Where any of it does not hold, the texts are read one by one as before.
"""

from __future__ import annotations

import re
from bisect import bisect_right
from itertools import accumulate, chain
from typing import TYPE_CHECKING, Callable, Iterator, Sequence, TypeVar, overload

from stepper.transcript.events import longest_text
from stepper.transcript.packed import name_byte_tables

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.expr_syntax import Template

__all__ = ["holes_of", "placed_names", "PlacedNames", "Chained", "joined_columns", "placed_rows", "FixedTexts",
           "TextColumn", "joined_texts", "row_strings"]

_WORDS = re.compile(rb"[A-Za-z0-9_.]+")  # maximal runs of the characters a name may hold
_FIRST_CHARS = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz_"
_CALL_WORDS = (b"eq", b"point", b"final")
_CALL_WORD_SIZES = frozenset(map(len, _CALL_WORDS))
SAME, OWN, BEFORE = "same", "own", "before"  # where a hole's names stand (PlacedNames.place)


def row_strings(rows: np.ndarray) -> list[str]:
    """Each row of ``rows`` (one text's bytes per row, all of one length) as a string: one decode and
    one split at the newlines put after the rows when every byte is ASCII and no text holds a newline
    itself (the parser reads one as a space), else row by row. UnicodeDecodeError when a row is not UTF-8."""
    import numpy as np

    count, width = rows.shape
    joined = np.full((count, width + 1), 0x0A, dtype=np.uint8)
    joined[:, :width] = rows
    raw = joined.tobytes()
    if raw.isascii() and raw.count(b"\n") == count:
        return raw.decode("ascii").split("\n")[:-1]
    return [raw[at:at + width].decode() for at in range(0, len(raw), width + 1)]


def holes_of(text: bytes) -> tuple[Template, list[tuple[int, int]]] | None:
    """The template of ``text`` (an expression's UTF-8 bytes) and the byte span of each of its holes,
    in order, or None when the text is not ASCII, has no template, or holds a word that is not a
    name, a call word or a number of digits only (``2a``, ``1.5``: the tokenizer cuts those where a
    name of another length could cut them otherwise)."""
    if not text.isascii():
        return None
    from stepper.field.expr_syntax import template_of

    decoded = text.decode("ascii")
    found = template_of(decoded)
    if found is None:
        return None
    template, names = found
    spans: list[tuple[int, int]] = []
    for match in _WORDS.finditer(text):
        word = match.group()
        if word[0] in _FIRST_CHARS:
            if word not in _CALL_WORDS:
                spans.append(match.span())
        elif not word.isdigit():
            return None
    if [decoded[begin:end] for begin, end in spans] != names:
        return None
    return template, spans


class PlacedNames(Sequence[str]):
    """One hole's names, one per instance of a stretch laid out alike, kept as rows of bytes and made
    strings only where read; ``place`` says where they stand: (SAME,) one name in every row, or
    (OWN, e) / (BEFORE, e): row k is the name of the e-th glue event after instance k's own run, or
    after the run before it (row 0's, before the stretch, stands wherever it was sent)."""

    __slots__ = ("rows", "place", "_names")

    def __init__(self, rows: np.ndarray, place: tuple[str, int]) -> None:
        self.rows = rows
        self.place = place
        self._names: list[str] | None = None

    def __len__(self) -> int:
        return len(self.rows)

    def _all(self) -> list[str]:
        if self._names is None:
            self._names = row_strings(self.rows)
        return self._names

    @overload
    def __getitem__(self, index: int) -> str: ...

    @overload
    def __getitem__(self, index: slice) -> list[str]: ...

    def __getitem__(self, index: int | slice) -> str | list[str]:
        if isinstance(index, slice):
            if self._names is not None or len(range(*index.indices(len(self)))) > 16:
                return self._all()[index]
            return [row.tobytes().decode("ascii") for row in self.rows[index]]
        if self._names is not None:
            return self._names[index]
        return self.rows[index].tobytes().decode("ascii")

    def __iter__(self) -> Iterator[str]:
        return iter(self._all())

    def count(self, value: object) -> int:
        if self.place[0] == SAME:
            return len(self) if len(self) and self[0] == value else 0
        return self._all().count(value)  # type: ignore[arg-type]


_Entry = TypeVar("_Entry")


class _Parts(Sequence[_Entry]):
    """Columns one after another (``parts``, each with the position of its first entry: ``starts``),
    read without joining them: what :class:`Chained` and :class:`TextColumn` share."""

    __slots__ = ("parts", "starts")

    def __init__(self, parts: list[Sequence[_Entry]]) -> None:
        self.parts = parts
        self.starts = [0]
        for part in parts:
            self.starts.append(self.starts[-1] + len(part))

    def __len__(self) -> int:
        return self.starts[-1]

    def _entry(self, index: int) -> _Entry:
        """Entry ``index`` (negative from the end), read from its part alone."""
        if index < 0:
            index += len(self)
        if not 0 <= index < len(self):
            raise IndexError(index)
        part = bisect_right(self.starts, index) - 1
        return self.parts[part][index - self.starts[part]]

    def __iter__(self) -> Iterator[_Entry]:
        return chain.from_iterable(self.parts)


class Chained(_Parts[str]):
    """Columns of names one after another, each a list or a :class:`PlacedNames`, read without joining
    them."""

    __slots__ = ()

    @overload
    def __getitem__(self, index: int) -> str: ...

    @overload
    def __getitem__(self, index: slice) -> list[str]: ...

    def __getitem__(self, index: int | slice) -> str | list[str]:
        if isinstance(index, slice):
            begin, end, step = index.indices(len(self))
            if step != 1:
                return list(self)[index]
            names: list[str] = []  # read from the parts the slice covers only
            for part, low in zip(self.parts, self.starts):
                if low >= end:
                    break
                if low + len(part) > begin:
                    names += part[max(begin - low, 0):end - low]
            return names
        return self._entry(index)

    def count(self, value: object) -> int:
        return sum(part.count(value) for part in self.parts)


def joined_columns(columns: list[Sequence[str]]) -> Sequence[str]:
    """Columns of names one after another: a list when all are lists, else :class:`Chained` (no part
    made strings)."""
    return _joined(columns, Chained)


def _joined(columns: list[Sequence[_Entry]], chained: type[_Parts[_Entry]]) -> Sequence[_Entry]:
    """Columns one after another: a list when all are lists, else ``chained`` of their parts (a column
    already of that class gives its own parts), none of them read."""
    if all(column.__class__ is list for column in columns):
        return list(chain.from_iterable(columns))
    parts: list[Sequence[_Entry]] = []
    for column in columns:
        parts += column.parts if isinstance(column, chained) else [column]
    return chained(parts)


def placed_names(periods: np.ndarray, holes: list[tuple[int, int]], glue_names: list[tuple[int, int]]
                 ) -> list[PlacedNames] | None:
    """Each hole's names (``holes``: byte spans in every period of ``periods``, one row of bytes per
    instance), found where they stand among the glue names (``glue_names``: the byte span of each glue
    event's name after the instance's run, in order): the same in every row, or the e-th glue name of
    the same period, or of the period before from the second row on (the first two rows say which; all
    rows are then compared at once). None when some name does not read as a name where the first text
    has one (a name's characters only, a letter or ``_`` first, no call word) or stands nowhere so."""
    import numpy as np

    if not holes or len(periods) < 2:
        return None
    first, second = periods[0].tobytes(), periods[1].tobytes()
    places: list[tuple[str, int]] = []
    for begin, end in holes:
        size, place = end - begin, None
        if first[begin:end] == second[begin:end]:
            place = (SAME, 0)
        else:
            for e, (low, high) in enumerate(glue_names):
                if high - low != size:
                    continue
                if first[begin:end] == first[low:high]:
                    place = (OWN, e)
                    break
                if second[begin:end] == first[low:high]:
                    place = (BEFORE, e)
                    break
        if place is None:
            return None
        places.append(place)
    columns = np.concatenate([np.arange(begin, end) for begin, end in holes])
    picked = periods[:, columns]  # every hole's bytes, instance by instance
    expected = np.empty_like(picked)
    starts = list(accumulate((end - begin for begin, end in holes[:-1]), initial=0))
    for (begin, end), at, (kind, e) in zip(holes, starts, places):
        out = expected[:, at:at + end - begin]
        if kind == SAME:
            out[:] = picked[0, at:at + end - begin]
            continue
        low, high = glue_names[e]
        if kind == OWN:
            out[:] = periods[:, low:high]
        else:
            out[1:] = periods[:-1, low:high]
            out[0] = picked[0, at:at + end - begin]
    name_ok, first_ok = name_byte_tables()
    if not np.array_equal(picked, expected) or not name_ok[picked].all() or not first_ok[picked[:, starts]].all():
        return None
    out_columns: list[PlacedNames] = []
    for (begin, end), at, place in zip(holes, starts, places):
        rows = picked[:, at:at + end - begin]
        size = end - begin
        if _holds_call_word(rows[:1] if place[0] == SAME else rows):  # read otherwise than the first text's name
            return None
        out_columns.append(PlacedNames(rows, place))
    return out_columns


def _holds_call_word(rows: np.ndarray) -> bool:
    """Whether some row (a name's bytes) is a call word."""
    if rows.shape[1] not in _CALL_WORD_SIZES:
        return False
    import numpy as np

    for word in _CALL_WORDS:
        if len(word) == rows.shape[1] and bool((rows[:, 0] == word[0]).any()) \
                and bool((rows == np.frombuffer(word, dtype=np.uint8)).all(axis=1).any()):
            return True
    return False


def placed_rows(column: Sequence[str], runs: np.ndarray, firsts: np.ndarray, names: Sequence[str],
                otherwise: Callable[[Sequence[str], np.ndarray], np.ndarray], step: int | None = None
                ) -> np.ndarray | None:
    """Each check's name's row among the glue of a block (-1: not there, looked up by name), check k's
    instance being the block's run ``runs[k]``, ``firsts`` each run's first glue row, then the end, and
    ``names`` the block's glue names by row: for the parts of ``column`` that are :class:`PlacedNames`
    placed after their instance's run or the run before, the e-th glue row after that run; for the
    other parts (and row 0 of a part placed before) the row that place gives where the name there is
    theirs, else what ``otherwise`` finds (given the names and their runs). None when no part is so
    placed, or a run holds fewer glue events than its place says. ``step``, when every run holds that
    many glue rows (``firsts`` counts up by it from 0), gives the rows of the usual case by arithmetic."""
    import numpy as np

    parts = column.parts if isinstance(column, Chained) else [column]
    places = [part.place for part in parts if isinstance(part, PlacedNames) and part.place[0] != SAME]
    if not places:
        return None
    common = places[0]
    if places.count(common) == len(places) and len(runs):  # the usual case: every placed part placed alike
        skip = int(common[0] == BEFORE and int(runs[0]) == 0)  # the block's first run has no run before it
        found = _at_place(common, runs[skip:], firsts, step)
        if found is not None:
            if skip:
                found = np.concatenate((np.full(1, -1, dtype=np.int64), found))
            for begin, part in zip(column.starts if isinstance(column, Chained) else [0], parts):
                if isinstance(part, PlacedNames) and part.place[0] != SAME:
                    checked = 1 if common[0] == BEFORE else 0  # a part's first name, sent before its stretch
                else:
                    checked = len(part)  # names not placed: those at the place, or found by name
                if checked and (begin < skip or [names[row] for row in found[begin:begin + checked].tolist()]
                                != list(part[:checked])):
                    found[begin:begin + checked] = otherwise(part[:checked], runs[begin:begin + checked])
            return found
    rows = np.empty(len(column), dtype=np.int64)
    at = 0
    for part in parts:
        mine = runs[at:at + len(part)]
        if isinstance(part, PlacedNames) and part.place[0] != SAME:
            found = _at_place(part.place, mine[1:] if part.place[0] == BEFORE else mine, firsts)
            if found is None:
                return None
            if part.place[0] == BEFORE:  # row 0's name was sent before the stretch
                found = np.concatenate((_guessed(part.place, part[:1], mine[:1], firsts, names, otherwise), found))
        else:
            found = _guessed(common, part, mine, firsts, names, otherwise)
        rows[at:at + len(part)] = found
        at += len(part)
    return rows


def _at_place(place: tuple[str, int], runs: np.ndarray, firsts: np.ndarray, step: int | None = None
              ) -> np.ndarray | None:
    """The rows ``place`` gives for checks of ``runs`` (the e-th glue row after the run, or the run before),
    or None when some run has no such row (``step``: see :func:`placed_rows`)."""
    kind, e = place
    after = runs - 1 if kind == BEFORE else runs
    if len(after) and (int(after.min()) < 0 or int(after.max()) >= len(firsts) - 1):
        return None
    if step is not None:  # run r's rows are r * step .. r * step + step - 1
        return after * step + e if e < step or not len(after) else None
    found = firsts[after] + e
    return None if (found >= firsts[after + 1]).any() else found  # type: ignore[no-any-return]


def _guessed(place: tuple[str, int], part: Sequence[str], runs: np.ndarray, firsts: np.ndarray,
             names: Sequence[str], otherwise: Callable[[Sequence[str], np.ndarray], np.ndarray]) -> np.ndarray:
    """The rows of ``part``'s names: where ``place`` puts them when the names there are theirs, else what
    ``otherwise`` finds."""
    found = _at_place(place, runs, firsts)
    if found is not None and [names[row] for row in found.tolist()] == list(part):
        return found
    return otherwise(part, runs)


class FixedTexts(Sequence[str]):
    """Texts of one length, one per instance, kept as rows of ASCII bytes (the sweep compared them with
    the first text but for their names, all of name characters) and made strings only where read."""

    __slots__ = ("rows",)

    def __init__(self, rows: np.ndarray) -> None:
        self.rows = rows

    @property
    def longest(self) -> int:
        """The characters of the longest text (all are this long)."""
        return int(self.rows.shape[1]) if len(self.rows) else 0

    def __len__(self) -> int:
        return len(self.rows)

    @overload
    def __getitem__(self, index: int) -> str: ...

    @overload
    def __getitem__(self, index: slice) -> FixedTexts: ...

    def __getitem__(self, index: int | slice) -> str | FixedTexts:
        if isinstance(index, slice):
            return FixedTexts(self.rows[index])
        return self.rows[index].tobytes().decode("ascii")

    def __iter__(self) -> Iterator[str]:
        return iter(row_strings(self.rows))


class TextColumn(_Parts["str | None"]):
    """Columns of texts (or None) one after another, lists or :class:`FixedTexts`, read without joining
    them; a slice of it is one too."""

    __slots__ = ()

    @property
    def longest(self) -> int:
        """The characters of the longest text."""
        return max((longest_text(part) for part in self.parts), default=0)

    @overload
    def __getitem__(self, index: int) -> str | None: ...

    @overload
    def __getitem__(self, index: slice) -> Sequence[str | None]: ...

    def __getitem__(self, index: int | slice) -> str | None | Sequence[str | None]:
        if isinstance(index, slice):
            begin, end, step = index.indices(len(self))
            if step != 1:
                return list(self)[index]
            parts = [part[max(begin - low, 0):max(end - low, 0)] for part, low in zip(self.parts, self.starts)]
            return TextColumn([part for part in parts if len(part)])
        return self._entry(index)


def joined_texts(columns: list[Sequence[str | None]]) -> Sequence[str | None]:
    """Columns of texts one after another: a list when all are lists, else a :class:`TextColumn` (no text
    made a string)."""
    return _joined(columns, TextColumn)
