"""Witness files: JSON, msgpack, .npz and JSON with .npy tables; fitting them to a transcript;
one clear WitnessError (exit code 2) for every way a witness can fail to fit."""

from __future__ import annotations

import json
from pathlib import Path

import msgpack
import numpy as np
import pytest

from rootcause_prover import prove
from stepper.errors import EXIT_INPUT, ExpressionError, WitnessError
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, get_field
from stepper.diagnose.stored_table import whole_table
from stepper.diagnose.witness import load_witness, witness_from_map
from stepper.diagnose.witness_fit import fit_witness

BABYBEAR = NAMED_PRIMES["babybear"]
FIELD = get_field(BABYBEAR)
EXT = get_field(BABYBEAR, DEFAULT_IRREDUCIBLES[("babybear", 4)])


def _transcript(field=FIELD, mu: int = 2):
    rng = np.random.default_rng(1)
    tables = {n: field.base.vrandom(1 << mu, rng) for n in ("ledger", "scans")}
    transcript, _ = prove(field, tables, "ledger*scans", degree=2, name="boarding-permutation")
    return transcript, tables


def _map(tables, combine="ledger*scans", name="boarding-permutation"):
    return {"instances": [{"name": name, "combine": combine,
                           "tables": {k: [int(x) for x in v] for k, v in tables.items()}}]}


def test_json_witness_loads_and_fits(tmp_path: Path) -> None:
    transcript, tables = _transcript()
    path = tmp_path / "w.json"
    path.write_text(json.dumps(_map(tables)))
    fitted = fit_witness(load_witness(path), transcript)
    assert list(fitted) == [0]
    assert np.array_equal(fitted[0].tables["ledger"], tables["ledger"])
    assert fitted[0].combine.names() == ("ledger", "scans")


def test_msgpack_witness_accepts_fixed_width_byte_elements(tmp_path: Path) -> None:
    transcript, tables = _transcript()
    raw = _map(tables)
    raw["instances"][0]["tables"]["ledger"] = [int(x).to_bytes(4, "little") for x in tables["ledger"]]
    path = tmp_path / "w.msgpack"
    path.write_bytes(msgpack.packb(raw))
    fitted = fit_witness(load_witness(path), transcript)
    assert np.array_equal(fitted[0].tables["ledger"], tables["ledger"])


def test_npz_witness_names_instances_by_their_combine_arrays(tmp_path: Path) -> None:
    transcript, tables = _transcript()
    path = tmp_path / "w.npz"
    np.savez(path, **{"boarding-permutation/combine": np.array("ledger*scans"),
                      **{f"boarding-permutation/{k}": v for k, v in tables.items()}})
    witness = load_witness(path)
    assert [i.name for i in witness.instances] == ["boarding-permutation"]
    assert whole_table(fit_witness(witness, transcript)[0].tables["scans"]).tolist() == tables["scans"].tolist()


def test_json_witness_may_name_npy_files_relative_to_itself(tmp_path: Path) -> None:
    transcript, tables = _transcript()
    for k, v in tables.items():
        np.save(tmp_path / f"{k}.npy", v.astype(np.uint32))
    raw = {"instances": [{"name": "boarding-permutation", "combine": "ledger*scans",
                          "tables": {"ledger": "ledger.npy", "scans": "scans.npy"}}]}
    (tmp_path / "w.json").write_text(json.dumps(raw))
    fitted = fit_witness(load_witness(tmp_path / "w.json"), transcript)
    ledger = whole_table(fitted[0].tables["ledger"])
    assert ledger.dtype == np.uint64
    assert ledger.tolist() == tables["ledger"].tolist()


def test_extension_entries_become_an_extension_table() -> None:
    transcript, tables = _transcript(EXT)
    raw = _map(tables)
    raw["instances"][0]["tables"]["scans"] = [[int(x), 1, 0, 0] for x in tables["scans"]]
    fitted = fit_witness(witness_from_map(raw), transcript)
    assert fitted[0].tables["scans"].shape == (4, 4)
    assert fitted[0].tables["ledger"].ndim == 1


