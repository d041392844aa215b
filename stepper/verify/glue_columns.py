"""The glue events after runs of rounds, read as columns (no I/O).

The whole-file pass (:mod:`stepper.verify.sweep`) keeps the ``value``, ``squeeze`` and
``opening`` events that follow each instance it takes as a run without turning each into a
record: as one blob of bytes where the writer packed them so
(:class:`~stepper.transcript.packed.GlueRun`), else as the reader unpacked them.
:class:`GlueColumns` takes all of a flush's at once and checks what the event
:class:`~stepper.transcript.events.Sequencer` would check of each, by columns: the blobs read
by numpy (:func:`~stepper.transcript.packed.read_glue_columns`: kinds, names and elements
exactly as msgpack would unpack them, every name a glue name), every name new to the proof
(added to the Sequencer's table of names, which must grow by as many), every element a
canonical packed element (one decode of their bytes joined). It then gives what the rest of
the pass needs, still by columns: the names and values for the replay's glue book, each
name's row and each row's run (for the rules of expressions), the Fiat-Shamir pieces of each
run (:meth:`~stepper.verify.fiatshamir.Sha256Schedule.glue_stream`), and the squeezed
elements sent, which the caller compares with those re-derived, by the block.

Anything else (a payload another producer shaped otherwise, a JSON-style element, a name
sent twice) raises :class:`~stepper.verify.packed_runs.GiveUp`: the caller then replays the
file event by event, which names the problem.
"""

from __future__ import annotations

import re
from itertools import accumulate, chain, repeat
from operator import itemgetter
from typing import TYPE_CHECKING, Any, Iterator, Mapping, MutableMapping, Sequence, overload

from stepper.transcript.glue_names import Counted, GlueNames, counted_columns, digit_runs
from stepper.transcript.glue_records import GLUE_NAME_PATTERN, NamedValue, Opening, Squeeze
from stepper.transcript.packed import (
    GLUE_CODES, GLUE_KINDS, GlueColumnsRead, GlueRun, decoder_for, read_glue_columns, read_glue_periods,
)
from stepper.transcript.payload_rules import MAX_VALUES
from stepper.verify.packed_runs import GiveUp, GluedRuns, rederive

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Field
    from stepper.field.kernels import Kernel
    from stepper.verify.fiatshamir import Sha256Schedule

__all__ = ["GlueColumns", "NameRows"]

_NAME = GLUE_NAME_PATTERN.pattern
_NAMES = re.compile(rf"{_NAME}(?:\n{_NAME})*")  # names joined by newlines


_FIXSTR = bytes((0xA0 + n) & 0xFF for n in range(256))  # a name's length -> its fixstr head
_KIND_BYTES = {kind: raw for raw, kind in GLUE_KINDS.items()}
_CODES = {kind: code for code, kind in enumerate(GLUE_CODES)}


def _payload(row: tuple[bytes, bytes, bytes, bytes]) -> dict[str, Any]:
    """A row of :class:`~stepper.transcript.packed.GlueRun` as the payload msgpack unpacks."""
    kind, head, name, element = row
    if head[0] != _FIXSTR[len(name)]:
        raise GiveUp("a glue name whose length is not its head's")
    return {"type": GLUE_KINDS[kind], "name": name.decode("ascii"), "value": element}


def _row(payload: Any) -> tuple[bytes, bytes, bytes, bytes] | None:
    """A payload as the row :class:`~stepper.transcript.packed.GlueRun` reads when the writer packed
    it so (a type, an ASCII name of at most 31 characters and one element's bytes), else None."""
    if payload.__class__ is not dict or len(payload) != 3:
        return None
    kind, name, element = payload.get("type"), payload.get("name"), payload.get("value")
    if kind.__class__ is not str or kind not in _KIND_BYTES or name.__class__ is not str or element.__class__ is not bytes \
            or not 0 < len(name) < 32 or not name.isascii():
        return None
    raw = name.encode("ascii")
    return _KIND_BYTES[kind], _FIXSTR[len(raw):len(raw) + 1], raw, element


