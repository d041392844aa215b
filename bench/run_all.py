"""Every figure of README's "Measured figures" table in one command, each with its target.

Runs the scripts of bench/ one after the other (each measures its ratios side by side within its
own run, so a slow spell of the shared machine slows both sides of a ratio), picks each figure
from their output, and prints the table in Markdown, ready to paste into README.md, with the
total time. A figure a script did not print shows as "not measured" and names the script, so
a regression or a broken bench shows in one command.

    python3 bench/run_all.py            # about 16 minutes on the shared 2-core machine, about 6 of them in
                                        # check_fields (ten fields under each of the two built-in schedules)
    python3 bench/run_all.py --quick    # smaller sizes, about 5 minutes (figures are not the README's)
    python3 bench/run_all.py --only check_fields witness

Sizes (full run): fields at 2^20; binary_fields at 2^18; store at 10^6 rounds; check and check_fields at 10^4 instances
x 24 rounds; memory at 10^4 and 10^5 instances x 2 rounds; rootcause at 2^22; witness at 2^20 and 2^22 (JSON at 2^20); app at 4,000 x 25; follow at 4,000 x 25;
permcheck to mu = 24 (grouped only past mu = 20: the direct prover's count is its formula there); glue at
10^4 instances x 8 rounds; startup: each command on the shipped small transcripts, best of 9.
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

HERE = Path(__file__).resolve().parent


@dataclass(frozen=True)
class Row:
    what: str
    command: str
    target: str
    pick: Callable[[str], str | None]  # the figure from the script's output, or None


def _first(pattern: str, fmt: Callable[[re.Match[str]], str]) -> Callable[[str], str | None]:
    def pick(text: str) -> str | None:
        found = re.search(pattern, text, re.MULTILINE)
        return fmt(found) if found else None
    return pick


def _all(pattern: str, fmt: Callable[[list[re.Match[str]]], str]) -> Callable[[str], str | None]:
    def pick(text: str) -> str | None:
        found = list(re.finditer(pattern, text, re.MULTILINE))
        return fmt(found) if found else None
    return pick


def _span(values: list[float], unit: str = "x", digits: int = 1) -> str:
    low, high = min(values), max(values)
    return f"{low:.{digits}f}{unit}" if low == high else f"{low:.{digits}f}{unit}-{high:.{digits}f}{unit}"


def _fields_rows(schedule: str) -> Callable[[str], str | None]:
    """check/decode per field for the transcripts of one schedule (bench/check_fields.py's table)."""
    def pick(text: str) -> str | None:
        rows = re.findall(rf"^\| (\S+) \| {re.escape(schedule)} \| [\d.]+ \| ([\d.]+)x \|", text, re.MULTILINE)
        return "; ".join(f"{name} {ratio}x" for name, ratio in rows) if rows else None
    return pick


def _witness_sizes(text: str) -> str | None:
    """The folder rows of bench/witness.py, largest size first, then the fixed floor; a size whose
    ratio or peak misses its target says so."""
    rows = re.findall(r"^2\^(\d+) check --witness \(folder\): .*?= ([\d.]+)x \(target <= 3x.*?\| peak (\d+) MB = "
                      r"([\d.]+)x one table", text, re.MULTILINE)
    floor = re.search(r"^2\^15 fixed floor: check --witness minus plain check ([\d.]+) s CPU, peak (\d+) MB", text,
                      re.MULTILINE)
    if not rows:
        return None
    parts = []
    for mu, ratio, peak, share in sorted(rows, key=lambda row: -int(row[0])):
        misses = [what for what, missed in (("time", float(ratio) > 3), ("memory", float(share) >= 1.5)) if missed]
        parts.append(f"2^{mu}: {ratio}x; {peak} MB = {share}x" + (f" (misses: {', '.join(misses)})" if misses else ""))
    if floor:
        parts.append(f"floor 2^15: {floor[1]} s, {floor[2]} MB")
    return "; ".join(parts)


SCRIPTS: dict[str, tuple[list[str], list[str], list[Row]]] = {
    # name: (full arguments, quick arguments, rows)
    "fields": (["--log2n", "20"], ["--log2n", "18", "--repeat", "2"], [
        Row("Goldilocks multiply vs galois", "python3 bench/fields.py", ">= 5x faster",
            _first(r"goldilocks mul: galois/stepper >= 5\s+measured\s+([\d.]+)", lambda m: f"{m[1]}x faster")),
        Row("BabyBear^4 multiply vs galois", "python3 bench/fields.py", ">= 100x faster",
            _first(r"babybear\^4 mul: galois/stepper >= 100\s+measured\s+([\d.]+)", lambda m: f"{m[1]}x faster")),
        Row("31-bit multiply vs bare numpy `(a*b)%p`", "python3 bench/fields.py", "<= 1.5x the time",
            _all(r"(?:babybear|koalabear|mersenne31) mul: stepper/numpy <= 1.5\s+measured\s+([\d.]+)",
                 lambda ms: _span([float(m[1]) for m in ms], "x", 2) + " the time")),
    ]),
    "binary_fields": ([], ["--log2n", "16", "--repeat", "2"], [
        Row("GF(2^k) multiply through galois vs the schoolbook extension kernel (CPU); galois's one-off set-up",
            "python3 bench/binary_fields.py", ">= 2x faster",
            _all(r"^GF\(2\^(\d+)\)\s+[\d.]+\s+[\d.]+\s+([\d.]+)\s+([\d.]+)",
                 lambda ms: ", ".join(f"GF(2^{m[1]}) {m[2]}x" for m in ms) + " faster; set-up "
                            + _span([float(m[3]) for m in ms], " s", 2))),
    ]),
    "store": ([], ["--rounds", "200000", "--log-size", "18", "--repeat", "3"], [
        Row("reading 10^6 rounds vs bare `msgpack.Unpacker`", "python3 bench/store.py", "<= 3x",
            _first(r"^\s+ratio\s+([\d.]+)x", lambda m: f"{m[1]}x")),
        Row("Recorder overhead on a 2^20 prover", "python3 bench/store.py", "< 5%",
            _first(r"^\s+overhead\s+([\d.]+)%", lambda m: f"{m[1]}%")),
    ]),
    "check": ([], ["--instances", "2000", "--repeat", "2"], [
        Row("`stepper check`, 10^4 instances x 24 rounds, Goldilocks, vs bare decode (CPU, fresh processes)",
            "python3 bench/check.py", "<= 3x",
            _first(r"ratio check/decode:\s+([\d.]+)x", lambda m: f"{m[1]}x")),
        Row("peak memory of `check`, a tenth of the instances vs all", "python3 bench/check.py", "flat",
            _first(r"peak resident memory of check:\s+([\d.]+) MB for (\d+) instances, ([\d.]+) MB for (\d+)",
                   lambda m: f"{m[1]} MB ({m[2]}) -> {m[3]} MB ({m[4]})")),
    ]),
    "memory": ([], ["--instances", "2000", "--repeat", "1"], [
        Row("peak memory of a plain `check`, 10^4 vs 10^5 instances x 2 rounds", "python3 bench/memory.py",
            "<= 1.2x",
            _all(r"^\s+(\d+) instances: ([\d.]+) MB|^ratio: ([\d.]+)",
                 lambda ms: f"{ms[0][2]} MB ({ms[0][1]}) -> {ms[1][2]} MB ({ms[1][1]}) = {ms[2][3]}x")),
    ]),
    "check_fields": ([], ["--instances", "2000", "--repeat", "1"], [
        Row("`stepper check` vs bare decode for every named field and extension (10^4 x 24, degree 3, CPU, "
            "fresh processes), transcripts of the schedule stepper-sha256/1 (every file written before /2, and "
            "`prove`'s default: they keep this figure)", "python3 bench/check_fields.py", "<= 3x (aim 2x)",
            _fields_rows("stepper-sha256/1")),
        Row("the same, transcripts of the schedule stepper-sha256/2 (one SHA-256 digest per challenge; two for BN254 "
            "and BLS12-381)", "python3 bench/check_fields.py", "<= 3x (aim 2x)", _fields_rows("stepper-sha256/2")),
    ]),
    "rootcause": (["--log2n", "22", "--fields", "babybear^4"], ["--log2n", "18", "--fields", "babybear^4"], [
        Row("root cause in process, BabyBear^4 degree 3, vs bare kernels", "python3 bench/rootcause.py",
            "<= 5x; peak < 4x the witness",
            _first(r"ratio\s+([\d.]+)x\s+peak\s+[\d.]+ MiB = ([\d.]+)x witness",
                   lambda m: f"{m[1]}x; peak {m[2]}x the witness")),
    ]),
    "witness": (["--log2n", "20", "22", "--json-max-log2n", "20"],
                ["--log2n", "16", "--repeat", "1", "--json-max-log2n", "16"], [
        Row("binary witness: writing vs `numpy.save` of the prover's arrays; bytes vs raw", "python3 bench/witness.py",
            "<= 2x; <= 1.1x",
            _first(r"= ([\d.]+)x \(target <= 2x\); [\d.]+ MiB = ([\d.]+)x raw", lambda m: f"{m[1]}x; {m[2]}x")),
        Row("`check --witness` (folder), whole command minus plain check, vs bare kernels (round 1 over extension "
            "elements, as the witness holds them); peak RSS vs one table: the largest size, then 2^20 and the fixed "
            "floor (2^15) every size pays", "python3 bench/witness.py --log2n 20 22 --json-max-log2n 20",
            "<= 3x; < 1.5x", _witness_sizes),
        Row("`check --witness` (JSON), the same, 2^20", "python3 bench/witness.py", "<= 3x; < 1.5x",
            _first(r"\(json\): .*= ([\d.]+)x \(target <= 3x.*\| peak (\d+) MB = ([\d.]+)x one table",
                   lambda m: f"{m[1]}x; {m[2]} MB = {m[3]}x")),
    ]),
    "app": ([], ["--instances", "1000", "--steps", "20", "--repeat", "2", "--fresh", "2"], [
        Row("app on 10^5 rounds: first paint / one step: median through the Pilot (it polls in 20 ms slices), "
            "its CPU, and key to paint without the Pilot", "python3 bench/app.py", "< 1 s / < 50 ms",
            _all(r"^(first paint s|step median ms|step cpu median ms|key to paint median ms)\s+[\d.]+\s+([\d.]+)",
                 lambda ms: "; ".join(f"{m[1]} {m[2]}" for m in ms))),
        Row("app on 10^5 rounds: every round checked, from creating the app / after its first paint, against "
            "`stepper check` on the same file in the same run (best of 3 each)", "python3 bench/app.py",
            "after paint <= 2x check",
            _all(r"^(all checked s|check s|all checked / check|after paint / check)\s+[\d.]+\s+([\d.]+)",
                 lambda ms: "; ".join(f"{m[1]} {m[2]}" for m in ms))),
        Row("app on 10^5 rounds until every round is checked vs `python3 -m stepper check`, each a fresh process, "
            "interleaved, best of 5", "python3 bench/app.py", "<= 2x (the issue's baseline)",
            _all(r"^fresh (app wall s|check wall s|app / check wall|app / check cpu)\s+([\d.]+)",
                 lambda ms: "; ".join(f"{m[1]} {m[2]}" for m in ms))),
        Row("`python3 -m stepper view` in a pseudo-terminal (140x44) until its screen says every round is "
            "checked vs `python3 -m stepper check`, fresh processes, interleaved, best of 5",
            "python3 bench/app.py", "<= 2x (the issue's baseline)",
            _all(r"^fresh (view in a terminal wall s|view / check wall|view / check cpu)\s+([\d.]+)",
                 lambda ms: "; ".join(f"{m[1]} {m[2]}" for m in ms))),
    ]),
    "follow": ([], ["--instances", "1000"], [
        Row("`view --follow`: one poll after an append, incremental vs full re-read", "python3 bench/follow.py",
            "proportional to the appended bytes",
            _all(r"full re-read\s+([\d.]+)\s+incremental\s+([\d.]+)",
                 lambda ms: "; ".join(f"{m[2]} ms vs {m[1]} ms" for m in ms))),
    ]),
    "permcheck": (["--max-mu", "24"], ["--max-mu", "18"], [
        Row("grouped permutation prover at the largest mu", "python3 bench/permcheck.py --max-mu 24", "< 60 s at mu 24",
            _all(r"^\s*(\d+)\s+\d+\s+\S+\s+\d+\s+([\d.]+)\s+\S+\s+([\d.]+)",
                 lambda ms: f"mu {ms[-1][1]}: {ms[-1][3]} s; multiplications direct/grouped "
                            f"{ms[0][2]} (mu {ms[0][1]}) to {ms[-1][2]} (mu {ms[-1][1]})")),
    ]),
    "glue": ([], ["--instances", "2000", "--repeat", "1"], [
        Row("`stepper check`, 10^4 instances x 8 rounds with 3 openings, a squeeze, claim_expr and final_expr each, "
            "vs the same proof without glue (CPU, in process)", "python3 bench/glue.py", "<= 1.5x",
            _first(r"^check\s+glue/plain: ([\d.]+)x[\s\S]*?^replay glue/plain: ([\d.]+)x",
                   lambda m: f"{m[1]}x (replay path alone {m[2]}x)")),
        Row("the same, `python3 -m stepper check FILE` in fresh processes (CPU of the child, start-up included)",
            "python3 bench/glue.py", "<= 1.5x", _first(r"^fresh\s+glue/plain: ([\d.]+)x", lambda m: f"{m[1]}x")),
    ]),
    "startup": ([], ["--repeat", "3"], [
        Row("start-up, fresh processes (CPU, best of 9 interleaved): `stepper --help` vs `python3 -c \"import "
            "msgpack\"`; `stepper check` of a small transcript without and with glue expressions vs `python3 -c "
            "\"import numpy\"`", "python3 bench/startup.py", "--help <= 2x; small check <= 1x",
            _all(r"^stepper (--help|check \(small, (?:no )?glue\))\s+([\d.]+)\s+[\d.]+\s+([\d.]+)x\s+([\d.]+)x",
                 lambda ms: "; ".join(f"{m[1]} {m[2]} s = " + (f"{m[3]}x msgpack" if m[1] == "--help" else
                                                               f"{m[4]}x numpy") for m in ms))),
    ]),
}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes (a smoke run)")
    parser.add_argument("--only", nargs="+", choices=sorted(SCRIPTS), metavar="SCRIPT")
    parser.add_argument("--show", action="store_true", help="print each script's own output too")
    args = parser.parse_args()
    started = time.perf_counter()
    table: list[tuple[Row, str]] = []
    for name, (full, quick, rows) in SCRIPTS.items():
        if args.only and name not in args.only:
            continue
        argv = [sys.executable, str(HERE / f"{name}.py"), *(quick if args.quick else full)]
        t = time.perf_counter()
        proc = subprocess.run(argv, capture_output=True, text=True, cwd=HERE.parent)
        output = proc.stdout + proc.stderr
        print(f"# {name}: {time.perf_counter() - t:.0f} s (exit {proc.returncode})", file=sys.stderr, flush=True)
        if args.show:
            print(output, file=sys.stderr)
        for row in rows:
            figure = row.pick(output)
            table.append((row, figure if figure is not None else f"not measured (see `{row.command}`)"))
    print("| what | command | figure | target |")
    print("|---|---|---|---|")
    for row, figure in table:
        print(f"| {row.what} | `{row.command}` | {figure} | {row.target} |")
    print(f"\n(bench/run_all.py{' --quick' if args.quick else ''}: {time.perf_counter() - started:.0f} s in all)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
