"""`stepper schema NAME`: the shipped JSON Schemas are valid draft 2020-12, printed verbatim,
and say what the contracts in transcripts/EVENTS.md say."""

from __future__ import annotations

import json
import re
from pathlib import Path

import jsonschema
import pytest

from json_contracts import conforming, schema
from stepper.cli.main import main
from stepper.cli.schema_cmd import SCHEMAS
from stepper.compare.schema import JSON_SCHEMA as DIFF_SCHEMA

EVENTS_MD = Path(__file__).resolve().parents[2] / "transcripts" / "EVENTS.md"


@pytest.mark.parametrize("name", list(SCHEMAS))
def test_every_schema_is_valid_draft_2020_12_and_printed_verbatim(name, capsys):
    # reference: the draft 2020-12 meta-schema, as the jsonschema library ships it
    assert main(["schema", name]) == 0
    printed = json.loads(capsys.readouterr().out)
    jsonschema.Draft202012Validator.check_schema(printed)
    assert printed["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert printed == schema(name)


def test_the_diff_schema_file_is_the_one_diff_prints():
    # After changing stepper/compare/schema.py, regenerate the shipped file with
    # `python3 -m stepper diff --schema > stepper/schemas/diff.schema.json`.
    assert schema("diff") == json.loads(json.dumps(DIFF_SCHEMA)), "stepper/schemas/diff.schema.json is stale"


def test_list_names_every_schema_and_a_wrong_name_exits_2(capsys):
    assert main(["schema", "--list"]) == 0
    assert [line.split()[0] for line in capsys.readouterr().out.splitlines()] == list(SCHEMAS)
    assert main(["schema", "verdicts"]) == 2
    assert "expected a schema name among event, check, check-files, diff, info" in capsys.readouterr().err
    assert main(["schema"]) == 2


def _json_blocks(text: str) -> list[str]:
    return re.findall(r"```json\n(.*?)```", text, flags=re.S)


def test_the_event_examples_of_events_md_match_the_event_schema():
    lines = [line for block in _json_blocks(EVENTS_MD.read_text()) for line in block.splitlines() if line.strip()]
    assert len(lines) >= 10
    for line in lines:
        conforming(line, "event")


@pytest.mark.parametrize("line", [
    '{"name": "babybear"}',                                         # no type
    '{"type": "end", "events": 3}',                                 # reserved for the writer
    '{"type": "challenge", "value": -1}',                           # negative element
    '{"type": "challenge", "value": "12a"}',                        # neither decimal nor 0x hex
    '{"type": "instance", "name": "a", "num_vars": 65, "degree": 1, "claim": 0}',  # above the 64 cap
    '{"type": "instance", "name": "a", "num_vars": 2, "degree": 1, "claim": 0, "form": "packed"}',
    '{"type": "field"}',                                            # neither name nor modulus
    '{"type": "value", "name": "tau point", "value": 1}',           # a name is an identifier
    '{"type": "round", "claim": ["1"]}',                            # no values
])
def test_malformed_event_lines_do_not_match(line):
    with pytest.raises(jsonschema.ValidationError):
        conforming(line, "event")


def test_unknown_event_types_match_as_the_contract_keeps_them():
    conforming('{"type": "commitment", "root": "0xabc"}', "event")


def test_a_check_result_without_its_contract_keys_does_not_match():
    with pytest.raises(jsonschema.ValidationError):
        conforming({"verdict": "accept", "instances": []}, "check")  # first_failure missing
    with pytest.raises(jsonschema.ValidationError):
        conforming({"verdict": "maybe", "first_failure": None, "instances": []}, "check")
    with pytest.raises(jsonschema.ValidationError):
        conforming({"verdict": "reject", "first_failure": {"instance": 0, "round": 1}, "instances": []}, "check")
