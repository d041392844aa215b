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

The rules live one module per part of the stream: the statement, rounds, challenges and
finals here, with the reader's hot loop (:meth:`Sequencer.stream`), the glue in
:mod:`stepper.transcript.glue_rules`, buckets and notes in :mod:`stepper.transcript.annotations`,
and the position and helpers they share in :mod:`stepper.transcript.sequence_state`.

:func:`to_payload` is the inverse: a record as a payload, binary or JSON.
Caps keep a hostile input from costing unbounded memory.
"""

from __future__ import annotations

import struct
from itertools import repeat
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator, Mapping, Sequence

from stepper.errors import FieldError, TranscriptError, Where
from stepper.field.poly import EQ_FACTORED, ORDERS, ROUND_FORMS
from stepper.field.spec import field_from_spec
from stepper.transcript.packed import decoder_for, pair_run
from stepper.transcript.payload_rules import (
    MAX_DEGREE, MAX_NUM_VARS, MAX_SIZES, MAX_TEXT, MAX_VALUES, checked_count, checked_text, plain, short,
)
from stepper.transcript.payloads import to_payload
from stepper.transcript.records import (
    BatchDecl, ChallengeMsg, ChallengeMsgDraft, FieldDecl, FinalValue, InstanceStart, InstanceStartDraft, RoundMsg,
    RoundMsgDraft, ScheduleDecl, UnknownEvent,
)
from stepper.transcript.annotations import AnnotationRules
from stepper.transcript.glue_rules import GlueRules

if TYPE_CHECKING:
    from stepper.field.expr import Expr
    from stepper.field.shape import Element
    from stepper.transcript.model import Event

__all__ = ["Sequencer", "to_payload", "plain_copy", "longest_text", "MAX_VALUES", "MAX_SIZES", "MAX_TEXT",
           "MAX_NUM_VARS", "MAX_DEGREE"]

KNOWN_TYPES = ("field", "schedule", "batch", "instance", "round", "challenge", "final", "buckets", "note",
               "value", "squeeze", "opening")
GLUE_TYPES = ("value", "squeeze", "opening")
MIN_PAIR_RUN = 2  # rounds left in an instance for the hot loop to look for a packed run of them


class Sequencer(GlueRules, AnnotationRules):
    """Feeds payloads in order; returns one record per payload or raises
    :class:`TranscriptError` naming the event index, instance and round."""

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
               on_error: Callable[[Exception], Exception] | None = None,
               window: Callable[[], tuple[bytes, int]] | None = None) -> Iterator[Event]:
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
        frame switch per event.

        ``window``, when given (``payloads`` is then a msgpack ``Unpacker``), returns the
        bytes last fed to the unpacker and the unpacker offset (``tell()``) of their first
        byte. Where the next events are rounds each followed by its challenge, packed as
        the writer packs them in a prime field of 4- or 8-byte elements
        (:func:`~stepper.transcript.packed.pair_run`), the loop decodes the whole run from
        those bytes in C, takes it from the unpacker with ``read_bytes`` and makes the same
        records the fast path would; the first pair that is not canonical, and whatever
        follows the run, go through the loop as before."""
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
                if window is not None and runs is not None and not waiting and num_vars - done >= MIN_PAIR_RUN:
                    data, data_at = window()
                    at = payloads.tell() - data_at  # type: ignore[attr-defined]
                    found = pair_run(data, at, width, num_vars - done) if at >= 0 else None
                    if found is not None and found[0]:
                        count, layout = found
                        end = at + count * layout.stride
                        view = memoryview(data)[at:end]
                        rows: Any = layout.pair.iter_unpack(view)  # (values..., challenge) per pair
                        if high_ones is None or data.find(high_ones, at, end) >= 0:  # a value may be >= p
                            rows = list(rows)  # unpacked once, for the range check and the records
                            if max(map(max, rows)) >= prime:  # up to the first non-canonical
                                count = next(i for i, row in enumerate(rows) if max(row) >= prime)
                                rows = rows[:count]
                        payloads.read_bytes(count * layout.stride)  # type: ignore[attr-defined]
                        n = layout.values
                        for row in rows:
                            done += 1
                            waiting = True
                            record = RoundMsgDraft()
                            record.instance, record.round, record.values = index, done, row[:n]
                            record.__class__ = round_cls  # see RoundMsgDraft
                            yield record
                            waiting = False
                            record = ChallengeMsgDraft()
                            record.instance, record.round, record.value = index, done, row[n]
                            record.__class__ = challenge_cls
                            yield record
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
                    if window is not None and runs is not None and not waiting and num_vars - done >= MIN_PAIR_RUN:
                        break  # rounds may follow: look for a packed run of them
                else:
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
        code = {4: "I", 8: "Q"}.get(self.field.base_bytes)
        self._one_extension = (struct.Struct(f"<{self.field.degree}{code}").unpack
                               if self.field.is_extension and code is not None else None)
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
        if self._late is not None:  # the previous instance's final_expr names: its own errors say so
            self._settle_late()
        try:
            return self._start_instance(payload)
        except TranscriptError as err:  # about the instance this event starts, not the one before it
            name = payload.get("name")
            raise err.at(instance=name if name.__class__ is str else None) from None

    def _start_instance(self, payload: Mapping[str, Any]) -> InstanceStart:
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
        claim_expr = final_expr = eq_point = None
        final_parsed: Expr | None = None
        if self.glue and ("claim_expr" in payload or "final_expr" in payload or "eq_point" in payload
                          or form == EQ_FACTORED):
            if self.defer_glue and form != EQ_FACTORED and "eq_point" not in payload:
                claim_expr, final_expr = self._glue_text(payload, "claim_expr"), self._glue_text(payload, "final_expr")
            else:
                claim_expr, final_expr, eq_point, final_parsed = self._instance_glue(payload, num_vars, degree,
                                                                                     form)
        start = self._open(name, num_vars, degree, claim, order, form, claim_expr, final_expr, eq_point)
        if final_parsed is not None:
            self._expect_late(start, final_parsed)
        return start

    def _open(self, name: str, num_vars: int, degree: int, claim: Element, order: str, form: str,
              claim_expr: str | None, final_expr: str | None, eq_point: Any) -> InstanceStart:
        """The record of an instance event whose every field is checked, made the current instance."""
        start = _checked_start(len(self.names), name, num_vars, degree, claim, order, form, self.pending_batch,
                              claim_expr, final_expr, eq_point)
        self.pending_batch = None
        self.current = start
        self.names.add(name)
        self._num_vars = num_vars
        self._index = start.index
        self.rounds_done = 0
        self.awaiting_challenge = False
        self.final_seen = False
        return start

    def plain_instance(self, name: str, num_vars: int, degree: int, claim: bytes, claim_expr: str | None = None,
                       final_expr: str | None = None) -> InstanceStart:
        """``feed`` of the payload {"type": "instance", "name": name, "num_vars": num_vars, "degree":
        degree, "claim": claim} and no other key but ``claim_expr`` and ``final_expr`` when given
        (stepper.verify.sweep reads such events from bytes): the same record and state by a short
        path where every value is plainly in range in a prime field (and the texts are deferred, see
        ``defer_glue``); anything else goes through ``feed``, which judges it."""
        prime = self._prime_modulus
        texts = claim_expr is not None or final_expr is not None
        if (prime and self.pending_batch is None and self._late is None and len(name) <= MAX_TEXT
                and 0 <= num_vars <= MAX_NUM_VARS and 0 <= degree <= MAX_DEGREE and claim.__class__ is bytes
                and len(claim) == self._elem_bytes and (not texts or (
                    self.glue and self.defer_glue and len(claim_expr or "") <= MAX_TEXT
                    and len(final_expr or "") <= MAX_TEXT))):
            value = int.from_bytes(claim, "little")
            if value < prime:
                self.count += 1
                return self._open(name, num_vars, degree, value, "low-first", "evals", claim_expr, final_expr, None)
        payload = {"type": "instance", "name": name, "num_vars": num_vars, "degree": degree, "claim": claim}
        if claim_expr is not None:
            payload["claim_expr"] = claim_expr
        if final_expr is not None:
            payload["final_expr"] = final_expr
        return self.feed(payload)  # type: ignore[return-value]

    def plain_runs(self, names: Sequence[str], num_vars: Sequence[int], degrees: Sequence[int], claims: bytes
                   ) -> tuple[Element, ...] | None:
        """:meth:`plain_instance` (no ``claim_expr``, no ``final_expr``) then :meth:`account_run` for
        each of several instances in a row, each an instance event of the writer's plainest form
        followed by its whole run (stepper.verify.sweep reads them from bytes and checks the runs in
        bulk): instance i has name ``names[i]``, ``num_vars[i]`` >= 1, ``degrees[i]`` and the claim
        packed at ``claims[i * elem_bytes:]``. Leaves the same state as those calls, the last instance's
        record the current one (earlier records are not made: ``plain_record`` makes one on demand), and
        returns the claims as elements; returns None, having done nothing, unless every value is
        plainly in range (the claims canonical): the caller then feeds the instances one at a time,
        and the usual path judges them."""
        values = self._bulk_claims(names, num_vars, degrees, claims)
        if values is None:
            return None
        self.names.add_all(names[:-1])
        self._open(names[-1], num_vars[-1], degrees[-1], values[-1], "low-first", "evals", None, None, None)
        self.rounds_done, self.final_seen = num_vars[-1], True
        self.count += 2 * len(names) + 2 * sum(num_vars)  # per instance its event, 2 per round, its final
        return values  # type: ignore[no-any-return]

    def glued_runs(self, names: Sequence[str], num_vars: Sequence[int], degrees: Sequence[int], claims: bytes,
                   claim_exprs: Sequence[str | None], final_exprs: Sequence[str | None]) -> list[InstanceStart] | None:
        """:meth:`glued_columns`, returning every instance's record (made by the short path), or None."""
        values = self.glued_columns(names, num_vars, degrees, claims, claim_exprs, final_exprs)
        if values is None:
            return None
        count = len(names)
        first = len(self.names) - count
        starts = list(map(_checked_start, range(first, first + count - 1), names, num_vars, degrees, values,
                          repeat("low-first"), repeat("evals"), repeat(None), claim_exprs, final_exprs, repeat(None)))
        starts.append(self.current)  # type: ignore[arg-type]
        return starts

    def glued_columns(self, names: Sequence[str], num_vars: Sequence[int], degrees: Sequence[int], claims: bytes,
                      claim_exprs: Sequence[str | None], final_exprs: Sequence[str | None]) -> tuple[Element, ...] | None:
        """:meth:`plain_instance` with the texts given (deferred, see ``defer_glue``) then
        :meth:`account_run` for each of several instances in a row, as :meth:`plain_runs` takes
        them (stepper.verify.sweep reads them and the glue after their runs from bytes): the same
        state, names added together, the last instance's record the current one (earlier records are
        not made: ``plain_record`` makes one on demand). Returns the claims as elements, or None,
        having done nothing, unless every value is plainly in range (the claims canonical, the texts
        no longer than a text may be): the caller then takes them one at a time."""
        count = len(names)
        if (not count or not self.glue or not self.defer_glue or not self._prime_modulus
                or len(claim_exprs) != count or len(final_exprs) != count
                or max(longest_text(claim_exprs), longest_text(final_exprs)) > MAX_TEXT):
            return None
        values = self._bulk_claims(names, num_vars, degrees, claims)
        if values is None:
            return None
        self.names.add_all(names[:-1])
        self._open(names[-1], num_vars[-1], degrees[-1], values[-1], "low-first", "evals", claim_exprs[-1],
                   final_exprs[-1], None)
        self.rounds_done, self.final_seen = num_vars[-1], True
        self.count += 2 * count + 2 * sum(num_vars)  # per instance its event, 2 per round, its final
        return values  # type: ignore[no-any-return]

    def _bulk_claims(self, names: Sequence[str], num_vars: Sequence[int], degrees: Sequence[int], claims: bytes
                     ) -> tuple[Element, ...] | None:
        """The claims of instances taken in a row (:meth:`plain_runs`, :meth:`glued_runs`) as elements,
        or None unless one may take them so: a field set, no batch or late event pending, one
        num_vars, degree and canonical claim per name, each value plainly within its limits."""
        count = len(names)
        if (not count or self.field is None or self.pending_batch is not None or self._late is not None
                or len(num_vars) != count or len(degrees) != count or len(claims) != count * self._elem_bytes
                or min(num_vars) < 1 or max(num_vars) > MAX_NUM_VARS or min(degrees) < 0
                or max(degrees) > MAX_DEGREE or max(map(len, names)) > MAX_TEXT):
            return None
        values = self._decode(claims)  # None when some claim is not canonical
        return values if values is not None and len(values) == count else None  # type: ignore[no-any-return]

    @staticmethod
    def plain_record(index: int, name: str, num_vars: int, degree: int, claim: Element, claim_expr: str | None = None,
                     final_expr: str | None = None) -> InstanceStart:
        """The record :meth:`plain_runs` (or, with texts, :meth:`glued_columns`) would have made for the
        instance at ``index`` (its values already checked there: made as :meth:`_open` makes one, without
        the frozen ``__init__``)."""
        return _checked_start(index, name, num_vars, degree, claim, "low-first", "evals", None, claim_expr, final_expr,
                              None)

    def _on_round(self, payload: Mapping[str, Any]) -> Event:
        self._close_instance()
        cur = self._need_instance("round")
        number = self.rounds_done + 1
        if self.awaiting_challenge:
            raise self._fail(f"expected the challenge of round {self.rounds_done} before another round", number)
        if number > cur.num_vars:
            raise self._fail(f"expected at most num_vars = {cur.num_vars} rounds, found round {number}", number)
        raw = next((payload[k] for k in ("evals", "values", "coeffs") if k in payload), None)
        if raw is None:
            others = [str(k) for k in payload if k != "type"]
            raise self._fail(f"expected the round's values under 'evals', found no such key "
                             f"(keys: {short(others) if others else 'none'})", number)
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