@pytest.mark.parametrize(
    ("mutate", "pattern"),
    [
        (lambda m: m["instances"][0]["tables"]["ledger"].append(1), r"2\^2 = 4 entries \(num_vars 2\), found 5"),
        (lambda m: m["instances"][0].__setitem__("combine", "ledger*cars"), "missing cars"),
        (lambda m: m["instances"][0].__setitem__("combine", "ledger*scans*scans"), "degree at most"),
        (lambda m: m["instances"][0]["tables"]["ledger"].__setitem__(2, BABYBEAR), "found 2013265921 at entry 2"),
        (lambda m: m["instances"][0]["tables"]["ledger"].__setitem__(1, "seven"), "table 'ledger' entry 1"),
        (lambda m: m["instances"][0].pop("combine"), "\"combine\" as text, found none \\(null, or the key is missing\\)$"),
        (lambda m: m["instances"][0].__setitem__("combine", 7), "\"combine\" as text, found an integer$"),
        (lambda m: m["instances"][0].__setitem__("name", ["a"]), "a text \"name\", found a list$"),
        (lambda m: m["instances"].__setitem__(0, "boarding"), "witness instance 0 to be a map, found text$"),
        (lambda m: m["instances"][0]["tables"].__setitem__("ledger", 1.5), "or a .npy path, found a number$"),
        (lambda m: m.pop("instances"), "\"instances\" list"),
        (lambda m: m["instances"][0].__setitem__("combine", "ledger * (scans"), "expected '\\)'"),
        (lambda m: m["instances"][0].__setitem__("combine", "7"), "at least one table"),
    ],
)
def test_a_witness_that_does_not_fit_says_what_and_where(mutate, pattern: str) -> None:
    transcript, tables = _transcript()
    raw = _map(tables)
    mutate(raw)
    with pytest.raises(WitnessError, match=pattern) as info:
        fit_witness(witness_from_map(raw), transcript)
    assert info.value.exit_code == EXIT_INPUT


def test_a_bad_combine_error_carries_the_column_and_the_instance() -> None:
    _, tables = _transcript()
    with pytest.raises(ExpressionError) as info:
        witness_from_map(_map(tables, combine="ledger $ scans"))
    assert info.value.column == 7
    assert "boarding-permutation" in str(info.value)


def test_malformed_json_is_reported_with_its_line(tmp_path: Path) -> None:
    path = tmp_path / "w.json"
    path.write_text('{"instances": [\n  {"name": 1,,}]}')
    with pytest.raises(WitnessError, match="line 2"):
        load_witness(path)


def test_unusable_files_are_witness_errors(tmp_path: Path) -> None:
    with pytest.raises(WitnessError, match="readable"):
        load_witness(tmp_path / "missing.json")
    np.save(tmp_path / "alone.npy", np.arange(4))
    with pytest.raises(WitnessError, match="single .npy"):
        load_witness(tmp_path / "alone.npy")
    np.save(tmp_path / "objects.npy", np.array([1, "x"], dtype=object), allow_pickle=True)
    (tmp_path / "w.json").write_text(json.dumps(
        {"instances": [{"name": "x", "combine": "t", "tables": {"t": "objects.npy"}}]}))
    with pytest.raises(WitnessError, match="objects.npy"):
        load_witness(tmp_path / "w.json")
    (tmp_path / "junk.bin").write_bytes(b"\xc1\xc1\xc1")
    with pytest.raises(WitnessError, match="undecodable"):
        load_witness(tmp_path / "junk.bin")


