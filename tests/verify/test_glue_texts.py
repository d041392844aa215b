"""stepper.verify.glue_texts: the glue texts of instances laid out alike, read by template from their bytes.

The independent side is the expression parser read text by text (stepper.field.expr_syntax.template_of,
whose trees tests/field/test_expr_templates.py holds against the character parser) and the names written
here by hand.
"""

from __future__ import annotations

import numpy as np
import pytest

from stepper.field.expr_syntax import template_of
from stepper.verify.glue_texts import (
    BEFORE, OWN, SAME, Chained, FixedTexts, PlacedNames, TextColumn, holes_of, joined_columns, joined_texts, placed_names,
    placed_rows,
)


def test_a_texts_holes_are_its_names_and_its_template_the_parsers():
    text = b"eq(tau) * (a12*b12 - c12) + 3*final_x ^ 2"
    found = holes_of(text)
    assert found is not None
    template, spans = found
    assert [text[begin:end].decode() for begin, end in spans] == ["tau", "a12", "b12", "c12", "final_x"]
    assert template is template_of(text.decode())[0]  # type: ignore[index]


@pytest.mark.parametrize("text", [b"2a + b", b"1.5*a", b"a + .b", "a\u00e9 + b".encode(), b"a + + b"])
def test_a_text_with_a_word_a_name_of_another_length_could_cut_otherwise_has_no_holes(text):
    # a number running into a name, a decimal point, a name after a '.', a character outside ASCII, no template
    assert holes_of(text) is None


def periods_of(texts: list[str], glue: list[list[str]]) -> tuple[np.ndarray, list[tuple[int, int]],
                                                                       list[tuple[int, int]]]:
    """One row of bytes per instance: its text, then its glue names after a '|' each (all of one layout)."""
    rows = [(text + "".join("|" + name for name in names)).encode() for text, names in zip(texts, glue)]
    assert len(set(map(len, rows))) == 1
    found = holes_of(texts[0].encode())
    assert found is not None
    at, glue_spans = len(texts[0]), []
    for name in glue[0]:
        glue_spans.append((at + 1, at + 1 + len(name)))
        at += 1 + len(name)
    return np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), -1), found[1], glue_spans


def alike(count: int = 5, first: int = 11) -> tuple[list[str], list[list[str]]]:
    texts = [f"a{i - 1} + beta{i - 1}*b{i - 1} + eq(tau) * (a{i}*b{i} - c{i})" for i in range(first, first + count)]
    glue = [[f"a{i}", f"b{i}", f"c{i}", f"beta{i}"] for i in range(first, first + count)]
    return texts, glue


def test_names_are_placed_after_the_instances_own_run_the_run_before_or_the_same_everywhere():
    texts, glue = alike()
    periods, holes, glue_spans = periods_of(texts, glue)
    placed = placed_names(periods, holes, glue_spans)
    assert placed is not None
    assert [column.place for column in placed] == [(BEFORE, 0), (BEFORE, 3), (BEFORE, 1), (SAME, 0), (OWN, 0),
                                                  (OWN, 1), (OWN, 2)]
    assert list(placed[0]) == ["a10", "a11", "a12", "a13", "a14"] and placed[3][4] == "tau"
    assert placed[1][1:3] == ["beta11", "beta12"] and placed[3].count("tau") == 5 and placed[3].count("a9") == 0


@pytest.mark.parametrize("change", ["a name placed elsewhere in the middle", "a character no name holds",
                                    "a digit first", "a call word where a name stands"])
def test_a_name_that_breaks_the_pattern_in_one_instance_leaves_the_texts_to_be_read_one_by_one(change):
    texts, glue = alike(count=7, first=31)
    if change == "a name placed elsewhere in the middle":
        texts[3] = texts[3].replace("- c34", "- a34")  # reads an opening of the same length, not its own c
    elif change == "a character no name holds":
        texts[3] = texts[3].replace("- c34", "- c+4")
    elif change == "a digit first":
        texts[3] = texts[3].replace("- c34", "- 9c4")
    else:
        texts, glue = alike(count=7, first=2)
        texts[3] = texts[3].replace("- c5)", "- eq)")
    assert texts != alike(count=7, first=2 if change.startswith("a call") else 31)[0]
    periods, holes, glue_spans = periods_of(texts, glue)
    assert placed_names(periods, holes, glue_spans) is None


def test_rows_follow_from_places_and_other_parts_are_checked_against_the_names_or_looked_up():
    # a block of 5 runs, 4 glue events each (a_i, b_i, c_i, beta_i for runs 20..24); a column of 5 checks:
    # a list for the first two (names found at the place the placed part gives, or looked up), then a part
    # placed after the run before
    names = [name for i in range(20, 25) for name in (f"a{i}", f"b{i}", f"c{i}", f"beta{i}")]
    firsts = np.arange(0, 21, 4)
    looked_up: list[list[str]] = []

    def otherwise(part, runs):
        looked_up.append(list(part))
        return np.array([names.index(name) if name in names else -1 for name in part], dtype=np.int64)

    placed = PlacedNames(np.frombuffer(b"beta21beta22beta23", dtype=np.uint8).reshape(3, 6), (BEFORE, 3))
    column = joined_columns([["beta19", "beta20"], placed])
    assert isinstance(column, Chained) and len(column) == 5 and column[3] == "beta22"
    rows = placed_rows(column, np.arange(5), firsts, names, otherwise)
    assert rows is not None and rows.tolist() == [-1, 3, 7, 11, 15]
    assert looked_up == [["beta19", "beta20"]]  # beta19 is not after run -1: the list part was looked up
    own = PlacedNames(np.frombuffer(b"c20c21", dtype=np.uint8).reshape(2, 3), (OWN, 2))
    assert placed_rows(own, np.array([0, 1]), firsts, names, otherwise).tolist() == [2, 6]  # type: ignore[union-attr]
    short = np.array([0, 4, 6, 10, 14, 18])  # run 1 holds two glue events: no third after it
    assert placed_rows(own, np.array([0, 1]), short, names, otherwise) is None
    assert placed_rows(["a20", "a21"], np.array([0, 1]), firsts, names, otherwise) is None  # nothing placed


