"""Expressions over a field: the witness `combine` and the glue of a transcript, evaluated.

The grammar, the parser and the node types live in :mod:`stepper.field.expr_syntax`
(ordinary arithmetic over names, integer powers, no division).

A witness ``combine`` uses the arithmetic only (names are tables). The glue
expressions of a transcript (``claim_expr``, ``final_expr``) also use the rest:
``NAME[i]`` is component i (0-based) of a list value, ``eq(a, b)`` is
prod_j (a_j b_j + (1 - a_j)(1 - b_j)), ``eq(a)`` is eq(a, the instance's own
challenge point), ``point(NAME)`` the challenge point of the earlier instance
NAME in variable order x_1..x_mu, ``final(NAME)`` that instance's final value;
they are evaluated at single elements through a :class:`GlueScope`.

:func:`parse` builds a small tree of frozen nodes (never ``eval``); a text that
does not fit raises :class:`stepper.errors.ExpressionError` whose ``column``
points at the offending character. The text is at most ``MAX_EXPR_LENGTH``
characters and parentheses, signs and calls nest at most ``_MAX_DEPTH`` deep; a
long chain of ``+`` or ``*`` becomes a balanced tree, so no walk over a tree
recurses deeper than about ``_MAX_DEPTH`` times the logarithm of the length.
``^`` takes an integer exponent below 2^``MAX_EXPONENT_BITS`` and is evaluated by
repeated squaring. Invariants: a tree is immutable, its
``degree()`` is the total degree of the polynomial it spells in the table
values (an upper bound on the per-variable degree of the summed polynomial,
each table being multilinear), and :meth:`Expr.evaluate` is vectorised:
one numpy pass per node, whatever the table length.

Evaluation accepts tables in the base field (1-D arrays) and in an extension
(shape (n, k)) side by side: a base table meets an extension one by embedding,
and products of base by extension cost k base products, not k^2.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from functools import lru_cache
from typing import TYPE_CHECKING, Mapping, Union

from stepper.errors import ExpressionError
from stepper.field.field import power_by_squaring
from stepper.field.expr_syntax import (
    MAX_EXPONENT_BITS,
    MAX_EXPR_LENGTH,
    Add,
    Const,
    Eq,
    FinalOf,
    Index,
    Mul,
    Neg,
    Node,
    PointOf,
    Pow,
    References,
    Sub,
    Table,
    Template,
    fill,
    parse_tree,
    references,
    template_of,
)

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field

__all__ = ["Expr", "Const", "Table", "Neg", "Add", "Sub", "Mul", "Pow", "Index", "Eq", "PointOf", "FinalOf",
           "GlueScope", "References", "parse", "parse_cached", "MAX_EXPR_LENGTH", "MAX_EXPONENT_BITS"]


@dataclass(frozen=True, slots=True)
class GlueScope:
    """What a glue expression may read: named values (an element or a tuple of
    elements), earlier instances' points and finals by instance name, and the
    instance's own point (None where it is not known, as in a claim)."""

    values: Mapping[str, object] = dc_field(default_factory=dict)
    points: Mapping[str, tuple] = dc_field(default_factory=dict)  # type: ignore[type-arg]
    finals: Mapping[str, object] = dc_field(default_factory=dict)
    own_point: tuple | None = None  # type: ignore[type-arg]


