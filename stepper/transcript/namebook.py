"""The names of the instances read so far, in a few bytes each.

A reader must answer "which instance, if any, was last called NAME?" for any
instance seen so far (a note names its instance; a glue expression's
``point(NAME)`` and ``final(NAME)`` must name an earlier instance), yet a
check streams through files of 10^5 instances and more, so it cannot keep a
record per instance. The book keeps each name as UTF-8 bytes in one buffer,
with its end offset and its hash in two flat arrays (16 bytes plus the name),
and the most recent names in a small dictionary: a question about a recent
name is a dictionary look-up, one about an older name a vectorised scan of the
hashes, confirmed against the stored bytes.
"""

from __future__ import annotations

from array import array
from itertools import accumulate, islice
from typing import Sequence

RECENT = 1024  # at most this many names answered from the dictionary; others by a scan of the hashes


class NameBook:
    """Instance names by position (0, 1, ...), with the last position of each name."""

    __slots__ = ("_blob", "_ends", "_hashes", "_recent", "_pending")

    def __init__(self) -> None:
        self._blob = bytearray()
        self._ends = array("q")  # end offset in _blob of each name
        self._hashes = array("q")  # hash() of each name (a 64-bit int on every platform Python runs on here)
        self._recent: dict[str, int] = {}  # name -> its last position, for up to RECENT recent names
        self._pending: list[tuple[list[str], int]] = []  # names added in bulk, not yet in _recent: (names, first position)

    def __len__(self) -> int:
        return len(self._ends)

    def add(self, name: str) -> int:
        """Record the next instance's name; returns its position."""
        index = len(self._ends)
        self._blob += name.encode("utf-8", "surrogatepass")
        self._ends.append(len(self._blob))
        self._hashes.append(hash(name))
        recent = self._recent_names()
        if len(recent) >= RECENT:
            recent.clear()  # start a new window: older names are found by the scan
        recent[name] = index  # an assignment: a name's entry, when there is one, is its last position
        return index

    def add_all(self, names: Sequence[str]) -> None:
        """Record the next instances' names, in order: the same book as :meth:`add` of each, in a few
        calls over the whole list (the whole-file check takes thousands of instances at once)."""
        count = len(names)
        if not count:
            return
        index = len(self._ends)
        joined = "".join(names)
        if joined.isascii():  # a character a byte: the names' lengths are their bytes', encoded together
            self._ends.extend(islice(accumulate(map(len, names), initial=len(self._blob)), 1, None))
            self._blob += joined.encode("ascii")
        else:
            encoded = [name.encode("utf-8", "surrogatepass") for name in names]
            self._ends.extend(islice(accumulate(map(len, encoded), initial=len(self._blob)), 1, None))
            self._blob += b"".join(encoded)
        self._hashes.extend(map(hash, names))
        waiting = sum(len(chunk) for chunk, _ in self._pending)
        if len(self._recent) + waiting + count >= RECENT:
            self._recent.clear()  # a new window holding the last names only: older ones are found by the scan
            self._pending.clear()
        window = min(count, RECENT - 1)
        # put in the window when a name is asked for (most bulk names never are), in order
        self._pending.append((list(islice(names, count - window, None)), index + count - window))

    def _recent_names(self) -> dict[str, int]:
        """The window of recent names, those added in bulk put in first (assignments in order: a name
        given twice keeps its last position)."""
        recent = self._recent
        if self._pending:
            for chunk, first in self._pending:
                recent.update(zip(chunk, range(first, first + len(chunk))))
            self._pending.clear()
        return recent

    def name_at(self, index: int) -> str:
        start = self._ends[index - 1] if index else 0
        return self._blob[start:self._ends[index]].decode("utf-8", "surrogatepass")

    def last(self, name: str) -> int | None:
        """The last position holding ``name``, or None if no instance was so named."""
        found = self._recent_names().get(name)
        if found is not None:
            return found
        if not self._ends:
            return None
        import numpy as np

        hits = np.flatnonzero(np.frombuffer(self._hashes, dtype=np.int64) == hash(name))
        for index in hits[::-1].tolist():
            if self.name_at(index) == name:
                return int(index)
        return None

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and self.last(name) is not None