@pytest.mark.parametrize("kind", [OWN, BEFORE])
@pytest.mark.parametrize("e", [0, 2, 3, 4])
def test_rows_of_runs_holding_one_count_of_glue_each_follow_from_that_count_as_from_each_runs_first_row(kind, e):
    # every run holds 4 glue events: the e-th after run r is row 4 r + e (the step), as firsts give it; past the
    # count (e = 4) no run holds it and neither way finds a row
    names = [f"{letter}{run}" for run in range(6) for letter in "abcd"]
    firsts = np.arange(0, 25, 4)

    def otherwise(part, runs):  # type: ignore[no-untyped-def]
        return np.array([names.index(name) if name in names else -1 for name in part], dtype=np.int64)

    for runs in (np.arange(1, 6), np.array([1, 3, 4]), np.arange(6), np.arange(0)):
        sent = runs - 1 if kind == BEFORE else runs
        letter = "abcd"[min(e, 3)]
        rows = np.frombuffer("".join(f"{letter}{r}" if r >= 0 else f"{letter}9" for r in sent).encode(),
                            dtype=np.uint8).reshape(len(runs), 2)
        column = PlacedNames(rows, (kind, e))
        by_step = placed_rows(column, runs, firsts, names, otherwise, 4)
        by_firsts = placed_rows(column, runs, firsts, names, otherwise)
        assert (by_step is None) == (by_firsts is None) == (e == 4 and len(runs) > 0), (runs, e)
        if by_step is not None:
            assert by_step.tolist() == by_firsts.tolist()  # type: ignore[union-attr]


def test_columns_joined_stay_lists_when_every_part_is_one():
    assert joined_columns([["a"], ["b", "c"]]) == ["a", "b", "c"]
    placed = PlacedNames(np.frombuffer(b"xy", dtype=np.uint8).reshape(2, 1), (OWN, 0))
    chained = joined_columns([joined_columns([["a"], placed]), ["z"]])
    assert isinstance(chained, Chained) and list(chained) == ["a", "x", "y", "z"] and chained[-1] == "z"
    assert chained[1:3] == ["x", "y"] and chained.count("y") == 1
    with pytest.raises(IndexError):
        chained[4]


def test_a_slice_of_chained_columns_is_the_joined_lists_slice_and_reads_only_the_parts_it_covers():
    first = PlacedNames(np.frombuffer(b"a10a11a12a13", dtype=np.uint8).reshape(4, 3), (OWN, 0))
    last = PlacedNames(np.frombuffer(b"b20b21b22", dtype=np.uint8).reshape(3, 3), (BEFORE, 1))
    chained = joined_columns([["tau"], first, [], ["x", "y"], last])
    joined = ["tau", "a10", "a11", "a12", "a13", "x", "y", "b20", "b21", "b22"]
    assert isinstance(chained, Chained) and chained[:1] == ["tau"]
    assert first._names is None and last._names is None  # the first entry read alone: no part after it
    assert list(chained) == joined
    for begin in range(-11, 12):
        for end in (None, *range(-11, 12)):
            for step in (None, 1, 2, -1):
                assert chained[begin:end:step] == joined[begin:end:step], (begin, end, step)


def test_texts_kept_as_bytes_read_as_the_strings_they_hold_and_slice_without_being_read():
    texts = ["a1 + b1", "a2 + b2", "a3 + b3"]
    fixed = FixedTexts(np.frombuffer("".join(texts).encode(), dtype=np.uint8).reshape(3, -1))
    assert list(fixed) == texts and fixed[1] == "a2 + b2" and fixed.longest == 7
    assert isinstance(fixed[1:], FixedTexts) and list(fixed[1:]) == texts[1:]
    column = joined_texts([[None, "x*y"], fixed, [None]])
    assert isinstance(column, TextColumn) and len(column) == 6 and column.longest == 7
    assert list(column) == [None, "x*y", *texts, None] and column[2] == "a1 + b1" and column[-1] is None
    tail = column[3:]
    assert isinstance(tail, TextColumn) and list(tail) == ["a2 + b2", "a3 + b3", None]
    assert column[::2] == [None, "a1 + b1", "a3 + b3"]
    assert list(joined_texts([column, ["z"]])) == [*column, "z"]
    assert joined_texts([["a"], [None]]) == ["a", None]


def test_texts_kept_as_bytes_that_hold_a_line_break_read_one_string_per_text():
    # the parser takes a newline, a tab or a carriage return as a space (stepper.field.expr_syntax's grammar):
    # a text laid out over two lines is still one text, so reading the rows gives one string per instance
    texts = ["a1*b1\n- c1", "a2*b2\n- c2"]
    fixed = FixedTexts(np.frombuffer("".join(texts).encode(), dtype=np.uint8).reshape(2, -1))
    assert list(fixed) == texts and len(list(joined_texts([fixed, ["z"]]))) == 3
