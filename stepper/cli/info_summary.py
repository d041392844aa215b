"""What `stepper info` counts while it streams a file once: each instance's rounds, challenges,
final value and bucket reports, the notes, unknown and glue events.

Kept apart from :mod:`stepper.cli.info_cmd` so that building the command line (`stepper
--help`) creates none of these classes.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import Any

from stepper.transcript.glue_records import NamedValue, Opening, Squeeze
from stepper.transcript.records import (
    BucketStats, ChallengeMsg, FieldDecl, FinalValue, InstanceStart, Note, RoundMsg, ScheduleDecl, UnknownEvent,
)

__all__ = ["InstanceCounts", "Summary", "take"]


@dataclass
class InstanceCounts:
    """What `info` counts of one instance as the records stream past."""

    name: str
    num_vars: int
    degree: int
    order: str
    form: str
    batched: bool
    rounds: int = 0
    challenges: int = 0
    final: bool = False
    buckets: int = 0


@dataclass
class Summary:
    """What `info` keeps of a whole file: its instances' counts, the first notes, unknown and glue events."""

    instances: list[InstanceCounts] = dc_field(default_factory=list)
    notes: list[Any] = dc_field(default_factory=list)
    note_count: int = 0
    unknown: dict[str, int] = dc_field(default_factory=dict)
    glue: dict[str, int] = dc_field(default_factory=dict)  # value, squeeze, opening events by type
    field: Any = None
    schedule: Any = None


def take(summary: Summary, record: Any) -> None:
    """Count one record of the stream into ``summary``."""
    kind = type(record)
    if kind is RoundMsg:
        summary.instances[record.instance].rounds += 1
    elif kind is ChallengeMsg:
        summary.instances[record.instance].challenges += 1
    elif kind is InstanceStart:
        summary.instances.append(InstanceCounts(record.name, record.num_vars, record.degree, record.order,
                                                  record.form, record.batch is not None))
    elif kind is FinalValue:
        summary.instances[record.instance].final = True
    elif kind is BucketStats:
        summary.instances[record.instance].buckets += 1
    elif kind is Note:
        summary.note_count += 1
        if len(summary.notes) < 50:
            summary.notes.append(record)
    elif kind is FieldDecl:
        summary.field = record.field
    elif kind is ScheduleDecl:
        summary.schedule = record
    elif kind is UnknownEvent:
        summary.unknown[record.kind] = summary.unknown.get(record.kind, 0) + 1
    elif kind is NamedValue or kind is Squeeze or kind is Opening:
        name = {NamedValue: "value", Squeeze: "squeeze", Opening: "opening"}[kind]
        summary.glue[name] = summary.glue.get(name, 0) + 1
