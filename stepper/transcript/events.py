"""Event payloads <-> event records, and the rules of their order.

Both transcript files (msgpack; elements as fixed-width bytes) and event
streams (JSON lines; elements as ints, decimal or 0x strings, lists) carry
the same payloads: maps with a ``type`` key. :class:`Sequencer` turns them,
one at a time, into the records of :mod:`stepper.transcript.model`, checking what
a payload may contain and where it may stand:

* ``field`` comes first, once; ``schedule`` may follow it, before any instance;
* ``batch`` (optional) immediately precedes the ``instance`` it describes;
* rounds of an instance come in order, each followed by its ``challenge``,
  at most ``num_vars`` of them; ``final`` comes after the last challenge;
* ``buckets``, ``note`` and unknown types may stand anywhere after ``field``;
* the glue (``value``, ``squeeze``, ``opening``) stands between instances: a
  value or squeeze anywhere after ``field`` outside a round, an opening after the
  last challenge of the instance it opens at; each has a name unique in the proof.
  An instance's ``claim_expr`` and ``eq_point`` may name only glue sent before it,
  its ``final_expr`` also glue sent after its rounds, before the next instance;
  ``point(NAME)`` and ``final(NAME)`` name earlier instances. Files of format
  version 1 predate the glue: there these types stay unknown events.

:func:`to_payload` is the inverse: a record as a payload, binary or JSON.
Caps keep a hostile input from costing unbounded memory.
"""

from __future__ import annotations

import struct
from typing import Any, Callable, Iterable, Iterator, Mapping

from stepper.errors import FieldError, TranscriptError, Where
from stepper.field.field import Element, Field
from stepper.field.spec import field_from_spec
from stepper.transcript.namebook import NameBook
from stepper.transcript.packed import decoder_for, unpack_elements
from stepper.transcript.payload_rules import (
    MAX_DEGREE, MAX_NUM_VARS, MAX_SIZES, MAX_TEXT, MAX_VALUES, checked_count, checked_text, plain, short,
)
from stepper.transcript.payloads import to_payload
from stepper.field.expr import Expr, parse as parse_expr, parse_cached
from stepper.field.poly import EQ_FACTORED, ORDERS, ROUND_FORMS
from stepper.errors import ExpressionError
from stepper.transcript.model import (
    GLUE_NAME,
    GLUE_NAME_PATTERN,
    NamedValue,
    Opening,
    Squeeze,
    BatchDecl,
    BucketStats,
    ChallengeMsg,
    Event,
    FieldDecl,
    FinalValue,
    InstanceStart,
    Note,
    RoundMsg,
    ScheduleDecl,
    UnknownEvent,
    ChallengeMsgDraft,
    InstanceStartDraft,
    RoundMsgDraft,
    GlueDraft,
    OpeningDraft,
)

__all__ = ["Sequencer", "to_payload", "plain_copy", "MAX_VALUES", "MAX_SIZES", "MAX_TEXT", "MAX_NUM_VARS",
           "MAX_DEGREE"]

KNOWN_TYPES = ("field", "schedule", "batch", "instance", "round", "challenge", "final", "buckets", "note",
               "value", "squeeze", "opening")
GLUE_TYPES = ("value", "squeeze", "opening")


