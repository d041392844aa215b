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


# ----- powers and the glue syntax --------------------------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(e=st.integers(0, 300), seed=st.integers(0, 2**32 - 1))
def test_integer_powers_match_sympy_vectorised_and_at_a_point(e: int, seed: int) -> None:
    # sympy evaluates the same text independently (reduced mod p afterwards)
    field = get_field(BABYBEAR)
    rng = np.random.default_rng(seed)
    env = {"a": field.vrandom(4, rng), "b": field.vrandom(4, rng)}
    text = f"3*a^{e} - (a + b)^2"
    got = field.vlist(parse(text).evaluate(field, env))
    a, b = sympy.symbols("a b")
    sym = sympy.sympify(text.replace("^", "**"))
    for i in range(4):
        want = int(sym.subs({a: int(env["a"][i]), b: int(env["b"][i])})) % BABYBEAR
        assert got[i] == want
    scalar = parse(text).evaluate_scalar(field, {"a": int(env["a"][0]), "b": int(env["b"][0])})
    assert scalar == got[0]
    assert parse(text).degree() == max(e, 2)


def test_glue_syntax_evaluates_lists_points_finals_and_eq_like_the_definition() -> None:
    from stepper.field.expr import GlueScope

    p = 101
    field = get_field(p)
    tau, r, other = [3, 7], [10, 20], [5, 6]

    def eq(a: list[int], b: list[int]) -> int:  # prod (a_i b_i + (1 - a_i)(1 - b_i)), common practice, no source
        out = 1
        for x, y in zip(a, b):
            out = out * (x * y + (1 - x) * (1 - y)) % p
        return out

    scope = GlueScope({"tau": tau, "v": 9}, {"layer.0": tuple(other)}, {"layer.0": 44}, tuple(r))
    assert parse("eq(tau)").evaluate_glue(field, scope) == eq(tau, r)
    assert parse("eq(tau, point(layer.0))").evaluate_glue(field, scope) == eq(tau, other)
    assert parse("tau[1] * v + final(layer.0)").evaluate_glue(field, scope) == (7 * 9 + 44) % p
    assert parse("v^3 - eq(point(layer.0), tau)^2").evaluate_glue(field, scope) == (9**3 - eq(other, tau) ** 2) % p
    refs = parse("eq(tau) * v + final(layer.0) + eq(point(layer.0), w) + u[2]").references()
    assert (refs.scalars, refs.lists, refs.points, refs.finals, refs.own_point) == (
        ("v",), ("tau", "w", "u"), ("layer.0",), ("layer.0",), True)