def _joined_blobs(tails: Sequence[Any]) -> tuple[bytes, np.ndarray]:
    """The blobs of glue after each run, one after another, and each run's blob's length: a tail is
    empty or one blob, or instances laid out alike (:class:`~stepper.verify.packed_runs.GluedRuns`),
    standing for the blobs after each of its runs but the last."""
    import numpy as np

    parts: list[bytes] = []
    sizes: list[np.ndarray] = []
    loose: list[bytes] = []  # blobs of runs taken one by one, in a row
    for tail in [*tails, None]:
        if tail is not None and tail.__class__ is not GluedRuns:
            loose.append(tail[0] if tail else b"")
            continue
        if loose:
            parts += loose
            sizes.append(np.fromiter(map(len, loose), dtype=np.int64, count=len(loose)))
            loose = []
        if tail is not None:
            parts.append(tail.glue_blob())
            sizes.append(np.full(len(tail) - 1, tail.period - tail.run_end, dtype=np.int64))
    return b"".join(parts), np.concatenate(sizes) if sizes else np.zeros(0, dtype=np.int64)


def _read_by_stretch(joined: bytes, sizes: np.ndarray, width: int) -> GlueColumnsRead | None:
    """:func:`~stepper.transcript.packed.read_glue_columns` of the blobs after each run joined, stretch by
    stretch of runs whose blobs have one length: such a stretch is read as blobs alike
    (:func:`~stepper.transcript.packed.read_glue_periods`) where it is one, else as any glue."""
    import numpy as np

    changes = np.flatnonzero(sizes[1:] != sizes[:-1]) + 1
    if len(changes) > 64:
        return read_glue_columns(joined, width)
    bounds = [0, *changes.tolist(), len(sizes)]
    offsets = np.concatenate(([0], np.cumsum(sizes)))
    parts: list[tuple[int, GlueColumnsRead]] = []
    for low, high in zip(bounds[:-1], bounds[1:]):
        begin, end = int(offsets[low]), int(offsets[high])
        if begin == end:
            continue
        piece = joined[begin:end]
        read = read_glue_periods(piece, width, int(sizes[low])) if high - low > 1 else None
        if read is None:
            read = read_glue_columns(piece, width)
            if read is None:
                return None
        parts.append((begin, read))
    if len(parts) == 1 and parts[0][0] == 0:
        return parts[0][1]
    if not parts:
        return read_glue_columns(b"", width)
    firsts = accumulate((len(read.codes) for _, read in parts), initial=0)
    return GlueColumnsRead(np.concatenate([read.codes for _, read in parts]), None,
                           np.concatenate([read.elements for _, read in parts]),
                           np.concatenate([read.ends + begin for begin, read in parts]),
                           (np.concatenate([read.spelled[0] for _, read in parts]),
                            b"".join([read.spelled[1] for _, read in parts])),
                           [(first + at, rows, lengths) for (_, read), first in zip(parts, firsts)
                            for at, rows, lengths in read.periods])


def _cut(joined: bytes, sizes: np.ndarray) -> list[bytes]:
    """``joined`` cut into pieces of ``sizes``."""
    import numpy as np

    ends = np.cumsum(sizes).tolist()
    return list(map(joined.__getitem__, map(slice, [0, *ends[:-1]], ends)))


