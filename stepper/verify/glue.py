"""The verifier's glue between instances (contract 3 as restated in transcripts/FORMAT.md; no I/O).

* :class:`GlueBook` keeps what glue expressions may read: every ``value``,
  ``squeeze`` and ``opening`` by name, and the challenge point and final value of
  recent instances by instance name (at most ``MAX_POINT_ELEMENTS`` challenge
  elements in all, oldest dropped first, so memory stays flat in the number of
  instances).
* :class:`EqFactor` turns an eq-factored round q_k(0..e-1) into the verifier's
  round polynomial g_k(X) = prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X),
  eq(w, X) = w X + (1 - w)(1 - X), as evaluations g_k(0..e); the usual degree,
  sum and carry checks then apply to g_k.
* :func:`link_result` and :func:`evaluation_result` are the checks ``link`` (the
  claim against ``claim_expr``, reported at round 0) and ``evaluation`` (the
  reduced claim after the last round against ``final_expr``, reported at the
  last round).

Expressions are parsed once per distinct text (:func:`parsed`).
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from stepper.errors import ExpressionError, TranscriptError, Where
from stepper.field.expr import Expr, GlueScope, parse_cached
from stepper.field.poly import lagrange_at, point_from_challenges
from stepper.transcript.model import NamedValue, Opening, Squeeze

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceStart

__all__ = ["GlueBook", "EqFactor", "GlueResult", "parsed", "link_result", "evaluation_result",
           "MAX_POINT_ELEMENTS"]

MAX_POINT_ELEMENTS = 1 << 16


def parsed(text: str) -> Expr:
    """The tree of a glue expression (the Sequencer has already parsed it, and named any error)."""
    return parse_cached(text)


@dataclass(frozen=True, slots=True)
class GlueResult:
    """A ``link`` or ``evaluation`` check: ``expected`` is the expression's value,
    ``found`` the claim (link) or the reduced claim after the last round (evaluation);
    ``expr`` the expression's text."""

    instance: int
    instance_name: str
    round: int
    check: str
    expr: str
    expected: Element
    found: Element
    status: str
    explanation: str = ""


class GlueBook:
    """Named glue values, and the points and finals of recent instances."""

    __slots__ = ("values", "points", "finals", "_stored")

    def __init__(self) -> None:
        self.values: dict[str, Any] = {}  # name -> element, or list of elements
        self.points: OrderedDict[str, tuple[Element, ...]] = OrderedDict()
        self.finals: dict[str, Element] = {}
        self._stored = 0

    def add(self, record: NamedValue | Squeeze | Opening) -> None:
        if isinstance(record, Opening):
            self.values[record.name] = record.value
        else:
            self.values[record.name] = list(record.value) if record.listed else record.value

    def close_instance(self, start: InstanceStart, challenges: list[Element] | None, final: Element | None) -> None:
        """Remember a complete instance's point (variable order) and final value."""
        if challenges is None or len(challenges) != start.num_vars or final is None:
            return
        name = start.name
        if name in self.points:
            self._stored -= len(self.points.pop(name))
        self.points[name] = point_from_challenges(challenges, start.order)
        self.finals[name] = final
        self._stored += start.num_vars
        while self._stored > MAX_POINT_ELEMENTS and len(self.points) > 1:
            old, point = self.points.popitem(last=False)
            self.finals.pop(old, None)
            self._stored -= len(point)

    def scope(self, own_point: tuple[Element, ...] | None) -> GlueScope:
        return GlueScope(self.values, self.points, self.finals, own_point)

    def missing(self, expr: Expr) -> str | None:
        """The first named value the expression needs that has not arrived."""
        for name in expr.references().values:
            if name not in self.values:
                return name
        return None

    def point_value(self, ref: tuple[Element, ...] | str, where: Where) -> tuple[Element, ...]:
        """An ``eq_point``: the list itself, or the named list value."""
        if not isinstance(ref, str):
            return ref
        value = self.values.get(ref)
        if not isinstance(value, list):
            raise TranscriptError(f"expected eq_point {ref!r} to name an earlier list value or squeeze, found "
                                  f"{'none' if value is None else 'one element'}", where)
        return tuple(value)