@pytest.mark.parametrize(("text", "fragment"), [
    ("tau[5]", "index below 2"),
    ("v[0]", "to be a list"),
    ("tau * 2", "one element, found a list"),
    ("eq(v)", "to be a list (a point)"),
    ("eq(tau, short)", "one length"),
    ("final(nowhere)", "instance named 'nowhere'"),
])
def test_glue_values_of_the_wrong_kind_are_named(text: str, fragment: str) -> None:
    from stepper.field.expr import GlueScope

    field = get_field(101)
    scope = GlueScope({"tau": [1, 2], "v": 3, "short": [1]}, {}, {}, (4, 5))
    with pytest.raises(ExpressionError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        parse(text).evaluate_glue(field, scope)


@pytest.mark.parametrize(("text", "column", "fragment"), [
    ("a ^ b", 4, "integer exponent"),
    ("a^2^3", 3, "one '^'"),
    ("f(x)", 1, "only calls"),
    ("eq(3)", 3, "a point"),
    ("point(x)", 0, "only inside eq"),
    ("eq(a, point(b)", 14, "')'"),
    ("v[x]", 2, "component index"),
])
def test_glue_syntax_errors_point_at_the_column(text: str, column: int, fragment: str) -> None:
    with pytest.raises(ExpressionError) as info:
        parse(text)
    assert info.value.column == column and fragment in info.value.message


def test_long_chains_and_deep_nesting_never_exhaust_the_stack() -> None:
    field = get_field(101)
    long_sum = parse("+".join(["a"] * 2000))  # within MAX_EXPR_LENGTH: a balanced tree, not 2000 deep
    assert long_sum.evaluate_scalar(field, {"a": 1}) == 2000 % 101
    long_product = parse("*".join(["a"] * 2000))
    assert long_product.evaluate_scalar(field, {"a": 2}) == pow(2, 2000, 101)
    assert field.vlist(long_product.evaluate(field, {"a": field.vec([2, 3])})) == [pow(2, 2000, 101),
                                                                                   pow(3, 2000, 101)]
    mixed = parse(" - ".join(["a"] * 30))  # a - a - ... : signs survive the balancing
    assert mixed.evaluate_scalar(field, {"a": 1}) == (1 - 29) % 101
    with pytest.raises(ExpressionError, match="nested"):
        parse("(" * 100 + "a" + ")" * 100)
    with pytest.raises(ExpressionError, match="at most"):
        parse("a+" * 3000 + "a")


_glue_atoms = st.sampled_from(["a", "b.c", "_t1", "7", "0", "tau[0]", "eq(w)", "eq(w, point(i.0))",
                               "final(i.0)", "a^3", "(a)", "x ^ 2"])


@st.composite
def _glue_texts(draw: st.DrawFn, depth: int = 0) -> str:
    if depth >= 3 or draw(st.booleans()):
        return draw(_glue_atoms)
    op = draw(st.sampled_from(["+", "-", "*", "neg", "paren", "junk"]))
    if op == "neg":
        return "-" + draw(_glue_texts(depth + 1))
    if op == "paren":
        return "(" + draw(_glue_texts(depth + 1)) + ")"
    if op == "junk":  # a malformed piece: both parsers must refuse it (the slow one names the column)
        return draw(_glue_texts(depth + 1)) + draw(st.sampled_from([" +", "(", ")", "^", "[1]", "/2", " eq", "2a"]))
    return draw(_glue_texts(depth + 1)) + f" {op} " + draw(_glue_texts(depth + 1))


@settings(max_examples=300, deadline=None)
@given(text=_glue_texts())
def test_the_token_fast_path_and_the_character_parser_agree(text: str) -> None:
    # the character parser is the reference: same tree, or the fast path steps aside (None) for it to refuse
    from stepper.field.expr_syntax import _fast_parse, _Parser

    try:
        slow = _Parser(text, "test").expr(0)
        parser_ok = True
    except ExpressionError:
        parser_ok = False
    fast = _fast_parse(text)
    if parser_ok:
        try:
            reference = parse(text).root
        except ExpressionError:
            reference = None
        assert fast is None or fast == reference
        if fast is not None:  # the references filled from the template's are the tree's own, walked
            from stepper.field.expr_syntax import _fast_parse_refs, references

            assert _fast_parse_refs(text)[1] == references(fast)  # type: ignore[index]
        if reference is not None:
            assert slow == reference
    else:
        assert fast is None


def test_texts_of_one_shape_with_other_names_get_their_own_names_back() -> None:
    # the token template is shared; the character parser is the reference for each text
    from stepper.field.expr_syntax import _Parser

    texts = [f"eq(tau{i}, point(leg.{i})) * (a{i}*b{i} - c{i})^2 + final(leg.{i}) - x{i}[{i}] + eq(w{i})"
             for i in range(5)] + ["eq(eq, point(point)) * (final*final - eq)^2 + final(eq) - final[0] + eq(eq)"]
    for text in texts:
        assert parse(text).root == _Parser(text, "test").expr(0)
    refs = parse(texts[3]).references()
    assert (refs.scalars, refs.lists, refs.points, refs.finals) == (
        ("a3", "b3", "c3"), ("tau3", "x3", "w3"), ("leg.3",), ("leg.3",))