class NameColumn(Sequence[str]):
    """Glue names as the bytes they were read from (``joined``: each name, then a newline; ``lengths`` each
    name's), made strings one at a time when read, or all at once when iterated: a passing check reads a few
    of a flush's names (their rows come by place), so most never become strings. A slice is a column of the
    same bytes (a step other than one gives a list); ``index`` and ``in`` search the bytes."""

    __slots__ = ("_joined", "_starts", "_lengths")

    def __init__(self, lengths: np.ndarray, joined: bytes, starts: np.ndarray | None = None) -> None:
        import numpy as np

        self._joined = joined
        self._lengths = lengths
        self._starts = np.cumsum(lengths + 1) - (lengths + 1) if starts is None else starts

    def __len__(self) -> int:
        return len(self._lengths)

    @overload
    def __getitem__(self, at: int) -> str: ...

    @overload
    def __getitem__(self, at: slice) -> Sequence[str]: ...

    def __getitem__(self, at: int | slice) -> str | Sequence[str]:
        if isinstance(at, slice):
            begin, end, step = at.indices(len(self))
            if step != 1:
                return [self[i] for i in range(begin, end, step)]
            return NameColumn(self._lengths[begin:end], self._joined, self._starts[begin:max(begin, end)])
        if at < 0:
            at += len(self)
        if not 0 <= at < len(self):
            raise IndexError("name index out of range")
        start = int(self._starts[at])
        return self._joined[start:start + int(self._lengths[at])].decode("ascii")

    def __iter__(self) -> Iterator[str]:
        if not len(self):
            return iter(())
        begin, end = int(self._starts[0]), int(self._starts[-1]) + int(self._lengths[-1])
        return iter(self._joined[begin:end].decode("ascii").split("\n"))

    def index(self, name: object, start: int = 0, stop: int | None = None) -> int:
        """The first row from ``start`` (up to ``stop``) holding ``name``; ValueError when none does."""
        import numpy as np

        count = len(self)
        stop = count if stop is None else min(stop, count)
        if name.__class__ is not str or "\n" in name or not name.isascii() or not 0 <= start < stop:  # type: ignore[operator, attr-defined]
            raise ValueError(f"{name!r} is not in the column")
        encoded = name.encode("ascii")  # type: ignore[attr-defined]
        first = int(self._starts[start])
        if self._joined.startswith(encoded + b"\n", first):
            return start
        end = int(self._starts[stop - 1]) + int(self._lengths[stop - 1]) + 1
        found = self._joined.find(b"\n" + encoded + b"\n", first, end)
        if found < 0:
            raise ValueError(f"{name!r} is not in the column")
        return start + int(np.searchsorted(self._starts[start:stop], found + 1))

    def __contains__(self, name: object) -> bool:
        try:
            self.index(name)
        except ValueError:
            return False
        return True

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Sequence) and list(self) == list(other)

    __hash__ = None  # type: ignore[assignment]


class WordColumn(Sequence[int]):
    """Elements of a prime field below 2^64 as one numpy array of uint64, read back as ints one at a time
    (a slice is a column too): the values of a flush's glue, of which a passing check reads a few."""

    __slots__ = ("_words",)

    def __init__(self, words: np.ndarray) -> None:
        self._words = words

    @overload
    def __getitem__(self, at: int) -> int: ...

    @overload
    def __getitem__(self, at: slice) -> WordColumn: ...

    def __getitem__(self, at: int | slice) -> int | WordColumn:
        if isinstance(at, slice):
            return WordColumn(self._words[at])
        return int(self._words[at])

    def __len__(self) -> int:
        return len(self._words)

    def __iter__(self) -> Iterator[int]:
        return iter(self._words.tolist())

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Sequence) and list(self) == list(other)

    __hash__ = None  # type: ignore[assignment]


def _word_column(field: Field, elements: np.ndarray) -> WordColumn | None:
    """The elements (rows of packed bytes) as a :class:`WordColumn` when the field is a prime one below
    2^64 packed in 4 or 8 bytes; GiveUp when one is not canonical; None for other fields."""
    import numpy as np

    width = field.elem_bytes
    if field.is_extension or field.p >= 1 << 64 or width not in (4, 8) or elements.ndim != 2 \
            or elements.shape[1] != width:
        return None
    words = np.ascontiguousarray(elements).view("<u8" if width == 8 else "<u4").reshape(-1).astype(np.uint64)
    if len(words) and int(words.max()) >= field.p:
        raise GiveUp("a glue element that is not canonical")
    return WordColumn(words)


