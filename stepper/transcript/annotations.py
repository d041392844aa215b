"""The rules of the annotations: bucket occupancy (``buckets``) and notes (``note``), which may
stand anywhere after ``field``."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping

from stepper.transcript.payload_rules import MAX_NUM_VARS, MAX_SIZES, checked_count, checked_text, plain, short
from stepper.transcript.records import BucketStats, Note
from stepper.transcript.sequence_state import SequenceState

if TYPE_CHECKING:
    from stepper.transcript.model import Event

__all__ = ["AnnotationRules"]


class AnnotationRules(SequenceState):
    """The Sequencer's rules for bucket statistics and notes."""

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
