"""Where the CPU time of `stepper check` goes, phase by phase, in fresh processes: what is left to
cut when a field misses its check / decode target (BN254 and BLS12-381 do, bench/check_fields.py).

For each field it writes the honest transcript bench/check_fields.py writes (``--instances`` x
``--rounds``, degree 3, challenges derived by ``--schedule``), then times, in ``--repeat``
interleaved rounds (best and median of each), CPU seconds of fresh processes:

* decode: the interpreter, ``import msgpack`` and iterating every msgpack object (the denominator);
* start: the interpreter importing numpy, msgpack and hashlib, and nothing else;
* modules: the same plus every stepper module a check of this file loads;
* check without the block arithmetic and without Fiat-Shamir: ``stepper check FILE`` with
  ``roundblock.block_passes`` answering True at once and the schedule's absorbing and squeezing of
  the runs left out (``RunBlock.absorb_plain`` and ``RunBlock.rederived`` doing nothing);
* check without the block arithmetic: only ``block_passes`` left out;
* check: the whole command.

The runs with parts left out exist only to be timed: their verdict means nothing (a check that
skips its arithmetic accepts anything). The differences give the phases: the arithmetic (sums,
challenges and finals as congruences on 29-bit limbs), Fiat-Shamir (the frames, and the SHA-256
calls, whose floor, bench/check_fields.py's "hashing alone", is printed beside it), the rest of the
check (reading, the file's digest, bytes to limbs, the instance events, the report) and stepper's
modules. Every process runs the same prelude (a few imports, then ``runpy``), so the differences
hold only what was left out.

    python3 bench/check_phases.py                                  # BN254 and BLS12-381 under stepper-sha256/2
    python3 bench/check_phases.py --fields bn254 --schedule stepper-sha256/1 --repeat 5
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check import _child, _child_env, decode_process  # noqa: E402  (same measuring helpers as bench/check.py)
from check_fields import chosen_fields, hashing_floor, write_transcript  # noqa: E402

from stepper.verify.fiatshamir import BUILTIN_SCHEDULES  # noqa: E402

# the measured processes: stepper's check after the patches that leave a part out (none for the whole check)
PRELUDE = ("import runpy, sys\n"
           "from stepper.verify import packed_runs, roundblock\n"
           "{patches}"
           "sys.argv = ['stepper', 'check', sys.argv[1]]\n"
           "runpy.run_module('stepper', run_name='__main__', alter_sys=True)\n")
LEFT_OUT = {
    "check": "",
    "without arithmetic": "roundblock.block_passes = lambda *args: True\n",
    "without arithmetic, Fiat-Shamir": ("roundblock.block_passes = lambda *args: True\n"
                                        "packed_runs.RunBlock.absorb_plain = lambda *args: None\n"
                                        "packed_runs.RunBlock.rederived = lambda *args: None\n"),
}
START = "import hashlib, msgpack, numpy\n"


def loaded_modules(path: Path) -> list[str]:
    """The stepper modules a check of ``path`` loads, in the order they were first imported."""
    code = ("import contextlib, io, sys\nfrom stepper.cli.main import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n    main(['check', sys.argv[1]])\n"
            "print(' '.join(name for name in sys.modules if name.startswith('stepper')))\n")
    out = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True, check=True,
                         env=_child_env()).stdout
    return out.split()


def cpu(code: str, *args: str) -> float:
    """CPU seconds of ``python -c code args`` in a fresh process (which must exit 0)."""
    _, seconds, _, status = _child([sys.executable, "-c", code, *args])
    assert status == 0, f"a measured process exited {status}"
    return seconds


def measure(name: str, schedule: str, instances: int, rounds: int, repeat: int, tmp: Path) -> None:
    path = tmp / f"{name}.sumtr"
    write_transcript(path, name, instances, rounds, schedule)
    modules = START + "".join(f"import {module}\n" for module in loaded_modules(path))
    times: dict[str, list[float]] = {}
    for _ in range(repeat):  # interleaved: a slow spell of the machine slows every row alike
        times.setdefault("decode", []).append(decode_process(path))
        times.setdefault("start", []).append(cpu(START))
        times.setdefault("modules", []).append(cpu(modules))
        for label, patches in LEFT_OUT.items():
            times.setdefault(label, []).append(cpu(PRELUDE.format(patches=patches), str(path)))
    floor = min(hashing_floor(name, schedule, instances * rounds) for _ in range(repeat))
    best = {label: min(values) for label, values in times.items()}
    median = {label: statistics.median(values) for label, values in times.items()}
    decode = best["decode"]
    phases = [
        ("start (interpreter, numpy, msgpack, hashlib)", "start", None),
        ("stepper's modules", "modules", "start"),
        ("reading, file digest, bytes to limbs, events, report", "without arithmetic, Fiat-Shamir", "modules"),
        ("Fiat-Shamir: frames and SHA-256 calls", "without arithmetic", "without arithmetic, Fiat-Shamir"),
        ("block arithmetic (limb congruences)", "check", "without arithmetic"),
    ]
    size = path.stat().st_size / 1e6
    print(f"\n{name} {schedule}, {size:.1f} MB: decode {decode:.3f} s, check {best['check']:.3f} s = "
          f"{best['check'] / decode:.2f}x (median {median['check'] / statistics.median(times['decode']):.2f}x)")
    print("| phase | CPU s (best) | CPU s (median) | / decode |")
    print("|---|---|---|---|")
    for label, upper, lower in phases:
        low_best = best[lower] if lower else 0.0
        low_median = median[lower] if lower else 0.0
        print(f"| {label} | {best[upper] - low_best:.3f} | {median[upper] - low_median:.3f} | "
              f"{(best[upper] - low_best) / decode:.2f}x |")
    print(f"| (of Fiat-Shamir: the SHA-256 calls alone, in process) | {floor:.3f} | | {floor / decode:.2f}x |")
    print(f"| check | {best['check']:.3f} | {median['check']:.3f} | {best['check'] / decode:.2f}x |")
    path.unlink()


def parse_args() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--fields", default="bn254,bls12-381", help="comma-separated names (default: bn254,bls12-381)")
    parser.add_argument("--schedule", choices=BUILTIN_SCHEDULES, default="stepper-sha256/2")
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=24)
    parser.add_argument("--repeat", type=int, default=7)
    return parser.parse_args()


def main() -> None:
    args = parse_args()
    started = time.perf_counter()
    names = chosen_fields(args.fields, "check_phases.py")
    print(f"{args.instances} instances x {args.rounds} rounds, degree 3; CPU seconds of fresh processes, best and "
          f"median of {args.repeat} interleaved; a phase is the difference of two rows (so the noise of both)")
    with tempfile.TemporaryDirectory() as tmp:
        for name in names:
            measure(name, args.schedule, args.instances, args.rounds, args.repeat, Path(tmp))
    print(f"\n(bench/check_phases.py: {time.perf_counter() - started:.0f} s in all)")


if __name__ == "__main__":
    main()
