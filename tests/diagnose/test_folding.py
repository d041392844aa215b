"""The chunked fold (stepper.diagnose.folding): the same rounds, root causes and opening values as the
in-memory path and the Dask engine, for every chunk size, and the same as plain Python integers.

Outside references: round polynomials by folding as in tests/plain_sumcheck.py (Python integers,
g_k(X) = sum over the free variables; common practice, no source); the multilinear extension by its
definition sum_x T[x] * prod_i (x_i r_i + (1 - x_i)(1 - r_i)) (common practice, no source). Moduli:
BabyBear 2^31 - 2^27 + 1, Goldilocks 2^64 - 2^32 + 1, Mersenne31 2^31 - 1 (common practice, no
source); the BabyBear^4 polynomial is the field module's default, checked irreducible against galois
in tests/field/test_field.py."""

from __future__ import annotations

import random
from pathlib import Path

import numpy as np
import pytest

from plain_sumcheck import Plain, product_rounds
from rootcause_prover import Fault, prove
from stepper.diagnose.folding import ChunkedFold, PassPlan
from stepper.diagnose.honest import HonestRound, honest_rounds
from stepper.diagnose.rootcause import InMemory, diagnose
from stepper.diagnose.stored_table import StoredTable
from stepper.diagnose.witness import Witness, WitnessInstance, load_witness
from stepper.diagnose.witness_dir import write_witness_folder
from stepper.errors import InputError
from stepper.field.expr import parse
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.field.poly import mle_eval
from stepper.verify.replay import replay_transcript

BABYBEAR4 = get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)])
FIELDS = {
    "babybear^4": BABYBEAR4,
    "goldilocks": get_field(NAMED_PRIMES["goldilocks"]),
    "mersenne31": get_field(NAMED_PRIMES["mersenne31"]),
}
# 2 and 3: pieces of one or two rows; 5, 7, 100: pieces that do not divide n; 16: exact; 4096: whole
CHUNKS = (2, 3, 5, 7, 16, 100, 4096)


def _tables(field, mu: int, seed: int = 5, base: bool = False):
    rng = np.random.default_rng(seed)
    make = field.base.vrandom if base else field.vrandom
    return {n: make(1 << mu, rng) for n in ("ledger", "scans", "tolls")}


def _stored(field, tmp_path: Path, transcript, tables, combine: str, order: str) -> Witness:
    """The same witness as a binary folder, read back memory-mapped (the tables become StoredTable)."""
    folder = tmp_path / f"w-{len(list(tmp_path.iterdir()))}"
    write_witness_folder(folder, field, [(transcript.instances[0].name, tables, combine, order)])
    return load_witness(folder)


@pytest.mark.parametrize("chunk", [2, 3, 5, 8, 100, 1 << 18])
@pytest.mark.parametrize("num_vars", [1, 2, 5, 10, 17, 26, 32])
def test_a_pass_plan_keeps_pieces_within_the_chunk_and_leaves_at_most_a_chunk_when_chunk_squared_covers_n(
        chunk: int, num_vars: int) -> None:
    plan = PassPlan.of(num_vars, chunk)
    assert 0 <= plan.levels <= num_vars and plan.rows >= 1
    assert (plan.rows << plan.levels) <= chunk  # one piece of every table
    left = (1 << num_vars) >> plan.levels
    if chunk * chunk >= 1 << num_vars:
        assert left <= chunk
    else:
        assert left == (1 << num_vars) >> (chunk.bit_length() - 1)


@pytest.mark.parametrize("name", sorted(FIELDS))
@pytest.mark.parametrize("order", ["low-first", "high-first"])
@pytest.mark.parametrize("chunk", CHUNKS)
@pytest.mark.parametrize("given", [0, 1, 3, 7, 8])  # none, fewer than the pass's folds, mu - 1, mu
def test_honest_rounds_equal_the_in_memory_ones_for_every_chunk_and_any_number_of_challenges(
        name: str, order: str, chunk: int, given: int) -> None:
    field = FIELDS[name]
    mu = 8  # 2^8 entries: each chunk below folds as many levels in its pass as at 2^10, in a quarter of the pieces
    tables = _tables(field, mu, base=(chunk % 2 == 1))  # base-field tables fold into the extension
    expr = parse("ledger*scans*tolls + 3*ledger")
    rng = random.Random(chunk * 31 + given)
    challenges = [field.random(rng) for _ in range(given)]
    expected = list(honest_rounds(field, tables, expr, challenges, order, 4))
    got = list(ChunkedFold(chunk).honest_rounds(field, tables, expr, challenges, order, 4))
    assert got == expected
    assert sum(isinstance(item, HonestRound) for item in got) == min(given + 1, mu)


@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_honest_rounds_over_python_integer_entries_equal_the_in_memory_ones(order: str) -> None:
    # BN254 tables are object arrays of Python ints: the pieces keep them so, in either layout
    field = get_field(NAMED_PRIMES["bn254"])
    tables = _tables(field, 8)
    challenges = [field.random(random.Random(3)) for _ in range(8)]
    expr = parse("ledger*scans*tolls")
    expected = list(honest_rounds(field, tables, expr, challenges, order, 4))
    assert list(ChunkedFold(16).honest_rounds(field, tables, expr, challenges, order, 4)) == expected


