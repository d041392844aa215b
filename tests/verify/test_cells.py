"""stepper.verify.cells: packed elements decoded by the block, against ``int.from_bytes`` of each cell.

An element is packed as ``elem_bytes`` little-endian bytes, k coefficients of ``base_bytes`` each,
constant first, in an extension (transcripts/FORMAT.md). Moduli: BabyBear 2^31 - 2^27 + 1, Goldilocks
2^64 - 2^32 + 1 (common practice, no source), the BN254 scalar field (EIP-197, from memory), 97.
"""

from __future__ import annotations

import random

import numpy as np
import pytest

from stepper.field.field import get_field
from stepper.verify.cells import decode_cells, decode_grid
from stepper.verify.roundblock import block_kernel

BABYBEAR = 2**31 - 2**27 + 1
GOLDILOCKS = 2**64 - 2**32 + 1
BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617
FIELDS = {  # name -> (p, irreducible or None); the extensions' irreducibles are stepper's defaults (from memory)
    "babybear": (BABYBEAR, None), "goldilocks": (GOLDILOCKS, None), "p97": (97, None), "bn254": (BN254, None),
    "babybear^4": (BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1)), "goldilocks^2": (GOLDILOCKS, (GOLDILOCKS - 7, 0, 1)),
    "p97^3": (97, (92, 0, 0, 1)),
}


@pytest.mark.parametrize("name", sorted(set(FIELDS) - {"bn254"}))  # uint64 entries (BN254: rows of limbs)
@pytest.mark.parametrize("values", [1, 4])
def test_decode_grid_gives_each_rounds_values_as_int_from_bytes_reads_them(name, values):
    p, irreducible = FIELDS[name]
    field = get_field(p, irreducible) if irreducible else get_field(p)
    kernel = block_kernel(field)
    width, k, base = field.elem_bytes, field.degree, field.base_bytes
    rng = random.Random(f"{name}-{values}")
    count, before, after = 33, 5, 3  # each row's values between other bytes: a strided slice, as in a block
    cells = [[[rng.randrange(p) for _ in range(k)] for _ in range(values)] for _ in range(count)]
    rows = b"".join(rng.randbytes(before) + b"".join(c.to_bytes(base, "little") for value in row for c in value)
                    + rng.randbytes(after) for row in cells)
    block = np.frombuffer(rows, dtype=np.uint8).reshape(count, -1)[:, before:before + values * width]
    got = decode_grid(kernel, block, values, width)
    assert got.shape[:2] == (count, values) and got.dtype == np.uint64
    assert got.tolist() == [[value if k > 1 else value[0] for value in row] for row in cells]
    if base in (4, 8):  # value-major: a view of one array whose every column (value, coefficient) is contiguous
        assert got.base is not None and got.base.flags.c_contiguous and got.base.shape[-1] == count


@pytest.mark.parametrize("name", ["bn254", "p97"])
def test_decode_grid_falls_back_to_decode_cells_where_no_words_fit(name):
    p, _ = FIELDS[name]
    field = get_field(p)
    kernel = block_kernel(field)
    rng = random.Random(name)
    rows = np.frombuffer(b"".join(rng.randrange(p).to_bytes(field.elem_bytes, "little") for _ in range(3 * 7)),
                         dtype=np.uint8).reshape(7, 3 * field.elem_bytes)
    got = decode_grid(kernel, rows, 3, field.elem_bytes)
    expected = decode_cells(kernel, rows, field.elem_bytes)
    assert np.array_equal(got.reshape(expected.shape), expected)