class NameRows(Mapping[str, int]):
    """Each name's row in a flush's names (no name twice: :class:`GlueColumns` gave up on that). A name
    of a column read as a template (``counted``: the first row of its stretch, the names after each
    run there, its place among them, and the :class:`~stepper.transcript.glue_names.Counted`) is found
    by parsing its counter; the others by comparing the name's hash with an array of theirs while few
    are asked for, by a dict of them after that: the rules of expressions usually ask for a few names
    only (the rest are found by place), and a dict of a flush's thousands of names cost more than a
    few searches; a search for a name not there, the usual question about a name sent before the
    flush, is one comparison of the array."""

    __slots__ = ("_names", "_index", "_hashes", "_searches", "_counted", "_others")
    SEARCHES = 256  # look-ups by hash before the dict is built

    def __init__(self, names: Sequence[str], counted: Sequence[tuple[int, int, int, Counted]] = ()) -> None:
        self._names = names
        self._index: dict[str, int] | None = None
        self._hashes: Any = None
        self._searches = 0
        self._counted: dict[tuple[str, str, int], list[tuple[int, int, int, Counted]]] = {}
        for entry in counted:
            self._counted.setdefault(entry[3].key, []).append(entry)
        self._others: list[int] | None = None  # the rows no template holds (all when none does)
        if counted:
            covered = sorted({(first, first + len(template) * per) for first, per, _, template in counted})
            bounds = [0, *(end for begin_end in covered for end in begin_end), len(names)]
            self._others = [row for low, high in zip(bounds[::2], bounds[1::2]) for row in range(low, high)]

    def _row(self, name: object) -> int | None:
        if self._counted and name.__class__ is str:
            for key, value in digit_runs(name):  # type: ignore[arg-type]
                for first, per, place, template in self._counted.get(key, ()):
                    row = first + (value - template.low) * per + place
                    if template.low <= value < template.high and self._names[row] == name:
                        return row
        others = self._others
        if self._index is None:
            if self._searches < self.SEARCHES and name.__class__ is str:
                self._searches += 1
                import numpy as np

                if self._hashes is None:
                    listed = self._names if others is None else [self._names[row] for row in others]
                    self._hashes = np.fromiter(map(hash, listed), dtype=np.int64, count=len(listed))
                for found in np.flatnonzero(self._hashes == hash(name)).tolist():
                    row = found if others is None else others[found]
                    if self._names[row] == name:
                        return row  # type: ignore[no-any-return]
                return None
            self._index = {self._names[row]: row for row in (range(len(self._names)) if others is None else others)}
        return self._index.get(name)  # type: ignore[call-overload, no-any-return]

    def __getitem__(self, name: str) -> int:
        row = self._row(name)
        if row is None:
            raise KeyError(name)
        return row

    def get(self, name: str, default: Any = None) -> Any:  # type: ignore[override]
        row = self._row(name)
        return default if row is None else row

    def __contains__(self, name: object) -> bool:
        return self._row(name) is not None

    def __iter__(self) -> Iterator[str]:
        return iter(self._names)

    def __len__(self) -> int:
        return len(self._names)


