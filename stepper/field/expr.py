"""The `combine` expression of a witness: parsing and evaluation.

Grammar (ordinary arithmetic over table names, no functions, no division)::

    expr   := term (("+" | "-") term)*
    term   := unary ("*" unary)*
    unary  := "-" unary | atom
    atom   := INTEGER | NAME | "(" expr ")"
    NAME   := [A-Za-z_][A-Za-z0-9_.]*

:func:`parse` builds a small tree of frozen nodes (never ``eval``); a text that
does not fit raises :class:`stepper.errors.ExpressionError` whose ``column``
points at the offending character. Invariants: a tree is immutable, its
``degree()`` is the total degree of the polynomial it spells in the table
values (an upper bound on the per-variable degree of the summed polynomial,
each table being multilinear), and :meth:`Expr.evaluate` is vectorised:
one numpy pass per node, whatever the table length.

Evaluation accepts tables in the base field (1-D arrays) and in an extension
(shape (n, k)) side by side: a base table meets an extension one by embedding,
and products of base by extension cost k base products, not k^2.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Mapping, Union

import numpy as np

from stepper.errors import ExpressionError

if TYPE_CHECKING:
    from stepper.field.field import Element, Field

__all__ = ["Expr", "Const", "Table", "Neg", "Add", "Sub", "Mul", "parse", "MAX_EXPR_LENGTH"]

MAX_EXPR_LENGTH = 4096
_MAX_DEPTH = 200


@dataclass(frozen=True, slots=True)
class Const:
    """An integer constant (reduced mod p when evaluated)."""

    value: int


@dataclass(frozen=True, slots=True)
class Table:
    """The multilinear extension of the named table."""

    name: str


@dataclass(frozen=True, slots=True)
class Neg:
    operand: Expr


@dataclass(frozen=True, slots=True)
class Add:
    left: Expr
    right: Expr


@dataclass(frozen=True, slots=True)
class Sub:
    left: Expr
    right: Expr


@dataclass(frozen=True, slots=True)
class Mul:
    left: Expr
    right: Expr


Node = Union[Const, Table, Neg, Add, Sub, Mul]


@dataclass(frozen=True, slots=True)
class Expr:
    """A parsed `combine` expression: its source text and its tree."""

    text: str
    root: Node

    def degree(self) -> int:
        """Total degree in the table values (constants 0, a table 1)."""
        return _degree(self.root)

    def names(self) -> tuple[str, ...]:
        """Table names in order of first appearance."""
        seen: dict[str, None] = {}
        _collect(self.root, seen)
        return tuple(seen)

    def evaluate(self, field: Field, env: Mapping[str, np.ndarray]) -> np.ndarray:
        """The expression entry by entry over equally long table arrays; the result
        is 1-D when every table is in the base field, else shape (n, k)."""
        arith = _VectorArith(field, _length(env, self.names()))
        return arith.finish(_eval(self.root, env, arith))

    def evaluate_scalar(self, field: Field, env: Mapping[str, Element]) -> Element:
        """The expression at single field elements (e.g. the tables' values at a point)."""
        return _eval_scalar(self.root, field, env)

    def __str__(self) -> str:
        return self.text


# ----- parsing --------------------------------------------------------------------------
def parse(text: str) -> Expr:
    """The tree of ``text``; raises :class:`ExpressionError` pointing at the first
    character that does not fit the grammar."""
    if not isinstance(text, str):
        raise ExpressionError(f"expected the combine expression as text, found {type(text).__name__}", "", 0)
    if len(text) > MAX_EXPR_LENGTH:
        raise ExpressionError(
            f"expected a combine expression of at most {MAX_EXPR_LENGTH} characters, found {len(text)}",
            text[:80],
            0,
        )
    parser = _Parser(text)
    root = parser.expr(0)
    parser.skip_space()
    if parser.pos < len(text):
        parser.fail(f"expected an operator (+, -, *) or the end, found {text[parser.pos]!r}")
    return Expr(text, root)


class _Parser:
    def __init__(self, text: str) -> None:
        self.text = text
        self.pos = 0

    def fail(self, message: str, column: int | None = None) -> None:
        col = self.pos if column is None else column
        raise ExpressionError(f"{message} at column {col + 1} of the combine expression", self.text, col)

    def skip_space(self) -> None:
        while self.pos < len(self.text) and self.text[self.pos] in " \t\r\n":
            self.pos += 1

    def peek(self) -> str:
        self.skip_space()
        return self.text[self.pos] if self.pos < len(self.text) else ""

    def expr(self, depth: int) -> Node:
        node = self.term(depth)
        while self.peek() in ("+", "-"):
            op = self.text[self.pos]
            self.pos += 1
            right = self.term(depth)
            node = Add(node, right) if op == "+" else Sub(node, right)
        return node

    def term(self, depth: int) -> Node:
        node = self.unary(depth)
        while self.peek() == "*":
            self.pos += 1
            if self.peek() == "*":
                self.fail("expected a table name, a number or '(' after '*' ('**' is not supported; repeat the factor)")
            node = Mul(node, self.unary(depth))
        return node

    def unary(self, depth: int) -> Node:
        if depth > _MAX_DEPTH:
            self.fail(f"expected at most {_MAX_DEPTH} nested parentheses or signs, found more")
        if self.peek() == "-":
            self.pos += 1
            return Neg(self.unary(depth + 1))
        return self.atom(depth)

    def atom(self, depth: int) -> Node:
        ch = self.peek()
        start = self.pos
        if ch == "":
            self.fail("expected a table name, a number or '(', found the end of the expression")
        if ch == "(":
            self.pos += 1
            node = self.expr(depth + 1)
            if self.peek() != ")":
                found = repr(self.text[self.pos]) if self.pos < len(self.text) else "the end"
                self.fail(f"expected ')' to close the '(' at column {start + 1}, found {found}")
            self.pos += 1
            return node
        if ch.isdigit():
            while self.pos < len(self.text) and self.text[self.pos].isdigit():
                self.pos += 1
            if self.pos < len(self.text) and (self.text[self.pos].isalpha() or self.text[self.pos] == "_"):
                self.fail(f"expected an operator after the number {self.text[start:self.pos]}, found {self.text[self.pos]!r}")
            return Const(int(self.text[start : self.pos]))
        if ch.isascii() and (ch.isalpha() or ch == "_"):
            while self.pos < len(self.text) and (
                self.text[self.pos].isascii() and (self.text[self.pos].isalnum() or self.text[self.pos] in "_.")
            ):
                self.pos += 1
            return Table(self.text[start : self.pos])
        if ch == "/":
            self.fail("expected +, - or *; division is not part of a combine expression, found '/'")
        self.fail(f"expected a table name, a number or '(', found {ch!r}")
        raise AssertionError("unreachable")  # fail() always raises


# ----- tree walks -----------------------------------------------------------------------
def _degree(node: Node) -> int:
    if isinstance(node, Const):
        return 0
    if isinstance(node, Table):
        return 1
    if isinstance(node, Neg):
        return _degree(node.operand)
    if isinstance(node, Mul):
        return _degree(node.left) + _degree(node.right)
    return max(_degree(node.left), _degree(node.right))


def _collect(node: Node, seen: dict[str, None]) -> None:
    if isinstance(node, Table):
        seen.setdefault(node.name)
    elif isinstance(node, Neg):
        _collect(node.operand, seen)
    elif isinstance(node, (Add, Sub, Mul)):
        _collect(node.left, seen)
        _collect(node.right, seen)


def _length(env: Mapping[str, np.ndarray], names: tuple[str, ...]) -> int:
    """The common length of the tables used (of any table given, for a constant)."""
    lengths = {len(env[n]) for n in (names or tuple(env))}
    if len(lengths) > 1:
        raise ExpressionError(f"expected tables of one length, found lengths {sorted(lengths)}", "", 0)
    return lengths.pop() if lengths else 1


# A value during vector evaluation: an int constant (not yet broadcast) or an array.
_Value = Union[int, np.ndarray]


class _VectorArith:
    """Mixed base / extension vector arithmetic for one evaluation."""

    def __init__(self, field: Field, n: int) -> None:
        self.field = field
        self.base = field.base
        self.n = n
        self.p = field.p

    def lift(self, a: np.ndarray) -> np.ndarray:
        return self.field.vec(a) if self.field.is_extension and a.ndim == 1 else a

    def finish(self, v: _Value) -> np.ndarray:
        if isinstance(v, int):
            return self.base.vec([v % self.p] * self.n)
        return v

    def const_array(self, c: int) -> np.ndarray:
        return self.base.vec([c % self.p] * self.n)

    def add(self, a: _Value, b: _Value) -> _Value:
        if isinstance(a, int) and isinstance(b, int):
            return (a + b) % self.p
        a = self.const_array(a) if isinstance(a, int) else a
        b = self.const_array(b) if isinstance(b, int) else b
        if a.ndim == b.ndim:
            return (self.base if a.ndim == 1 else self.field).vadd(a, b)
        ext, flat = (a, b) if a.ndim == 2 else (b, a)
        out = ext.copy()
        out[:, 0] = self.base.vadd(ext[:, 0], flat)
        return out

    def neg(self, a: _Value) -> _Value:
        if isinstance(a, int):
            return -a % self.p
        return (self.base if a.ndim == 1 else self.field).vneg(a)

    def mul(self, a: _Value, b: _Value) -> _Value:
        if isinstance(a, int) and isinstance(b, int):
            return a * b % self.p
        if isinstance(a, int) or isinstance(b, int):
            c, arr = (a, b) if isinstance(a, int) else (b, a)
            c = c % self.p  # type: ignore[operator]
            if c == 1:
                return arr
            return self.base.kernel.mul(arr, self.base.vec([c])[0])  # type: ignore[arg-type]
        if a.ndim == b.ndim:
            return (self.base if a.ndim == 1 else self.field).vmul(a, b)
        ext, flat = (a, b) if a.ndim == 2 else (b, a)
        return self.field.vmul_base(ext, flat)


def _eval(node: Node, env: Mapping[str, np.ndarray], arith: _VectorArith) -> _Value:
    if isinstance(node, Const):
        return node.value % arith.p
    if isinstance(node, Table):
        return env[node.name]
    if isinstance(node, Neg):
        return arith.neg(_eval(node.operand, env, arith))
    left = _eval(node.left, env, arith)
    right = _eval(node.right, env, arith)
    if isinstance(node, Add):
        return arith.add(left, right)
    if isinstance(node, Sub):
        return arith.add(left, arith.neg(right))
    return arith.mul(left, right)


def _eval_scalar(node: Node, field: Field, env: Mapping[str, Element]) -> Element:
    if isinstance(node, Const):
        return field.embed(node.value)
    if isinstance(node, Table):
        return field.lift(env[node.name])
    if isinstance(node, Neg):
        return field.neg(_eval_scalar(node.operand, field, env))
    left = _eval_scalar(node.left, field, env)
    right = _eval_scalar(node.right, field, env)
    if isinstance(node, Add):
        return field.add(left, right)
    if isinstance(node, Sub):
        return field.sub(left, right)
    return field.mul(left, right)
