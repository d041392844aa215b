"""The witness on disk: writing it, its size, and `check --witness` as a whole command.

For each size 2^mu (default 2^20), `stepper prove --kind generic --combine "a*b*c"` (degree 3) over
``--field`` (default babybear^4) writes a transcript with its witness, once as the binary folder and
once as JSON. Then, side by side in one run (CPU seconds, best of ``--repeat``):

* writing: :func:`stepper.diagnose.witness_dir.write_witness_folder` of the prover's tables against
  ``numpy.save`` of the same arrays (target <= 2x), and the folder's bytes against the tables' raw
  bytes (elements x element bytes; target <= 1.1x);
* root cause: ``python3 -m stepper check F --witness W`` as a fresh process, minus the plain
  ``check F`` (fresh process too), against the bare kernels doing the recomputation's
  multiplications (``bench/rootcause.py``'s ``bare_kernels``, CPU seconds in this process; target
  <= 3x), and on the same line its peak resident memory (the child's own ``VmHWM``) against one
  table's raw bytes (target < 1.5x), for the folder and for the JSON witness. The peak includes
  the interpreter, numpy and stepper's modules (and numba's, where the command loads it). The bare
  kernels (numba's loops, loaded in this process) count round 1 as it is here:
  the generic prover's tables over an extension hold extension elements, so round 1 multiplies
  extension elements like every later round (``bench/rootcause.py``'s own tables are base-field
  ones, where round 1 multiplies base elements); the earlier count, round 1 over base elements,
  is printed beside it, and whether each target is met. For the folder, the same command once more
  on numpy alone and with numba loaded (``STEPPER_KERNELS=numpy`` / ``compiled``), interleaved:
  ``check`` loads numba only from ``COMPILED_WORK_MIN`` table entries of work, and this line is
  the measurement behind that choice. First of all, the fixed floor: the same command on a 2^15
  witness, minus its plain check, and its peak: the start-up that every size pays, beside a
  Python process that imports numpy alone (a floor no Python command goes below);
* the Dask engine's local overhead: ``check F --witness W --engine dask`` (Dask's local threaded
  scheduler, blocks of 2^16 entries) minus the plain check, against the same with the default
  (chunked) engine, in CPU and in wall seconds, for the folder witness (skipped when dask is not
  installed, or with ``--no-dask``).

    python3 bench/witness.py                    # 2^20, about a minute
    python3 bench/witness.py --log2n 18 22 --repeat 1
    python3 bench/witness.py --log2n 20 22 --json-max-log2n 20   # what bench/run_all.py runs
    python3 bench/witness.py --log2n 26 --synthetic --repeat 1 --no-json --no-dask   # the 2^26 demonstration

``--synthetic`` skips the in-memory prover (at 2^26 its three BabyBear^4 tables alone are 6 GiB):
the folder's tables are written in pieces of random canonical words, and the honest transcript
(random challenges, no Fiat-Shamir schedule) is computed from them by the chunked engine
itself, whose agreement with the in-memory path the tests establish at small sizes.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check import _child  # noqa: E402
from rootcause import bare_kernels, field_named  # noqa: E402


def prove(folder: Path, field: str, mu: int, witness: str) -> tuple[Path, Path]:
    out, w = folder / f"p{mu}.sumtr", folder / witness
    code = _child([sys.executable, "-m", "stepper", "prove", "--kind", "generic", "--field", field, "--num-vars",
                   str(mu), "--combine", "a*b*c", "-o", str(out), "--witness-out", str(w), "--force"])[3]
    assert code == 0, "prove failed"
    return out, w


def cpu_of_check(argv: list[str]) -> tuple[float, float]:
    """(CPU s, peak MB) of one fresh `check` process."""
    cpu, _, rss = times_of_check(argv)
    return cpu, rss


def times_of_check(argv: list[str], extra_env: dict[str, str] | None = None) -> tuple[float, float, float]:
    """(CPU s, wall s, peak MB) of one fresh `check` process; the peak is the child's own (VmHWM,
    through check.py's PEAK_SELF: ru_maxrss would count this script's high-water mark under vfork)."""
    wall, cpu, rss, code = _child([sys.executable, "-m", "stepper", "check", *argv], extra_env)
    assert code == 0, f"check {argv} exited {code}"
    return cpu, wall, rss


def dask_overhead(transcript: Path, witness: Path, repeat: int) -> str:
    """One line: the Dask engine against the in-memory engine, both minus the plain check."""
    best = {}
    for name, extra in (("plain", []), ("chunked", ["--witness", str(witness)]),
                        ("dask", ["--witness", str(witness), "--engine", "dask"])):
        runs = [times_of_check([str(transcript), *extra]) for _ in range(repeat)]
        best[name] = (min(r[0] for r in runs), min(r[1] for r in runs), min(r[2] for r in runs))
    (pc, pw, _), (mc, mw, _), (dc, dw, drss) = best["plain"], best["chunked"], best["dask"]
    return (f"--engine dask {dc - pc:.2f} s CPU / {dw - pw:.2f} s wall vs chunked {mc - pc:.2f} s / "
            f"{mw - pw:.2f} s (each minus the plain check) = {(dc - pc) / (mc - pc):.2f}x CPU, "
            f"{(dw - pw) / (mw - pw):.2f}x wall (local threads); peak {drss:.0f} MB")


def bare_start() -> float:
    """Peak MB (its own VmHWM) of a Python process that imports numpy and nothing else: a floor below
    stepper's own."""
    code = ("import numpy\n"
            "print(next(line.split()[1] for line in open('/proc/self/status') if line.startswith('VmHWM:')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return int(out.stdout) / 1024


def verdict(ratio: float, share: float) -> str:
    """The two targets of a whole-command line, each said met or missed."""
    return (f"time {'met' if ratio <= 3 else 'MISSED'}, memory {'met' if share < 1.5 else 'MISSED'}")


def kernels_side_by_side(transcript: Path, witness: Path, mu: int, repeat: int) -> str:
    """One line: the same command on numpy alone and with numba loaded, interleaved, best of ``repeat``
    each (CPU s, peak MB): the measurement behind stepper's crossover (COMPILED_WORK_MIN)."""
    from stepper.field.kernels.base import COMPILED_WORK_MIN

    argv = [str(transcript), "--witness", str(witness)]
    sides = {"numpy": {"STEPPER_KERNELS": "numpy"}, "numba": {"STEPPER_KERNELS": "compiled"}}
    runs: dict[str, list[tuple[float, float, float]]] = {name: [] for name in sides}
    for _ in range(repeat):
        for name, env in sides.items():
            runs[name].append(times_of_check(argv, env))
    (nc, nr), (cc, cr) = ((min(r[0] for r in runs[n]), min(r[2] for r in runs[n])) for n in sides)
    default = "numpy" if 3 << mu < COMPILED_WORK_MIN else "numba"
    return (f"2^{mu} kernels side by side (folder, whole command): numpy alone {nc:.2f} s CPU, {nr:.0f} MB | "
            f"numba loaded {cc:.2f} s, {cr:.0f} MB = {cc / nc:.2f}x the time; stepper picks {default} here "
            f"(numba from {COMPILED_WORK_MIN} table entries of work; these tables hold {3 << mu})")


def writing(field_name: str, mu: int, repeat: int, tmp: Path) -> tuple[float, float, float, float]:
    """(folder write s, numpy.save s, folder bytes, raw bytes) for the prover's tables."""
    from stepper.diagnose.witness_dir import write_witness_folder
    from stepper.provers.reference import ProveSpec, parse_field, prove as run_prover

    field = parse_field(field_name)

    class Discard:
        def write(self, record: object) -> object:
            return record

    spec = ProveSpec("generic", mu, combine="a*b*c")
    proof = run_prover(spec, field, Discard(), witness=True)
    tables = [(w.name, dict(w.tables), w.combine, w.order) for w in proof.witness]
    ours, bare = [], []
    for i in range(repeat):
        target = tmp / f"w{i}"
        t = time.process_time()
        write_witness_folder(target, field, tables)
        ours.append(time.process_time() - t)
        size = sum(f.stat().st_size for f in target.iterdir())
        shutil.rmtree(target)
        plain = tmp / f"n{i}"
        plain.mkdir()
        t = time.process_time()
        for name, ts, _, _ in tables:
            for tname, table in ts.items():
                np.save(plain / f"{name}-{tname}.npy", table)
        bare.append(time.process_time() - t)
        shutil.rmtree(plain)
    raw = sum(len(t) * field.elem_bytes for _, ts, _, _ in tables for t in ts.values())
    return min(ours), min(bare), size, raw


def extension_entries(folder: Path) -> bool:
    """Whether the witness folder's first table holds extension elements (shape (n, k))."""
    import json

    from stepper.diagnose.witness_dir import MANIFEST

    manifest = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
    first = next(iter(manifest["instances"][0]["tables"].values()))
    return bool(np.load(folder / first, mmap_mode="r").ndim == 2)


def synthetic(folder: Path, field_name: str, mu: int) -> tuple[Path, Path]:
    """A witness folder of three random BabyBear^4-shaped tables written in pieces, and its honest
    transcript computed from the memory-mapped tables by the chunked engine (module docstring)."""
    import json
    import random

    from stepper.diagnose.folding import ChunkedFold
    from stepper.diagnose.honest import HonestRound
    from stepper.diagnose.stored_table import StoredTable
    from stepper.diagnose.witness_dir import FORMAT, MANIFEST, element_layout
    from stepper.field.expr import parse
    from stepper.transcript.model import ChallengeMsg, FieldDecl, FinalValue, InstanceStart, RoundMsg
    from stepper.transcript.store import TranscriptWriter

    field = field_named(field_name)
    word, limbs = element_layout(field)
    assert limbs == 1, "--synthetic writes fields below 2^64"
    n, shape = 1 << mu, ((1 << mu, field.degree) if field.is_extension else (1 << mu,))
    w = folder / f"s{mu}"
    w.mkdir()
    rng = np.random.default_rng(mu)
    names = ("a", "b", "c")
    for name in names:
        out = np.lib.format.open_memmap(w / f"0-{name}.npy", mode="w+", dtype=np.dtype(word), shape=shape)
        for start in range(0, n, 1 << 20):
            stop = min(start + (1 << 20), n)
            out[start:stop] = rng.integers(0, field.p, size=(stop - start, *shape[1:]), dtype=np.uint64)
        out.flush()
        del out
    manifest = {"format": FORMAT, "field": field.spec(), "element": {"word": word, "limbs": 1},
                "instances": [{"name": "boarding-permutation", "combine": "a*b*c", "order": "low-first",
                               "tables": {name: f"0-{name}.npy" for name in names}}]}
    (w / MANIFEST).write_text(json.dumps(manifest, indent=1) + "\n", encoding="utf-8")
    tables = {name: StoredTable(field, np.load(w / f"0-{name}.npy", mmap_mode="r"), name) for name in names}
    prng = random.Random(mu)
    challenges = [field.random(prng) for _ in range(mu)]
    expr = parse("a*b*c")
    items = list(ChunkedFold().honest_rounds(field, tables, expr, challenges, "low-first", 4))
    rounds = [item.evals for item in items if isinstance(item, HonestRound)]
    final = expr.evaluate_scalar(field, items[-1])  # type: ignore[arg-type]
    out = folder / f"s{mu}.sumtr"
    with TranscriptWriter(out) as writer:
        writer.write(FieldDecl(field))
        writer.write(InstanceStart(0, "boarding-permutation", mu, 3, field.add(rounds[0][0], rounds[0][1])))
        for k, evals in enumerate(rounds, start=1):
            writer.write(RoundMsg(0, k, evals))
            writer.write(ChallengeMsg(0, k, challenges[k - 1]))
        writer.write(FinalValue(0, final))
    return out, w


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--field", default="babybear^4")
    parser.add_argument("--log2n", nargs="+", type=int, default=[20])
    parser.add_argument("--repeat", type=int, default=2)
    parser.add_argument("--no-json", action="store_true", help="skip the JSON witness (slow at 2^22 and up)")
    parser.add_argument("--json-max-log2n", type=int, default=None, metavar="MU",
                        help="the JSON witness only at sizes up to 2^MU (its text is about 130 bytes an entry)")
    parser.add_argument("--no-dask", action="store_true", help="skip the Dask engine's overhead")
    parser.add_argument("--no-kernels", action="store_true",
                        help="skip the folder command on numpy alone beside the same with numba loaded")
    parser.add_argument("--synthetic", action="store_true",
                        help="write the folder and the transcript without the in-memory prover (2^25 and up); "
                             "implies --no-json and skips the writing comparison")
    args = parser.parse_args()
    field = field_named(args.field)
    print(f"{args.field}, combine a*b*c (degree 3); CPU seconds, best of {args.repeat}")
    with tempfile.TemporaryDirectory(dir=os.environ.get("STEPPER_BENCH_TMP")) as name:
        tmp = Path(name)
        small_t, small_w = prove(tmp, args.field, 15, "floor")  # 2^15: the compiled kernels load
        small_plain = min(cpu_of_check([str(small_t)])[0] for _ in range(args.repeat))
        small_runs = [times_of_check([str(small_t), "--witness", str(small_w)]) for _ in range(args.repeat)]
        floor = min(r[2] for r in small_runs)
        python_numpy = min(bare_start() for _ in range(args.repeat))
        print(f"2^15 fixed floor: check --witness minus plain check {min(r[0] for r in small_runs) - small_plain:.2f} s "
              f"CPU, peak {floor:.0f} MB (the start-up every size pays: interpreter, numpy, stepper's modules; "
              f"python3 with numpy alone: {python_numpy:.0f} MB, so no Python command meets the memory target "
              f"on a table below {python_numpy / 1.5:.0f} MB)", flush=True)
        for mu in args.log2n:
            raw = 3 * (1 << mu) * field.elem_bytes
            if not args.synthetic:
                ours, bare, size, raw = writing(args.field, mu, args.repeat, tmp)
                print(f"2^{mu} write: folder {ours:.3f} s vs numpy.save {bare:.3f} s = {ours / bare:.2f}x (target "
                      f"<= 2x); {size / 2**20:.1f} MiB = {size / raw:.3f}x raw (target <= 1.1x)", flush=True)
            table_raw = raw / 3
            json_here = not (args.no_json or args.synthetic or (args.json_max_log2n is not None
                                                                 and mu > args.json_max_log2n))
            kinds = [("folder", "w")] + ([("json", "w.json")] if json_here else [])
            # the bare kernels depend on the size only: measured once for every witness kind
            kernels = min(bare_kernels(field, mu, clock=time.process_time, extension_tables=field.is_extension)
                          for _ in range(args.repeat))
            earlier = min(bare_kernels(field, mu, clock=time.process_time) for _ in range(args.repeat))
            for kind, wname in kinds:
                if args.synthetic:
                    began = time.perf_counter()
                    transcript, witness = synthetic(tmp, args.field, mu)
                    print(f"2^{mu} synthetic witness and honest transcript written in "
                          f"{time.perf_counter() - began:.0f} s wall", flush=True)
                else:
                    transcript, witness = prove(tmp, args.field, mu, wname)
                plain = min(cpu_of_check([str(transcript)])[0] for _ in range(args.repeat))
                runs = [times_of_check([str(transcript), "--witness", str(witness)]) for _ in range(args.repeat)]
                full, wall, rss = min(r[0] for r in runs), min(r[1] for r in runs), min(r[2] for r in runs)
                # both witnesses hold the tables as the folder does: extension elements over an extension
                assert kind != "folder" or extension_entries(witness) == field.is_extension
                print(f"2^{mu} check --witness ({kind}): {full:.2f} s - plain check {plain:.2f} s = "
                      f"{full - plain:.2f} s vs bare kernels {kernels:.2f} s = {(full - plain) / kernels:.1f}x "
                      f"(target <= 3x; round 1 counted over base elements, as before: {earlier:.2f} s = "
                      f"{(full - plain) / earlier:.1f}x) | peak {rss:.0f} MB = {rss * 2**20 / table_raw:.2f}x one table "
                      f"({table_raw / 2**20:.0f} MiB; target < 1.5x; the same command at 2^15: {floor:.0f} MB) "
                      f"| {wall:.0f} s wall | {verdict((full - plain) / kernels, rss * 2**20 / table_raw)}", flush=True)
                if kind == "folder" and not args.no_kernels:
                    print(kernels_side_by_side(transcript, witness, mu, args.repeat), flush=True)
                if kind == "folder" and not args.no_dask and importlib.util.find_spec("dask") is not None:
                    print(f"2^{mu} {dask_overhead(transcript, witness, args.repeat)}", flush=True)
                if witness.is_dir():
                    shutil.rmtree(witness)
                else:
                    witness.unlink()
                transcript.unlink()


if __name__ == "__main__":
    main()
