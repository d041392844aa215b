"""Root cause with the witness: the first round where the prover left the honest path,
against the verifier's first failure.

The worked example is the sum-check example of J. Thaler, "Proofs, Arguments, and
Zero-Knowledge", section 4.1 (g = 2*x1^3 + x1*x3 + x2*x3 over {0,1}^3, H = 12; from memory),
written as a combine over three multilinear tables x1, x2, x3 whose extensions are the
variables themselves. The verifier side is stepper.verify.replay, replayed independently.
"""

from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from json_contracts import conforming
from rootcause_prover import Fault, prove
from stepper.errors import WitnessError
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.diagnose.rootcause import diagnose
from stepper.verify.replay import replay_transcript
from stepper.diagnose.witness import Witness, WitnessInstance
from stepper.field.expr import parse

MERSENNE31 = get_field(NAMED_PRIMES["mersenne31"])
BABYBEAR4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
GOLDILOCKS = get_field(NAMED_PRIMES["goldilocks"])
THALER = "2*x1*x1*x1 + x1*x3 + x2*x3"


def _thaler_tables(field):
    return {f"x{j + 1}": field.vec([(i >> j) & 1 for i in range(8)]) for j in range(3)}


def test_thaler_example_with_a_sum_consistent_wrong_round_2_is_traced_to_round_2_not_round_3() -> None:
    # J. Thaler, section 4.1 (from memory): H = 12. Round 2 is altered by delta * t * (t - 1),
    # which keeps g2(0) + g2(1) equal to the claim, so the sum check of round 2 passes.
    transcript, witness = prove(MERSENNE31, _thaler_tables(MERSENNE31), THALER, degree=3,
                                fault=Fault("sum-consistent", 2, 7), name="thaler-4.1")
    assert transcript.instances[0].start.claim == 12
    report = replay_transcript(transcript)
    assert report.verdict == "reject"
    assert (report.first_failure.round, report.first_failure.check) == (3, "sum")
    diagnosis = diagnose(transcript, witness, report)
    cause = diagnosis.root_cause_json()
    assert cause is not None
    assert (cause["instance"], cause["round"], cause["check"], cause["point"]) == (0, 2, "honest-poly", 2)
    assert cause["noticed"]["round"] == 3
    # g2(2) sent = honest g2(2) + 7 * 2 * 1
    assert int(cause["found"]) == (int(cause["expected"]) + 14) % MERSENNE31.p
    text = " ".join(diagnosis.explain())
    assert "round 2" in text and "1 round(s) later" in text and "g(0) + g(1) = claim" in text


def test_honest_thaler_transcript_has_no_root_cause_and_says_the_soundness_caveat() -> None:
    transcript, witness = prove(MERSENNE31, _thaler_tables(MERSENNE31), THALER, degree=3, name="thaler-4.1")
    diagnosis = diagnose(transcript, witness)
    assert diagnosis.root_cause_json() is None
    assert diagnosis.findings_json() == []
    assert any("not show that the protocol" in s for s in diagnosis.explain())


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 2**31), mu=st.integers(1, 5),
       order=st.sampled_from(["low-first", "high-first"]),
       form=st.sampled_from(["evals", "evals-no-1", "coeffs", "coeffs-no-linear"]),
       field=st.sampled_from([MERSENNE31, BABYBEAR4, GOLDILOCKS]))
def test_random_honest_witnesses_never_produce_a_root_cause(seed, mu, order, form, field) -> None:
    rng = np.random.default_rng(seed)
    tables = {n: field.base.vrandom(1 << mu, rng) for n in ("ledger", "scans", "eq")}
    transcript, witness = prove(field, tables, "eq * (ledger - scans) + ledger * scans * 3", degree=3,
                                order=order, form=form, seed=seed)
    assert replay_transcript(transcript).verdict == "accept"
    diagnosis = diagnose(transcript, witness)
    assert diagnosis.root_cause is None
    assert diagnosis.rounds_checked == mu


