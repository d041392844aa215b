"""The Dask engine (stepper.diagnose.dask_engine): the same root cause and the same values as the
in-memory path, on tables cut into many blocks, with Dask's local threaded scheduler.

Outside references: the worked example is J. Thaler's section 4.1 sumcheck
(g = 2 x1^3 + x1 x3 + x2 x3 over {0,1}^3, H = 12; from memory). The multilinear extension
of a table at a point is checked against its definition, sum_x T[x] * prod_i (x_i r_i +
(1 - x_i)(1 - r_i)) with Python integers (common practice, no source). Moduli:
Mersenne31 2^31 - 1, BabyBear 2^31 - 2^27 + 1, Goldilocks 2^64 - 2^32 + 1 (common
practice, no source), BN254 (EIP-197 curve order)."""

from __future__ import annotations

import random
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("dask")

from rootcause_prover import Fault, prove  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.diagnose.dask_engine import DaskEngine  # noqa: E402
from stepper.diagnose.rootcause import diagnose  # noqa: E402
from stepper.diagnose.witness_dir import write_witness_folder  # noqa: E402
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field  # noqa: E402
from stepper.field.poly import mle_eval  # noqa: E402
from stepper.transcript.model import RoundMsg  # noqa: E402
from stepper.verify.replay import replay_transcript  # noqa: E402

MERSENNE31 = get_field(NAMED_PRIMES["mersenne31"])
BABYBEAR4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
FIELDS = {
    "babybear^4": BABYBEAR4,
    "goldilocks": get_field(NAMED_PRIMES["goldilocks"]),
    "bn254": get_field(NAMED_PRIMES["bn254"]),
}
SMALL_BLOCK = 8  # many blocks even on small tables, so block boundaries are exercised


def _write(transcript, path: Path) -> Path:
    from stepper.transcript.store import TranscriptWriter
    from stepper.transcript.model import ChallengeMsg, FieldDecl, FinalValue

    inst = transcript.instances[0]
    with TranscriptWriter(path) as writer:
        writer.write(FieldDecl(transcript.field))
        writer.write(inst.start)
        for rnd in inst.rounds:
            writer.write(RoundMsg(0, rnd.number, rnd.values))
            writer.write(ChallengeMsg(0, rnd.number, rnd.challenge))
        writer.write(FinalValue(0, inst.final))
    return path


def _tables(field, mu: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    return {n: field.vrandom(1 << mu, rng) for n in ("ledger", "scans", "tolls")}


def test_thaler_example_gives_the_same_root_cause_with_the_dask_engine() -> None:
    # J. Thaler, section 4.1 (from memory): H = 12; round 2 altered by 7 t (t - 1) keeps g2(0) + g2(1).
    tables = {f"x{j + 1}": MERSENNE31.vec([(i >> j) & 1 for i in range(8)]) for j in range(3)}
    transcript, witness = prove(MERSENNE31, tables, "2*x1*x1*x1 + x1*x3 + x2*x3", degree=3,
                                fault=Fault("sum-consistent", 2, 7), name="thaler-4.1")
    assert transcript.instances[0].start.claim == 12
    cause = diagnose(transcript, witness, engine=DaskEngine(block=2)).root_cause_json()
    assert (cause["round"], cause["check"], cause["point"]) == (2, "honest-poly", 2)
    assert cause == diagnose(transcript, witness).root_cause_json()


@pytest.mark.parametrize("name", sorted(FIELDS))
@pytest.mark.parametrize("order", ["low-first", "high-first"])
@pytest.mark.parametrize("fault", [None, Fault("negate-value", 4, 2), Fault("negate-final"), Fault("challenge-ahead", 3)])
def test_dask_and_in_memory_give_identical_root_causes(name: str, order: str, fault) -> None:
    field = FIELDS[name]
    transcript, witness = prove(field, _tables(field, 7), "ledger*scans*tolls", degree=3, order=order, fault=fault)
    report = replay_transcript(transcript)
    memory = diagnose(transcript, witness, report)
    dasked = diagnose(transcript, witness, report, engine=DaskEngine(block=SMALL_BLOCK))
    assert dasked.root_cause_json() == memory.root_cause_json()
    assert dasked.findings_json() == memory.findings_json()
    assert dasked.rounds_checked == memory.rounds_checked
    assert (memory.root_cause is None) == (fault is None)


@pytest.mark.parametrize("name", sorted(FIELDS))
def test_opening_values_match_the_definition_of_the_multilinear_extension(name: str) -> None:
    field = FIELDS[name]
    mu = 5
    table = _tables(field, mu)["ledger"]
    rng = random.Random(9)
    point = [field.random(rng) for _ in range(mu)]
    by_definition = field.lift(0)
    entries = field.vlist(table)
    for x, value in enumerate(entries):
        weight = field.lift(1)
        for i, r in enumerate(point):
            bit = (x >> i) & 1
            weight = field.mul(weight, field.lift(r) if bit else field.sub(field.lift(1), field.lift(r)))
        by_definition = field.add(by_definition, field.mul(field.lift(value), weight))
    got = DaskEngine(block=4).mle_eval(field, table, point)
    assert field.lift(got) == by_definition == field.lift(mle_eval(field, table, point))


def test_a_2_to_the_17_binary_witness_through_the_command_line_agrees_with_the_in_memory_path(
        tmp_path: Path, capsys) -> None:
    field = BABYBEAR4
    mu = 17  # two blocks of the command's BLOCK = 2^16 entries
    rng = np.random.default_rng(11)
    tables = {n: field.base.vrandom(1 << mu, rng) for n in ("ledger", "scans", "tolls")}
    transcript, _ = prove(field, tables, "ledger*scans*tolls", degree=3, fault=Fault("negate-value", 9, 1))
    path = _write(transcript, tmp_path / "ferries.sumtr")
    folder = tmp_path / "w"
    write_witness_folder(folder, field, [(transcript.instances[0].name, tables, "ledger*scans*tolls", "low-first")])
    outputs = []
    for extra in ([], ["--engine", "dask"]):
        code = main(["check", str(path), "--witness", str(folder), "--json", *extra])
        outputs.append((code, capsys.readouterr().out))
    assert outputs[0][0] == outputs[1][0] == 1
    assert outputs[0][1] == outputs[1][1]
    assert '"round": 9' in outputs[1][1]


def test_engine_flags_out_of_place_are_one_line_and_exit_2(tmp_path: Path, capsys) -> None:
    transcript, _ = prove(MERSENNE31, _tables(MERSENNE31, 3), "ledger*scans", degree=2)
    path = _write(transcript, tmp_path / "f.sumtr")
    for argv in (["--engine", "dask"], ["--scheduler", "tcp://127.0.0.1:1"]):
        assert main(["check", str(path), *argv]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "expected" in err[0]
