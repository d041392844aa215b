"""The vocabulary of ``stepper compare`` results: divergence kinds, the caution and the JSON schema.

Pure data, no I/O. Invariants: every ``classification.kind`` that
:func:`stepper.compare.diff.compare` gives is a key of :data:`KINDS`; :data:`JSON_SCHEMA`
(JSON Schema draft 2020-12) describes exactly what
:meth:`stepper.compare.diff.Comparison.to_json` returns, with ``$id`` :data:`SCHEMA_ID`.
"""

from __future__ import annotations

from typing import Any

__all__ = ["SCHEMA_ID", "KINDS", "CAUTION", "JSON_SCHEMA"]

SCHEMA_ID = "stepper-diff/1"


# kind -> what it means (the JSON `classification.kind` is one of these keys)
KINDS: dict[str, str] = {
    "identical": "every compared element agrees",
    "different-fields": "the two sides declare different fields",
    "instance-order": "the same instances (or claims) stand in a different order",
    "claim-order": "a batch combines the same claims in a different order",
    "statement": "an instance's num_vars or degree differs",
    "binding-order": "the sides bind the variables in opposite orders",
    "encoding": "the same polynomials are sent in different forms or lengths",
    "constant-factor": "one side's values are the other's times a constant (e.g. a Montgomery radix)",
    "different-claim": "the claimed sums differ",
    "round-shift": "one side has an extra or missing transcript step",
    "challenges-reversed": "one side lists the challenges in reverse order",
    "fiat-shamir-drift": "same polynomials, different challenges",
    "prover-arithmetic": "different polynomial after identical challenges",
    "final-value": "every round agrees but the final value differs",
    "truncated": "one side stops early; everything both sides have agrees",
    "extra-instance": "one side has an instance the other lacks",
    "different-opening": "every round agrees but an opening (a table's value at the instance's point) differs",
    "squeeze-drift": "a squeezed value differs while everything before it agrees",
    "different-value": "a named public value differs",
    "link": "an instance's claim_expr, final_expr or eq_point differs, or its claim while the glue it links agrees",
}

CAUTION = (
    "A diff compares two recorded runs; agreement is not evidence that either run, "
    "or the protocol, is sound."
)

_NULLABLE_INT = {"type": ["integer", "null"]}
_NULLABLE_TEXT = {"type": ["string", "null"]}

# JSON Schema (draft 2020-12) of Comparison.to_json(); `stepper compare --schema` prints it.
JSON_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "$id": SCHEMA_ID,
    "title": "stepper compare result",
    "type": "object",
    "required": ["schema", "identical", "a", "b", "alignment", "first_divergence", "classification", "remarks",
                 "caution"],
    "additionalProperties": False,
    "$defs": {
        "side": {
            "type": "object",
            "required": ["file", "field", "completeness", "instances"],
            "properties": {
                "file": _NULLABLE_TEXT,
                "field": {"type": "string"},
                "completeness": {"enum": ["complete", "incomplete"]},
                "instances": {"type": "integer", "minimum": 0},
            },
        },
    },
    "properties": {
        "schema": {"const": SCHEMA_ID},
        "identical": {"type": "boolean"},
        "a": {"$ref": "#/$defs/side"},
        "b": {"$ref": "#/$defs/side"},
        "alignment": {
            "type": "array",
            "items": {
                "type": "object",
                "required": ["a", "b", "name", "by"],
                "properties": {"a": _NULLABLE_INT, "b": _NULLABLE_INT, "name": {"type": "string"},
                               "by": {"enum": ["name", "position"]}},
            },
        },
        "first_divergence": {
            "oneOf": [
                {"type": "null"},
                {
                    "type": "object",
                    "required": ["element", "instance_a", "instance_b", "instance_name", "round", "index", "detail",
                                 "a", "b"],
                    "properties": {
                        "element": {"enum": ["field", "instance", "statement", "batch", "claim", "value",
                                             "challenge", "final", "round", "squeeze", "opening"]},
                        "instance_a": _NULLABLE_INT,
                        "instance_b": _NULLABLE_INT,
                        "instance_name": _NULLABLE_TEXT,
                        "round": {"type": ["integer", "null"], "minimum": 0},
                        "index": _NULLABLE_INT,
                        "detail": _NULLABLE_TEXT,
                        "a": _NULLABLE_TEXT,
                        "b": _NULLABLE_TEXT,
                    },
                },
            ]
        },
        "classification": {
            "type": "object",
            "required": ["kind", "explanation", "factor", "factor_name", "shift", "side"],
            "properties": {
                "kind": {"enum": list(KINDS)},
                "explanation": {"type": "string"},
                "factor": _NULLABLE_TEXT,
                "factor_name": _NULLABLE_TEXT,
                "shift": {"enum": [1, -1, None]},
                "side": {"enum": ["a", "b", None]},
            },
        },
        "remarks": {"type": "array", "items": {"type": "string"}},
        "caution": {"type": "string"},
    },
}
