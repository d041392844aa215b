"""The glue after runs, read as columns (stepper.verify.glue_columns): the same columns whether the
whole-file pass kept the events as unpacked payloads or as blobs of bytes (GlueRun), and the blobs'
name heads checked. The independent side is msgpack itself, which unpacks the same bytes."""

from __future__ import annotations

import random
import struct

import msgpack
import pytest
from hypothesis import given, settings, strategies as st

from stepper.field.field import get_field
from stepper.verify.glue_columns import GlueColumns
from stepper.verify.packed_runs import GiveUp

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
FIELD = get_field(GOLDILOCKS)


def glue_tails(seed: int, runs: int) -> list[list[dict[str, object]]]:
    rng = random.Random(seed)
    kinds = ["opening", "opening", "value", "squeeze"]
    return [[{"type": rng.choice(kinds), "name": f"pier{i}_{j}", "value": struct.pack("<Q", rng.randrange(GOLDILOCKS))}
             for j in range(rng.randrange(4))] for i in range(runs)]


def packed(payloads: list[dict[str, object]]) -> bytes:
    return b"".join(msgpack.packb(payload, use_bin_type=True) for payload in payloads)


def columns(glue: GlueColumns) -> tuple[object, ...]:
    return glue.kinds, glue.names, glue.tables, glue.values, glue.bounds, glue.counts, glue.listed, glue.data


def unpacked(tails: list[list[dict[str, object]]]) -> list[list[dict[str, object]]]:
    return [[msgpack.unpackb(msgpack.packb(payload, use_bin_type=True), raw=False) for payload in tail]
            for tail in tails]


@pytest.mark.parametrize("seed", range(6))
def test_blobs_after_runs_give_the_columns_of_the_payloads_msgpack_unpacks(seed):
    tails = glue_tails(seed, 12)
    as_payloads = GlueColumns(FIELD, unpacked(tails), {})
    as_blobs = GlueColumns(FIELD, [[packed(tail)] if tail else [] for tail in tails], {})
    assert columns(as_blobs) == columns(as_payloads)
    assert as_blobs.from_bytes == sum(map(len, tails)) and as_payloads.from_bytes == 0


def test_a_blob_followed_by_payloads_gives_the_same_columns_tables_included():
    # the blob stops at the first event packed otherwise (here, one naming its table); the rest is unpacked
    tails = glue_tails(5, 6)
    tails[2][:0] = [{"type": "value", "name": "draft", "value": struct.pack("<Q", 4)}]
    tails[2].append({"type": "opening", "name": "gangway", "value": struct.pack("<Q", 9), "table": "ramp"})
    mixed = [[packed(tail[:-1]), *unpacked([tail[-1:]])[0]] if tail else [] for tail in tails]
    glue = GlueColumns(FIELD, mixed, {})
    assert columns(glue) == columns(GlueColumns(FIELD, unpacked(tails), {}))
    assert glue.tables[glue.names.index("gangway")] == "ramp" and glue.from_bytes == sum(len(tail) - 1 for tail in tails if tail)


def test_a_name_head_that_is_not_the_names_length_gives_up():
    blob = bytearray(packed([{"type": "value", "name": "tide", "value": struct.pack("<Q", 1)}]))
    at = blob.index(b"tide") - 1
    blob[at] = 0xA0 + 3  # msgpack would read the name "tid" and go astray
    with pytest.raises(GiveUp):
        GlueColumns(FIELD, [[bytes(blob)]], {})
    with pytest.raises(GiveUp):
        GlueColumns(FIELD, [[bytes(blob), {"type": "value", "name": "ebb", "value": struct.pack("<Q", 2)}]], {})


def test_a_name_sent_before_the_flush_gives_up_when_it_comes_again_in_a_blob():
    blob = packed([{"type": "value", "name": "tide", "value": struct.pack("<Q", 1)}])
    with pytest.raises(GiveUp):
        GlueColumns(FIELD, [[blob]], {"tide": None})


def test_name_rows_answer_as_a_dict_of_the_names_rows_before_and_after_it_builds_one(monkeypatch):
    # NameRows searches the names' hashes for its first look-ups and builds a dict after: every answer is the
    # dict's (a hash shared by two names, forced here, is told apart by the names themselves)
    from stepper.verify.glue_columns import NameRows

    monkeypatch.setattr(NameRows, "SEARCHES", 16)
    names = [f"pier{i}" for i in range(40)]
    rows, index = NameRows(names), dict(zip(names, range(len(names))))
    asked = ["pier7", "tide", "pier0", "pier39", "", "pier7", *names[::3], "pier", "pier40", *names[::-2]]
    assert len(asked) > 2 * NameRows.SEARCHES
    for name in asked:
        assert rows.get(name, -1) == index.get(name, -1) and (name in rows) == (name in index)
        if name in index:
            assert rows[name] == index[name]
        else:
            with pytest.raises(KeyError):
                rows[name]
    assert list(rows) == names and len(rows) == len(names) and rows._index == index
    shared = NameRows(names)
    shared.get("pier1")
    shared._hashes[:12] = hash("pier9")  # the first twelve names' hashes made the same: told apart by the names
    assert shared.get("pier9") == 9 and "pier12" in shared and shared.get("tide") is None


