"""Large integer arrays of a JSON witness read by numpy (stepper.diagnose.witness_json).

Reference: the standard library's ``json.loads`` of the same text, an independent JSON decoder:
every array taken out must be exactly what it reads, and every text it reads otherwise (or
refuses) must be left to it whole.
"""

from __future__ import annotations

import json
import mmap
import random

import numpy as np
import pytest

from stepper.diagnose import witness_json
from stepper.diagnose.witness import load_witness
from stepper.diagnose.witness_json import MIN_BYTES, put_back, split_tables
from stepper.errors import WitnessError


@pytest.fixture(autouse=True, params=[witness_json.BLOCK_BYTES, 2048], ids=["block-1MiB", "block-2KiB"])
def block_bytes(request, monkeypatch):
    """Every test once with the usual blocks (one block per test table) and with small ones, so
    that blocks end at every kind of place: inside a row, after one, in white space."""
    monkeypatch.setattr(witness_json, "BLOCK_BYTES", request.param)
    return request.param

P = 2013265921  # BabyBear, 15 * 2^27 + 1 (common practice, no source)


def _rows(count: int, k: int, seed: int = 1) -> list:
    rng = random.Random(seed)
    if k == 1:
        return [rng.randrange(P) for _ in range(count)]
    return [[rng.randrange(P) for _ in range(k)] for _ in range(count)]


def _witness(table_a: object, table_b: object) -> dict:
    return {"instances": [{"name": "deck[2]", "tables": {"a": table_a, "b": table_b}, "combine": "a*b"}]}


def _decoded(data: bytes) -> object:
    text, _, arrays = split_tables(data)
    return put_back(json.loads(text), arrays), arrays


def _same(ours: object, reference: object) -> bool:
    """Equal as values, an array standing for the list of lists json.loads makes."""
    if isinstance(ours, np.ndarray):
        return ours.dtype in (np.uint32, np.uint64) and ours.tolist() == reference
    if isinstance(ours, dict):
        return isinstance(reference, dict) and ours.keys() == reference.keys() and all(
            _same(ours[key], reference[key]) for key in ours)
    if isinstance(ours, list):
        return isinstance(reference, list) and len(ours) == len(reference) and all(
            _same(a, b) for a, b in zip(ours, reference))
    return ours == reference and type(ours) is type(reference)


@pytest.mark.parametrize("k", [1, 4])
@pytest.mark.parametrize("dumps", [
    lambda m: json.dumps(m, separators=(",", ":")),  # compact, as stepper prove writes it
    json.dumps,  # ", " and ": "
    lambda m: json.dumps(m, indent=1),  # a line per entry
])
def test_large_arrays_are_taken_out_and_read_as_json_loads_reads_them(k: int, dumps) -> None:
    witness = _witness(_rows(20_000, k), _rows(20_000, k, seed=2))
    data = dumps(witness).encode()
    decoded, arrays = _decoded(data)
    assert len(arrays) == 2 and arrays[0].shape == ((20_000,) if k == 1 else (20_000, k))
    assert _same(decoded, json.loads(data))  # reference: json.loads


def test_small_arrays_and_arrays_inside_strings_stay_in_the_text() -> None:
    big = json.dumps(_rows(20_000, 1), separators=(",", ":"))
    assert len(big) > MIN_BYTES
    witness = {"instances": [{"name": big, "tables": {"a": [1, 2, 3]}, "combine": "a"}]}
    data = json.dumps(witness).encode()
    text, nesting, arrays = split_tables(data)
    assert arrays == [] and text == data and nesting == data