_HANDLERS: dict[str, Callable[[Sequencer, Mapping[str, Any]], Event]] = {
    kind: getattr(Sequencer, "_on_" + kind) for kind in KNOWN_TYPES}  # each known type's handler


def longest_text(texts: Sequence[str | None]) -> int:
    """The characters of the longest of ``texts`` (None: no text); a column that knows it says so
    (``longest``: texts the whole-file pass keeps as bytes until read)."""
    longest = getattr(texts, "longest", None)
    return int(longest) if longest is not None else max(map(len, filter(None, texts)), default=0)


def _checked_start(index: int, name: str, num_vars: int, degree: int, claim: Element, order: str, form: str,
                  batch: Any, claim_expr: str | None, final_expr: str | None, eq_point: Any) -> InstanceStart:
    """The record of an instance whose every field the caller has checked: made as a draft whose class
    then becomes the frozen record's, skipping the frozen ``__init__`` (see RoundMsgDraft)."""
    start: Any = InstanceStartDraft()
    start.index, start.name, start.num_vars, start.degree, start.claim = index, name, num_vars, degree, claim
    start.order, start.form, start.batch = order, form, batch
    start.claim_expr, start.final_expr, start.eq_point = claim_expr, final_expr, eq_point
    start.__class__ = InstanceStart
    return start  # type: ignore[no-any-return]


def plain_copy(value: Any, where: Where | None = None) -> Any:
    """A capped copy of free-form data (metadata, unknown payloads): refuses deep
    nesting and huge strings with a :class:`TranscriptError` at ``where``."""
    return plain(value, Sequencer(where)._fail)