@pytest.mark.parametrize("searches", [0, 16])
def test_name_rows_of_names_held_as_templates_answer_as_a_dict_of_the_names_rows(monkeypatch, searches):
    # two stretches read as templates (rows 4-27: six runs of a<i>, b<i>, berth<i>, beta<i>; rows 31-36: three runs
    # of q<i>.x, r<i>) among names read one by one; counters past a template's range, other widths and near
    # misses must not find a row: every answer is a dict's of the list
    from stepper.transcript.glue_names import Counted
    from stepper.verify.glue_columns import NameRows

    monkeypatch.setattr(NameRows, "SEARCHES", searches)
    first = [name for i in range(10, 16) for name in (f"a{i}", f"b{i}", f"berth{i}", f"beta{i}")]
    second = [name for i in range(7, 10) for name in (f"q{i}.x", f"r{i}")]
    names = ["tau", "a9", "b9", "berth9", *first, "a16", "x1", "a010", *second, "q10.x", "r10"]
    counted = [(4, 4, place, Counted(prefix, "", 2, 10, 16)) for place, prefix in enumerate(("a", "b", "berth", "beta"))]
    counted += [(31, 2, 0, Counted("q", ".x", 1, 7, 10)), (31, 2, 1, Counted("r", "", 1, 7, 10))]
    rows, index = NameRows(names, counted), dict(zip(names, range(len(names))))
    for name in [*names, "a17", "a1", "a0010", "q6.x", "q11.x", "r6", "beta16", "tide", "", "a10x"]:
        assert rows.get(name, -1) == index.get(name, -1) and (name in rows) == (name in index), name
    assert list(rows) == names and len(rows) == len(names)


@pytest.mark.parametrize("field_name", ["goldilocks", "babybear"])
def test_values_of_blobs_in_a_field_below_2_64_read_back_as_the_ints_msgpack_unpacks(field_name):
    # the elements stay one uint64 array (WordColumn); every read gives a Python int, a slice a column, and an
    # element at p (not canonical, transcripts/EVENTS.md) gives up as the payloads' decoding does
    from stepper.field.field import NAMED_PRIMES, get_field
    from stepper.verify.glue_columns import WordColumn

    field = get_field(NAMED_PRIMES[field_name])
    width = field.elem_bytes
    rng = random.Random(11)
    tails = [[{"type": "value", "name": f"dock{i}_{j}", "value": rng.randrange(field.p).to_bytes(width, "little")}
              for j in range(3)] for i in range(5)]
    glue = GlueColumns(field, [[packed(tail)] for tail in tails], {})
    expected = [int.from_bytes(payload["value"], "little") for tail in tails for payload in tail]  # type: ignore[arg-type]
    assert isinstance(glue.values, WordColumn)
    assert [glue.values[i] for i in range(len(expected))] == expected == list(glue.values)
    assert all(type(value) is int for value in [*glue.values, glue.values[4]])
    assert list(glue.values[5:9]) == expected[5:9] and len(glue.values[5:]) == len(expected) - 5
    tails[3][1]["value"] = field.p.to_bytes(width, "little")
    with pytest.raises(GiveUp):
        GlueColumns(field, [[packed(tail)] for tail in tails], {})


NAME_TEXT = st.from_regex(r"[A-Za-z_][A-Za-z0-9_.]{0,6}", fullmatch=True)


@settings(max_examples=200, deadline=None)
@given(names=st.lists(st.sampled_from(["a1", "a10", "a", "b1", "a1.x", "_1", "beta10"]) | NAME_TEXT, max_size=12),
       probes=st.lists(st.sampled_from(["a1", "a10", "a", "1", "", "a1\nb1", "é", "b1"]) | NAME_TEXT, max_size=6),
       cut=st.tuples(st.integers(-14, 14), st.integers(-14, 14), st.sampled_from([None, 1, 2, -1])))
def test_a_name_column_answers_as_the_list_of_its_names(names, probes, cut):
    # the reference is the plain list of strings the column stands for (names may repeat here: a column does
    # not judge them; index gives the first)
    import numpy as np

    from stepper.verify.glue_columns import NameColumn

    column = NameColumn(np.array([len(name) for name in names], dtype=np.int64),
                        "".join(name + "\n" for name in names).encode())
    sliced, expected = column[slice(*cut)], names[slice(*cut)]
    for got, want in ((column, names), (sliced, expected)):
        assert len(got) == len(want) and list(got) == want and got == want
        assert [got[i] for i in range(-len(want), len(want))] == [want[i] for i in range(-len(want), len(want))]
        for probe in [*probes, *want[:3]]:
            assert (probe in got) == (probe in want)
            for start, stop in ((0, None), (1, None), (1, len(want) - 1), (2, 3)):
                try:
                    index = want.index(probe, start, len(want) if stop is None else stop)
                except ValueError:
                    index = None
                bounds = (start,) if stop is None else (start, stop)
                if index is None:
                    with pytest.raises(ValueError):
                        got.index(probe, *bounds)
                else:
                    assert got.index(probe, *bounds) == index
    with pytest.raises(IndexError):
        column[len(names)]