def test_a_wrong_claim_in_a_compressed_form_is_round_0_while_the_verifier_sees_only_the_final_check() -> None:
    rng = np.random.default_rng(3)
    tables = {n: GOLDILOCKS.vrandom(16, rng) for n in ("a", "b")}
    transcript, witness = prove(GOLDILOCKS, tables, "a*b", degree=2, form="evals-no-1", fault=Fault("negate-claim"))
    report = replay_transcript(transcript)
    assert report.first_failure.check == "final"
    diagnosis = diagnose(transcript, witness, report)
    cause = diagnosis.root_cause_json()
    assert (cause["round"], cause["check"]) == (0, "claim")
    assert cause["expected"] == GOLDILOCKS.fmt(GOLDILOCKS.neg(transcript.instances[0].start.claim))
    assert any("compressed form evals-no-1" in s for s in diagnosis.explain())


def test_a_wrong_final_value_after_honest_rounds_is_a_final_root_cause() -> None:
    rng = np.random.default_rng(4)
    tables = {n: BABYBEAR4.base.vrandom(8, rng) for n in ("a", "b")}
    transcript, witness = prove(BABYBEAR4, tables, "a*b + a", degree=2, fault=Fault("negate-final"))
    cause = diagnose(transcript, witness).root_cause_json()
    assert (cause["round"], cause["check"]) == (3, "final")
    assert cause["found"] == BABYBEAR4.fmt(transcript.instances[0].final)


def test_root_cause_json_follows_the_check_contract_and_is_json_serialisable() -> None:
    transcript, witness = prove(MERSENNE31, _thaler_tables(MERSENNE31), THALER, degree=3,
                                fault=Fault("sum-consistent", 1, 3))
    cause = diagnose(transcript, witness).root_cause_json()
    json.dumps(cause)
    for key in ("instance", "instance_name", "round", "check", "point", "expected", "found"):
        assert key in cause
    assert isinstance(cause["expected"], str) and isinstance(cause["found"], str)
    assert len(cause["honest"]) == 4 and len(cause["sent"]) == 4


def test_witness_instances_are_matched_by_name_before_position() -> None:
    rng = np.random.default_rng(5)
    good = {n: MERSENNE31.vrandom(4, rng) for n in ("a", "b")}
    other = {n: MERSENNE31.vrandom(4, rng) for n in ("a", "b")}
    t1, _ = prove(MERSENNE31, good, "a*b", degree=2, name="deck-slots-zero")
    # the witness lists a decoy first; the right tables are found by name, so no root cause
    witness = Witness((WitnessInstance("decoy", other, parse("a*b")),
                       WitnessInstance("deck-slots-zero", good, parse("a*b"))), "memory")
    with pytest.raises(WitnessError, match="decoy"):
        diagnose(t1, witness)
    only = Witness((WitnessInstance("deck-slots-zero", good, parse("a*b")),), "memory")
    assert diagnose(t1, only).root_cause is None
    by_position = Witness((WitnessInstance("renamed", good, parse("a*b")),), "memory")
    matched = diagnose(t1, by_position)
    assert matched.root_cause is None
    # a match by position is said out loud, since the names disagree
    assert matched.by_position == (("renamed", "deck-slots-zero"),)
    assert any("'renamed'" in line and "by position" in line for line in matched.explain())
    assert diagnose(t1, only).by_position == ()


def test_witness_that_does_not_fit_is_a_witness_error_naming_the_table_and_sizes() -> None:
    rng = np.random.default_rng(6)
    tables = {n: MERSENNE31.vrandom(8, rng) for n in ("a", "b")}
    transcript, _ = prove(MERSENNE31, tables, "a*b", degree=2)
    short = Witness((WitnessInstance("boarding-permutation", {"a": tables["a"][:4], "b": tables["b"]},
                                     parse("a*b")),), "w.json")
    with pytest.raises(WitnessError, match=r"table 'a' with 2\^3 = 8 entries \(num_vars 3\), found 4"):
        diagnose(transcript, short)
    unknown = Witness((WitnessInstance("boarding-permutation", tables, parse("a*c")),), "w.json")
    with pytest.raises(WitnessError, match="missing c"):
        diagnose(transcript, unknown)
    too_high = Witness((WitnessInstance("boarding-permutation", tables, parse("a*b*a")),), "w.json")
    with pytest.raises(WitnessError, match="degree 2, found 'a\\*b\\*a' of degree 3"):
        diagnose(transcript, too_high)


