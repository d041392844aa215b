"""The shared helper that holds every JSON output of the tests to its published schema.

The schemas are the ones shipped in the package (stepper/schemas/*.schema.json, printed by
`stepper schema NAME`); validation uses the jsonschema library's draft 2020-12 validator
(reference: JSON Schema draft 2020-12, json-schema.org).
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources
from typing import Any

import jsonschema

__all__ = ["conforming", "conforming_lines", "schema"]


@cache
def schema(name: str) -> dict[str, Any]:
    text = (resources.files("stepper") / "schemas" / f"{name}.schema.json").read_text(encoding="utf-8")
    doc = json.loads(text)
    jsonschema.Draft202012Validator.check_schema(doc)
    return doc  # type: ignore[no-any-return]


def conforming(output: str | dict[str, Any], name: str) -> Any:
    """The JSON document (text or already parsed), after asserting it matches schema NAME."""
    doc = json.loads(output) if isinstance(output, str) else output
    jsonschema.Draft202012Validator(schema(name)).validate(doc)
    if name == "check-files":  # each file's result is a one-file check object
        for entry in doc["files"]:
            if entry["result"] is not None:
                conforming(entry["result"], "check")
    return doc


def conforming_lines(text: str) -> list[dict[str, Any]]:
    """Every line of a JSON-lines event stream, each asserted to match the event schema."""
    return [conforming(line, "event") for line in text.splitlines() if line.strip()]
