"""`stepper check`: the check contract of transcripts/EVENTS.md (exit codes, JSON keys), human output,
the plug-in route, the witness route and hostile files (never a traceback).

Honest runs come from tests/plain_sumcheck.py (plain integers, independent of stepper);
the worked example is J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1
(from memory).
"""

from __future__ import annotations

import copy
import json
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared plain-integer prover

from plain_sumcheck import BABYBEAR, Plain, instance_payloads, jsonl, product_rounds, thaler_payloads  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from json_contracts import conforming  # noqa: E402
from stepper.transcript.store import TranscriptWriter  # noqa: E402

CHALLENGES = (5, 7, 11)


def honest() -> list[dict]:
    payloads = thaler_payloads(Plain(BABYBEAR), CHALLENGES)
    payloads.append({"type": "note", "text": "scanner 3 restarted before this sailing", "round": 2})
    return payloads


def write_jsonl(path: Path, payloads: list[dict]) -> Path:
    path.write_text(jsonl(payloads))
    return path


def write_sumtr(path: Path, payloads: list[dict], finish: bool = True) -> Path:
    writer = TranscriptWriter(path, metadata={"label": "isle-of-quill-0740"})
    for p in payloads:
        writer.write_payload(p)
    writer.finish() if finish else writer.close()
    return path