class EqFactor:
    """The eq factor of an eq-factored instance: the point w (variable order) and the
    running prefix prod_(i<k) eq(w_i, r_i)."""

    __slots__ = ("field", "w", "order", "prefix")

    def __init__(self, field: Field, w: tuple[Element, ...], order: str) -> None:
        self.field = field
        self.w = tuple(field.lift(x) for x in w)
        self.order = order
        self.prefix: Element = field.one

    def weight(self, k: int) -> Element:
        """w_k: the coordinate of the variable bound in round k."""
        mu = len(self.w)
        return self.w[k - 1] if self.order == "low-first" else self.w[mu - k]

    def linear(self, w: Element, x: Element) -> Element:
        """eq(w, x) = w x + (1 - w)(1 - x)."""
        f = self.field
        one = f.one
        return f.add(f.mul(w, x), f.mul(f.sub(one, w), f.sub(one, x)))

    def expand(self, q: tuple[Element, ...], k: int) -> tuple[Element, ...]:
        """g_k(0..e) from q_k(0..e-1): q is extended to X = e by interpolation."""
        f = self.field
        e = len(q)
        w = self.weight(k)
        full = (*q, lagrange_at(f, q, f.embed(e)))
        return tuple(f.mul(f.mul(self.prefix, self.linear(w, f.embed(j))), full[j]) for j in range(e + 1))

    def advance(self, k: int, r: Element) -> None:
        """After round k's challenge r_k: fold eq(w_k, r_k) into the prefix."""
        self.prefix = self.field.mul(self.prefix, self.linear(self.weight(k), self.field.lift(r)))


def _value(field: Field, expr: Expr, scope: GlueScope, start: InstanceStart, key: str) -> Element:
    try:
        return expr.evaluate_glue(field, scope)
    except ExpressionError as err:
        raise TranscriptError(f"instance {start.name!r}: {key} cannot be evaluated: {err.message}",
                              Where(instance=start.name)) from None


def link_result(field: Field, book: GlueBook, start: InstanceStart) -> GlueResult:
    """The ``link`` check of an instance with a ``claim_expr`` (before its first round)."""
    text = start.claim_expr
    assert text is not None
    expected = _value(field, parsed(text), book.scope(None), start, "claim_expr")
    found = field.lift(start.claim)
    ok = expected == found
    explanation = (f"the claim of instance '{start.name}' equals claim_expr {text}" if ok else
                   f"the claim of instance '{start.name}' is {field.fmt(found)}, but claim_expr {text} gives "
                   f"{field.fmt(expected)}: the claim is not linked to the values it should be built from")
    return GlueResult(start.index, start.name, 0, "link", text, expected, found, "pass" if ok else "fail",
                      explanation)


def evaluation_result(field: Field, book: GlueBook, start: InstanceStart, challenges: list[Element],
                      reduced: Element) -> GlueResult:
    """The ``evaluation`` check: the reduced claim after the last round against ``final_expr``."""
    text = start.final_expr
    assert text is not None
    own = point_from_challenges(challenges, start.order)
    expected = _value(field, parsed(text), book.scope(own), start, "final_expr")
    found = field.lift(reduced)
    ok = expected == found
    explanation = (f"after round {start.num_vars} the reduced claim equals final_expr {text}" if ok else
                   f"after round {start.num_vars} the reduced claim is {field.fmt(found)}, but final_expr {text} "
                   f"gives {field.fmt(expected)} from the openings and values sent: an opening or the last "
                   f"rounds are wrong")
    return GlueResult(start.index, start.name, start.num_vars, "evaluation", text, expected, found,
                      "pass" if ok else "fail", explanation)
