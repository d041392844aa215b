"""Compare two transcripts: align them, find the first divergence, say what kind it is.

Pure: takes two folded :class:`~stepper.transcript.model.Transcript` values (A and B)
and returns a :class:`Comparison`; no I/O. Invariants:

* instances align by name (the k-th instance of a name in A with the k-th of
  that name in B) when the sides share any name, else by position; rounds
  align by number;
* the first divergence is the earliest differing element in A's order: the
  field, the order of instances, an instance's statement (num_vars, degree,
  order, form), its batch, its claim, then round by round the values sent and
  the challenge, then the final value, then the glue after it (values, squeezes,
  openings), then rounds or instances one side lacks; glue before the first
  instance comes first, and an instance's claim_expr / final_expr / eq_point
  belong to its statement;
* exactly one :class:`Classification` (a kind from :data:`KINDS`, one sentence)
  is given; further observations go to ``remarks``;
* header metadata, notes, bucket statistics and unknown events are annotations,
  not the proof: they never make two transcripts differ (buckets earn a remark).

The alignment lives in :mod:`stepper.compare.alignment`, the analysis of a
divergence in :mod:`stepper.compare.divergence`; the kinds, the caution and the
JSON schema of the result in :mod:`stepper.compare.schema`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from stepper.compare.alignment import (
    Classification,
    Divergence,
    InstancePair,
    Pairing,
    RoundPair,
    decoded_rounds,
    instance_at,
    pair_instances,
    pair_rounds,
    same_poly,
    value_label,
)
from stepper.compare.divergence import find_divergence
from stepper.compare.schema import CAUTION, JSON_SCHEMA, KINDS, SCHEMA_ID
from stepper.field.field import Field
from stepper.transcript.model import Transcript

__all__ = [
    "KINDS",
    "SCHEMA_ID",
    "JSON_SCHEMA",
    "CAUTION",
    "Pairing",
    "RoundPair",
    "InstancePair",
    "Divergence",
    "Classification",
    "Comparison",
    "compare",
    "pair_instances",
    "same_poly",
    "decoded_rounds",
    "value_label",
]

@dataclass(frozen=True, slots=True)
class Comparison:
    field_a: Field
    field_b: Field
    completeness_a: str
    completeness_b: str
    pairs: tuple[InstancePair, ...]
    divergence: Divergence | None
    classification: Classification
    remarks: tuple[str, ...] = ()

    @property
    def identical(self) -> bool:
        return self.divergence is None

    def to_json(self, label_a: str | None = None, label_b: str | None = None) -> dict[str, Any]:
        """The ``stepper compare --json`` object, described by :data:`JSON_SCHEMA` (``stepper compare --schema``)."""

        def side(field: Field, completeness: str, label: str | None, key: str) -> dict[str, Any]:
            count = sum(1 for p in self.pairs if getattr(p, key) is not None)
            return {"file": label, "field": field.describe(), "completeness": completeness, "instances": count}

        d = self.divergence
        c = self.classification
        return {
            "schema": SCHEMA_ID,
            "identical": self.identical,
            "a": side(self.field_a, self.completeness_a, label_a, "a"),
            "b": side(self.field_b, self.completeness_b, label_b, "b"),
            "alignment": [
                {"a": p.pairing.a, "b": p.pairing.b, "name": p.pairing.name, "by": p.pairing.by} for p in self.pairs
            ],
            "first_divergence": None
            if d is None
            else {
                "element": d.element,
                "instance_a": d.instance_a,
                "instance_b": d.instance_b,
                "instance_name": d.instance_name,
                "round": d.round,
                "index": d.index,
                "detail": d.detail,
                "a": d.a,
                "b": d.b,
            },
            "classification": {
                "kind": c.kind,
                "explanation": c.explanation,
                "factor": c.factor,
                "factor_name": c.factor_name,
                "shift": c.shift,
                "side": c.side,
            },
            "remarks": list(self.remarks),
            "caution": CAUTION,
        }


def compare(a: Transcript, b: Transcript) -> Comparison:
    """Align A and B, find the first divergence and classify it."""
    same_field = a.field == b.field
    pairs = tuple(pair_rounds(a.field, p, instance_at(a, p.a), instance_at(b, p.b), same_field) for p in pair_instances(a, b))
    divergence, classification, remarks = find_divergence(a, b, pairs)
    return Comparison(
        a.field, b.field, a.completeness, b.completeness, pairs, divergence, classification, tuple(remarks)
    )
