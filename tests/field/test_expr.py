"""The combine-expression parser: grammar, degree, names, vectorised evaluation, errors.

Evaluation is checked against sympy (an independent computer-algebra library)
evaluating the same text, and its polynomial arithmetic over GF(p) for extension elements.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.errors import ExpressionError, WitnessError
from stepper.field.expr import Add, Const, Mul, Neg, Sub, Table, parse
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field

BABYBEAR = NAMED_PRIMES["babybear"]


def test_precedence_binds_products_tighter_than_sums_and_minus_is_left_associative() -> None:
    tree = parse("a - b - c*d + 2").root
    assert tree == Add(Sub(Sub(Table("a"), Table("b")), Mul(Table("c"), Table("d"))), Const(2))


def test_unary_minus_and_parentheses_build_the_expected_tree() -> None:
    assert parse("-(a + b) * c").root == Mul(Neg(Add(Table("a"), Table("b"))), Table("c"))


def test_degree_is_total_degree_in_the_tables() -> None:
    assert parse("a*b*c + 3*a - b*b").degree() == 3
    assert parse("7").degree() == 0
    assert parse("(a + b) * (c - d) * e").degree() == 3
    assert parse("-a").degree() == 1


def test_names_are_listed_once_in_order_of_first_use() -> None:
    assert parse("eq * (z_1 + z_1 * w.hi) - eq").names() == ("eq", "z_1", "w.hi")


@pytest.mark.parametrize(
    ("text", "column", "fragment"),
    [
        ("a +", 3, "found the end"),
        ("a $ b", 2, "'$'"),
        ("(a + b", 6, "expected ')'"),
        ("a ** b", 3, "'**' is not supported"),
        ("3x", 1, "after the number 3"),
        ("a / b", 2, "'/'"),
        ("", 0, "found the end"),
        ("a b", 2, "'b'"),
        ("f(x)", 1, "'('"),
    ],
)
def test_parse_errors_point_at_the_offending_character(text: str, column: int, fragment: str) -> None:
    with pytest.raises(ExpressionError) as info:
        parse(text)
    err = info.value
    assert err.column == column
    assert fragment in err.message
    assert f"column {column + 1}" in err.message
    assert err.pointer().splitlines()[1] == " " * column + "^"
    assert isinstance(err, WitnessError)  # a bad combine is a bad witness: exit code 2


def test_absurdly_deep_nesting_is_refused_with_a_message_not_a_recursion_error() -> None:
    with pytest.raises(ExpressionError, match="nested"):
        parse("(" * 500 + "a" + ")" * 500)


def test_overlong_text_is_refused() -> None:
    with pytest.raises(ExpressionError, match="at most"):
        parse("a+" * 3000 + "a")


_atoms = st.sampled_from(["a", "b", "c", "0", "1", "2", "17"])


@st.composite
def _texts(draw: st.DrawFn, depth: int = 0) -> str:
    if depth >= 3 or draw(st.booleans()):
        return draw(_atoms)
    op = draw(st.sampled_from(["+", "-", "*", "neg", "paren"]))
    if op == "neg":
        return "-" + draw(_texts(depth + 1))
    if op == "paren":
        return "(" + draw(_texts(depth + 1)) + ")"
    return draw(_texts(depth + 1)) + f" {op} " + draw(_texts(depth + 1))


@settings(max_examples=60, deadline=None)
@given(text=_texts(), seed=st.integers(0, 2**32 - 1))
def test_vector_evaluation_matches_sympy_reduced_mod_p(text: str, seed: int) -> None:
    # sympy parses the same ordinary arithmetic independently; we reduce its integer result mod p.
    field = get_field(BABYBEAR)
    rng = np.random.default_rng(seed)
    env = {name: field.vrandom(5, rng) for name in "abc"}
    got = field.vlist(parse(text).evaluate(field, env))
    sym = sympy.sympify(text)
    a, b, c = sympy.symbols("a b c")
    for i in range(5):
        want = int(sym.subs({a: int(env["a"][i]), b: int(env["b"][i]), c: int(env["c"][i])})) % BABYBEAR
        assert got[i] == want


def test_base_and_extension_tables_mix_like_embedded_extension_elements() -> None:
    # sympy's polynomial arithmetic over GF(p), reduced modulo X^4 - 11, is the independent reference
    ext = get_field(BABYBEAR, DEFAULT_IRREDUCIBLES[("babybear", 4)])
    x = sympy.Symbol("X")
    modulus = sympy.Poly(x**4 - 11, x, modulus=BABYBEAR)
    rng = np.random.default_rng(5)
    a = ext.base.vrandom(4, rng)  # base-field table
    b = ext.vrandom(4, rng)  # extension table
    got = ext.vlist(parse("3*a*b - a + b*b").evaluate(ext, {"a": a, "b": b}))

    def poly(coeffs: list[int]) -> sympy.Poly:
        return sympy.Poly(sum(int(c) * x**i for i, c in enumerate(coeffs)), x, modulus=BABYBEAR)

    for i in range(4):
        pa, pb = poly([int(a[i])]), poly([int(c) for c in b[i]])
        want = ((3 * pa * pb - pa + pb * pb).rem(modulus)).all_coeffs()[::-1]
        want = [int(c) % BABYBEAR for c in want] + [0] * (4 - len(want))
        assert list(got[i]) == want


def test_a_constant_expression_broadcasts_to_the_table_length() -> None:
    field = get_field(101)
    out = parse("2 * 3 - 10").evaluate(field, {})
    assert field.vlist(out) == [97]


def test_scalar_evaluation_agrees_with_vector_evaluation() -> None:
    field = get_field(NAMED_PRIMES["goldilocks"])
    rng = np.random.default_rng(9)
    env = {n: field.vrandom(3, rng) for n in ("x", "y")}
    expr = parse("x*x*y - 5*(y + 1)")
    vec = field.vlist(expr.evaluate(field, env))
    for i in range(3):
        assert expr.evaluate_scalar(field, {n: int(v[i]) for n, v in env.items()}) == vec[i]
