"""`stepper prove`, `stepper buckets`, `stepper plan` and `stepper demo` from the command line."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from stepper.cli.main import main
from json_contracts import conforming


def _prove(tmp_path, *flags):
    out = tmp_path / "p.sumtr"
    code = main(["prove", "-o", str(out), "--num-vars", "5", *flags])
    return code, out


@pytest.mark.parametrize("kind", ["generic", "zerocheck", "perm-direct", "perm-grouped", "ferries"])
def test_every_kind_writes_a_transcript_that_check_accepts_with_its_witness(kind, tmp_path, capsys):
    witness = tmp_path / "w.json"
    code, out = _prove(tmp_path, "--kind", kind, "--witness-out", str(witness))
    assert code == 0
    assert "multiplications" in capsys.readouterr().out
    assert main(["check", str(out), "--witness", str(witness), "--json"]) == 0
    report = conforming(capsys.readouterr().out, "check")
    assert report["verdict"] == "accept" and report["root_cause"] is None


def test_a_fault_is_rejected_and_the_root_cause_names_its_round(tmp_path, capsys):
    witness = tmp_path / "w.json"
    code, out = _prove(tmp_path, "--kind", "perm-direct", "--fault", "montgomery@3", "--witness-out", str(witness))
    assert code == 0
    capsys.readouterr()
    assert main(["check", str(out), "--witness", str(witness), "--json"]) == 1
    report = conforming(capsys.readouterr().out, "check")
    assert (report["first_failure"]["round"], report["first_failure"]["check"]) == (3, "sum")
    assert report["root_cause"]["round"] == 3


def test_prove_json_summary_lists_round_multiplications(tmp_path, capsys):
    code, _ = _prove(tmp_path, "--kind", "perm-grouped", "--groups", "2", "--switch-round", "3", "--json")
    summary = json.loads(capsys.readouterr().out)
    assert code == 0
    assert [i["name"] for i in summary["instances"]] == ["permutation", "permutation/groups"]
    assert all(len(i["round_mults"]) == 5 for i in summary["instances"])
    assert summary["multiplications"] > sum(sum(i["round_mults"]) for i in summary["instances"])


def test_the_parser_offers_exactly_the_reference_kinds_without_importing_the_provers():
    from stepper.cli import prove_cmd
    from stepper.provers.reference import KINDS

    assert prove_cmd.KINDS == KINDS
    proc = subprocess.run([sys.executable, "-c", "import sys; from stepper.cli.main import _build_parser; "
                           "_build_parser(); print('stepper.provers.reference' in sys.modules)"],
                          capture_output=True, text=True)
    assert proc.stdout.strip() == "False"


@pytest.mark.parametrize("flags, message", [
    (["--fault", "gremlin"], "expected a fault among"),
    (["--field", "babybear^3"], "babybear^3"),
    (["--switch-round", "soon"], "--switch-round"),
    (["--num-vars", "40"], "--num-vars"),
    (["--kind", "perm-direct", "--order", "high-first"], "low-first"),
    (["--kind", "perm-direct", "--fault", "drop-eval@9"], "at most 5"),
    (["--kind", "perm-grouped", "--fault", "negate-claim", "--fault-instance", "2"], "below 2"),
    (["--kind", "perm-grouped", "--fault", "stale-challenge@2", "--fault-instance", "1"], "first instance"),
    (["--kind", "zerocheck", "--combine", "eq * a"], "'eq'"),
    (["--seed", "-1"], "non-negative"),
    (["--schedule", "stepper-sha256/9"], "'stepper-sha256/1', 'stepper-sha256/2'"),
])
def test_bad_flags_are_one_line_and_exit_2(flags, message, tmp_path, capsys):
    # through main() in this process (a process start costs about a second); the test after this
    # one takes the same path through `python -m stepper` for the process boundary
    out = tmp_path / "x.sumtr"
    try:
        code = main(["prove", "-o", str(out), "--num-vars", "5", *flags])
    except SystemExit as stop:  # argparse refuses a malformed value by exiting
        code = stop.code
    err = capsys.readouterr().err
    assert code == 2
    assert not out.exists()  # nothing half-written is left behind
    assert message in err and err.strip().count("\n") == 0
    assert "Traceback" not in err


@pytest.mark.parametrize("flags, message", [
    (["--switch-round", "soon"], "--switch-round"),  # refused by argparse
    (["--kind", "perm-direct", "--fault", "drop-eval@9"], "at most 5"),  # refused by the prover's checks
])
def test_a_bad_flag_through_python_dash_m_is_one_line_on_stderr_and_exit_2(flags, message, tmp_path):
    out = tmp_path / "x.sumtr"
    proc = subprocess.run([sys.executable, "-m", "stepper", "prove", "-o", str(out), "--num-vars", "5", *flags],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert not out.exists()
    assert message in proc.stderr and proc.stderr.strip().count("\n") == 0
    assert "Traceback" not in proc.stderr


def test_buckets_prints_rows_and_json(tmp_path, capsys):
    _, out = _prove(tmp_path, "--kind", "perm-grouped", "--groups", "2")
    capsys.readouterr()
    assert main(["buckets", str(out)]) == 0
    text = capsys.readouterr().out
    assert "instance #1 'permutation/groups'" in text and "buckets" in text
    assert main(["buckets", str(out), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["rows"]
    assert rows[0]["round"] == 1 and rows[0]["bound_log2"] == 2 * 3


def test_buckets_on_a_proof_without_buckets_says_so(tmp_path, capsys):
    _, out = _prove(tmp_path, "--kind", "generic")
    capsys.readouterr()
    assert main(["buckets", str(out)]) == 0
    assert "no bucket events" in capsys.readouterr().out


def test_plan_recommends_a_row_and_reads_a_sigma_file(tmp_path, capsys):
    assert main(["plan", "--num-vars", "6", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["recommended"]["multiplications"] == min(r["multiplications"] for r in result["rows"])
    assert "not a proof" in result["caution"]
    sigma = tmp_path / "sigma.json"
    sigma.write_text(json.dumps(list(range(15, -1, -1))))
    assert main(["plan", "--sigma", str(sigma)]) == 0
    assert "recommended: --groups" in capsys.readouterr().out


def test_plan_refuses_a_sigma_that_is_not_a_permutation(tmp_path, capsys):
    sigma = tmp_path / "sigma.json"
    sigma.write_text("[0, 1, 1, 3]")
    assert main(["plan", "--sigma", str(sigma)]) == 2
    err = capsys.readouterr().err
    assert "sigma.json" in err and "permutation of 0..3" in err


def test_demo_without_the_app_writes_the_examples_and_shows_a_failure_and_an_acceptance(tmp_path, capsys):
    assert main(["demo", "--dir", str(tmp_path / "d"), "--no-view"]) == 0
    out = capsys.readouterr().out
    assert f"to {tmp_path / 'd'}" in out
    assert "ACCEPTED" in out and "REJECTED" in out
    assert "challenge-shift" in out  # the root-cause probe explains the prover bug
    assert (tmp_path / "d" / "ferries-stale-challenge.witness.json").exists()


def test_the_parser_offers_exactly_the_built_in_schedules_the_first_by_default():
    from stepper.cli import prove_cmd
    from stepper.provers.reference import ProveSpec
    from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, SCHEDULE_NAME

    assert prove_cmd.SCHEDULES == BUILTIN_SCHEDULES and ProveSpec("generic").schedule == SCHEDULE_NAME


@pytest.mark.parametrize("field", ["babybear^4", "bn254"])
def test_a_proof_under_the_second_schedule_checks_clean_and_a_tampered_challenge_fails_check_challenge(
        field, tmp_path, capsys):
    out = tmp_path / "events.jsonl"
    assert main(["prove", "--kind", "gkr-product", "--num-vars", "4", "--field", field,
                 "--schedule", "stepper-sha256/2", "-o", str(out)]) == 0
    lines = out.read_text().splitlines()
    assert json.loads(lines[1]) == {"type": "schedule", "name": "stepper-sha256/2",
                                    "label": "stepper reference prover: gkr-product"}
    capsys.readouterr()
    assert main(["check", str(out)]) == 0
    assert "challenges re-derived by the built-in schedule stepper-sha256/2" in capsys.readouterr().out
    imported = tmp_path / "imported.sumtr"  # the event stream's import takes the declaration as it is
    assert main(["import", str(out), "-o", str(imported)]) == 0 and main(["check", str(imported)]) == 0
    assert "challenges re-derived by the built-in schedule stepper-sha256/2" in capsys.readouterr().out
    at = [i for i, line in enumerate(lines) if json.loads(line)["type"] == "challenge"][3]
    event = json.loads(lines[at])
    value = event["value"]
    event["value"] = [str((int(value[0]) + 1) % 7)] + value[1:] if isinstance(value, list) else str(int(value) // 2)
    lines[at] = json.dumps(event)
    tampered = tmp_path / "tampered.jsonl"
    tampered.write_text("\n".join(lines) + "\n")
    assert main(["check", str(tampered), "--json"]) == 1
    failure = conforming(capsys.readouterr().out, "check")["first_failure"]
    assert failure["check"] == "challenge"


def test_an_output_ending_in_jsonl_gets_the_event_stream_that_check_reads(tmp_path, capsys):
    out = tmp_path / "events.jsonl"
    assert main(["prove", "--kind", "zerocheck", "--num-vars", "3", "-o", str(out)]) == 0
    lines = out.read_text().splitlines()
    assert conforming(lines[0], "event") == {"type": "field", "name": "babybear"}
    assert conforming(lines[1], "event")["type"] == "schedule"
    capsys.readouterr()
    assert main(["check", str(out)]) == 0


@pytest.mark.parametrize("flags, message", [
    (["--seed", str(10**30)], "below 2^63"),  # too big for the header's metadata
    (["--field", "babybear^"], "NAME^K"),
    (["--kind", "generic", "--tamper", "double-scan"], "--tamper only with --kind ferries"),
    (["--kind", "perm-direct", "--groups", "3"], "--groups only with"),
    (["--kind", "generic", "--switch-round", "2"], "--switch-round only with"),
    (["--kind", "ferries", "--combine", "a * b"], "--combine only with"),
])
def test_flags_the_kind_cannot_use_and_out_of_range_values_are_refused(flags, message, tmp_path, capsys):
    code, out = _prove(tmp_path, *flags)
    err = capsys.readouterr().err
    assert code == 2 and message in err and err.count("\n") == 1
    assert not out.exists()


def test_an_output_or_witness_path_that_is_a_folder_is_exit_2_and_leaves_the_folder_and_no_orphan(tmp_path, capsys):
    folder = tmp_path / "already-here"
    folder.mkdir()
    assert main(["prove", "--num-vars", "3", "-o", str(folder)]) == 2
    assert main(["prove", "--num-vars", "3", "-o", str(tmp_path / "f.jsonl"), "--witness-out", str(folder)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 2 and "internal error" not in err
    assert folder.is_dir()
    assert not (tmp_path / "f.jsonl").exists()  # no transcript orphaned without its witness


def test_plan_refuses_an_empty_group_list(capsys):
    for groups in ("", ","):
        assert main(["plan", "--num-vars", "4", "--groups", groups]) == 2
    assert capsys.readouterr().err.count("expected --groups as comma-separated integers") == 2


def test_demo_refuses_a_folder_whose_files_it_would_overwrite(tmp_path, capsys):
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "ledger.csv").write_text("booking ledger\n")
    (folder / "ferries-honest.sumtr").write_bytes(b"my own transcript")
    assert main(["demo", "--dir", str(folder), "--no-view"]) == 2
    assert "ferries-honest.sumtr" in capsys.readouterr().err
    assert (folder / "ferries-honest.sumtr").read_bytes() == b"my own transcript"


def test_demo_off_a_terminal_prints_the_checks_instead_of_starting_the_app(tmp_path, capsys):
    # under pytest neither standard input nor captured output is a terminal
    assert main(["demo", "--dir", str(tmp_path / "d")]) == 0
    out = capsys.readouterr().out
    assert "not on a terminal" in out
    assert "ACCEPTED" in out and "REJECTED" in out


def test_demo_run_again_keeps_a_note_the_user_added_and_names_the_file(tmp_path, capsys):
    # it used to rewrite the whole folder of an earlier demo, silently dropping the note
    folder = tmp_path / "d"
    assert main(["demo", "--dir", str(folder), "--no-view"]) == 0
    honest = folder / "ferries-honest.sumtr"
    assert main(["note", str(honest), "checked with the harbour master"]) == 0
    noted = honest.read_bytes()
    capsys.readouterr()
    assert main(["demo", "--dir", str(folder), "--no-view"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "ferries-honest.sumtr" in err and "--force" in err
    assert honest.read_bytes() == noted
    assert main(["demo", "--dir", str(folder), "--no-view", "--force"]) == 0
    assert honest.read_bytes() != noted  # replaced only when asked


def test_demo_run_again_on_its_own_unchanged_folder_succeeds_and_leaves_other_files(tmp_path):
    folder = tmp_path / "d"
    assert main(["demo", "--dir", str(folder), "--no-view"]) == 0
    (folder / "ledger.csv").write_text("booking ledger\n")
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    assert main(["demo", "--dir", str(folder), "--no-view"]) == 0
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before  # the demo's bytes do not depend on the clock


@pytest.mark.parametrize("kind, num_vars", [("zerocheck-eq", "4"), ("gkr-product", "4"), ("ferries-fingerprint", "4")])
def test_the_glue_kinds_write_transcripts_that_check_accepts_with_their_witness(kind, num_vars, tmp_path, capsys):
    witness = tmp_path / "w.json"
    out = tmp_path / "p.sumtr"
    assert main(["prove", "-o", str(out), "--num-vars", num_vars, "--kind", kind, "--witness-out", str(witness)]) == 0
    capsys.readouterr()
    assert main(["check", str(out), "--witness", str(witness), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["verdict"] == "accept" and report["root_cause"] is None


# where the verifier must notice each glue fault (contract 3; common practice, no source): a wrong opening
# breaks final_expr at the instance's last round (evaluation), a claim that does not follow its claim_expr
# breaks the link at round 0, an eq-factored round scaled by the eq factor breaks g(0) + g(1) at its round
GLUE_EXPECTED = [
    (["--kind", "zerocheck", "--fault", "open-wrong-table"], 0, 4, "evaluation"),
    (["--kind", "zerocheck-eq", "--fault", "open-reversed"], 0, 4, "evaluation"),
    (["--kind", "zerocheck-eq", "--fault", "drop-eq@3"], 0, 3, "sum"),
    (["--kind", "zerocheck-eq", "--fault", "double-eq@2"], 0, 2, "sum"),
    (["--kind", "zerocheck", "--fault", "final-without-eq"], 0, 4, "evaluation"),
    (["--kind", "gkr-product", "--fault", "stale-coefficient", "--fault-instance", "1"], 1, 0, "link"),
    (["--kind", "gkr-product", "--fault", "open-wrong-table", "--fault-instance", "1"], 1, 2, "evaluation"),
    (["--kind", "perm-grouped", "--fault", "open-other-point", "--fault-instance", "1"], 1, 4, "evaluation"),
    (["--kind", "perm-grouped", "--fault", "final-without-eq", "--fault-instance", "1"], 1, 4, "evaluation"),
]


@pytest.mark.parametrize("flags, instance, round_, check", GLUE_EXPECTED)
def test_each_glue_fault_is_rejected_where_contract_3_says(flags, instance, round_, check, tmp_path, capsys):
    out = tmp_path / "p.sumtr"
    assert main(["prove", "-o", str(out), "--num-vars", "4", *flags]) == 0
    capsys.readouterr()
    assert main(["check", str(out), "--json"]) == 1
    first = json.loads(capsys.readouterr().out)["first_failure"]
    assert (first["instance"], first["round"], first["check"]) == (instance, round_, check)


@pytest.mark.parametrize("flags, message", [
    (["--kind", "generic", "--fault", "open-reversed"], "prover kind that makes it"),
    (["--kind", "gkr-product", "--num-vars", "2"], "n >= 3"),
    (["--kind", "zerocheck-eq", "--fault", "drop-eq@1"], "K >= 2"),
    (["--kind", "zerocheck-eq", "--form", "coeffs"], "eq-factored"),
    (["--kind", "gkr-product", "--fault", "stale-coefficient"], "earlier coefficient"),
])
def test_glue_flags_that_cannot_work_are_one_line_and_exit_2(flags, message, tmp_path, capsys):
    assert main(["prove", "-o", str(tmp_path / "p.sumtr"), "--num-vars", "4", *flags]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]
    assert not (tmp_path / "p.sumtr").exists()


# with the witness, each glue bug is named by its probe (contract 3's root cause for an opening; the glue
# probes of stepper.diagnose.glue_probes for the rest)
GLUE_PROBED = [
    (["--kind", "ferries", "--groups", "0", "--fault", "open-other-point", "--fault-instance", "1"], "opening-point"),
    (["--kind", "zerocheck", "--fault", "open-reversed"], "opening-point"),
    (["--kind", "zerocheck", "--fault", "open-wrong-table"], "opening-table"),
    (["--kind", "perm-grouped", "--fault", "open-reversed", "--fault-instance", "1"], "opening-point"),
    (["--kind", "perm-grouped", "--fault", "open-wrong-table", "--fault-instance", "1"], "opening-table"),
    (["--kind", "gkr-product", "--fault", "stale-coefficient", "--fault-instance", "2"], "stale-coefficient"),
    (["--kind", "zerocheck-eq", "--fault", "drop-eq@2"], "eq-factor"),
    (["--kind", "zerocheck-eq", "--fault", "double-eq@4"], "eq-factor"),
    (["--kind", "zerocheck-eq", "--fault", "final-without-eq"], "final-without-eq"),
]


@pytest.mark.parametrize("flags, probe", GLUE_PROBED)
def test_check_with_the_witness_names_each_glue_bug(flags, probe, tmp_path, capsys):
    out, witness = tmp_path / "p.sumtr", tmp_path / "w.json"
    assert main(["prove", "-o", str(out), "--num-vars", "4", "--witness-out", str(witness), *flags]) == 0
    capsys.readouterr()
    assert main(["check", str(out), "--witness", str(witness), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert probe in [f["probe"] for f in report["witness_findings"]], report["witness_findings"]


@pytest.mark.parametrize("field", ["babybear^4", "bn254"])
@pytest.mark.parametrize("kind", ["gkr-product", "zerocheck-eq"])
def test_the_glue_kinds_check_over_extension_and_254_bit_fields_and_as_event_streams(field, kind, tmp_path, capsys):
    events, witness = tmp_path / "p.jsonl", tmp_path / "w.json"
    assert main(["prove", "-o", str(events), "--num-vars", "4", "--kind", kind, "--field", field,
                 "--witness-out", str(witness)]) == 0
    assert main(["import", str(events), "-o", str(tmp_path / "p.sumtr")]) == 0
    capsys.readouterr()
    for path in (events, tmp_path / "p.sumtr"):
        assert main(["check", str(path), "--witness", str(witness), "--json"]) == 0
        assert json.loads(capsys.readouterr().out)["verdict"] == "accept"
