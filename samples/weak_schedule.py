"""A Fiat-Shamir schedule with the classic weak-transform bug, as a `--challenges` plug-in.

It re-derives challenges exactly like stepper's built-in schedule
(``stepper-sha256/1``) except that an instance's claimed sum is absorbed as zero,
the way a prover built with ``--fault unbound-claim`` draws them:

    stepper prove --kind generic -o weak.sumtr --fault unbound-claim
    stepper check weak.sumtr --challenges samples/weak_schedule.py:derive

``check`` then accepts every challenge (they match this schedule) and its
binding probe reports that the claim does not influence the challenges: a
prover could pick its claim after seeing them. This file only shows the
plug-in route; it is not a schedule to copy.
"""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from stepper.verify.fiatshamir import Sha256Schedule
from stepper.field.spec import field_from_spec
from stepper.transcript.glue_records import NamedValue, Opening
from stepper.transcript.model import BatchDecl, FieldDecl, InstanceStart, RoundMsg, ScheduleDecl


def derive(history: Sequence[Mapping[str, Any]]) -> Any:
    """The challenge for the round at the end of ``history`` (plain event maps, ints)."""
    schedule = Sha256Schedule()
    field = None
    index = -1
    round_ = 0
    for event in history:
        kind = event.get("type")
        if kind == "field":
            field = field_from_spec(dict(event))
            schedule.observe(FieldDecl(field))
        elif kind == "schedule":
            schedule.observe(ScheduleDecl(event["name"], event.get("label", "")))
        elif kind == "batch":
            terms = tuple(_element(field, t) for t in event["terms"])
            schedule.observe(BatchDecl(_element(field, event["coefficient"]), terms))
        elif kind == "instance":
            index += 1
            round_ = 0
            schedule.observe(InstanceStart(index, event["name"], event["num_vars"], event["degree"], field.zero,
                                           event.get("order", "low-first"), event.get("form", "evals")))
        elif kind == "round":
            values = event.get("evals", event.get("values", []))
            round_ += 1
            schedule.observe(RoundMsg(index, round_, tuple(_element(field, v) for v in values)))
        elif kind == "challenge":
            schedule.challenge()  # absorbs the challenge, as the prover's schedule did
        elif kind == "value":  # the glue between instances, absorbed as the built-in schedule does
            listed, value = _named(field, event["value"])
            schedule.observe(NamedValue(event["name"], value, listed))
        elif kind == "opening":
            schedule.observe(Opening(event["name"], _element(field, event["value"]),
                                     event.get("table", event["name"]), max(index, 0)))
        elif kind == "squeeze":
            listed, value = _named(field, event["value"])
            schedule.squeeze(event["name"], len(value) if listed else None)
    value = schedule.challenge()
    return list(value) if isinstance(value, tuple) else value


def _element(field: Any, value: Any) -> Any:
    return tuple(value) if isinstance(value, list) else field.lift(value)


def _named(field: Any, value: Any) -> tuple[bool, Any]:
    """A value or squeeze: (listed, the element or the tuple of elements); in an extension
    field one element is itself a list, so a list of lists is a listed value."""
    listed = isinstance(value, list) and (not field.is_extension or (bool(value) and isinstance(value[0], list)))
    return listed, tuple(_element(field, v) for v in value) if listed else _element(field, value)