def test_an_incomplete_transcript_is_checked_as_far_as_it_goes() -> None:
    rng = np.random.default_rng(7)
    tables = {n: GOLDILOCKS.vrandom(16, rng) for n in ("a", "b")}
    transcript, witness = prove(GOLDILOCKS, tables, "a*b", degree=2, with_final=False)
    inst = transcript.instances[0]
    partial = replace(transcript, instances=(replace(inst, rounds=inst.rounds[:2]),), completeness="incomplete")
    diagnosis = diagnose(partial, witness)
    assert diagnosis.root_cause is None and diagnosis.rounds_checked == 2


def test_progress_reports_reach_the_total_and_never_go_back() -> None:
    rng = np.random.default_rng(8)
    tables = {n: GOLDILOCKS.vrandom(64, rng) for n in ("a", "b")}
    transcript, witness = prove(GOLDILOCKS, tables, "a*b", degree=2)
    seen: list[tuple[int, int]] = []
    diagnose(transcript, witness, progress=lambda done, total: seen.append((done, total)))
    assert seen and seen[-1][0] == seen[-1][1]
    assert all(a[0] <= b[0] for a, b in zip(seen, seen[1:]))


def _write_case(tmp_path, fault):
    from stepper.transcript.store import TranscriptWriter
    from stepper.transcript.model import ChallengeMsg, FieldDecl, FinalValue, RoundMsg

    tables = _thaler_tables(MERSENNE31)
    transcript, _ = prove(MERSENNE31, tables, THALER, degree=3, fault=fault, name="isle-of-quill-0740")
    path = tmp_path / "run.sumtr"
    inst = transcript.instances[0]
    with TranscriptWriter(path) as writer:
        writer.write(FieldDecl(MERSENNE31))
        writer.write(inst.start)
        for rnd in inst.rounds:
            writer.write(RoundMsg(0, rnd.number, rnd.values))
            writer.write(ChallengeMsg(0, rnd.number, rnd.challenge))
        writer.write(FinalValue(0, inst.final))
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{
        "name": "isle-of-quill-0740", "combine": THALER,
        "tables": {k: [int(x) for x in v] for k, v in tables.items()}}]}))
    return path, witness


def test_check_command_reports_the_root_cause_in_json_and_text(tmp_path, capsys) -> None:
    from stepper.cli.main import main

    path, witness = _write_case(tmp_path, Fault("sum-consistent", 2, 7))
    assert main(["check", str(path), "--json", "--witness", str(witness)]) == 1
    out = conforming(capsys.readouterr().out, "check")
    assert out["first_failure"]["round"] == 3
    assert (out["root_cause"]["round"], out["root_cause"]["check"], out["root_cause"]["point"]) == (2, "honest-poly", 2)
    assert main(["check", str(path), "--witness", str(witness)]) == 1
    text = capsys.readouterr().out
    assert "first went wrong" in text and "round 2" in text


