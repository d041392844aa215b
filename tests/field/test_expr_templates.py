"""Templates of glue expressions read many at once (expr_syntax.templates_of): the same template and
names, text by text, as expr_syntax.template_of, and each filled template is the tree the character
parser builds (stepper.field.expr.parse, which reads the grammar without templates)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings, strategies as st

from stepper.errors import ExpressionError
from stepper.field.expr import parse
from stepper.field.expr_syntax import MAX_EXPR_LENGTH, fill, template_of, templates_of

SHAPES = ("a{i} + beta{i}*b{i}", "eq(tau) * (a{i}*b{i} - c{i})", "eq(w{i}, u) * x{i}[2] + 3*y{i}^2",
          "-(c{i} - eq(w{i})) * 7", "eq{i} + point.{i} * final_{i}", "x{i}[0] + 12*y{i}", "a{i}*a{i} - _{i}")
NAMES = st.sampled_from(["v", "beta", "eqx", "eq.5", "point.x", "final2", "_q", "T"])


def each_alone(texts: list[str]) -> list[tuple[object, list[str]] | None]:
    return [template_of(text) for text in texts]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(SHAPES), st.integers(0, 40), NAMES), min_size=1, max_size=30))
def test_many_texts_give_the_templates_and_names_each_gives_alone(picks):
    texts = [shape.format(i=f"{name}{i}" if "{i}" in shape else i) for shape, i, name in picks]
    groups = templates_of(texts)
    alone = each_alone(texts)
    assert groups is not None and all(found is not None for found in alone)
    seen = sorted(i for _, _, positions in groups for i in positions)
    assert seen == list(range(len(texts)))
    for template, columns, positions in groups:
        for row, i in enumerate(positions):
            names = [column[row] for column in columns]
            assert (template, names) == alone[i]
            assert fill(template.root, names) == parse(texts[i]).root  # type: ignore[union-attr]



@pytest.mark.parametrize("texts", [
    ["x1 * y", "x2 *  y"],  # spacing differs: two shapes
    ["x1*b", "x2*9b"],  # a word starting with a digit where the first text has a name
    ["x1 * b", "eq * b"],  # a call word where the first text has a name
    ["x1*y.u", "x2*y.\u00e9"],  # a character outside ASCII
    ["a1 + 2*b1", "a2 + 3*b2"],  # constants differ: two templates
    ["eq(t) * a1", "eq(t) * eq"],
    ["2a + b1", "2a + b2"],  # a number and a name run together
    ["a1+b1", "a2+b2", "a3 +b3"],
])
def test_texts_alike_but_for_spacing_constants_or_odd_words_give_what_each_gives_alone(texts):
    groups = templates_of(texts)
    alone = each_alone(texts)
    if groups is None:
        assert None in alone
        return
    assert sorted(i for _, _, positions in groups for i in positions) == list(range(len(texts)))
    for template, columns, positions in groups:
        for row, i in enumerate(positions):
            assert (template, [column[row] for column in columns]) == alone[i]

def test_a_text_the_template_path_cannot_read_makes_the_whole_lot_none():
    assert templates_of(["a + b", "a + + b"]) is None
    assert templates_of(["a +", "b +"]) is None


def test_texts_holding_a_newline_are_read_one_by_one():
    groups = templates_of(["a0 +\nb0", "a1 + b1"])
    assert groups is not None
    assert sorted(i for _, _, positions in groups for i in positions) == [0, 1]
    assert {tuple(column[0] for column in columns) for _, columns, _ in groups} == {("a0", "b0"), ("a1", "b1")}


def test_a_text_longer_than_the_character_parser_takes_has_no_template_alone_or_among_others():
    # the parser refuses a text past MAX_EXPR_LENGTH characters; the template path must not read it either,
    # alone or among texts of its shape, where only the first goes through template_of (the others have
    # their names compared: longer names make a longer text of the same shape)
    pad = " " * (MAX_EXPR_LENGTH - len("a1 + beta1*b1"))
    first, longer = "a1 + beta1*b1" + pad, "a12 + beta12*b12" + pad
    assert len(first) == MAX_EXPR_LENGTH < len(longer)
    found = template_of(first)
    assert found is not None and fill(found[0].root, found[1]) == parse(first).root
    assert templates_of([first, "a3 + beta3*b3" + pad]) is not None
    with pytest.raises(ExpressionError, match=f"at most {MAX_EXPR_LENGTH} characters"):
        parse(longer)
    assert template_of(longer) is None
    assert templates_of([longer]) is None
    assert templates_of([first, longer]) is None