def test_npy_table_with_a_non_canonical_entry_names_the_entry(tmp_path: Path) -> None:
    transcript, tables = _transcript()
    bad = tables["ledger"].copy()
    bad[3] = BABYBEAR + 5
    np.save(tmp_path / "ledger.npy", bad)
    np.save(tmp_path / "scans.npy", tables["scans"])
    (tmp_path / "w.json").write_text(json.dumps({"instances": [
        {"name": "boarding-permutation", "combine": "ledger*scans",
         "tables": {"ledger": "ledger.npy", "scans": "scans.npy"}}]}))
    with pytest.raises(WitnessError, match="at entry 3"):
        fit_witness(load_witness(tmp_path / "w.json"), transcript)


def test_npz_instance_names_may_contain_slashes(tmp_path: Path) -> None:
    path = tmp_path / "w.npz"
    np.savez(path, **{"permutation/combine": np.array("f*g"), "permutation/f": np.arange(4),
                      "permutation/g": np.arange(4), "permutation/groups/combine": np.array("e"),
                      "permutation/groups/e": np.arange(8)})
    witness = load_witness(path)
    assert [(i.name, sorted(i.tables)) for i in witness.instances] == [
        ("permutation", ["f", "g"]), ("permutation/groups", ["e"])]


def test_npz_key_outside_every_instance_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "w.npz"
    np.savez(path, **{"sailing/combine": np.array("f"), "sailing/f": np.arange(4), "stray": np.arange(4)})
    with pytest.raises(WitnessError, match="'stray'"):
        load_witness(path)


# ----- bounds checked before anything is decoded or allocated ---------------------------------------
from stepper.diagnose.witness import WitnessLimits, json_depth  # noqa: E402


def _nested(depth: int) -> str:
    """A witness map whose first table entry sits inside ``depth`` levels of lists and maps in all."""
    inner = "[" * (depth - 4) + "1" + "]" * (depth - 4)
    return '{"instances": [{"name": "a", "combine": "t", "tables": {"t": ' + inner + "}}]}"


def test_json_depth_counts_brackets_outside_strings_only() -> None:
    # JSON string escaping per RFC 8259 section 7: \" and \\ inside a string are not delimiters
    assert json_depth(b'{"a": [1, {"b": []}]}') == 4
    assert json_depth(b'{"a": "[[[[{{{{", "b": "\\"[[", "c": "\\\\", "d": [[]]}') == 3
    assert json_depth(b"1") == 0
    assert json_depth(b"[" * 100_000) == 100_000


def test_one_hundred_thousand_nested_brackets_is_a_clean_input_error(tmp_path: Path) -> None:
    # before the limit, json.loads recursed until RecursionError and the CLI exited 70
    path = tmp_path / "w.json"
    path.write_text("[" * 100_000)
    says = r"nested at most 32 deep, found 100000 levels.*STEPPER_WITNESS_MAX_DEPTH"
    with pytest.raises(WitnessError, match=says) as err:
        load_witness(path)
    assert err.value.exit_code == EXIT_INPUT


@pytest.mark.parametrize("form", ["json", "msgpack"])
def test_nesting_at_the_limit_loads_and_one_past_it_is_refused(tmp_path: Path, form: str) -> None:
    limits = WitnessLimits(max_depth=8)
    for depth, ok in ((8, True), (9, False)):
        raw = _nested(depth)
        assert json_depth(raw.encode()) == depth
        path = tmp_path / f"w{depth}.{form}"
        path.write_bytes(raw.encode() if form == "json" else msgpack.packb(json.loads(raw)))
        if ok:
            assert load_witness(path, limits).instances[0].name == "a"
        else:
            with pytest.raises(WitnessError, match="nested at most 8 deep"):
                load_witness(path, limits)


def test_total_bytes_at_the_limit_load_and_one_past_are_refused_before_reading(tmp_path: Path) -> None:
    _, tables = _transcript()
    text = json.dumps(_map(tables)).encode()
    path = tmp_path / "w.json"
    path.write_bytes(text)
    assert load_witness(path, WitnessLimits(max_bytes=len(text))).instances
    says = f"at most {len(text) - 1} bytes, found {len(text)}.*STEPPER_WITNESS_MAX_BYTES"
    with pytest.raises(WitnessError, match=says):
        load_witness(path, WitnessLimits(max_bytes=len(text) - 1))