def check(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["check", *argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_honest_event_file_is_accepted_with_a_table_and_notes(tmp_path, capsys):
    code, out, err = check(capsys, str(write_jsonl(tmp_path / "run.jsonl", honest())))
    assert code == 0 and err == ""
    assert "boarding-permutation" in out and "ACCEPTED" in out
    assert "scanner 3 restarted before this sailing" in out
    assert "proves nothing about the soundness" in out
    assert "\x1b[" not in out  # no colour when stdout is not a terminal


def test_honest_transcript_json_follows_the_contract(tmp_path, capsys):
    code, out, _ = check(capsys, str(write_sumtr(tmp_path / "run.sumtr", honest())), "--json")
    data = conforming(out, "check")
    assert code == 0 and data["verdict"] == "accept" and data["first_failure"] is None
    assert data["instances"][0]["name"] == "boarding-permutation"
    assert [(r["round"], r["status"]) for r in data["instances"][0]["rounds"]] == [(1, "pass"), (2, "pass"),
                                                                                   (3, "pass")]
    assert data["instances"][0]["rounds"][0]["values"] == ["1", "11", "69", "223"]  # Thaler 4.1, from memory
    assert data["soundness"]["numerator"] == "9"  # v * d = 3 * 3


@pytest.mark.parametrize("name", ["run.stp", "run.bin", "run"])
def test_the_format_is_recognised_by_content_not_by_the_file_name(tmp_path, capsys, name):
    # Transcripts are named .sumtr; files kept under the earlier .stp name, or any name, still open.
    code, out, err = check(capsys, str(write_sumtr(tmp_path / name, honest())), "--json")
    assert code == 0 and err == "" and conforming(out, "check")["verdict"] == "accept"


@pytest.mark.parametrize("mutate, round_, check_name", [
    (lambda p: p[4]["evals"].__setitem__(1, p[4]["evals"][1] + 1), 2, "sum"),
    (lambda p: p[4]["evals"].__setitem__(3, p[4]["evals"][3] + 1), 3, "sum"),
    (lambda p: p[8].__setitem__("value", p[8]["value"] + 1), 3, "final"),
    (lambda p: p[2]["evals"].append(0), 1, "degree"),
    (lambda p: p[1].__setitem__("claim", 13), 1, "sum"),
])
def test_single_faults_exit_1_with_round_and_check(tmp_path, capsys, mutate, round_, check_name):
    payloads = honest()
    mutate(payloads)
    code, out, _ = check(capsys, str(write_sumtr(tmp_path / "bad.sumtr", payloads)), "--json")
    ff = conforming(out, "check")["first_failure"]
    assert code == 1
    assert (ff["instance"], ff["instance_name"], ff["round"], ff["check"]) == (0, "boarding-permutation", round_,
                                                                               check_name)


def test_human_output_states_the_first_failure_in_words(tmp_path, capsys):
    payloads = honest()
    payloads[4]["evals"][0] += 1
    code, out, _ = check(capsys, str(write_jsonl(tmp_path / "bad.jsonl", payloads)))
    carried = payloads[4]["evals"][0] - 1 + payloads[4]["evals"][1]
    assert code == 1 and "REJECTED at instance #0 'boarding-permutation', round 2, check sum" in out
    assert f"round 2: g(0)+g(1) = {carried + 1}, but round 1 carried the claim g1(r1) = {carried}" in out


def test_transcript_that_stops_early_exits_3(tmp_path, capsys):
    path = write_sumtr(tmp_path / "cut.sumtr", honest()[:6], finish=False)
    code, out, _ = check(capsys, str(path), "--json")
    assert code == 3 and conforming(out, "check")["verdict"] == "incomplete"
    code, out, _ = check(capsys, str(path))
    assert code == 3 and "INCOMPLETE" in out


def test_unfinished_file_with_every_round_present_is_still_incomplete(tmp_path, capsys):
    code, out, _ = check(capsys, str(write_sumtr(tmp_path / "nofinish.sumtr", honest(), finish=False)), "--json")
    assert code == 3 and conforming(out, "check")["completeness"] == "incomplete"


@pytest.mark.parametrize("content", [
    '{"type": "field", "name": "no-such-field"}\n',
    '{"type": "field", "name": "babybear"}\n{"type": "round", "evals": [1, 2]}\n',
    '{"type": "field", "name": "babybear"}\n{"type": "instance", "name": "x", "num_vars": 1, "degree": 1, '
    '"claim": 2013265921}\n',
    "not json at all\n",
    "",
    '{"type": "field", "name": "babybear"}\n{"type": "instance", "name": "x", "num_vars": 1000000000, '
    '"degree": 1, "claim": 0}\n',
    '{"type": "field", "name": "babybear"}\n{"type": "instance", "name": "x", "num_vars": 1, "degree": 1, '
    '"claim": 0}\n{"type": "round", "evals": {"g0": 1}}\n',
    '{"type": "field", "name": "babybear"}\n{"type": "instance", "name": "x", "num_vars": 1, "degree": 1, '
    '"claim": 0}\n{"type": "challenge", "value": 3}\n',
    "stepper:sumcheck\n\xff\xff",
])
def test_unusable_input_is_one_line_and_exit_2(tmp_path, capsys, content):
    path = tmp_path / "bad.jsonl"
    path.write_text(content)
    code, out, err = check(capsys, str(path))
    assert code == 2 and out == ""
    assert err.startswith("stepper check: ") and err.count("\n") == 1


def checked_with_schedule(tmp_path, capsys, name: str) -> dict:
    """The --json report of the honest proof declaring the schedule ``name``; the check passes and
    says its challenges were not re-derived."""
    payloads = honest()
    payloads.insert(1, {"type": "schedule", "name": name, "label": "gate"})
    code, out, _ = check(capsys, str(write_jsonl(tmp_path / "run.jsonl", payloads)), "--json")
    data = conforming(out, "check")
    assert code == 0 and data["challenges"].startswith("not re-derived")
    return data


def test_foreign_schedule_is_reported_as_not_re_derived(tmp_path, capsys):
    data = checked_with_schedule(tmp_path, capsys, "ferry-office-transcript/3")
    assert [f["kind"] for f in data["findings"]] == ["challenges-unchecked"]


def test_unknown_schedule_of_stepper_own_namespace_names_the_ones_this_version_knows(tmp_path, capsys):
    data = checked_with_schedule(tmp_path, capsys, "stepper-sha256/9")
    assert "knows stepper-sha256/1, stepper-sha256/2; a newer one may" in data["challenges"]
    (finding,) = data["findings"]
    assert finding["kind"] == "challenges-unchecked" and "a newer one may" in finding["message"]


def test_missing_file_and_bad_flags_exit_2(tmp_path, capsys):
    assert check(capsys, str(tmp_path / "absent.sumtr"))[0] == 2
    path = write_jsonl(tmp_path / "run.jsonl", honest())
    assert check(capsys, str(path), "--challenges", "no_colon_here")[0] == 2
    assert check(capsys, str(path), "--challenges", str(tmp_path / "missing.py") + ":derive")[0] == 2


FORGETFUL_PLUGIN = '''
import hashlib

def derive(history):
    """A port that hashes every message except the claim (the bug under test)."""
    h = hashlib.sha256()
    for event in history[1:]:
        h.update(repr(sorted((k, v) for k, v in event.items() if k != "claim")).encode())
    return int.from_bytes(h.digest(), "little") % int(history[0]["modulus"])
'''


def _plugin_payloads(derive) -> list[dict]:
    ar = Plain(BABYBEAR)
    tables = [[3, 1, 4, 1], [5, 9, 2, 6]]
    claim = sum(a * b for a, b in zip(*tables)) % BABYBEAR
    history = [{"type": "field", "modulus": str(BABYBEAR)},
               {"type": "instance", "name": "deck-slots-zero", "num_vars": 2, "degree": 2, "claim": claim,
                "order": "low-first", "form": "evals"}]

    def challenge(k, evals):
        history.append({"type": "round", "evals": evals})
        r = derive(history)
        history.append({"type": "challenge", "value": r})
        return r

    rounds, rs, final = product_rounds(ar, tables, challenge)
    return [ar.spec(), *instance_payloads(ar, "deck-slots-zero", 2, 2, claim, rounds, rs, final)]


def test_plugin_forgetting_the_claim_is_reported_as_a_finding(tmp_path, capsys):
    plugin = tmp_path / "ferry_channel.py"
    plugin.write_text(FORGETFUL_PLUGIN)
    namespace: dict = {}
    exec(FORGETFUL_PLUGIN, namespace)
    path = write_jsonl(tmp_path / "run.jsonl", _plugin_payloads(namespace["derive"]))
    code, out, _ = check(capsys, str(path), "--challenges", f"{plugin}:derive", "--json")
    data = conforming(out, "check")
    assert code == 0 and data["verdict"] == "accept"
    assert [f["kind"] for f in data["findings"]] == ["unbound-claim"]
    code, out, _ = check(capsys, str(path), "--challenges", f"{plugin}:derive")
    assert "the claimed sum is not bound into the challenges" in out


def test_witness_adds_the_root_cause(tmp_path, capsys):
    ar = Plain(BABYBEAR)
    tables = {"fare": [3, 1, 4, 1], "seat": [5, 9, 2, 6]}
    rounds, rs, final = product_rounds(ar, list(tables.values()), lambda k, ev: [13, 17][k - 1])
    rounds[0][2] = (rounds[0][2] + 1) % BABYBEAR  # sum-consistent lie in round 1, visible in round 2
    payloads = [ar.spec(), *instance_payloads(ar, "deck-slots-zero", 2, 2, 38, rounds, rs, final)]
    path = write_jsonl(tmp_path / "run.jsonl", payloads)
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "deck-slots-zero", "tables": tables,
                                                  "combine": "fare * seat"}]}))
    code, out, _ = check(capsys, str(path), "--witness", str(witness), "--json")
    data = conforming(out, "check")
    assert code == 1 and data["first_failure"]["round"] == 2
    assert data["root_cause"]["round"] == 1 and data["root_cause"]["check"] == "honest-poly"
    code, out, _ = check(capsys, str(path), "--witness", str(witness))
    assert "root cause" in out


