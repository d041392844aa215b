"""The glue names of a proof held as templates answer as a plain set of every name would.

Reference: a Python set of every name recorded (the obvious implementation; that glue names are unique in a
proof is the event stream's contract, transcripts/EVENTS.md). A template is checked against the names it
spells out one by one (Counted.names), and the names read from rows of bytes against those rows decoded.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stepper.transcript.glue_names import Counted, GlueNames, counted_columns, digit_runs


def rows_of(names: list[list[str]]) -> np.ndarray:
    """Each row's names joined, as rows of bytes (every row of one length)."""
    joined = ["".join(row).encode("ascii") for row in names]
    return np.frombuffer(b"".join(joined), dtype=np.uint8).reshape(len(joined), -1)


# ----- reading columns of names as templates -----------------------------------------------


def test_columns_that_count_by_one_are_read_as_templates_whose_names_are_the_columns():
    table = [[f"a{i}", f"x1y{i}", f"v{i:03d}_7", f"beta{i}q"] for i in range(10, 40)]
    templates = counted_columns(rows_of(table), [3, 5, 6, 7])
    assert templates is not None
    for column, template in enumerate(templates):
        assert list(template.names()) == [row[column] for row in table]
    # the field is the whole run of digits around what varies: x1y10 ... x1y39 counts 10 ... 39 after x1y, not
    # 0 ... 9 after x1y1 (a prefix does not end with a digit, a suffix does not start with one)
    assert templates[1] == Counted("x1y", "", 2, 10, 40)
    assert templates[2] == Counted("v", "_7", 3, 10, 40)


@pytest.mark.parametrize("column", [
    ["a1", "a2", "a2", "a4"],  # a counter that repeats
    ["a1", "a3", "a5", "a7"],  # one that counts by two
    ["a4", "a3", "a2", "a1"],  # down
    ["a1", "a1", "a1", "a1"],  # the same name in every row
    ["ab", "ac", "ad", "ae"],  # letters vary, not digits
    ["a1", "b2", "a3", "a4"],  # a letter varies with the digits
])
def test_a_column_whose_names_do_not_count_up_by_one_is_not_a_template(column):
    assert counted_columns(rows_of([[name, f"c{i}"] for i, name in enumerate(column)]), [2, 2]) is None


def test_a_field_too_wide_for_int64_is_left_alone():
    names = [[f"a{i:019d}"] for i in range(3)]
    assert counted_columns(rows_of(names), [20]) is None
    assert counted_columns(rows_of([[f"a{i:018d}"] for i in range(3)]), [19]) == [Counted("a", "", 18, 0, 3)]


def test_digit_runs_give_each_maximal_run_with_its_prefix_suffix_and_value():
    assert list(digit_runs("x1y05z")) == [(("x", "y05z", 1), 1), (("x1y", "z", 2), 5)]
    assert list(digit_runs("beta")) == []


# ----- one name at a time ----------------------------------------------------------------


def test_names_set_one_by_one_read_back_with_their_lengths():
    names = GlueNames()
    names["tau"] = 8
    names["a0"] = None
    assert "tau" in names and names["tau"] == 8 and names.get("a0", 0) is None and names.get("b0", 0) == 0
    assert "b0" not in names and len(names) == 2 and list(names) == ["tau", "a0"]
    with pytest.raises(KeyError):
        names["b0"]


def test_a_template_answers_for_its_names_only():
    names = GlueNames()
    assert names.add_counted(Counted("a", "", 2, 10, 20))
    assert all(name in names and names[name] is None for name in (f"a{i}" for i in range(10, 20)))
    for other in ("a9", "a20", "a010", "a1", "b15", "a15x", "xa15", "a١٥", 15, None):
        assert other not in names and names.get(other, "absent") == "absent"  # type: ignore[arg-type]
    assert len(names) == 10 and sorted(names) == [f"a{i}" for i in range(10, 20)]


# ----- templates and names against a set of every name ------------------------------------

PREFIXES = ("a", "b", "x", "x1y", "v", "v0_", "q")
SUFFIXES = ("", "z", "_1", "_07", "y5")


@st.composite
def templates(draw: st.DrawFn) -> Counted:
    width = draw(st.integers(1, 3))
    low = draw(st.integers(0, 10**width - 1))
    high = draw(st.integers(low + 1, min(10**width, low + 30)))
    return Counted(draw(st.sampled_from(PREFIXES)), draw(st.sampled_from(SUFFIXES)), width, low, high)


def around(data: st.DataObject, held: list[str]) -> Counted:
    """A template through one maximal run of digits of a name held (maybe not the run its template counted
    in): it holds that name again."""
    name = data.draw(st.sampled_from(held))
    (prefix, suffix, width), value = data.draw(st.sampled_from(list(digit_runs(name))))
    low = data.draw(st.integers(max(0, value - 5), value))
    return Counted(prefix, suffix, width, low, data.draw(st.integers(value + 1, min(10**width, value + 6))))


def a_name(data: st.DataObject, held: list[str]) -> str:
    """A name held (sent twice), or one spelled by some template (maybe held, maybe not)."""
    if held and data.draw(st.booleans()):
        return data.draw(st.sampled_from(held))
    template = data.draw(templates())
    return template.name(data.draw(st.integers(0, 10**template.width - 1)))


@settings(max_examples=400, deadline=None)
@given(st.data())
def test_templates_and_names_are_refused_exactly_when_a_set_of_every_name_already_holds_one(data):
    names, every = GlueNames(), set()
    for _ in range(data.draw(st.integers(1, 20))):
        kind = data.draw(st.sampled_from(["template", "template", "around", "one", "names"]))
        if kind in ("template", "around"):
            template = around(data, sorted(every)) if kind == "around" and every else data.draw(templates())
            spelled = set(template.names())
            fresh = spelled.isdisjoint(every)
            assert names.add_counted(template) == fresh, (template, sorted(spelled & every))
            if fresh:
                every |= spelled
        elif kind == "one":
            name = a_name(data, sorted(every))
            assert (name in names) == (name in every)
            if name not in every:
                names[name] = None
                every.add(name)
        else:
            batch = [a_name(data, sorted(every)) for _ in range(data.draw(st.integers(0, 5)))]
            fresh = len(set(batch)) == len(batch) and every.isdisjoint(batch)
            added = names.add_names(batch)
            assert added == fresh, (batch, every & set(batch))
            if not added:
                return  # some may be recorded: the caller gives up on the whole proof
            every.update(batch)
        for _ in range(5):
            probe = a_name(data, sorted(every))
            assert (probe in names) == (probe in every), probe
    assert len(names) == len(every) and set(names) == every