@pytest.mark.parametrize("mutation", [
    ("[1,", "[01,"),  # a leading zero: json.loads refuses
    ("[1,", "[-1,"),  # a sign
    ("[1,", "[1.5,"),  # a fraction
    ("[1,", "[1e3,"),  # an exponent
    ("[1,", "[12345678901234567890,"),  # 20 digits: past an unsigned 64-bit word
    ("[1,", "[1 2,"),  # white space alone between two numbers
    ("[1,", "[1,,"),  # an empty item
    ("[1,", "[,1,"),
    ("[1,", "[[1],"),  # a row beside integers
    ("[1,", "[1,[],"),
    ("[1,", '[1,"2",'),  # text among the integers
    ("[1,", "[1,true,"),
    ("]]", "],]]"),  # a trailing comma
])
def test_a_table_json_loads_reads_otherwise_or_refuses_is_left_to_it(mutation: tuple[str, str]) -> None:
    table = [1] + _rows(20_000, 1)
    good = json.dumps({"t": [table]}, separators=(",", ":"))
    old, new = mutation
    assert old in good
    data = good.replace(old, new, 1).encode()
    text, _, arrays = split_tables(data)
    assert arrays == [] and text == data


@pytest.mark.parametrize("mutation", [("],[", "],[7,"), ("],[", "][")])
def test_ragged_or_unseparated_rows_are_left_to_json_loads(mutation: tuple[str, str]) -> None:
    good = json.dumps({"t": _rows(20_000, 4)}, separators=(",", ":"))
    data = good.replace(*mutation, 1).encode()
    text, _, arrays = split_tables(data)
    assert arrays == [] and text == data


def test_a_text_with_a_backslash_is_left_to_json_loads_whole() -> None:
    data = json.dumps({"name": "a\\b", "t": _rows(20_000, 1)}).encode()
    assert split_tables(data) == (data, data, [])


def test_the_nesting_text_keeps_each_array_s_depth() -> None:
    data = json.dumps({"x": [{"t": _rows(20_000, 4)}]}).encode()
    _, nesting, arrays = split_tables(data)
    assert len(arrays) == 1 and json.loads(nesting) == {"x": [{"t": [[0]]}]}


def test_a_json_witness_file_loads_the_same_tables_either_way(tmp_path) -> None:
    path = tmp_path / "w.json"
    witness = _witness(_rows(20_000, 4), _rows(20_000, 4, seed=3))
    path.write_text(json.dumps(witness, separators=(",", ":")))
    tables = load_witness(path).instances[0].tables
    assert all(isinstance(t, np.ndarray) for t in tables.values())
    assert {name: t.tolist() for name, t in tables.items()} == witness["instances"][0]["tables"]  # reference: the input


def test_a_malformed_witness_is_named_at_its_line_in_the_file_itself(tmp_path) -> None:
    path = tmp_path / "w.json"
    text = json.dumps(_witness(_rows(20_000, 1), _rows(20_000, 1, seed=4)), indent=1)
    lines = text.splitlines()
    lines[-2] += ","  # a trailing comma after the last item of the instance, near the end
    path.write_text("\n".join(lines))
    with pytest.raises(WitnessError) as caught:
        load_witness(path)
    with pytest.raises(json.JSONDecodeError) as reference:  # reference: json.loads of the file's own text
        json.loads(path.read_text())
    assert reference.value.lineno > 40_000  # past the tables, which the placeholders shorten to a line each
    assert f"line {reference.value.lineno}, byte {reference.value.pos}:" in str(caught.value)


def test_arrays_of_32_bit_integers_are_kept_in_32_bits_and_wider_ones_in_64() -> None:
    narrow = _rows(20_000, 4)
    narrow[-1][-1] = 2**32 - 1
    wide = _rows(20_000, 4, seed=5)
    wide[-1][-1] = 10**19 - 1  # the largest of 19 digits (past 2^63), in the last block
    decoded, arrays = _decoded(json.dumps(_witness(narrow, wide)).encode())
    assert [a.dtype for a in arrays] == [np.uint32, np.uint64]
    assert _same(decoded, _witness(narrow, wide))  # reference: the input itself


def test_a_memory_mapped_text_gives_what_its_bytes_give(tmp_path) -> None:
    path = tmp_path / "w.json"
    path.write_text(json.dumps(_witness(_rows(20_000, 4), _rows(20_000, 1)), indent=1))
    with path.open("rb") as handle:
        mapped = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
        from_map = split_tables(mapped)
    from_bytes = split_tables(path.read_bytes())
    assert from_map[:2] == from_bytes[:2]
    assert [a.tolist() for a in from_map[2]] == [a.tolist() for a in from_bytes[2]]
    assert len(from_map[2]) == 2