@pytest.mark.parametrize("name", sorted(FIELDS))
@pytest.mark.parametrize("order", ["low-first", "high-first"])
@pytest.mark.parametrize("fault", [None, Fault("negate-value", 2, 1), Fault("negate-value", 7, 2),
                                   Fault("negate-final"), Fault("challenge-ahead", 4), Fault("sum-consistent", 6, 5)])
def test_root_causes_from_a_memory_mapped_folder_equal_the_in_memory_path_for_every_chunk(
        tmp_path: Path, name: str, order: str, fault) -> None:
    field = FIELDS[name]
    tables = _tables(field, 7)  # seven rounds: faults inside the chunks' passes, after them and in the last round
    combine = "ledger*scans*tolls"
    transcript, witness = prove(field, tables, combine, degree=3, order=order, fault=fault)
    report = replay_transcript(transcript)
    memory = diagnose(transcript, witness, report, engine=InMemory())
    stored = _stored(field, tmp_path, transcript, tables, combine, order)
    assert isinstance(stored.instances[0].tables["ledger"], np.memmap)
    for chunk in CHUNKS:
        chunked = diagnose(transcript, stored, report, engine=ChunkedFold(chunk))
        assert chunked.root_cause_json() == memory.root_cause_json(), chunk
        assert chunked.findings_json() == memory.findings_json(), chunk
        assert chunked.rounds_checked == memory.rounds_checked
    assert (memory.root_cause is None) == (fault is None)


@pytest.mark.parametrize("order", ["low-first", "high-first"])
@pytest.mark.parametrize("fault", [None, Fault("negate-value", 6, 0)])
def test_root_causes_equal_the_dask_engine(tmp_path: Path, order: str, fault) -> None:
    pytest.importorskip("dask")
    from stepper.diagnose.dask_engine import DaskEngine

    field = BABYBEAR4
    tables = _tables(field, 8, base=True)
    transcript, witness = prove(field, tables, "ledger*scans*tolls", degree=3, order=order, fault=fault)
    stored = _stored(field, tmp_path, transcript, tables, "ledger*scans*tolls", order)
    report = replay_transcript(transcript)
    dasked = diagnose(transcript, stored, report, engine=DaskEngine(block=8))
    for chunk in (3, 16):
        chunked = diagnose(transcript, stored, report, engine=ChunkedFold(chunk))
        assert chunked.root_cause_json() == dasked.root_cause_json()
        assert chunked.findings_json() == dasked.findings_json()


@pytest.mark.parametrize("name", sorted(FIELDS))
@pytest.mark.parametrize("chunk", CHUNKS)
def test_opening_values_equal_the_definition_of_the_multilinear_extension(tmp_path: Path, name: str,
                                                                         chunk: int) -> None:
    field = FIELDS[name]
    mu = 6
    table = _tables(field, mu)["ledger"]
    np.save(tmp_path / "t.npy", table.astype(np.uint64))
    stored = StoredTable(field, np.load(tmp_path / "t.npy", mmap_mode="r"), "ledger")
    rng = random.Random(chunk)
    point = [field.random(rng) for _ in range(mu)]
    by_definition = field.lift(0)
    for x, value in enumerate(field.vlist(table)):
        weight = field.lift(1)
        for i, r in enumerate(point):
            weight = field.mul(weight, field.lift(r) if (x >> i) & 1 else field.sub(field.lift(1), field.lift(r)))
        by_definition = field.add(by_definition, field.mul(field.lift(value), weight))
    got = ChunkedFold(chunk).mle_eval(field, stored, point)
    assert got == mle_eval(field, table, point)
    assert field.lift(got) == by_definition


@pytest.mark.parametrize("num_vars", [1, 2, 3, 4])
@pytest.mark.parametrize("chunk", [2, 3, 5])
def test_rounds_and_final_values_equal_plain_python_integers(num_vars: int, chunk: int) -> None:
    # tests/plain_sumcheck.py folds lists of Python ints in F_p[X]/(q) (common practice, no source)
    field = BABYBEAR4
    plain = Plain(field.p, 4, q=tuple(DEFAULT_IRREDUCIBLES[("babybear", 4)]))
    tables = _tables(field, num_vars, seed=num_vars)
    lists = [[tuple(int(c) for c in row) for row in tables[n]] for n in ("ledger", "scans", "tolls")]
    rng = random.Random(num_vars * 10 + chunk)
    drawn = [field.random(rng) for _ in range(num_vars)]
    rounds, challenges, final = product_rounds(plain, lists, lambda k, evals: tuple(drawn[k - 1]))
    items = list(ChunkedFold(chunk).honest_rounds(field, tables, parse("ledger*scans*tolls"), challenges,
                                                  "low-first", 4))
    assert [list(item.evals) for item in items[:-1]] == rounds
    values = items[-1]
    assert field.mul(field.mul(values["ledger"], values["scans"]), values["tolls"]) == final


def test_a_chunk_below_two_entries_is_refused() -> None:
    with pytest.raises(InputError, match="at least 2"):
        ChunkedFold(1)


def test_the_default_engine_reads_a_witness_given_as_in_memory_arrays_too() -> None:
    field = FIELDS["goldilocks"]
    tables = _tables(field, 6)
    transcript, _ = prove(field, tables, "ledger*scans", degree=2, fault=Fault("negate-value", 3, 1))
    witness = Witness((WitnessInstance(transcript.instances[0].name, tables, parse("ledger*scans")),), "memory")
    assert diagnose(transcript, witness).root_cause_json()["round"] == 3
