"""Expressions printed and parsed again give the same tree: for generated trees of constants,
tables, negation, sums, differences, products and powers, printed fully parenthesised and also with
the fewest parentheses the usual precedence needs (powers over signs over products over sums, left
to right; common practice, no source), the parser returns the tree it was printed from."""

from __future__ import annotations

from hypothesis import given, settings, strategies as st

from stepper.field.expr import Add, Const, Mul, Neg, Pow, Sub, Table, parse

NAMES = ("ledger", "scans", "deck", "slot_2")
leaves = st.one_of(st.builds(Const, st.integers(0, 2**70)), st.builds(Table, st.sampled_from(NAMES)))
trees = st.recursive(
    leaves,
    lambda inner: st.one_of(
        st.builds(Neg, inner), st.builds(Add, inner, inner), st.builds(Sub, inner, inner),
        st.builds(Mul, inner, inner), st.builds(Pow, inner, st.integers(0, 9))),
    max_leaves=12)


def full(node) -> str:
    if isinstance(node, Const):
        return str(node.value)
    if isinstance(node, Table):
        return node.name
    if isinstance(node, Neg):
        return f"(-{full(node.operand)})"
    if isinstance(node, Pow):
        return f"({full(node.base)})^{node.exponent}"
    op = {Add: "+", Sub: "-", Mul: "*"}[type(node)]
    return f"({full(node.left)} {op} {full(node.right)})"


RANK = {Add: 1, Sub: 1, Mul: 2, Neg: 3, Pow: 4, Const: 5, Table: 5}


def tight(node) -> str:
    """Parentheses only where precedence or left-to-right grouping needs them."""
    def wrap(child, need: int) -> str:
        text = tight(child)
        return f"({text})" if RANK[type(child)] < need else text

    if isinstance(node, (Const, Table)):
        return full(node)
    if isinstance(node, Neg):
        return "-" + wrap(node.operand, RANK[Neg])
    if isinstance(node, Pow):
        return wrap(node.base, RANK[Pow] + 1) + f"^{node.exponent}"
    op = {Add: "+", Sub: "-", Mul: "*"}[type(node)]
    rank = RANK[type(node)]
    return f"{wrap(node.left, rank)} {op} {wrap(node.right, rank + 1)}"


@settings(max_examples=300, deadline=None)
@given(tree=trees)
def test_printing_and_parsing_gives_back_the_tree(tree):
    assert parse(full(tree)).root == tree
    assert parse(tight(tree)).root == tree
