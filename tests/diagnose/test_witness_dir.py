"""The binary witness folder (stepper.diagnose.witness_dir): written by `prove --witness-out`, read
memory-mapped by `check --witness`, the same root cause as the JSON witness; hostile folders are one
clear error (exit 2).

Outside references: the .npy layout is numpy's format document (numpy.lib.format: magic
b"\\x93NUMPY", a header, then the raw array in C order), read back here with numpy.lib.format and
compared with the bytes Python's int.to_bytes gives for each value (little-endian, 64-bit words least
significant first). Moduli: BabyBear 2^31 - 2^27 + 1 and Goldilocks 2^64 - 2^32 + 1 (common practice, no
source), BN254 (EIP-197 curve order)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from rootcause_prover import prove
from stepper.cli.main import main
from stepper.diagnose.stored_table import whole_table
from stepper.diagnose.witness import load_witness
from stepper.diagnose.witness_fit import fit_witness
from stepper.diagnose.witness_dir import FORMAT, MANIFEST, write_witness_folder
from stepper.errors import InputError, WitnessError
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field

FIELDS = {
    "babybear": get_field(NAMED_PRIMES["babybear"]),
    "babybear^4": get_field(NAMED_PRIMES["babybear"], DEFAULT_IRREDUCIBLES[("babybear", 4)]),
    "goldilocks": get_field(NAMED_PRIMES["goldilocks"]),
    "bn254": get_field(NAMED_PRIMES["bn254"]),
}


def _proof(field, mu: int = 3):
    rng = np.random.default_rng(5)
    tables = {n: field.vrandom(1 << mu, rng) for n in ("ledger", "scans")}
    transcript, _ = prove(field, tables, "ledger*scans", degree=2, name="boarding-permutation")
    return transcript, tables


def _raw_bytes(field, table) -> bytes:
    """The stored bytes by the manifest's rule, with Python ints (independent of numpy's casts)."""
    width = 4 if field.p < 2**32 else 8 * -(-field.p.bit_length() // 64)
    values = [c for e in field.vlist(table) for c in (e if isinstance(e, tuple) else (e,))]
    return b"".join(int(v).to_bytes(width, "little") for v in values)


@pytest.mark.parametrize("name", sorted(FIELDS))
def test_tables_are_raw_little_endian_npy_files_and_fit_back_unchanged(tmp_path: Path, name: str) -> None:
    field = FIELDS[name]
    transcript, tables = _proof(field)
    folder = tmp_path / "w"
    write_witness_folder(folder, field, [("boarding-permutation", tables, "ledger*scans", "low-first")])
    manifest = json.loads((folder / MANIFEST).read_text())
    assert manifest["format"] == FORMAT and manifest["field"] == field.spec()
    for tname, table in tables.items():
        path = folder / manifest["instances"][0]["tables"][tname]
        with path.open("rb") as handle:  # numpy.lib.format: magic, header, then the raw array
            assert handle.read(6) == b"\x93NUMPY"
            handle.seek(0)
            version = np.lib.format.read_magic(handle)
            read = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
            read(handle)
            data = handle.read()
        assert data == _raw_bytes(field, table)
        raw_size = len(data)
        assert path.stat().st_size <= 1.1 * raw_size + 128  # the header is at most 128 bytes at these sizes
    witness = load_witness(folder)
    fitted = fit_witness(witness, transcript)[0]
    for tname, table in tables.items():
        assert field.vlist(whole_table(fitted.tables[tname])) == field.vlist(table)


def test_tables_are_memory_mapped_not_read(tmp_path: Path) -> None:
    field = FIELDS["babybear"]
    _, tables = _proof(field)
    write_witness_folder(tmp_path / "w", field, [("boarding-permutation", tables, "ledger*scans", "low-first")])
    raw = load_witness(tmp_path / "w").instances[0].tables["ledger"]
    assert isinstance(raw, np.memmap)


def test_an_existing_path_is_never_replaced_and_nothing_is_left_behind(tmp_path: Path) -> None:
    field = FIELDS["babybear"]
    _, tables = _proof(field)
    (tmp_path / "taken").write_text("keep me")
    with pytest.raises(InputError, match="never replaced"):
        write_witness_folder(tmp_path / "taken", field, [("x", tables, "ledger*scans", "low-first")])
    assert (tmp_path / "taken").read_text() == "keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["taken"]


def _folder(tmp_path: Path) -> Path:
    field = FIELDS["babybear"]
    _, tables = _proof(field)
    folder = tmp_path / "w"
    write_witness_folder(folder, field, [("boarding-permutation", tables, "ledger*scans", "low-first")])
    return folder


@pytest.mark.parametrize("damage, message", [
    (lambda m: m.update(format="someone-else/9"), "expected a manifest with"),
    (lambda m: m["instances"][0]["tables"].update(ledger="../outside.npy"), "file name inside the witness folder"),
    (lambda m: m["instances"][0]["tables"].update(ledger="missing.npy"), "expected table 'ledger'"),
    (lambda m: m.update(element={"word": "<f8", "limbs": 1}), "expected \"element\""),
    (lambda m: m.update(instances=[]), "non-empty list"),
    (lambda m: m["instances"][0].update(combine=7), "text \"combine\""),
])
def test_a_damaged_manifest_is_one_witness_error(tmp_path: Path, damage, message) -> None:
    folder = _folder(tmp_path)
    manifest = json.loads((folder / MANIFEST).read_text())
    damage(manifest)
    (folder / MANIFEST).write_text(json.dumps(manifest))
    with pytest.raises(WitnessError, match=message.replace("(", r"\(")):
        load_witness(folder)


def test_a_table_of_the_wrong_word_type_is_refused(tmp_path: Path) -> None:
    folder = _folder(tmp_path)
    np.save(folder / "0-ledger.npy", np.zeros(8, dtype=np.float64))
    with pytest.raises(WitnessError, match="expected table 'ledger' of <u4 words"):
        load_witness(folder)
    (folder / MANIFEST).write_text("{not json")
    with pytest.raises(WitnessError, match="expected a JSON manifest"):
        load_witness(folder)


@pytest.mark.parametrize("field", ["babybear^4", "bn254", "goldilocks"])
def test_prove_writes_a_folder_and_check_finds_the_same_root_cause_as_with_json(tmp_path: Path, capsys,
                                                                                 field: str) -> None:
    reports = {}
    for kind, name in (("folder", "w"), ("json", "w.json")):
        out = tmp_path / f"{kind}.sumtr"
        witness = tmp_path / f"{kind}-{name}"
        assert main(["prove", "--kind", "generic", "--num-vars", "5", "--field", field, "--fault", "montgomery@2",
                     "-o", str(out), "--witness-out", str(witness)]) == 0
        assert witness.is_dir() == (kind == "folder")
        capsys.readouterr()
        assert main(["check", str(out), "--witness", str(witness), "--json"]) == 1
        reports[kind] = json.loads(capsys.readouterr().out)["root_cause"]
    assert reports["folder"] == reports["json"] and reports["folder"]["round"] == 2


def test_prove_refuses_an_existing_witness_folder_with_one_line(tmp_path: Path, capsys) -> None:
    (tmp_path / "w").mkdir()
    assert main(["prove", "--num-vars", "3", "-o", str(tmp_path / "p.sumtr"), "--witness-out", str(tmp_path / "w")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "is a folder" in err
    assert not (tmp_path / "p.sumtr").exists()


@pytest.mark.parametrize("name", sorted(FIELDS))
def test_json_tables_are_read_as_whole_arrays_without_the_element_parser(tmp_path: Path, monkeypatch,
                                                                          name: str) -> None:
    # the JSON form written by `prove --witness-out W.json`: ints below 2^53, decimal text above
    # (Field.to_json), k-lists in an extension; the values must come back equal to Python's int()
    field = FIELDS[name]
    path = tmp_path / "w.json"
    assert main(["prove", "--kind", "generic", "--num-vars", "3", "--field", name, "-o", str(tmp_path / "p.sumtr"),
                 "--witness-out", str(path)]) == 0
    doc = json.loads(path.read_text())
    import stepper.field.field as field_module

    def refuse(*args, **kwargs):
        raise AssertionError("the element parser was called for a whole-array table")

    monkeypatch.setattr(field_module.Field, "parse", refuse)
    from stepper.transcript.store import load

    fitted = fit_witness(load_witness(path), load(tmp_path / "p.sumtr"))[0]
    for tname, entries in doc["instances"][0]["tables"].items():
        expected = [tuple(int(c) for c in e) if isinstance(e, list) else int(e) for e in entries]
        got = field.vlist(fitted.tables[tname])
        assert [tuple(g) if isinstance(g, tuple) else g for g in got] == expected