def test_command_line_run_has_no_traceback_and_no_colour_in_a_pipe(tmp_path):
    payloads = honest()
    payloads[4]["evals"][0] += 1
    path = write_sumtr(tmp_path / "bad.sumtr", payloads)
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(path)], capture_output=True, text=True)
    assert proc.returncode == 1 and "Traceback" not in proc.stderr and "\x1b[" not in proc.stdout
    raw = path.read_bytes()
    path.write_bytes(raw[:40] + bytes([raw[40] ^ 0xFF]) + raw[41:])
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(path)], capture_output=True, text=True)
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr


_SUMTR_BYTES: dict[str, bytes] = {}


def _sumtr_bytes(tmp: Path) -> bytes:
    if "honest" not in _SUMTR_BYTES:
        _SUMTR_BYTES["honest"] = write_sumtr(tmp / "seed.sumtr", honest()).read_bytes()
    return _SUMTR_BYTES["honest"]


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_hostile_files_never_crash_the_check(tmp_path, capsys, data):
    kind = data.draw(st.sampled_from(["sumtr", "jsonl"]))
    raw = bytearray(_sumtr_bytes(tmp_path) if kind == "sumtr" else jsonl(honest()).encode())
    for _ in range(data.draw(st.integers(1, 4))):
        action = data.draw(st.sampled_from(["flip", "cut", "insert"]))
        pos = data.draw(st.integers(0, max(0, len(raw) - 1)))
        if action == "flip" and raw:
            raw[pos] ^= data.draw(st.integers(1, 255))
        elif action == "cut":
            del raw[pos:]
        else:
            raw[pos:pos] = data.draw(st.binary(min_size=1, max_size=8))
    path = tmp_path / f"hostile.{kind}"
    path.write_bytes(bytes(raw))
    code, out, err = check(capsys, str(path), "--json")
    assert code in (0, 1, 2, 3), err
    if code == 2:
        assert err.count("\n") == 1 and err.startswith("stepper check: ")
    else:
        assert conforming(out, "check")["verdict"] in ("accept", "reject", "incomplete")