def test_check_command_turns_a_misfit_witness_into_one_line_and_exit_2(tmp_path, capsys) -> None:
    from stepper.cli.main import main

    path, witness = _write_case(tmp_path, None)
    witness.write_text(json.dumps({"instances": [{"name": "isle-of-quill-0740", "combine": "x1 * (x2",
                                                  "tables": {"x1": [0] * 8, "x2": [0] * 8}}]}))
    assert main(["check", str(path), "--witness", str(witness)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "expected ')'" in err and "witness.json" in err


@pytest.mark.parametrize("form", ["evals", "evals-no-1"])
def test_a_lie_seen_only_at_the_final_check_is_explained_by_why_the_sum_checks_held(form) -> None:
    # A prover that switches its binding order at round 2 stays consistent with its own folded tables,
    # so every sum check holds (common practice, no source): only the final check can see it.
    from stepper.provers.channel import ListSink
    from stepper.provers.engine import witness_payload
    from stepper.provers.faults import parse_fault
    from stepper.provers.reference import ProveSpec, prove as reference_prove
    from stepper.diagnose.witness import witness_from_map

    spec = ProveSpec("perm-direct", num_vars=4, seed=2, fault=parse_fault("flip-order@2"), form=form)
    sink = ListSink()
    run = reference_prove(spec, GOLDILOCKS, sink)
    transcript = sink.transcript()
    diagnosis = diagnose(transcript, witness_from_map(witness_payload(GOLDILOCKS, run.witness)))
    assert (diagnosis.first_failure.round, diagnosis.first_failure.check) == (4, "final")
    assert diagnosis.root_cause_json()["round"] == 2
    gap = diagnosis.explain()[1]
    assert "2 round(s) later" in gap and "only the final check" in gap
    assert ("recovered from the claim" in gap) == (form == "evals-no-1")


def test_a_dropped_point_is_described_as_the_sent_polynomial_extended_not_as_a_sent_value() -> None:
    # the differing point lies beyond the values sent, so no value was "sent" there
    rng = np.random.default_rng(11)
    tables = {n: GOLDILOCKS.vrandom(8, rng) for n in ("a", "b", "c")}
    transcript, witness = prove(GOLDILOCKS, tables, "a*b*c", degree=3, fault=Fault("drop-point", 2))
    diagnosis = diagnose(transcript, witness)
    cause = diagnosis.root_cause
    assert cause is not None and cause.point is not None and cause.point >= len(cause.sent)
    assert "extends to" in diagnosis.explain()[0] and "sent " not in diagnosis.explain()[0].split("(")[-1]


def test_probes_past_their_table_limit_are_said_to_be_skipped_and_the_root_cause_still_stands(monkeypatch) -> None:
    import stepper.diagnose.rootcause as rootcause_module

    rng = np.random.default_rng(4)
    tables = {n: GOLDILOCKS.vrandom(64, rng) for n in ("ledger", "scans")}
    transcript, witness = prove(GOLDILOCKS, tables, "ledger*scans", degree=2, fault=Fault("negate-value", 3, 1))
    within = diagnose(transcript, witness)
    assert within.findings and "probes_skipped" not in within.root_cause_json()
    monkeypatch.setattr(rootcause_module, "PROBE_MAX_ENTRIES", 32)
    past = diagnose(transcript, witness)
    cause = past.root_cause_json()
    assert past.findings == () and cause["probes"] == []
    assert {k: v for k, v in cause.items() if k not in ("probes", "probes_skipped")} == \
        {k: v for k, v in within.root_cause_json().items() if k != "probes"}
    assert "64 entries (more than 32" in cause["probes_skipped"]
    assert any(line.startswith("The bug-class probes were not run") for line in past.explain())


def test_the_recomputation_declares_every_table_entry_it_reads_as_its_size_of_work(monkeypatch) -> None:
    # the size decides whether numba is worth loading (stepper.field.kernels.base.work_of)
    from contextlib import contextmanager

    import stepper.diagnose.rootcause as rootcause_module

    sizes = []

    @contextmanager
    def recording(entries):
        sizes.append(entries)
        yield

    rng = np.random.default_rng(5)
    tables = {n: GOLDILOCKS.vrandom(32, rng) for n in ("ledger", "scans", "eq")}
    transcript, witness = prove(GOLDILOCKS, tables, "ledger*scans*eq", degree=3)
    monkeypatch.setattr(rootcause_module, "work_of", recording)
    assert diagnose(transcript, witness).root_cause is None
    assert sizes == [3 * 32]
