"""The caps of the expression language (README "Limits"), each met exactly and exceeded by one:
length in characters, nesting of parentheses/signs/calls, and exponent size. The caps are stepper's
own choices (common practice, no source)."""

from __future__ import annotations

import pytest

from stepper.errors import EXIT_INPUT, ExpressionError
from stepper.field import expr_syntax
from stepper.field.expr import MAX_EXPONENT_BITS, MAX_EXPR_LENGTH, parse

DEPTH = expr_syntax._MAX_DEPTH


@pytest.mark.parametrize("name, at_cap, past_cap, says", [
    ("length", "ledger" + " " * (MAX_EXPR_LENGTH - 6), "ledger" + " " * (MAX_EXPR_LENGTH - 5),
     f"at most {MAX_EXPR_LENGTH} characters, found {MAX_EXPR_LENGTH + 1}"),
    ("parentheses", "(" * DEPTH + "ledger" + ")" * DEPTH, "(" * (DEPTH + 1) + "ledger" + ")" * (DEPTH + 1),
     f"at most {DEPTH} nested"),
    ("signs", "-" * DEPTH + "ledger", "-" * (DEPTH + 1) + "ledger", f"at most {DEPTH} nested"),
    ("exponent", f"ledger^{2**MAX_EXPONENT_BITS - 1}", f"ledger^{2**MAX_EXPONENT_BITS}",
     rf"below 2\^{MAX_EXPONENT_BITS}, found one of {MAX_EXPONENT_BITS + 1} bits"),
])
def test_an_expression_at_the_cap_parses_and_one_past_it_is_refused(name, at_cap, past_cap, says):
    assert parse(at_cap).names() == ("ledger",)
    with pytest.raises(ExpressionError, match=says) as err:
        parse(past_cap)
    assert err.value.exit_code == EXIT_INPUT
