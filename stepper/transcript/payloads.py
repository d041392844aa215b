"""Event records as payloads: the inverse of :class:`stepper.transcript.events.Sequencer`.

:func:`to_payload` turns a record back into the map a transcript file or an
event stream carries: elements as fixed-width bytes (``binary``; with
``packed``, element lists as one blob, the form transcript files store) or as
JSON values (integers, decimal strings above 2^53, lists for extensions).
Feeding the payload to a fresh Sequencer in the same position gives the record
back; the tests pin that for every event kind and every form.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from stepper.field.field import Element, Field
from stepper.transcript.packed import pack_elements
from stepper.transcript.records import (
    BatchDecl, BucketStats, ChallengeMsg, FieldDecl, FinalValue, InstanceStart, Note, RoundMsg, ScheduleDecl,
    UnknownEvent,
)
from stepper.transcript.glue_records import NamedValue, Opening, Squeeze

if TYPE_CHECKING:
    from stepper.transcript.model import Event

__all__ = ["to_payload"]


def to_payload(event: Event, field: Field | None, binary: bool, packed: bool = False) -> dict[str, Any]:
    """The payload of a record: elements as fixed-width bytes (``binary``) or JSON values.
    With ``packed`` (binary only) a list of elements is one blob of concatenated
    fixed-width elements, the form transcript files store."""

    def el(e: Element) -> Any:
        assert field is not None
        return field.encode(e) if binary else field.to_json(e)

    def els(values: tuple[Element, ...]) -> Any:
        assert field is not None
        if binary and packed:
            return pack_elements(field, values)
        return [el(v) for v in values]

    if isinstance(event, FieldDecl):
        return {"type": "field", **event.field.spec()}
    if isinstance(event, ScheduleDecl):
        out: dict[str, Any] = {"type": "schedule", "name": event.name}
        if event.label:
            out["label"] = event.label
        if event.params:
            out["params"] = dict(event.params)
        return out
    if isinstance(event, BatchDecl):
        out = {"type": "batch", "coefficient": el(event.coefficient), "terms": els(event.terms)}
        if event.sources:
            out["sources"] = list(event.sources)
        return out
    if isinstance(event, InstanceStart):
        out = {"type": "instance", "name": event.name, "num_vars": event.num_vars, "degree": event.degree,
               "claim": el(event.claim)}
        if event.order != "low-first":
            out["order"] = event.order
        if event.form != "evals":
            out["form"] = event.form
        if event.claim_expr is not None:
            out["claim_expr"] = event.claim_expr
        if event.final_expr is not None:
            out["final_expr"] = event.final_expr
        if event.eq_point is not None:
            out["eq_point"] = event.eq_point if isinstance(event.eq_point, str) else [el(v) for v in event.eq_point]
        return out
    if isinstance(event, (NamedValue, Squeeze)):
        kind = "value" if isinstance(event, NamedValue) else "squeeze"
        # a list is always a list of elements (never packed): one element and a list of one stay apart
        return {"type": kind, "name": event.name,
                "value": [el(v) for v in event.value] if event.listed else el(event.value)}
    if isinstance(event, Opening):
        out = {"type": "opening", "name": event.name, "value": el(event.value)}
        if event.table != event.name:
            out["table"] = event.table
        return out
    if isinstance(event, RoundMsg):
        return {"type": "round", "evals": els(event.values)}
    if isinstance(event, ChallengeMsg):
        return {"type": "challenge", "value": el(event.value)}
    if isinstance(event, FinalValue):
        return {"type": "final", "value": el(event.value)}
    if isinstance(event, BucketStats):
        out = {"type": "buckets", "round": event.round, "chunk": event.chunk, "count": event.count}
        if event.sizes is not None:
            out["sizes"] = list(event.sizes)
        if event.bound_log2 is not None:
            out["bound_log2"] = event.bound_log2
        if event.remaining is not None:
            out["remaining"] = event.remaining
        out.update(event.extra)
        return out
    if isinstance(event, Note):
        out = {"type": "note", "text": event.text}
        if event.instance is not None:
            out["instance"] = event.instance
        if event.round is not None:
            out["round"] = event.round
        return out
    if isinstance(event, UnknownEvent):
        return {**event.payload, "type": event.kind}
    raise TypeError(f"not an event record: {type(event).__name__}")
