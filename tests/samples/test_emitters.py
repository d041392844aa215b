"""samples/c and samples/rust: the emitters in other languages produce a stream that
`stepper record` and `stepper import` accept and `check` passes. Each is compiled and run when
its compiler is on PATH and skipped, saying so, otherwise.

The expected values are recomputed here in plain Python integers: the claim is the sum of the
table, each round's g(0) and g(1) sum its even and odd entries, and the final value is the
table folded with the recorded challenges (the multilinear sumcheck, common practice, no source).
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

from json_contracts import conforming_lines
from stepper.cli.main import main

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
P = 2**31 - 2**27 + 1  # BabyBear (common practice, no source)


def _expected_lines() -> list[dict]:
    table, rs = [3, 1, 4, 1, 5, 9, 2, 6], [17, 1234567, 99991]
    out: list[dict] = [{"type": "field", "name": "babybear"},
                       {"type": "instance", "name": "deck-slots", "num_vars": 3, "degree": 1,
                        "claim": str(sum(table) % P)}]
    for r in rs:
        out.append({"type": "round", "evals": [str(sum(table[0::2]) % P), str(sum(table[1::2]) % P)]})
        out.append({"type": "challenge", "value": str(r)})
        table = [(a + r * (b - a)) % P for a, b in zip(table[0::2], table[1::2])]
    out.append({"type": "final", "value": str(table[0])})
    return out


def _build(kind: str, tmp_path: Path) -> Path:
    exe = tmp_path / f"emit_{kind}"
    if kind == "c":
        compiler = shutil.which("cc") or shutil.which("gcc") or shutil.which("clang")
        if compiler is None:
            pytest.skip("no C compiler (cc, gcc or clang) on PATH: the C emitter was not compiled")
        argv = [compiler, "-std=c99", "-Wall", "-Werror", "-O2", "-o", str(exe), str(SAMPLES / "c" / "emit_deck_slots.c")]
    else:
        compiler = shutil.which("rustc")
        if compiler is None:
            pytest.skip("no Rust compiler (rustc) on PATH: the Rust emitter was not compiled")
        argv = [compiler, "-O", "-o", str(exe), str(SAMPLES / "rust" / "emit_deck_slots.rs")]
    proc = subprocess.run(argv, capture_output=True, text=True, timeout=600, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    return exe


@pytest.mark.parametrize("kind", ["c", "rust"])
def test_the_emitter_stream_is_recorded_imported_and_checked(kind, tmp_path, capsys):
    exe = _build(kind, tmp_path)
    env = {k: v for k, v in os.environ.items() if k != "STEPPER_EVENTS"}
    printed = subprocess.run([str(exe)], capture_output=True, text=True, env=env, timeout=60, check=True).stdout
    assert conforming_lines(printed) == _expected_lines()
    recorded = tmp_path / "deck.sumtr"
    assert main(["record", "-o", str(recorded), "--", str(exe)]) == 0
    events = tmp_path / "deck.jsonl"
    events.write_text(printed)
    imported = tmp_path / "imported.sumtr"
    assert main(["import", str(events), "-o", str(imported)]) == 0
    capsys.readouterr()
    for path in (recorded, imported, events):
        assert main(["check", str(path)]) == 0
        assert "passed; final value checked" in capsys.readouterr().out