class GlueColumns:
    """The glue payloads that follow the runs of one flush, checked and held as columns."""

    def __init__(self, field: Field, tails: Sequence[Sequence[Any]], defined: MutableMapping[str, Any] | GlueNames,
                 blobs_only: bool | None = None) -> None:
        """``tails[i]`` holds the events that followed run i, in stream order, each a payload as
        unpacked or a row of :class:`~stepper.transcript.packed.GlueRun`; ``defined`` the glue names
        sent before the flush, as the Sequencer records them (a list's length, None for one element):
        the flush's names are added to it, and none may be there already (a name comes once).
        ``blobs_only`` says that each tail is empty or one blob (None: look)."""
        self.field = field
        self.from_bytes = 0  # events read from blobs
        self.codes: np.ndarray  # each event's kind: 0 value, 1 squeeze, 2 opening
        self.elements: np.ndarray | None = None  # one row of packed bytes per event, when each holds one element
        self.listed: list[bool]  # whether each event's value is a list
        self.values: Sequence[Any]  # each event's element, or list of elements
        self.names: Sequence[str]  # each event's name
        self.tables: Sequence[str]  # each event's table (an opening's; the name itself for the others)
        self.has_lists = False  # whether any is
        self._kinds: list[str] | None = None
        self._data: list[bytes] | None = None
        self._rows: NameRows | None = None
        self._stream: tuple[memoryview, np.ndarray, np.ndarray] | None = None
        self._periods: list[tuple[int, np.ndarray, list[int]]] = []  # stretches read as blobs alike
        self._spelled: tuple[np.ndarray, bytes] | None = None  # the names' lengths and bytes, when read so
        self._bounds: np.ndarray | None = None  # bounds as an array
        self._counted: list[tuple[int, int, int, Counted]] = []  # columns of names read as templates
        if blobs_only is None:
            blobs_only = all(not tail or (len(tail) == 1 and tail[0].__class__ is bytes) for tail in tails)
        if blobs_only and any(tails):
            self._read_blobs(tails, defined)  # the usual case: one blob after a run, nothing else
            return
        glue_run = GlueRun(field.elem_bytes)
        tails = [[row for item in tail for row in (glue_run.rows(item) if item.__class__ is bytes else (item,))]
                 for tail in tails]
        payloads: list[Any] = list(chain.from_iterable(tails))
        self.size = len(payloads)
        self.bounds = [0, *accumulate(map(len, tails))]  # run i's events are bounds[i] .. bounds[i + 1] - 1
        shapes = set(map(type, payloads))
        self.from_bytes = self.size - sum(shape is dict for shape in map(type, payloads))
        if tuple in shapes and dict in shapes:  # rows and payloads mixed (the rows stopped at a chunk's end)
            rows = [item if item.__class__ is tuple else _row(item) for item in payloads]
            if None in rows:  # a payload shaped otherwise: the rows as payloads
                payloads = [_payload(item) if item.__class__ is tuple else item for item in payloads]
            else:
                payloads, shapes = rows, {tuple}
        if shapes == {tuple}:  # every event a row of GlueRun: one element each, no table apart
            self._take_rows(payloads, defined)
            return
        try:  # each payload is a map with a type (the sweep kept it for its type)
            self.kinds = list(map(itemgetter("type"), payloads))
            names = list(map(itemgetter("name"), payloads))
            raws: list[Any] = list(map(itemgetter("value"), payloads))
            joined = "\n".join(names)
        except (KeyError, TypeError):
            raise GiveUp("a glue event without a name or value, or a name that is not text") from None
        if payloads and _NAMES.fullmatch(joined) is None:
            raise GiveUp("a glue name outside the pattern")
        self.names = names
        self.tables = self._tables(payloads)
        types = set(map(type, raws))
        if list not in types:  # one element each (the usual case): no per-event work
            self._one_element_each(defined)
            self.data = raws
            self.values = self._decode(raws, raws)
            return
        self.listed = [raw.__class__ is list for raw in raws]
        self.has_lists = any(self.listed)
        self.counts = [len(raw) if is_list else 1 for raw, is_list in zip(raws, self.listed)]
        self._define(defined)
        if self.counts and max(self.counts) > MAX_VALUES:
            raise GiveUp("a glue list longer than the Sequencer takes")
        if any(is_list and kind == "opening" for is_list, kind in zip(self.listed, self.kinds)):
            raise GiveUp("an opening of a list")
        self.data = [b"".join(raw) if is_list else raw for raw, is_list in zip(raws, self.listed)]
        cells = [cell for raw, is_list in zip(raws, self.listed) for cell in (raw if is_list else (raw,))]
        self.values = self._decode(raws, cells)

    @property
    def kinds(self) -> list[str]:
        """Each event's type, in stream order."""
        if self._kinds is None:
            self._kinds = list(map(GLUE_CODES.__getitem__, self.codes.tolist()))
        return self._kinds

    @kinds.setter
    def kinds(self, kinds: list[str]) -> None:
        import numpy as np

        self._kinds = kinds
        self.codes = np.fromiter(map(_CODES.__getitem__, kinds), dtype=np.int8, count=len(kinds))

    @property
    def data(self) -> list[bytes]:
        """Each event's packed elements (one element's bytes, or a list's joined)."""
        if self._data is None:
            assert self.elements is not None
            width = self.elements.shape[1]
            joined = self.elements.tobytes()
            self._data = [joined[i:i + width] for i in range(0, len(joined), width)]
        return self._data

    @data.setter
    def data(self, data: list[bytes]) -> None:
        self._data = data

    def element_rows(self) -> np.ndarray:
        """Each event's element bytes as a row (every event one element: not :attr:`listed`)."""
        import numpy as np

        if self.elements is None:
            self.elements = np.frombuffer(b"".join(self.data), dtype=np.uint8).reshape(self.size, self.field.elem_bytes)
        return self.elements

    def _read_blobs(self, tails: Sequence[Sequence[Any]], defined: MutableMapping[str, Any] | GlueNames) -> None:
        """The columns of one blob of glue events after each run, read at once by numpy
        (:func:`~stepper.transcript.packed.read_glue_columns`), each run's events found where their
        bytes end; where that reading declines, the rows are read by a regex."""
        import numpy as np

        joined, sizes = _joined_blobs(tails)
        width = self.field.elem_bytes
        read = _read_by_stretch(joined, sizes, width)
        if read is None:
            self._take_blobs(_cut(joined, sizes), defined)
            return
        self.size = self.from_bytes = len(read.codes)
        ends = read.ends
        blob_ends = np.cumsum(sizes)
        counts = np.searchsorted(ends, blob_ends, side="right")  # events ending by each blob's end
        marks = np.concatenate(([0], ends))[counts]  # where the last of them ends: the blob's end, if a boundary
        if int(counts[-1]) != self.size or not np.array_equal(marks, blob_ends):
            raise GiveUp("glue blobs read otherwise than measured")
        self._bounds = np.concatenate(([0], counts))
        self.bounds = self._bounds.tolist()
        self.names = NameColumn(*read.spelled)
        self.codes = read.codes
        self.tables = self.names
        self._periods = read.periods
        self._spelled = read.spelled
        self._one_element_each(defined)
        self.elements = read.elements
        words = _word_column(self.field, read.elements)
        if words is not None:
            self.values = words
            return
        elements = decoder_for(self.field)(read.elements.tobytes())
        if elements is None:
            raise GiveUp("a glue element that is not canonical")
        self.values = list(elements)

    def _take_blobs(self, blobs: list[bytes], defined: MutableMapping[str, Any] | GlueNames) -> None:
        """The columns of one blob of glue events after each run, read by a regex; each run's events
        found by their byte lengths (a row fills 21 bytes, its kind, its name and its element)."""
        import numpy as np

        rows = GlueRun(self.field.elem_bytes).rows(b"".join(blobs))
        self.size = self.from_bytes = len(rows)
        fixed = 21 + self.field.elem_bytes
        ends = np.cumsum(np.fromiter(map(len, map(itemgetter(0), rows)), dtype=np.int64, count=len(rows))
                         + np.fromiter(map(len, map(itemgetter(2), rows)), dtype=np.int64, count=len(rows)) + fixed)
        blob_ends = np.cumsum(np.fromiter(map(len, blobs), dtype=np.int64, count=len(blobs)))
        if not len(rows) or ends[-1] != blob_ends[-1]:
            raise GiveUp("glue blobs read otherwise than measured")
        self.bounds = [0, *np.searchsorted(ends, blob_ends, side="right").tolist()]
        self._take_rows(rows, defined)

    def _one_element_each(self, defined: MutableMapping[str, Any] | GlueNames) -> None:
        """Every event of the flush holds one element (no list): its counts, and its names defined."""
        self.listed = [False] * self.size
        self.has_lists = False
        self.counts = [1] * self.size
        self._define(defined)

    def _take_rows(self, rows: list[tuple[bytes, bytes, bytes, bytes]], defined: MutableMapping[str, Any] | GlueNames) -> None:
        """The columns of events read as rows of bytes (kind, the name's fixstr head, name, element)."""
        names = b"\n".join(map(itemgetter(2), rows)).decode("ascii")
        if b"".join(map(itemgetter(1), rows)) != bytes(map(len, map(itemgetter(2), rows))).translate(_FIXSTR):
            raise GiveUp("a glue name whose length is not its head's")
        if rows and _NAMES.fullmatch(names) is None:
            raise GiveUp("a glue name outside the pattern")
        self.names = names.split("\n") if rows else []
        self.kinds = list(map(GLUE_KINDS.__getitem__, map(itemgetter(0), rows)))
        self.tables = self.names
        self._one_element_each(defined)
        self.data = list(map(itemgetter(3), rows))
        self.values = self._decode(self.data, self.data)

    def _tables(self, payloads: list[Mapping[str, Any]]) -> Sequence[str]:
        """Each opening's table (its name unless the payload names one); the names themselves stand
        for the others, which have none."""
        if sum(map(len, payloads)) == 3 * len(payloads):  # type, name, value only: no table named apart
            return self.names
        tables = [payload.get("table", name) if kind == "opening" else name for payload, kind, name
                  in zip(payloads, self.kinds, self.names)]
        given = [table for table, name, kind in zip(tables, self.names, self.kinds)
                 if kind == "opening" and table is not name]
        try:
            if given and _NAMES.fullmatch("\n".join(given)) is None:
                raise GiveUp("an opening's table outside the pattern")
        except TypeError:
            raise GiveUp("an opening's table that is not text") from None
        return tables

    def _decode(self, raws: list[Any], cells: list[Any]) -> list[Any]:
        """The elements sent, as the replay's glue book keeps them: an element, or a list of them
        (``cells``: every element's packed bytes, in order)."""
        width = self.field.elem_bytes
        if set(map(type, cells)) - {bytes} or set(map(len, cells)) - {width}:
            raise GiveUp("a glue element not packed as the writer packs it")
        elements = decoder_for(self.field)(b"".join(cells))
        if elements is None:
            raise GiveUp("a glue element that is not canonical")
        if not self.has_lists:
            return list(elements)
        out: list[Any] = []
        at = 0
        for n, is_list in zip(self.counts, self.listed):
            out.append(list(elements[at:at + n]) if is_list else elements[at])
            at += n
        return out

    # ----- what the rest of the flush reads -----------------------------------------------
    def _define(self, defined: MutableMapping[str, Any] | GlueNames) -> None:
        """Add the names to ``defined`` as the Sequencer records them; a name already there, or twice
        in the flush, leaves fewer entries than expected. A :class:`~stepper.transcript.glue_names.GlueNames`
        takes the columns of stretches read alike as templates where they are (:meth:`_define_counted`)."""
        if isinstance(defined, GlueNames):
            if self.has_lists:
                added = defined.add_names(self.names, (n if is_list else None for n, is_list
                                                       in zip(self.counts, self.listed)))
            else:
                added = self._define_counted(defined)
            if not added:
                raise GiveUp("a glue name sent twice")
            return
        before = len(defined)
        if not self.has_lists:
            defined.update(zip(self.names, repeat(None)))
        else:
            defined.update((name, n if is_list else None) for name, n, is_list in zip(self.names, self.counts, self.listed))
        if len(defined) != before + len(self.names):
            raise GiveUp("a glue name sent twice")

    def _define_counted(self, defined: GlueNames) -> bool:
        """Add the names (one element each) to ``defined``: each column of a stretch read alike whose
        names count (:func:`~stepper.transcript.glue_names.counted_columns`) as a template, kept for
        :meth:`rows`, the other names one by one; False when one was there already."""
        covered: list[tuple[int, int]] = []
        for first, rows, lengths in self._periods:
            templates = counted_columns(rows, lengths)
            if templates is None:
                continue
            for place, template in enumerate(templates):
                if not defined.add_counted(template):
                    return False
                self._counted.append((first, len(lengths), place, template))
            covered.append((first, first + len(rows) * len(lengths)))
        names = self.names
        if not covered:
            return defined.add_names(names)
        bounds = [0, *(end for begin_end in covered for end in begin_end), len(names)]
        return defined.add_names([name for low, high in zip(bounds[::2], bounds[1::2]) for name in names[low:high]])

    def lists(self) -> dict[str, int]:
        """The flush's list values by name, with their lengths."""
        if not self.has_lists:
            return {}
        return {name: n for name, n, is_list in zip(self.names, self.counts, self.listed) if is_list}

    def rows(self) -> NameRows:
        """Each name's row in the flush (its index in stream order)."""
        if self._rows is None:
            self._rows = NameRows(self.names, self._counted)
        return self._rows

    def run_of_row(self) -> np.ndarray:
        """The run (index in the flush) each row follows."""
        import numpy as np

        return np.repeat(np.arange(len(self.bounds) - 1), self._steps())

    def _bound_array(self) -> np.ndarray:
        """:attr:`bounds` as an array (made once)."""
        import numpy as np

        if self._bounds is None:
            self._bounds = np.array(self.bounds, dtype=np.int64)
        return self._bounds

    def _steps(self) -> np.ndarray:
        """The events after each run."""
        import numpy as np

        return np.diff(self._bound_array())

    def records(self, run: int, instance: int) -> list[NamedValue | Squeeze | Opening]:
        """The records of the events after run ``run`` (instance ``instance``), as the Sequencer builds them."""
        out: list[NamedValue | Squeeze | Opening] = []
        for i in range(self.bounds[run], self.bounds[run + 1]):
            code, name, value = self.codes[i], self.names[i], self.values[i]
            if code == 2:
                out.append(Opening(name, value, self.tables[i], instance))
                continue
            cls = NamedValue if code == 0 else Squeeze
            out.append(cls(name, tuple(value) if self.listed[i] else value, self.listed[i], instance))
        return out

    def cells(self, kernel: Kernel) -> tuple[Mapping[str, int], np.ndarray] | None:
        """The flush's elements as a kernel array, and each name's row there (None when some value
        is a list)."""

        from stepper.verify.cells import decode_cells

        if self.has_lists or not self.size:
            return None
        array = decode_cells(kernel, self.element_rows(), self.field.elem_bytes)
        return self.rows(), array

    def squeezes_pass(self, kernel: Kernel, schedule: Sha256Schedule | None, digests: bytearray) -> bool:
        """Whether every element squeezed is the one sent, ``digests`` being those
        :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` appended for the pieces
        of :meth:`pieces`, in stream order."""
        import numpy as np

        from stepper.verify.cells import decode_cells

        width = self.field.elem_bytes
        if self.has_lists:
            sent = b"".join([data for code, data in zip(self.codes.tolist(), self.data) if code == 1])
            rows = np.frombuffer(sent, dtype=np.uint8).reshape(-1, width)
        else:
            rows = self.element_rows()[self.codes == 1]
        expected = decode_cells(kernel, rows, width)
        return bool(np.array_equal(rederive(kernel, schedule, digests, len(rows), expected.shape), expected))

    def stream(self, schedule: Sha256Schedule) -> tuple[memoryview, np.ndarray, np.ndarray]:
        """The bytes :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` takes after the
        runs' rows, all runs' one after another (built once), the offset where each run's glue starts
        then the end (``len(bounds)`` offsets), and the offsets at which a challenge is squeezed."""
        import numpy as np

        if self._stream is None:
            ends: Sequence[int] | np.ndarray
            cuts: Sequence[int] | np.ndarray
            if self.tables is self.names and self.size and not self.has_lists:
                steps = self._steps()  # events after each run
                period = int(steps[0]) if len(steps) and bool((steps == steps[0]).all()) else 0
                stream, ends, cuts = schedule.flat_glue_stream(self.codes, self.names, self.element_rows().tobytes(),
                                                               period, self._spelled)
            else:
                tables = None if self.tables is self.names else self.tables
                stream, ends, cuts = schedule.glue_stream(self.kinds, self.names, tables, self.data, self.counts,
                                                          self.listed)
            run_ends = np.concatenate(([0], np.asarray(ends, dtype=np.int64)))[self._bound_array()]
            self._stream = (memoryview(stream), run_ends, np.asarray(cuts, dtype=np.int64))
        return self._stream

    def run_pieces(self, schedule: Sha256Schedule, run: int) -> list[memoryview]:
        """The pieces :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` takes after run
        ``run``'s rows (none for a run with no glue): its glue cut where a challenge is squeezed."""
        import numpy as np

        view, run_ends, cuts = self.stream(schedule)
        begin, end = int(run_ends[run]), int(run_ends[run + 1])
        inside = cuts[np.searchsorted(cuts, begin, side="right"):np.searchsorted(cuts, end, side="left")]
        marks = [begin, *inside.tolist(), end] if end > begin else []
        return list(map(view.__getitem__, map(slice, marks[:-1], marks[1:])))

    def one_squeeze_each(self, schedule: Sha256Schedule, first: int) -> np.ndarray | None:
        """Where the one challenge of each run's glue from run ``first`` on is squeezed (a squeeze of one
        element after each run), or None when some run's glue squeezes none or more than one."""
        import numpy as np

        _, run_ends, cuts = self.stream(schedule)
        ends = run_ends[first:]
        low = np.searchsorted(cuts, ends[:-1], side="right")
        if not np.array_equal(np.searchsorted(cuts, ends[1:], side="left") - low, np.ones(len(low), dtype=np.int64)):
            return None
        return cuts[low]  # type: ignore[no-any-return]