@dataclass(frozen=True, slots=True, eq=False)
class Expr:
    """A parsed expression: its source text and its tree (equal when their texts are).

    One made by :func:`parse_cached` from a template (:func:`template_of`) keeps the
    template and its names and builds its own tree only when asked for ``root``: checking
    what a glue expression references, or evaluating many that share a template by
    columns (stepper.verify.glue_block), never needs it."""

    text: str
    tree: Node | None = None  # None until ``root`` fills the template
    refs: References | None = None  # set by parse(); computed on demand otherwise
    template: Template | None = None
    holes: tuple[str, ...] = ()  # the names that fill the template's holes, in order

    @property
    def root(self) -> Node:
        """The tree (the template with its names put back, built on first use)."""
        tree = self.tree
        if tree is None:
            assert self.template is not None
            tree = fill(self.template.root, list(self.holes))
            object.__setattr__(self, "tree", tree)
        return tree

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Expr) and other.text == self.text

    def __hash__(self) -> int:
        return hash(self.text)

    def degree(self) -> int:
        """Total degree in the table values (constants 0, a table 1)."""
        return _degree(self.root)

    def names(self) -> tuple[str, ...]:
        """Table (value) names in order of first appearance."""
        seen: dict[str, None] = {}
        _collect(self.root, seen)
        return tuple(seen)

    def is_arithmetic(self) -> bool:
        """Only constants, names, + - * and ^ (what a witness combine may use)."""
        refs = self.references()
        return not (refs.lists or refs.points or refs.finals or refs.own_point)

    def references(self) -> References:
        """Names, points and finals the expression reads (computed once by parse)."""
        if self.refs is not None:
            return self.refs
        return references(self.root)

    def evaluate(self, field: Field, env: Mapping[str, np.ndarray]) -> np.ndarray:
        """The expression entry by entry over equally long table arrays; the result
        is 1-D when every table is in the base field, else shape (n, k)."""
        arith = _VectorArith(field, _length(env, self.names()))
        return arith.finish(_eval(self.root, env, arith))

    def evaluate_scalar(self, field: Field, env: Mapping[str, Element]) -> Element:
        """The expression at single field elements (e.g. the tables' values at a point)."""
        return _Scalar(field, GlueScope(env), self.text).eval(self.root)

    def evaluate_glue(self, field: Field, scope: GlueScope) -> Element:
        """A glue expression at single elements; a value of the wrong kind (a list
        where an element is wanted, an index past the end, points of different
        lengths) raises :class:`ExpressionError` naming it."""
        return _Scalar(field, scope, self.text).eval(self.root)

    def __str__(self) -> str:
        return self.text


# ----- parsing (the grammar is in stepper.field.expr_syntax) ------------------------------
def parse(text: str, what: str = "combine expression") -> Expr:
    """The expression ``text``; raises :class:`ExpressionError` pointing at the first
    character that does not fit the grammar (``what`` names the text in messages)."""
    return Expr(text, *parse_tree(text, what))


@lru_cache(maxsize=1024)
def parse_cached(text: str, what: str = "glue expression") -> Expr:
    """:func:`parse`, remembered for the last 1024 texts (the Sequencer and the replay
    meet each glue expression once each; an error is raised again each time). A
    well-formed text gets its references and template at once, its tree when first used."""
    if text.__class__ is str and len(text) <= MAX_EXPR_LENGTH:
        found = template_of(text)
        if found is not None:
            template, names = found
            return Expr(text, None, template.references(names), template, tuple(names))
    return parse(text, what)


# ----- tree walks -----------------------------------------------------------------------
def _degree(node: Node) -> int:
    if isinstance(node, (Const, Eq, PointOf, FinalOf)):
        return 0
    if isinstance(node, (Table, Index)):
        return 1
    if isinstance(node, Neg):
        return _degree(node.operand)
    if isinstance(node, Pow):
        return _degree(node.base) * node.exponent
    if isinstance(node, Mul):
        return _degree(node.left) + _degree(node.right)
    return max(_degree(node.left), _degree(node.right))


def _collect(node: Node, seen: dict[str, None]) -> None:
    if isinstance(node, (Table, Index)):
        seen.setdefault(node.name)
    elif isinstance(node, Neg):
        _collect(node.operand, seen)
    elif isinstance(node, Pow):
        _collect(node.base, seen)
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
_Value = Union[int, "np.ndarray"]


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

    def power(self, a: _Value, e: int) -> _Value:
        """a^e by repeated squaring: about 2 log2(e) vector products."""
        if isinstance(a, int):
            return pow(a, e, self.p)
        one: _Value = 1
        return power_by_squaring(self.mul, a, e, one)


def _eval(node: Node, env: Mapping[str, np.ndarray], arith: _VectorArith) -> _Value:
    if isinstance(node, Const):
        return node.value % arith.p
    if isinstance(node, Table):
        return env[node.name]
    if isinstance(node, Neg):
        return arith.neg(_eval(node.operand, env, arith))
    if isinstance(node, Pow):
        return arith.power(_eval(node.base, env, arith), node.exponent)
    if isinstance(node, (Index, Eq, PointOf, FinalOf)):
        raise ExpressionError("expected only + - * ^, numbers and table names in a combine expression, found "
                              f"{type(node).__name__.lower()}(...), which only a transcript's glue may use", "", 0)
    left = _eval(node.left, env, arith)
    right = _eval(node.right, env, arith)
    if isinstance(node, Add):
        return arith.add(left, right)
    if isinstance(node, Sub):
        return arith.add(left, arith.neg(right))
    return arith.mul(left, right)