def test_many_instances_show_a_bounded_table(tmp_path, capsys):
    payloads = honest()[:-1]
    body = payloads[1:]
    many = [payloads[0]] + [copy.deepcopy(p) for _ in range(40) for p in body]
    code, out, _ = check(capsys, str(write_jsonl(tmp_path / "many.jsonl", many)), "--rows", "5")
    assert code == 0 and "35 more instance(s) not shown" in out


def test_detail_shows_recovered_values_of_a_compressed_form(tmp_path, capsys):
    payloads = honest()
    payloads[1]["form"] = "evals-no-1"
    for p in payloads:
        if p["type"] == "round":
            p["evals"] = [p["evals"][0], *p["evals"][2:]]
    code, out, _ = check(capsys, str(write_jsonl(tmp_path / "short.jsonl", payloads)), "--detail")
    assert code == 0
    assert "round 1: g(1) = 11 was recovered from the claim, so the local sum check holds by construction" in out
    assert "final: the reduced claim g3(r3)" in out


def test_a_witness_of_one_hundred_thousand_nested_brackets_exits_2_not_70(tmp_path, capsys):
    # it used to end in "internal error (RecursionError ...)" with exit 70
    transcript = write_sumtr(tmp_path / "run.sumtr", honest())
    witness = tmp_path / "deep.json"
    witness.write_text("[" * 100_000)
    assert main(["check", str(transcript), "--witness", str(witness)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "STEPPER_WITNESS_MAX_DEPTH" in err[0] and "internal error" not in err[0]


@pytest.mark.parametrize("fault", [None, "stale-challenge@5", "flip-order@3"])
@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_every_engine_and_chunk_prints_the_same_json_for_a_binary_witness(tmp_path, capsys, fault, order):
    proof, folder = tmp_path / "p.sumtr", tmp_path / "w"
    argv = ["prove", "--kind", "generic", "--field", "babybear^4", "--num-vars", "7", "--combine", "a*b*c",
            "--order", order, "-o", str(proof), "--witness-out", str(folder)]
    assert main([*argv, *(["--fault", fault] if fault else [])]) == 0
    capsys.readouterr()
    runs = [[], ["--engine", "memory"], ["--chunk", "2"], ["--chunk", "7"], ["--chunk", "2^5"], ["--progress"]]
    outputs = [check(capsys, str(proof), "--witness", str(folder), "--json", *extra) for extra in runs]
    assert {code for code, _, _ in outputs} == {0 if fault is None else 1}
    assert len({out for _, out, _ in outputs}) == 1
    assert (conforming(outputs[0][1], "check")["root_cause"] is None) == (fault is None)


@pytest.mark.parametrize(("extra", "message"), [
    (["--chunk", "1"], "argument --chunk: invalid entry count"),
    (["--chunk", "2^x"], "argument --chunk: invalid entry count"),
    (["--engine", "memory", "--chunk", "8", "--witness", "W"], "--chunk N only with --witness W and the chunked"),
    (["--chunk", "8"], "--chunk N only with --witness W"),
    (["--progress"], "--progress only with --witness W"),
])
def test_chunk_and_progress_flags_out_of_place_are_one_line_and_exit_2(tmp_path, capsys, extra, message):
    path = write_jsonl(tmp_path / "run.jsonl", honest())
    try:
        code, out, err = check(capsys, str(path), *[str(tmp_path / "w") if a == "W" else a for a in extra])
    except SystemExit as stop:  # argparse's own refusal of a value
        code, (out, err) = stop.code, capsys.readouterr()
    assert code == 2 and out == ""
    assert message in err and "Traceback" not in err


def _two_instances(second_claim: int, second_challenge: bool) -> list[dict]:
    """Two one-variable instances over BabyBear (g(0) = 3, g(1) = 4, r = 5, g(5) = 8, checked by
    hand); the second with the claim given, and its challenge only when asked for."""
    one = [{"type": "round", "evals": ["3", "4"]}, {"type": "challenge", "value": "5"}, {"type": "final", "value": "8"}]
    second = [{"type": "instance", "name": "deck-slots-b", "num_vars": 1, "degree": 1, "claim": str(second_claim)},
              *(one if second_challenge else one[:1])]
    return [{"type": "field", "name": "babybear"},
            {"type": "instance", "name": "deck-slots-a", "num_vars": 1, "degree": 1, "claim": "7"}, *one, *second]


def test_the_proof_line_tells_an_instance_cut_short_even_when_rows_hides_it(tmp_path, capsys):
    path = write_jsonl(tmp_path / "cut.jsonl", _two_instances(7, second_challenge=False))
    expected = "stops early: instance #1 'deck-slots-b' has 0 of 1 rounds"
    assert check(capsys, str(path))[0] == 3
    for rows in ("0", "1"):
        code, out, _ = check(capsys, str(path), "--rows", rows)
        assert code == 3
        proof = out.splitlines()[2]
        assert "stops early" in proof and "--rows N shows them" in proof, proof
        assert "every instance has all its rounds" not in out and "no instance yet" not in out
    code, out, _ = check(capsys, str(path), "--rows", "2")
    assert code == 3 and expected in out.splitlines()[2]


def test_rows_0_still_shows_the_failed_instance_and_says_every_instance_is_whole(tmp_path, capsys):
    path = write_jsonl(tmp_path / "bad.jsonl", _two_instances(8, second_challenge=True))
    code, out, _ = check(capsys, str(path), "--rows", "0")
    assert code == 1
    lines = out.splitlines()
    assert lines[2].endswith("proof: every instance has all its rounds"), lines[2]
    assert any(line.split()[:2] == ["1", "deck-slots-b"] and "FAILED sum at round 1" in line for line in lines), out


def test_a_transcript_without_a_field_says_no_field_declared_and_that_nothing_was_checked(tmp_path, capsys):
    path = write_sumtr(tmp_path / "empty.sumtr", [])  # what `stepper record` seals when the program sends nothing
    code, out, _ = check(capsys, str(path))
    assert code == 0
    assert out.splitlines()[1].startswith("  no field declared; challenges ")
    assert "field no field" not in out and "nothing was checked" in out


def test_an_end_event_in_an_event_file_is_exit_2_as_in_import(tmp_path, capsys):
    # the same lines `stepper import` refuses (exit 2) are refused when checked straight
    events = honest()
    path = write_jsonl(tmp_path / "run.jsonl", [*events[:3], {"type": "end", "events": 2}, *events[3:]])
    code, out, err = check(capsys, str(path), "--json")
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "found `end`" in err and "line 4" in err


def test_an_opening_the_witness_has_no_table_for_is_said_to_be_unchecked(tmp_path, capsys):
    # one variable over BabyBear, table t = [3, 4] summed (claim 7); challenge 5 gives
    # t~(5) = 3 + 5*(4 - 3) = 8 (hand-derived), the honest opening of t. The opening `spare`
    # names a table the witness lacks: it cannot be compared, and a report that said
    # "the witness agrees with everything" without naming it would read as if it had been
    events = [{"type": "field", "name": "babybear"},
              {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 7},
              {"type": "round", "evals": [3, 4]}, {"type": "challenge", "value": 5},
              {"type": "final", "value": 8},
              {"type": "opening", "name": "t", "value": 8},
              {"type": "opening", "name": "spare", "table": "crates", "value": 1}]
    path = write_jsonl(tmp_path / "run.jsonl", events)
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "deck", "tables": {"t": [3, 4]}, "combine": "t"}]}))
    code, out, _ = check(capsys, str(path), "--witness", str(witness), "--json")
    report = json.loads(out)
    assert code == 0 and report["root_cause"] is None
    assert report["openings_unchecked"] == [{"instance": 0, "instance_name": "deck", "name": "spare",
                                             "table": "crates"}]
    assert conforming(report, "check")
    code, out, _ = check(capsys, str(path), "--witness", str(witness))
    assert code == 0 and "'spare' (table 'crates') of instance 'deck'" in out and "not compared" in out


def test_an_expression_that_cannot_be_evaluated_names_the_file_with_the_instance(tmp_path, capsys):
    # t[1] of a one-element list is found only when the replay evaluates the claim_expr;
    # that line named the instance and the key but not the file
    events = [{"type": "field", "name": "babybear"}, {"type": "value", "name": "t", "value": [1]},
              {"type": "instance", "name": "deck", "num_vars": 1, "degree": 1, "claim": 1, "claim_expr": "t[1]"},
              {"type": "round", "evals": [0, 1]}, {"type": "challenge", "value": 5}]
    path = write_jsonl(tmp_path / "run.jsonl", events)
    code, out, err = check(capsys, str(path), "--json")
    assert code == 2 and out == "" and err.count("\n") == 1
    assert str(path) in err and "'deck'" in err and "claim_expr" in err and "'t[1]'" in err