def test_table_entries_at_the_limit_load_and_one_past_are_refused(tmp_path: Path) -> None:
    _, tables = _transcript()  # 4 entries per table
    path = tmp_path / "w.json"
    path.write_text(json.dumps(_map(tables)))
    assert load_witness(path, WitnessLimits(max_entries=4)).instances
    with pytest.raises(WitnessError, match="at most 3 entries, found 4.*STEPPER_WITNESS_MAX_ENTRIES"):
        load_witness(path, WitnessLimits(max_entries=3))


@pytest.mark.parametrize("form", ["npy", "npz"])
def test_declared_table_size_is_refused_from_the_array_header_before_reading(tmp_path: Path, form: str) -> None:
    big = np.zeros(8, dtype=np.uint32)
    if form == "npy":
        np.save(tmp_path / "t.npy", big)
        path = tmp_path / "w.json"
        path.write_text(json.dumps({"instances": [{"name": "a", "combine": "t", "tables": {"t": "t.npy"}}]}))
    else:
        path = tmp_path / "w.npz"
        np.savez(path, **{"a/combine": np.array("t"), "a/t": big})
    assert load_witness(path, WitnessLimits(max_entries=8)).instances
    with pytest.raises(WitnessError, match="at most 7 entries, found 8 declared in its header"):
        load_witness(path, WitnessLimits(max_entries=7))


def test_a_table_of_the_wrong_length_is_refused_before_conversion() -> None:
    transcript, tables = _transcript()
    raw = _map(tables)
    raw["instances"][0]["tables"]["ledger"] = ["not an element"] * 5  # conversion would fail on the text
    with pytest.raises(WitnessError, match=r"2\^2 = 4 entries .* found 5"):
        fit_witness(witness_from_map(raw), transcript)


def test_limits_come_from_the_environment_and_bad_values_are_refused() -> None:
    assert WitnessLimits.from_environment({"STEPPER_WITNESS_MAX_DEPTH": "64"}).max_depth == 64
    assert WitnessLimits.from_environment({}) == WitnessLimits()
    with pytest.raises(WitnessError, match="STEPPER_WITNESS_MAX_BYTES to be a positive whole number"):
        WitnessLimits.from_environment({"STEPPER_WITNESS_MAX_BYTES": "-1"})


def test_witness_instances_at_the_limit_load_and_one_past_are_refused():
    from stepper.diagnose.witness import MAX_INSTANCES

    one = {"name": "a", "combine": "t", "tables": {"t": [1, 2]}}
    assert len(witness_from_map({"instances": [one] * MAX_INSTANCES}).instances) == MAX_INSTANCES
    with pytest.raises(WitnessError, match=f"at most {MAX_INSTANCES} witness instances, found {MAX_INSTANCES + 1}"):
        witness_from_map({"instances": [one] * (MAX_INSTANCES + 1)})


def test_a_decimal_entry_longer_than_any_bn254_element_names_the_entry_instead_of_crashing() -> None:
    # Python refuses int() of more than 4300 digits; found by bench/fuzz.py (corpus d5e77fc4d1289951).
    # BN254's r as given in EIP-197 has 77 digits, so 5000 digits can never be canonical.
    bn254 = get_field(NAMED_PRIMES["bn254"])
    transcript, tables = _transcript(bn254)
    raw = _map(tables)
    ledger = [str(v) for v in raw["instances"][0]["tables"]["ledger"]]  # all decimal text: read as one array
    ledger[2] = "9" * 5000
    raw["instances"][0]["tables"]["ledger"] = ledger
    with pytest.raises(WitnessError, match=r"table 'ledger' entry 2: .*a number of 5000 digits"):
        fit_witness(witness_from_map(raw), transcript)
