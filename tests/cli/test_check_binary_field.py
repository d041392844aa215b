"""`stepper check` end to end in a binary extension field GF(2^16), the field kind whose
products run through galois: an honest proof is accepted with its witness, and a proof with
one corrupted round is rejected at that round, with the root cause found there.

Degree-1 rounds only: the contract sends g(0), ..., g(d) at the integers 0..d, which are
distinct field elements only while d < p = 2 (common practice, no source).
"""

from __future__ import annotations

import copy
import io
import json
from pathlib import Path

import pytest

from json_contracts import conforming
from stepper.cli.main import main
from stepper.field.field import get_field
from stepper.field.kernels import BinaryFieldKernel, binary
from stepper.cli.prove_cmd import write_witness
from stepper.provers.channel import JsonLinesSink
from stepper.provers.reference import ProveSpec, prove

# x^16 + x^5 + x^3 + x + 1, irreducible over F_2 (get_field checks it with galois)
GF2_16 = (1, 1, 0, 1, 0, 1) + (0,) * 10 + (1,)
NUM_VARS = 16  # tables of 2^16 entries: the prover's and the root cause's folds are large arrays


@pytest.fixture
def field(monkeypatch: pytest.MonkeyPatch):
    """GF(2^16) whose kernel goes to galois at the first large product (no work threshold)."""
    monkeypatch.setattr(binary, "GALOIS_AFTER", 0)
    gf = get_field(2, GF2_16)
    gf.__dict__.pop("kernel", None)  # a kernel built earlier in this process had the old threshold
    yield gf
    gf.__dict__.pop("kernel", None)


@pytest.fixture(scope="module")
def proved(tmp_path_factory: pytest.TempPathFactory) -> tuple[list[dict], Path, bool]:
    """The honest proof's events, its witness file, and whether the prover's products went through
    galois: made once for the module (2^16 entries), by the kernel ``field`` gives each test."""
    folder = tmp_path_factory.mktemp("gf2_16")
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(binary, "GALOIS_AFTER", 0)
        gf = get_field(2, GF2_16)
        gf.__dict__.pop("kernel", None)
        out = io.StringIO()
        proof = prove(ProveSpec("generic", num_vars=NUM_VARS, seed=3, combine="a + b"), gf, JsonLinesSink(out))
        write_witness(str(folder / "w.json"), gf, proof)
        through_galois = isinstance(gf.kernel, BinaryFieldKernel) and gf.kernel._galois_field is not None
        gf.__dict__.pop("kernel", None)
    return [json.loads(line) for line in out.getvalue().splitlines()], folder / "w.json", through_galois


def _events(proved: tuple[list[dict], Path, bool]) -> list[dict]:
    return copy.deepcopy(proved[0])  # each test may change its own copy


def _transcript(tmp_path, name: str, events: list[dict]) -> str:
    stream = tmp_path / f"{name}.jsonl"
    stream.write_text("".join(json.dumps(e) + "\n" for e in events))
    out = tmp_path / f"{name}.sumtr"
    assert main(["import", str(stream), "-o", str(out)]) == 0
    return str(out)


def test_an_honest_gf_2_16_proof_is_accepted_with_its_witness(field, proved, tmp_path, capsys) -> None:
    events = _events(proved)
    assert events[0]["type"] == "field" and events[0]["modulus"] == "2" and events[0]["extension_degree"] == 16
    assert proved[2]  # the prover's large products went through galois
    path = _transcript(tmp_path, "honest", events)
    capsys.readouterr()
    assert main(["check", path, "--witness", str(proved[1]), "--json"]) == 0
    assert isinstance(field.kernel, BinaryFieldKernel) and field.kernel._galois_field is not None  # and check's
    report = conforming(capsys.readouterr().out, "check")
    assert report["verdict"] == "accept" and report["root_cause"] is None
    assert len(report["instances"][0]["rounds"]) == NUM_VARS


def test_a_corrupted_round_of_a_gf_2_16_proof_is_rejected_at_that_round(field, proved, tmp_path, capsys) -> None:
    events = _events(proved)
    rounds = [e for e in events if e["type"] == "round"]
    g0 = rounds[6]["evals"][0]  # round 7's g(0): 16 bits, constant term first
    rounds[6]["evals"][0] = [1 - g0[0], *g0[1:]]  # flip the constant bit
    path = _transcript(tmp_path, "corrupt", events)
    capsys.readouterr()
    assert main(["check", path, "--witness", str(proved[1]), "--json"]) == 1
    report = conforming(capsys.readouterr().out, "check")
    assert report["verdict"] == "reject"
    assert (report["first_failure"]["round"], report["first_failure"]["check"]) == (7, "sum")
    assert report["root_cause"]["round"] == 7