class Sequencer:
    """Feeds payloads in order; returns one record per payload or raises
    :class:`TranscriptError` naming the event index, instance and round."""

    def __init__(self, source: Where | None = None) -> None:
        self.source = source or Where()
        self.field: Field | None = None
        self.count = 0  # payloads fed
        self.current: InstanceStart | None = None  # the last instance read (earlier ones are not kept)
        self.names = NameBook()  # the names of all instances read, by position
        self.rounds_done = 0  # rounds of the current instance
        self.awaiting_challenge = False
        self.final_seen = False
        self.pending_batch: BatchDecl | None = None
        self._decode: Any = None  # packed-run decoder of the field, set by the field event
        self._elem_bytes = 0
        self._prime_modulus = 0  # p for a prime field, 0 for an extension
        self._runs: dict[int, Any] | None = None  # struct unpackers by run size (prime fields of 4/8 bytes)
        self._high_ones: bytes | None = None  # see _on_field
        self._num_vars = 0  # of the current instance (0 before any)
        self._index = -1
        self.stopped_at: UnknownEvent | None = None  # see stream()
        self.glue = True  # whether value/squeeze/opening are known (False for format version 1 files)
        self.defined: dict[str, int | None] = {}  # glue name -> list length (None for one element)
        self._late: tuple[InstanceStart, tuple[str, ...]] | None = None  # final_expr names still to come

    # ----- position --------------------------------------------------------------
    @property
    def instance_count(self) -> int:
        return len(self.names)

    def where(self, round_: int | None = None) -> Where:
        cur = self.current
        return self.source.but(
            event=self.count,
            instance=cur.name if cur else None,
            round=round_,
        )

    def _fail(self, message: str, round_: int | None = None) -> TranscriptError:
        return TranscriptError(message, self.where(round_))

    # ----- feeding ---------------------------------------------------------------
    def feed(self, payload: Any, where: Where | None = None) -> Event:
        """The record of one payload (``where`` updates the source location)."""
        if where is not None:
            self.source = where
        try:
            return self._feed(payload)
        finally:
            self.count += 1

    def stream(self, payloads: Iterable[Any], until: str | None = None, *,
               refill: Callable[[], bool] | None = None,
               on_error: Callable[[Exception], Exception] | None = None) -> Iterator[Event]:
        """The records of many payloads, exactly as :meth:`feed` on each would give,
        but with the bulk of a transcript (rounds and challenges whose elements are
        packed, canonical bytes) handled inline: this is the reader's hot loop.
        Anything unusual (another type, a JSON list, a bad size or value) falls
        through to :meth:`feed`, which judges it and names any problem.
        Stops after an unknown event of type ``until`` (kept in ``stopped_at``).

        ``refill``, when given, is called each time ``payloads`` runs dry; while it
        returns True, iteration of ``payloads`` resumes (a msgpack ``Unpacker`` fed
        another chunk). ``on_error`` maps an exception escaping the loop (a failing
        payload source, a :class:`TranscriptError`) to the one raised instead (itself
        to re-raise it unchanged). With
        both, a reader needs no generator of its own around this one, which saves a
        frame switch per event."""
        self.stopped_at = None
        # The count is not kept per event: fast events are only rounds and challenges, which
        # alternate, so since the last sync there were 2 * rounds + (waiting then - waiting now).
        waiting, done = self.awaiting_challenge, self.rounds_done
        base_count, base_done, base_waiting = self.count, done, waiting
        num_vars, index, decode, prime = self._num_vars, self._index, self._decode, self._prime_modulus
        width, runs, high_ones = self._elem_bytes, self._runs, self._high_ones
        run_unpack: Any = None  # the struct unpacker of the last packed-run size seen
        run_size = -1
        from_bytes = int.from_bytes
        round_cls, challenge_cls = RoundMsg, ChallengeMsg
        record: Any  # a draft whose class becomes the frozen record's (see RoundMsgDraft)
        value: Any
        try:
            while True:
                for payload in payloads:
                    try:  # the fast path; a KeyError, TypeError or ValueError just means "not fast"
                        kind = payload["type"]
                        if kind == "challenge":
                            if waiting:
                                raw = payload["value"]
                                if raw.__class__ is bytes and len(raw) == width:
                                    if prime:
                                        value = from_bytes(raw, "little")
                                        ok = value < prime
                                    else:
                                        one = decode(raw)
                                        ok = one is not None
                                        value = one[0] if ok else None
                                    if ok:
                                        waiting = False
                                        record = ChallengeMsgDraft()
                                        record.instance, record.round, record.value = index, done, value
                                        record.__class__ = challenge_cls  # see RoundMsgDraft
                                        yield record
                                        continue
                        elif kind == "round":
                            if not waiting and done < num_vars:
                                raw = payload["evals"]
                                if raw.__class__ is bytes:
                                    if runs is not None:
                                        if len(raw) != run_size:
                                            run_size, run_unpack = len(raw), self._run_unpacker(len(raw))
                                        values = run_unpack(raw)  # TypeError when the size is not a whole run
                                        # canonical: no element's top bytes are all 0xff (one C search; `in` would first
                                        # try the needle as an int and clear a TypeError), else max()
                                        ok = (high_ones is not None and raw.find(high_ones) < 0) or max(values) < prime
                                    else:
                                        values = decode(raw)
                                        ok = values is not None and len(values) <= MAX_VALUES
                                    if ok:
                                        done += 1
                                        waiting = True
                                        record = RoundMsgDraft()
                                        record.instance, record.round, record.values = index, done, values
                                        record.__class__ = round_cls  # see RoundMsgDraft
                                        yield record
                                        continue
                    except (KeyError, TypeError, ValueError):
                        pass
                    self.awaiting_challenge, self.rounds_done, self.count = (
                        waiting, done, base_count + 2 * (done - base_done) + base_waiting - waiting)
                    try:
                        record = self.feed(payload)
                    finally:
                        waiting, done = self.awaiting_challenge, self.rounds_done
                        base_count, base_done, base_waiting = self.count, done, waiting
                    num_vars, index, decode, prime = self._num_vars, self._index, self._decode, self._prime_modulus
                    width, runs, high_ones = self._elem_bytes, self._runs, self._high_ones
                    if self.pending_batch is not None:  # only `instance` may follow: let feed() judge
                        num_vars = width = -1
                    if until is not None and record.__class__ is UnknownEvent and record.kind == until:
                        self.stopped_at = record
                        return
                    yield record
                if refill is None or not refill():
                    return
        except Exception as err:
            if on_error is None:
                raise
            self.awaiting_challenge, self.rounds_done, self.count = (
                waiting, done, base_count + 2 * (done - base_done) + base_waiting - waiting)
            mapped = on_error(err)
            if mapped is err:
                raise
            raise mapped from None
        finally:
            self.awaiting_challenge, self.rounds_done, self.count = (
                waiting, done, base_count + 2 * (done - base_done) + base_waiting - waiting)

    def account_run(self, rounds: int) -> None:
        """Count the ``rounds`` rounds, their challenges and the final of the current instance
        as fed: a caller that read and will check them in bulk (stepper.verify.sweep)."""
        cur = self.current
        if cur is None or rounds != cur.num_vars or self.rounds_done or self.awaiting_challenge or self.final_seen:
            raise ValueError(f"expected a fresh instance of {rounds} rounds to account for in bulk")
        self.rounds_done, self.final_seen = rounds, True
        self.count += 2 * rounds + 1

    def _run_unpacker(self, size: int) -> Any:
        """A ``struct`` unpacker for a packed run of ``size`` bytes of a prime field
        with 4- or 8-byte elements (None if the size is not a whole, capped run)."""
        assert self._runs is not None
        width = self._elem_bytes
        if size % width or size // width > MAX_VALUES:
            return None
        return self._runs.setdefault(size, struct.Struct(f"<{size // width}{'I' if width == 4 else 'Q'}").unpack)

    def _feed(self, payload: Any) -> Event:
        if payload.__class__ is not dict and not isinstance(payload, Mapping):  # typing's check is slow
            raise self._fail(f"expected an event map with a `type`, found {type(payload).__name__}")
        kind = payload.get("type")
        if not isinstance(kind, str):
            raise self._fail(f"expected a string `type` in every event, found {short(kind)}")
        if self.field is None and kind != "field":
            if kind in KNOWN_TYPES:
                raise self._fail(f"expected the `field` event first, found `{short(kind)}`")
            return UnknownEvent(kind[:MAX_TEXT], plain(payload, self._fail))
        handler = _HANDLERS.get(kind)
        if handler is not None and not self.glue and kind in GLUE_TYPES:
            handler = None
        if handler is None:
            cur = self.current
            return UnknownEvent(kind[:MAX_TEXT], plain(payload, self._fail), cur.index if cur else None)
        return handler(self, payload)  # type: ignore[no-any-return]

    def _on_field(self, payload: Mapping[str, Any]) -> Event:
        if self.field is not None:
            raise self._fail("expected one `field` event, found a second")
        try:
            self.field = field_from_spec(dict(payload), self.where())
        except FieldError as err:
            raise TranscriptError(err.message, err.where) from None
        self._decode = decoder_for(self.field)
        self._elem_bytes = self.field.elem_bytes
        self._prime_modulus = 0 if self.field.is_extension else self.field.p
        if self._prime_modulus and self._elem_bytes in (4, 8):
            self._runs = {}
            # A value >= p below 256**width shares p's leading 0xff bytes (if p has any: Goldilocks has
            # four), so a packed run without that byte string anywhere is canonical; with it, max() decides.
            top = self._prime_modulus.to_bytes(self._elem_bytes, "big")
            ones = len(top) - len(top.lstrip(b"\xff"))
            self._high_ones = b"\xff" * ones if ones else None
        return FieldDecl(self.field)

    def _on_schedule(self, payload: Mapping[str, Any]) -> Event:
        if self.current is not None:
            raise self._fail("expected the `schedule` event before the first instance")
        name = checked_text(payload.get("name"), "schedule name", self._fail)
        if not name:
            raise self._fail("expected a non-empty schedule `name`, found an empty one")
        label = checked_text(payload.get("label", ""), "schedule label", self._fail)
        params = payload.get("params", {})
        if not isinstance(params, Mapping):
            raise self._fail("expected schedule `params` as a map")
        return ScheduleDecl(name, label, plain(params, self._fail))

    def _on_batch(self, payload: Mapping[str, Any]) -> Event:
        self._close_instance()
        coefficient = self._element(payload.get("coefficient"), "batch coefficient")
        terms = self._elements(payload.get("terms"), "batch terms")
        sources_raw = payload.get("sources", [])
        if not isinstance(sources_raw, list) or len(sources_raw) > len(terms) or len(sources_raw) > MAX_VALUES:
            raise self._fail("expected batch `sources` as a list of at most one string per term")
        sources = tuple(checked_text(s, "batch source", self._fail) for s in sources_raw)
        self.pending_batch = BatchDecl(coefficient, terms, sources)
        return self.pending_batch

    def _on_instance(self, payload: Mapping[str, Any]) -> Event:
        name = payload.get("name", self)  # the default name is formatted only when there is no name
        name = f"instance {len(self.names)}" if name is self else checked_text(name, "instance name", self._fail)
        num_vars, degree = payload.get("num_vars"), payload.get("degree")
        if num_vars.__class__ is not int or not 0 <= num_vars <= MAX_NUM_VARS:  # type: ignore[operator]
            num_vars = checked_count(num_vars, "num_vars", 0, MAX_NUM_VARS, self._fail)
        if degree.__class__ is not int or not 0 <= degree <= MAX_DEGREE:  # type: ignore[operator]
            degree = checked_count(degree, "degree", 0, MAX_DEGREE, self._fail)
        claim = self._element(payload.get("claim"), "claim")
        order = payload.get("order", "low-first")
        if order not in ORDERS:
            raise self._fail(f"expected `order` among {', '.join(ORDERS)}, found {short(order)}")
        form = payload.get("form", "evals")
        if form not in ROUND_FORMS or (form == EQ_FACTORED and not self.glue):
            forms = ROUND_FORMS if self.glue else ROUND_FORMS[:-1]
            raise self._fail(f"expected `form` among {', '.join(forms)}, found {short(form)}")
        if self._late is not None:
            self._settle_late()
        claim_expr = final_expr = eq_point = None
        final_parsed: Expr | None = None
        if self.glue and ("claim_expr" in payload or "final_expr" in payload or "eq_point" in payload
                          or form == EQ_FACTORED):
            claim_expr, final_expr, eq_point, final_parsed = self._instance_glue(payload, name, num_vars, degree,
                                                                                 form)
        start: Any = InstanceStartDraft()  # every field checked above: skip the frozen __init__ (see RoundMsgDraft)
        start.index, start.name, start.num_vars, start.degree, start.claim = (
            len(self.names), name, num_vars, degree, claim)
        start.order, start.form, start.batch = order, form, self.pending_batch
        start.claim_expr, start.final_expr, start.eq_point = claim_expr, final_expr, eq_point
        start.__class__ = InstanceStart
        self.pending_batch = None
        self.current = start
        self.names.add(name)
        self._num_vars = num_vars
        self._index = start.index
        self.rounds_done = 0
        self.awaiting_challenge = False
        self.final_seen = False
        if final_parsed is not None:
            defined = self.defined
            late = tuple(n for n in final_parsed.references().values if n not in defined)
            self._late = (start, late) if late else None
        return start

    # ----- the glue -----------------------------------------------------------------
    def _instance_glue(self, payload: Mapping[str, Any], name: str, num_vars: int, degree: int,
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
            try:
                expr = parse_cached(text)
            except ExpressionError:
                try:  # again, for a message naming the key and the instance
                    parse_expr(text, f"{key} of instance {name!r}")
                except ExpressionError as err:
                    raise self._fail(err.message) from None
                raise
            self._check_refs(expr, key, name)
            exprs.append(text)
            parsed = expr
        eq_raw = payload.get("eq_point")
        eq_point: tuple[Element, ...] | str | None = None
        if form == EQ_FACTORED:
            if degree < 1:
                raise self._fail(f"expected degree >= 1 for the eq-factored instance {name!r}, found {degree}")
            if eq_raw is None:
                raise self._fail(f"expected `eq_point` with form eq-factored in instance {name!r}, found none")
            if isinstance(eq_raw, str):
                if eq_raw not in self.defined:
                    raise self._fail(f"instance {name!r}: eq_point names {short(eq_raw)}, which no earlier value or "
                                     "squeeze defines")
                length = self.defined[eq_raw]
                if length is None:
                    raise self._fail(f"instance {name!r}: eq_point names {eq_raw!r}, one element; expected a list "
                                     f"of num_vars = {num_vars}")
                eq_point = eq_raw
            else:
                eq_point = self._elements(eq_raw, "eq_point")
                length = len(eq_point)
            if length != num_vars:
                raise self._fail(f"instance {name!r}: expected eq_point of num_vars = {num_vars} elements, "
                                 f"found {length}")
        elif eq_raw is not None:
            raise self._fail(f"expected `eq_point` only with form eq-factored, found it with form {form!r} in "
                             f"instance {name!r}")
        return exprs[0], exprs[1], eq_point, parsed if exprs[1] is not None else None

    def _check_refs(self, expr: Expr, key: str, name: str) -> None:
        refs = expr.references()
        earlier = self.names
        for inst in (*refs.points, *refs.finals):
            if inst not in earlier:
                raise self._fail(f"instance {name!r}: {key} names the instance {inst!r}, which is not an earlier "
                                 "instance")
        if key == "claim_expr":
            if refs.own_point:
                raise self._fail(f"instance {name!r}: claim_expr uses eq(a) with the instance's own point, which is "
                                 "not known before its rounds; write eq(a, b)")
            for value in refs.values:
                if value not in self.defined:
                    raise self._fail(f"instance {name!r}: claim_expr names {value!r}, which no earlier value, "
                                     "squeeze or opening defines")
        for value in refs.lists:
            if self.defined.get(value, 0) is None:
                raise self._fail(f"instance {name!r}: {key} uses {value!r} as a list, found one element")
        for value in refs.scalars:
            if self.defined.get(value) is not None:
                raise self._fail(f"instance {name!r}: {key} uses {value!r} as one element, found a list of "
                                 f"{self.defined[value]}")

    def _settle_late(self) -> None:
        """At the next instance: the previous instance's final_expr names must all have come."""
        assert self._late is not None
        start, late = self._late
        self._late = None
        missing = [n for n in late if n not in self.defined]
        if missing:
            raise TranscriptError(
                f"instance {start.name!r}: final_expr names {missing[0]!r}, which nothing before the next instance "
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
            raise self._fail(f"expected an opening after all {cur.num_vars} rounds of instance {cur.name!r} "
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

    def _close_instance(self) -> None:
        if self.pending_batch is not None:
            raise self._fail("expected an `instance` event right after `batch`")

    def _on_round(self, payload: Mapping[str, Any]) -> Event:
        self._close_instance()
        cur = self._need_instance("round")
        number = self.rounds_done + 1
        if self.awaiting_challenge:
            raise self._fail(f"expected the challenge of round {self.rounds_done} before another round", number)
        if number > cur.num_vars:
            raise self._fail(f"expected at most num_vars = {cur.num_vars} rounds, found round {number}", number)
        raw = next((payload[k] for k in ("evals", "values", "coeffs") if k in payload), None)
        values = self._elements(raw, "round values", number)
        self.rounds_done = number
        self.awaiting_challenge = True
        return RoundMsg(cur.index, number, values)

    def _on_challenge(self, payload: Mapping[str, Any]) -> Event:
        self._close_instance()
        cur = self._need_instance("challenge")
        if not self.awaiting_challenge:
            raise self._fail("expected a round before its challenge, found a challenge with no round pending",
                             self.rounds_done or None)
        value = self._element(payload.get("value"), "challenge", self.rounds_done)
        self.awaiting_challenge = False
        return ChallengeMsg(cur.index, self.rounds_done, value)

    def _on_final(self, payload: Mapping[str, Any]) -> Event:
        self._close_instance()
        cur = self._need_instance("final")
        if self.final_seen:
            raise self._fail("expected one `final` per instance, found a second")
        if self.rounds_done != cur.num_vars or self.awaiting_challenge:
            raise self._fail(
                f"expected `final` after all {cur.num_vars} rounds and their challenges, "
                f"found it after {self.rounds_done} rounds"
            )
        self.final_seen = True
        return FinalValue(cur.index, self._element(payload.get("value"), "final value"))

    def _on_buckets(self, payload: Mapping[str, Any]) -> Event:
        cur = self._need_instance("buckets")
        round_ = checked_count(payload.get("round"), "buckets round", 0, MAX_NUM_VARS, self._fail)
        chunk = checked_count(payload.get("chunk"), "buckets chunk", 0, 1 << 20, self._fail)
        count = checked_count(payload.get("count"), "buckets count", 0, 1 << 62, self._fail)
        sizes_raw = payload.get("sizes")
        sizes: tuple[int, ...] | None = None
        if sizes_raw is not None:
            if not isinstance(sizes_raw, list) or len(sizes_raw) > MAX_SIZES:
                raise self._fail(f"expected bucket `sizes` as a list of at most {MAX_SIZES} counts")
            sizes = tuple(checked_count(s, "bucket size", 0, 1 << 62, self._fail) for s in sizes_raw)
        bound = payload.get("bound_log2")
        remaining = payload.get("remaining")
        extra = {k: v for k, v in payload.items()
                 if k not in ("type", "round", "chunk", "count", "sizes", "bound_log2", "remaining")}
        return BucketStats(
            cur.index,
            round_,
            chunk,
            count,
            sizes,
            None if bound is None else checked_count(bound, "bound_log2", 0, 1 << 40, self._fail),
            None if remaining is None else checked_count(remaining, "remaining", 0, 1 << 62, self._fail),
            plain(extra, self._fail),
        )

    def _on_note(self, payload: Mapping[str, Any]) -> Event:
        text = checked_text(payload.get("text"), "note text", self._fail)
        target = payload.get("instance")
        if target is None and "instance" in payload:  # an explicit null: a note on the whole proof
            index = None
        elif target is None:
            index = self.current.index if self.current else None
        elif isinstance(target, str):
            index = self.names.last(target)
            if index is None:
                raise self._fail(f"expected a note's `instance` to name an instance seen so far, found {short(target)}")
        else:
            index = checked_count(target, "note instance", 0, max(0, len(self.names) - 1), self._fail)
            if not self.names:
                raise self._fail("expected a note's `instance` to refer to an instance seen so far")
        round_raw = payload.get("round")
        round_ = None if round_raw is None else checked_count(round_raw, "note round", 0, MAX_NUM_VARS, self._fail)
        return Note(text, index, round_)

    # ----- helpers -------------------------------------------------------------------
    def _need_instance(self, kind: str) -> InstanceStart:
        cur = self.current
        if cur is None:
            raise self._fail(f"expected an `instance` event before `{kind}`")
        return cur

    def _element(self, raw: Any, what: str, round_: int | None = None) -> Element:
        assert self.field is not None
        if raw.__class__ is bytes and len(raw) == self._elem_bytes:
            if self._prime_modulus:  # a prime field: the bytes are the value, little-endian
                value = int.from_bytes(raw, "little")
                if value < self._prime_modulus:
                    return value
            one = self._decode(raw)
            if one is not None:
                return one[0]  # type: ignore[no-any-return]
        if raw is None:
            raise self._fail(f"expected a {what}, found none", round_)
        try:
            return self.field.parse(raw)
        except FieldError as err:  # the location is built only when it is needed
            raise TranscriptError(f"{what}: {err.message}", self.where(round_)) from None

    def _elements(self, raw: Any, what: str, round_: int | None = None) -> tuple[Element, ...]:
        if isinstance(raw, (bytes, bytearray)) and self.field is not None:
            values = self._decode(bytes(raw))
            if values is None:
                try:
                    unpack_elements(self.field, bytes(raw), what, self.where(round_))
                except FieldError as err:
                    raise TranscriptError(err.message, err.where) from None
            if len(values) > MAX_VALUES:
                raise self._fail(f"expected at most {MAX_VALUES} {what}, found {len(values)}", round_)
            return values  # type: ignore[no-any-return]
        if not isinstance(raw, list):
            raise self._fail(f"expected {what} as a list, found {short(raw)}", round_)
        if len(raw) > MAX_VALUES:
            raise self._fail(f"expected at most {MAX_VALUES} {what}, found {len(raw)}", round_)
        return tuple(self._element(v, what, round_) for v in raw)


_HANDLERS: dict[str, Callable[[Sequencer, Mapping[str, Any]], Event]] = {
    kind: getattr(Sequencer, "_on_" + kind) for kind in KNOWN_TYPES}  # each known type's handler


def plain_copy(value: Any, where: Where | None = None) -> Any:
    """A capped copy of free-form data (metadata, unknown payloads): refuses deep
    nesting and huge strings with a :class:`TranscriptError` at ``where``."""
    return plain(value, Sequencer(where)._fail)
