"""A table kept as stored (stepper.diagnose.stored_table): rows read canonical on demand, the whole
table checked in row ranges when admitted, and the mapped pages of a read range handed back.

Outside references: the BabyBear modulus 2^31 - 2^27 + 1 (common practice, no source); the resident
size of a mapping is the kernel's own count, the ``Rss:`` line of /proc/self/smaps (proc(5))."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

import stepper.diagnose.stored_table as stored_module
from stepper.diagnose.stored_table import StoredTable, bit_reversed, stored_table, table_rows, whole_table
from stepper.errors import WitnessError, Where
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
BABYBEAR4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
P = 2**31 - 2**27 + 1


def _mapped(tmp_path: Path, words: np.ndarray) -> np.ndarray:
    np.save(tmp_path / "t.npy", words)
    return np.load(tmp_path / "t.npy", mmap_mode="r")


def test_rows_and_the_whole_table_are_the_stored_words_as_canonical_uint64(tmp_path: Path) -> None:
    words = np.random.default_rng(1).integers(0, P, size=(1000, 4), dtype=np.uint32)
    table = stored_table(BABYBEAR4, _mapped(tmp_path, words), "ledger", Where())
    assert len(table) == 1000 and table.shape == (1000, 4) and table.dtype == np.uint64
    part = table.rows(10, 17)
    assert part.dtype == np.uint64 and part.flags.c_contiguous
    assert part.tolist() == words[10:17].tolist()
    assert table.part(500, 1000).rows(0, 3).tolist() == words[500:503].tolist()
    # rows 16..31 as 2 groups (r) of 8 (s = 0..7, 3 bits): row rev(s) 2 + r is row 16 + 8 r + s, where
    # rev = 0, 4, 2, 6, 1, 5, 3, 7 (s written in 3 bits, read backwards)
    spread = table.rows_bit_reversed(16, 32, 3)
    assert spread.dtype == np.uint64 and spread.flags.c_contiguous
    want = [16 + 8 * r + s for s in (0, 4, 2, 6, 1, 5, 3, 7) for r in (0, 1)]
    assert spread.tolist() == words[want].tolist()
    assert bit_reversed(words[16:32], 0).tolist() == words[16:32].tolist()
    big = np.array([2**200 + i for i in range(8)], dtype=object)  # BN254-sized entries keep their type
    assert bit_reversed(big, 2).tolist() == [2**200 + i for i in (0, 4, 2, 6, 1, 5, 3, 7)]
    assert whole_table(table).tolist() == words.tolist()
    memory = BABYBEAR.vec([1, 2, 3])
    assert table_rows(memory, 1, 3).tolist() == [2, 3] and whole_table(memory) is memory


@pytest.mark.parametrize("bad_at", [0, 5, 1023, 1024, 4095])
def test_a_non_canonical_entry_is_named_by_its_index_in_any_row_range(tmp_path: Path, monkeypatch,
                                                                      bad_at: int) -> None:
    monkeypatch.setattr(stored_module, "SCAN_ROWS", 1024)  # several ranges
    words = np.arange(4096, dtype=np.uint32)
    words[bad_at] = P
    with pytest.raises(WitnessError, match=rf"0 <= v < p = {P} in table 'scans', found {P} at entry {bad_at}$"):
        stored_table(BABYBEAR, _mapped(tmp_path, words), "scans", Where())


def test_negative_signed_entries_and_a_wrong_extension_shape_are_refused() -> None:
    with pytest.raises(WitnessError, match="found -1 at entry 2"):
        stored_table(BABYBEAR, np.array([0, 1, -1, 3], dtype=np.int64), "tolls", Where())
    with pytest.raises(WitnessError, match=r"shape \(n,\) or \(n, 4\).*found shape \(4, 3\)"):
        stored_table(BABYBEAR4, np.zeros((4, 3), dtype=np.uint32), "tolls", Where())


def _resident_kib(path: Path) -> int:
    """The kernel's resident count for the mapping of ``path`` in this process."""
    lines = Path("/proc/self/smaps").read_text().splitlines()
    total, inside = 0, False
    for line in lines:
        head = line.split()
        if head and "-" in head[0] and len(head) >= 5:  # a mapping's first line
            inside = line.endswith(str(path))
        elif inside and line.startswith("Rss:"):
            total += int(head[1])
    return total


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc/self/smaps (Linux)")
def test_reading_every_row_range_leaves_almost_nothing_of_the_mapping_resident(tmp_path: Path) -> None:
    words = np.random.default_rng(2).integers(0, P, size=(1 << 20, 4), dtype=np.uint32)  # 16 MiB
    path = tmp_path / "t.npy"
    np.save(path, words)
    mapped = np.load(path, mmap_mode="r")
    table = StoredTable(BABYBEAR4, mapped, "ledger")
    total = 0
    for start in range(0, len(table), 1 << 16):
        total += int(table.rows(start, start + (1 << 16))[:, 0].sum(dtype=np.uint64)) & 1  # int first: numpy 1.x refuses uint64 & int
    after_rows = _resident_kib(path)
    np.asarray(mapped).sum()  # plain slicing keeps every page it touched
    after_plain = _resident_kib(path)
    assert after_plain > 12 * 1024  # the control: most of the 16 MiB resident
    assert after_rows < 1024
