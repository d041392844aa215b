"""The rules of the glue events (``value``, ``squeeze``, ``opening``) and of an instance's
glue keys (``claim_expr``, ``final_expr``, ``eq_point``).

Names are identifiers, unique in the proof; a value or squeeze stands anywhere after
``field`` outside a round, an opening after the last challenge of the instance it opens at.
``claim_expr`` and ``eq_point`` may name only glue sent before the instance, ``final_expr``
also glue sent after its rounds, before the next instance (settled when that instance
comes, or at the end of the stream).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping

from stepper.errors import ExpressionError, TranscriptError
from stepper.field.field import Element
from stepper.field.poly import EQ_FACTORED
from stepper.transcript.payload_rules import MAX_TEXT, checked_text, short
from stepper.transcript.records import InstanceStart
from stepper.transcript.glue_records import (
    GLUE_NAME, GLUE_NAME_PATTERN, GlueDraft, NamedValue, Opening, OpeningDraft, Squeeze,
)
from stepper.transcript.sequence_state import SequenceState

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.transcript.model import Event

__all__ = ["GlueRules"]


class GlueRules(SequenceState):
    """The Sequencer's rules for the glue between sumchecks."""

    # ----- the glue -----------------------------------------------------------------
    def _instance_glue(self, payload: Mapping[str, Any], num_vars: int, degree: int,
                       form: str) -> tuple[str | None, str | None, tuple[Element, ...] | str | None, Expr | None]:
        """The checked ``claim_expr``, ``final_expr`` and ``eq_point`` of an instance event, and the
        parsed final_expr."""
        exprs: list[str | None] = []
        parsed: Expr | None = None
        for key in ("claim_expr", "final_expr"):
            raw = payload.get(key)
            if raw is None:
                exprs.append(None)
                continue
            text = checked_text(raw, key, self._fail)
            parsed = self._checked_expr(text, key)
            exprs.append(text)
        eq_raw = payload.get("eq_point")
        eq_point: tuple[Element, ...] | str | None = None
        if form == EQ_FACTORED:
            if degree < 1:
                raise self._fail(f"expected degree >= 1 for an eq-factored instance, found {degree}")
            if eq_raw is None:
                raise self._fail("expected `eq_point` with form eq-factored, found none")
            if isinstance(eq_raw, str):
                if eq_raw not in self.defined:
                    raise self._fail(f"eq_point names {short(eq_raw)}, which no earlier value or "
                                     "squeeze defines")
                length = self.defined[eq_raw]
                if length is None:
                    raise self._fail(f"eq_point names {eq_raw!r}, one element; expected a list "
                                     f"of num_vars = {num_vars}")
                eq_point = eq_raw
            else:
                eq_point = self._elements(eq_raw, "eq_point")
                length = len(eq_point)
            if length != num_vars:
                raise self._fail(f"expected eq_point of num_vars = {num_vars} elements, "
                                 f"found {length}")
        elif eq_raw is not None:
            raise self._fail(f"expected `eq_point` only with form eq-factored, found it with form {form!r}")
        return exprs[0], exprs[1], eq_point, parsed if exprs[1] is not None else None

    def _checked_expr(self, text: str, key: str) -> Expr:
        """The parsed ``key`` of the instance being read, its names checked against what came before."""
        from stepper.field.expr import parse as parse_expr, parse_cached  # numpy with it: only for glue

        try:
            expr = parse_cached(text)
        except ExpressionError:
            try:  # again, for a message naming the key (the error's location names the instance)
                parse_expr(text, key)
            except ExpressionError as err:
                raise self._fail(err.message) from None
            raise
        self._check_refs(expr, key)
        return expr

    def _glue_text(self, payload: Mapping[str, Any], key: str) -> str | None:
        """An instance's ``claim_expr`` or ``final_expr`` as text, unparsed (see ``defer_glue``)."""
        raw = payload.get(key)
        if raw.__class__ is str and len(raw) <= MAX_TEXT:  # type: ignore[arg-type]
            return raw  # type: ignore[return-value]
        return None if raw is None else checked_text(raw, key, self._fail)

    def check_deferred(self, start: InstanceStart) -> None:
        """The checks of ``start``'s claim_expr and final_expr that ``defer_glue`` left out, made now
        (the caller has brought the names defined up to the instance's place in the stream)."""
        parsed = None
        for key, text in (("claim_expr", start.claim_expr), ("final_expr", start.final_expr)):
            if text is not None:
                parsed = self._checked_expr(text, key)
        if start.final_expr is not None and parsed is not None:
            self._expect_late(start, parsed)

    def _expect_late(self, start: InstanceStart, final_expr: Expr) -> None:
        """Remember the final_expr names not sent yet: they must come before the next instance."""
        defined = self.defined
        late = tuple(n for n in final_expr.references().values if n not in defined)
        self._late = (start, late) if late else None

    def _check_refs(self, expr: Expr, key: str) -> None:
        refs = expr.references()
        earlier = self.names
        for inst in (*refs.points, *refs.finals):
            if inst not in earlier:
                raise self._fail(f"{key} names the instance {inst!r}, which is not an earlier "
                                 "instance")
        if key == "claim_expr":
            if refs.own_point:
                raise self._fail("claim_expr uses eq(a) with the instance's own point, which is "
                                 "not known before its rounds; write eq(a, b)")
            for value in refs.values:
                if value not in self.defined:
                    raise self._fail(f"claim_expr names {value!r}, which no earlier value, "
                                     "squeeze or opening defines")
        for value in refs.lists:
            if self.defined.get(value, 0) is None:
                raise self._fail(f"{key} uses {value!r} as a list, found one element")
        for value in refs.scalars:
            if self.defined.get(value) is not None:
                raise self._fail(f"{key} uses {value!r} as one element, found a list of "
                                 f"{self.defined[value]}")

    def _settle_late(self) -> None:
        """At the next instance: the previous instance's final_expr names must all have come."""
        assert self._late is not None
        start, late = self._late
        self._late = None
        missing = [n for n in late if n not in self.defined]
        if missing:
            raise TranscriptError(
                f"final_expr names {missing[0]!r}, which nothing before the next instance "
                "defines", self.source.but(event=self.count, instance=start.name))

    def _glue_name(self, payload: Mapping[str, Any], kind: str) -> str:
        name = payload.get("name")
        if name.__class__ is not str or GLUE_NAME_PATTERN.fullmatch(name) is None:  # type: ignore[arg-type]
            raise self._fail(f"expected a {kind} `name` of {GLUE_NAME}, found {short(name)}")
        if name in self.defined:
            raise self._fail(f"expected glue names unique in the proof, found a second {short(name)}")
        if self.awaiting_challenge:
            raise self._fail(f"expected the challenge of round {self.rounds_done} before a {kind}",
                             self.rounds_done)
        return name  # type: ignore[return-value]

    def _glue_value(self, raw: Any, what: str) -> tuple[Any, bool]:
        """One element or a list of them: (value, listed)."""
        assert self.field is not None
        if raw.__class__ is list:
            if self.field.is_extension and len(raw) == self.field.degree and all(
                    isinstance(v, (int, str)) for v in raw):
                return self._element(raw, what), False  # k scalars: one extension element
            return self._elements(raw, what), True
        return self._element(raw, what), False

    def _on_value(self, payload: Mapping[str, Any]) -> Event:
        return self._named(payload, "value", NamedValue)

    def _on_squeeze(self, payload: Mapping[str, Any]) -> Event:
        return self._named(payload, "squeeze", Squeeze)

    def _named(self, payload: Mapping[str, Any], kind: str, cls: type) -> Event:
        """A value or squeeze: checked, then built from a draft (see RoundMsgDraft)."""
        self._close_instance()
        name = self._glue_name(payload, kind)
        value, listed = self._glue_value(payload.get("value"), f"{kind} {name!r}")
        self.defined[name] = len(value) if listed else None
        cur = self.current
        record: Any = GlueDraft()
        record.name, record.value, record.listed, record.instance = name, value, listed, cur.index if cur else None
        record.__class__ = cls
        return record  # type: ignore[no-any-return]

    def _on_opening(self, payload: Mapping[str, Any]) -> Event:
        if self.pending_batch is not None:
            self._close_instance()
        cur = self.current
        if cur is None:
            cur = self._need_instance("opening")
        name = self._glue_name(payload, "opening")
        if self.rounds_done != cur.num_vars:
            raise self._fail(f"expected an opening after all {cur.num_vars} rounds of its instance "
                             f"(its challenge point), found it after {self.rounds_done}")
        table = payload.get("table", name)
        if table is not name and (table.__class__ is not str or GLUE_NAME_PATTERN.fullmatch(table) is None):
            raise self._fail(f"expected an opening's `table` of {GLUE_NAME}, found {short(table)}")
        value = self._element(payload.get("value"), f"opening {name!r}")
        self.defined[name] = None
        record: Any = OpeningDraft()
        record.name, record.value, record.table, record.instance = name, value, table, cur.index
        record.__class__ = Opening
        return record  # type: ignore[no-any-return]

    def finish_glue(self) -> str | None:
        """At the end of the stream: the first final_expr name that never came, as
        ``instance NAME: final_expr names X`` (the proof is incomplete), or None."""
        if self._late is None:
            return None
        start, late = self._late
        missing = [n for n in late if n not in self.defined]
        return f"instance {start.name!r}: final_expr names {missing[0]!r}, never sent" if missing else None
