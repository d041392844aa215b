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
* :class:`GlueDesk` is the replay's side of it: it keeps the book, runs those
  checks and the ``squeeze`` comparison at the right moments, and records their
  failures in the replay's ledger (a failure before any instance goes to the
  next instance, at round 0).

Expressions are parsed once per distinct text (:func:`parsed`).
"""

from __future__ import annotations

from collections import OrderedDict
from typing import TYPE_CHECKING, Any, Iterable, Iterator, Mapping, Sequence

from stepper.errors import ExpressionError, TranscriptError, Where
from stepper.field.poly import lagrange_at, point_from_challenges
from stepper.transcript.glue_records import NamedValue, Opening, Squeeze

if TYPE_CHECKING:
    from stepper.verify.glue_results import GlueResult, SqueezeResult
    from stepper.verify.results import Failure
    from stepper.field.expr import Expr, GlueScope
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceStart
    from stepper.verify.ledger import InstanceLedger, LiveInstance

__all__ = ["GlueBook", "GlueDesk", "EqFactor", "parsed", "link_result", "evaluation_result",
           "passing_link", "passing_evaluation", "MAX_POINT_ELEMENTS"]

MAX_POINT_ELEMENTS = 1 << 16


def parsed(text: str) -> Expr:
    """The tree of a glue expression (the Sequencer has already parsed it, and named any error)."""
    from stepper.field.expr import parse_cached  # only for glue

    return parse_cached(text)


class GlueBook:
    """Named glue values, and the points and finals of recent instances.

    Values settled in bulk (:meth:`add_columns`: the whole-file pass's thousands after each block)
    wait as the columns they came in and join the dictionary only when something reads it
    (:attr:`values`): a passing check usually never does. :meth:`lookup` answers a few names
    without that (names are unique in a proof, so the order they join in does not matter)."""

    __slots__ = ("_values", "points", "finals", "_stored", "_waiting", "_scans")
    SCANS = 16  # names looked up in the waiting columns before they all join the dictionary

    def __init__(self) -> None:
        self._values: dict[str, Any] = {}  # name -> element, or list of elements
        self.points: OrderedDict[str, tuple[Element, ...]] = OrderedDict()
        self.finals: dict[str, Element] = {}
        self._stored = 0
        self._waiting: list[tuple[Sequence[str], Sequence[Any]]] = []  # columns not yet in _values, oldest first
        self._scans = 0

    @property
    def values(self) -> dict[str, Any]:
        """Every value received so far, by name."""
        if self._waiting:
            for names, values in self._waiting:
                self._values.update(zip(names, values))
            self._waiting.clear()
            self._scans = 0
        return self._values

    def add(self, record: NamedValue | Squeeze | Opening) -> None:
        if isinstance(record, Opening):
            self._values[record.name] = record.value
        else:
            self._values[record.name] = list(record.value) if record.listed else record.value

    def add_all(self, records: Iterable[NamedValue | Squeeze | Opening]) -> None:
        """:meth:`add` for each record, in order."""
        self._values.update({record.name: list(record.value) if not isinstance(record, Opening) and record.listed
                             else record.value for record in records})

    def add_columns(self, names: Sequence[str], values: Sequence[Any]) -> None:
        """:meth:`add` for values given as columns (an element, or a list of elements, each), kept as they
        are until read (the columns must not change afterwards)."""
        if names:
            self._waiting.append((names, values))

    def lookup(self) -> Mapping[str, Any]:
        """The values by name for a few look-ups: the waiting columns are scanned for the first
        :attr:`SCANS` names not in the dictionary, and join it after that."""
        return _Lookup(self)

    def _scan(self, name: str) -> tuple[bool, Any]:
        """Whether ``name`` was received and its value, the waiting columns scanned while few were."""
        found = self._values.get(name, _ABSENT)
        if found is not _ABSENT:
            return True, found
        if not self._waiting:
            return False, None
        if self._scans >= self.SCANS:
            found = self.values.get(name, _ABSENT)
            return found is not _ABSENT, found
        self._scans += 1
        # the end of every column first, the newest first (what a block's first expressions read was sent last,
        # often in the column before the block's own), then the rest of each
        columns = [(names, values, max(0, len(names) - _TAIL)) for names, values in reversed(self._waiting)]
        for part in ("tail", "rest"):
            for names, values, tail in columns:
                begin, end = (tail, len(names)) if part == "tail" else (0, tail)
                try:
                    return True, values[names.index(name, begin, end)]
                except ValueError:
                    continue
        return False, None

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

    def forget_points(self) -> None:
        """Forget every point and final kept (instances were settled in bulk: see
        :meth:`stepper.verify.replay.Replay.forget_points`)."""
        self.points.clear()
        self.finals.clear()
        self._stored = 0

    def scope(self, own_point: tuple[Element, ...] | None) -> GlueScope:
        from stepper.field.expr import GlueScope

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


_ABSENT = object()
_TAIL = 64  # names at the end of waiting columns scanned first


class _Lookup(Mapping[str, Any]):
    """:meth:`GlueBook.lookup`: a name's value, found without filling the book's dictionary while few
    are asked for; iterating or sizing it reads the whole book."""

    __slots__ = ("_book",)

    def __init__(self, book: GlueBook) -> None:
        self._book = book

    def __getitem__(self, name: str) -> Any:
        found, value = self._book._scan(name)
        if not found:
            raise KeyError(name)
        return value

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and self._book._scan(name)[0]

    def __iter__(self) -> Iterator[str]:
        return iter(self._book.values)

    def __len__(self) -> int:
        return len(self._book.values)


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
        raise TranscriptError(f"{key} cannot be evaluated: {err.message}", Where(instance=start.name)) from None


def link_result(field: Field, book: GlueBook, start: InstanceStart) -> GlueResult:
    """The ``link`` check of an instance with a ``claim_expr`` (before its first round)."""
    text = start.claim_expr
    assert text is not None
    expected = _value(field, parsed(text), book.scope(None), start, "claim_expr")
    return _link(field, start, text, expected, field.lift(start.claim))


def passing_link(field: Field, start: InstanceStart) -> GlueResult:
    """The ``link`` result of an instance whose check passed by the block (stepper.verify.glue_block):
    claim_expr's value is the claim."""
    assert start.claim_expr is not None
    found = field.lift(start.claim)
    return _link(field, start, start.claim_expr, found, found)


def _link(field: Field, start: InstanceStart, text: str, expected: Element, found: Element) -> GlueResult:
    from stepper.verify.glue_results import GlueResult  # with the glue's first check: a file without glue makes none

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
    return _evaluation(field, start, text, expected, field.lift(reduced))


def passing_evaluation(field: Field, start: InstanceStart, reduced: Element) -> GlueResult:
    """The ``evaluation`` result of an instance whose check passed by the block: final_expr's value
    is the reduced claim."""
    assert start.final_expr is not None
    found = field.lift(reduced)
    return _evaluation(field, start, start.final_expr, found, found)


def _evaluation(field: Field, start: InstanceStart, text: str, expected: Element, found: Element) -> GlueResult:
    from stepper.verify.glue_results import GlueResult

    ok = expected == found
    explanation = (f"after round {start.num_vars} the reduced claim equals final_expr {text}" if ok else
                   f"after round {start.num_vars} the reduced claim is {field.fmt(found)}, but final_expr {text} "
                   f"gives {field.fmt(expected)} from the openings and values sent: an opening or the last "
                   f"rounds are wrong")
    return GlueResult(start.index, start.name, start.num_vars, "evaluation", text, expected, found,
                      "pass" if ok else "fail", explanation)


class GlueDesk:
    """The glue checks of one replay, called by :class:`stepper.verify.replay.Replay`."""

    __slots__ = ("book", "held")

    def __init__(self) -> None:
        self.book = GlueBook()
        self.held: list[Failure] = []  # failures before the first instance, given to it

    def open_instance(self, field: Field, live: LiveInstance, ledger: InstanceLedger) -> None:
        """A new instance: held failures, its eq factor, its ``link`` check."""
        start = live.start
        if self.held:  # squeezes before the first instance failed
            from stepper.verify.results import Failure

            for held in self.held:
                ledger.fail(live, Failure(start.index, start.name, 0, held.check, held.expected, held.found,
                                          held.explanation))
            self.held.clear()
        if start.eq_point is not None:
            live.eqf = EqFactor(field, self.book.point_value(start.eq_point, Where(instance=start.name)),
                                start.order)
        if start.claim_expr is not None:
            link = link_result(field, self.book, start)
            live.link = link
            if link.status == "fail":
                from stepper.verify.results import Failure  # a failing check only

                ledger.fail(live, Failure(start.index, start.name, 0, "link", link.expected,  # type: ignore[arg-type]
                                          link.found, link.explanation))  # type: ignore[arg-type]
        if start.num_vars == 0 and start.final_expr is not None:  # no rounds: the claim is the reduced claim
            self.evaluate(field, live, ledger)

    def take(self, field: Field, record: NamedValue | Squeeze | Opening, derived: Any, deriver: str,
             live: LiveInstance | None, ledger: InstanceLedger) -> SqueezeResult | None:
        """A value, squeeze (``derived``: the schedule's value, or None) or opening: compared,
        kept for the expressions; an evaluation waiting for it is settled. A squeeze's
        result (sent, re-derived, status) is returned."""
        result = None
        if isinstance(record, Squeeze):
            result = self._check_squeeze(field, record, derived, deriver, live, ledger)
        self.book.add(record)
        if live is not None and isinstance(record, Opening) and record.instance == live.start.index:
            live.openings.append(record)
        if live is not None and live.awaiting:
            self.evaluate(field, live, ledger)
        return result

    def _check_squeeze(self, field: Field, record: Squeeze, derived: Any, deriver: str, live: LiveInstance | None,
                       ledger: InstanceLedger) -> SqueezeResult:
        from stepper.verify.glue_results import SqueezeResult

        where = (live.start.index, live.seen) if live is not None else (None, 0)
        if derived is None:
            return SqueezeResult(where[0], record.name, where[1], record.value, None, "unchecked")
        sent, want = record.items(), (derived if record.listed else (derived,))
        for i, (s, d) in enumerate(zip(sent, want)):
            if field.lift(s) != field.lift(d):
                part = f" (element {i})" if record.listed else ""
                text = (f"the squeeze '{record.name}'{part} is {field.fmt(s)}, but {deriver} derives "
                        f"{field.fmt(d)}: the prover drew it from a different transcript state")
                from stepper.verify.results import Failure  # a failing check only

                if live is not None:
                    start = live.start
                    ledger.fail(live, Failure(start.index, start.name, live.seen, "squeeze", d, s, text))
                else:
                    self.held.append(Failure(0, "", 0, "squeeze", d, s, text))
                return SqueezeResult(where[0], record.name, where[1], record.value, derived, "fail")
        return SqueezeResult(where[0], record.name, where[1], record.value, derived, "pass")

    def evaluate(self, field: Field | None, live: LiveInstance, ledger: InstanceLedger) -> None:
        """The ``evaluation`` check once every value final_expr names has arrived (else it waits)."""
        start = live.start
        assert field is not None and start.final_expr is not None
        if self.book.missing(parsed(start.final_expr)) is not None:
            live.awaiting = True
            return
        live.awaiting = False
        result = evaluation_result(field, self.book, start, live.challenges, live.claim)
        live.evaluation = result
        if result.status == "fail":
            from stepper.verify.results import Failure  # a failing check only

            ledger.fail(live, Failure(start.index, start.name, start.num_vars, "evaluation",
                                      result.expected, result.found, result.explanation))  # type: ignore[arg-type]

    def close_instance(self, live: LiveInstance) -> None:
        """Remember a complete instance's point and final for point() and final()."""
        start = live.start
        if live.seen == start.num_vars:
            final = live.final.value if live.final is not None else live.claim
            self.book.close_instance(start, live.challenges, final)

    def finish(self, ledger: InstanceLedger) -> None:
        """Failures of glue sent before any instance, in a proof that never started one."""
        for held in self.held:
            ledger.fail_first(held)
        self.held.clear()