class _Scalar:
    """Evaluation at single elements (a combine at a point, or a glue expression)."""

    def __init__(self, field: Field, scope: GlueScope, text: str) -> None:
        self.field = field
        self.scope = scope
        self.text = text

    def fail(self, message: str) -> ExpressionError:
        return ExpressionError(f"{message} in {self.text!r}"[:300], self.text, 0)

    def value(self, name: str) -> object:
        try:
            return self.scope.values[name]
        except KeyError:
            raise self.fail(f"expected a value named {name!r}, found none") from None

    def element(self, name: str) -> Element:
        v = self.value(name)
        if isinstance(v, list):
            raise self.fail(f"expected {name!r} to be one element, found a list of {len(v)}")
        return self.field.lift(v)  # type: ignore[arg-type]

    def points(self, node: Union[Table, PointOf, None]) -> tuple:  # type: ignore[type-arg]
        if node is None:
            if self.scope.own_point is None:
                raise self.fail("expected eq(a) only where the instance's challenge point is known (final_expr); "
                                "use eq(a, b)")
            return self.scope.own_point
        if isinstance(node, PointOf):
            try:
                return self.scope.points[node.name]
            except KeyError:
                raise self.fail(f"expected an earlier, complete instance named {node.name!r}, found none") from None
        v = self.value(node.name)
        if not isinstance(v, list):
            raise self.fail(f"expected {node.name!r} to be a list (a point), found one element")
        return tuple(v)

    def eval(self, node: Node) -> Element:
        return self._ops[node.__class__](self, node)  # type: ignore[no-any-return, operator]

    def _const(self, node: Const) -> Element:
        return self.field.embed(node.value)

    def _table(self, node: Table) -> Element:
        return self.element(node.name)

    def _index(self, node: Index) -> Element:
        v = self.value(node.name)
        if not isinstance(v, list):
            raise self.fail(f"expected {node.name!r} to be a list, found one element")
        if node.index >= len(v):
            raise self.fail(f"expected an index below {len(v)} into {node.name!r}, found {node.index}")
        return self.field.lift(v[node.index])

    def _final(self, node: FinalOf) -> Element:
        try:
            return self.field.lift(self.scope.finals[node.name])  # type: ignore[arg-type]
        except KeyError:
            raise self.fail(f"expected an earlier, complete instance named {node.name!r}, found none") from None

    def _point(self, node: PointOf) -> Element:
        raise self.fail(f"expected point({node.name}) only inside eq(...)")

    def _eq(self, node: Eq) -> Element:
        f = self.field
        a, b = self.points(node.left), self.points(node.right)
        if len(a) != len(b):
            raise self.fail(f"expected points of one length in eq(...), found lengths {len(a)} and {len(b)}")
        if not f.is_extension:  # plain integers: one product and a few sums per coordinate
            p = f.p
            acc = 1
            for x, y in zip(a, b):
                xy = x * y  # type: ignore[operator]
                acc = acc * (1 - x - y + 2 * xy) % p  # type: ignore[operator]
            return acc % p
        one = f.one
        acc = one  # type: ignore[assignment]
        for x, y in zip(a, b):
            x, y = f.lift(x), f.lift(y)
            acc = f.mul(acc, f.add(f.mul(x, y), f.mul(f.sub(one, x), f.sub(one, y))))  # type: ignore[assignment]
        return acc

    def _neg(self, node: Neg) -> Element:
        return self.field.neg(self.eval(node.operand))

    def _pow(self, node: Pow) -> Element:
        return self.field.pow(self.eval(node.base), node.exponent)

    def _add(self, node: Add) -> Element:
        return self.field.add(self.eval(node.left), self.eval(node.right))

    def _sub(self, node: Sub) -> Element:
        return self.field.sub(self.eval(node.left), self.eval(node.right))

    def _mul(self, node: Mul) -> Element:
        return self.field.mul(self.eval(node.left), self.eval(node.right))

    _ops = {Const: _const, Table: _table, Index: _index, FinalOf: _final, PointOf: _point, Eq: _eq, Neg: _neg,
            Pow: _pow, Add: _add, Sub: _sub, Mul: _mul}
