"""Root cause with a witness: recomputation time against the bare field kernels.

For each field and size, builds an honest transcript of one degree-3 instance
(combine ``ledger * scans * eq`` over three random base-field tables of 2^mu
entries; challenges in the extension when one is named), then times
:func:`stepper.diagnose.rootcause.diagnose` (every round recomputed by folding, plus the
claim and final checks), and, in the same run, the bare kernels doing the same
multiplications on arrays of the same shapes: per round on m remaining entries,
(d + 1) points x (d - 1) products on m/2 entries, and 3 folds of m/2 entries
(base x extension in round 1). The ratio diagnose / bare is the figure that
matters; it is machine-independent to first order. Peak memory is measured with
tracemalloc in a second pass and given as a multiple of the witness size
(the tables' bytes). Timings are the best of ``--repeat`` runs.

Targets (issue 5): ratio within 5x at 2^22 over BabyBear^4; peak under 4x the witness.

    python3 bench/rootcause.py                     # 2^20 and 2^22, both fields (well under 2 minutes)
    python3 bench/rootcause.py --log2n 24          # a larger size
    python3 bench/rootcause.py --fields babybear^4 --log2n 22 --no-memory
"""

from __future__ import annotations

import argparse
import random
import time
import tracemalloc
from typing import Callable

import numpy as np

from stepper.field.expr import parse
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field
from stepper.diagnose.honest import HonestRound, honest_rounds
from stepper.field.poly import RoundPoly
from stepper.diagnose.rootcause import diagnose
from stepper.transcript.model import ChallengeMsg, FieldDecl, FinalValue, InstanceStart, RoundMsg, fold_events
from stepper.verify.replay import replay_transcript
from stepper.diagnose.witness import Witness, WitnessInstance

COMBINE = "ledger * scans * eq"
DEGREE = 3


def field_named(text: str) -> Field:
    name, _, k = text.partition("^")
    p = NAMED_PRIMES[name]
    return get_field(p, DEFAULT_IRREDUCIBLES[(name, int(k))]) if k else get_field(p)


def honest_case(field: Field, mu: int, seed: int = 7):
    rng = np.random.default_rng(seed)
    tables = {n: field.base.vrandom(1 << mu, rng) for n in ("ledger", "scans", "eq")}
    expr = parse(COMBINE)
    prng = random.Random(seed)
    challenges = [field.random(prng) for _ in range(mu)]
    events: list = [FieldDecl(field)]
    rounds: list = []
    final = None
    for item in honest_rounds(field, tables, expr, challenges, "low-first", DEGREE + 1):
        if isinstance(item, HonestRound):
            rounds.append(item.evals)
        else:
            final = expr.evaluate_scalar(field, item)
    claim = field.add(rounds[0][0], rounds[0][1])
    events.append(InstanceStart(0, "boarding-permutation", mu, DEGREE, claim))
    for k, evals in enumerate(rounds, start=1):
        events.append(RoundMsg(0, k, RoundPoly(evals).evals))
        events.append(ChallengeMsg(0, k, challenges[k - 1]))
    events.append(FinalValue(0, final))
    witness = Witness((WitnessInstance("boarding-permutation", tables, expr),), "bench")
    return fold_events(events), witness, tables


def bare_kernels(field: Field, mu: int, seed: int = 9, clock: Callable[[], float] = time.perf_counter,
                 extension_tables: bool = False) -> float:
    """Seconds (of ``clock``: wall by default, ``time.process_time`` for CPU) for the same
    multiplications as the recomputation, with no adds, sums or chunks. Round 1 multiplies
    base-field entries (this script's tables) unless ``extension_tables``: tables whose
    entries are already extension elements (as ``stepper prove --kind generic`` writes them
    over an extension) make round 1's products and folds extension products too."""
    rng = np.random.default_rng(seed)
    products = (DEGREE + 1) * (DEGREE - 1)
    total = 0.0
    challenge = field.vec([field.random(random.Random(seed))])
    for k in range(1, mu + 1):
        half = 1 << (mu - k)
        ext = (k > 1 or extension_tables) and field.is_extension
        kernel = field if ext or not field.is_extension else field.base
        a, b = kernel.vrandom(half, rng), kernel.vrandom(half, rng)
        start = clock()
        for _ in range(products):
            kernel.vmul(a, b)
        for _ in range(3):
            if not field.is_extension:
                field.vscale(a, int(challenge[0]))
            elif not ext:
                field.vmul_base(np.broadcast_to(challenge, (half, field.degree)), a)
            else:
                field.vmul(a, challenge)
        total += clock() - start
    return total


def best_of(repeat: int, run: Callable[[], object]) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return best


def measure(name: str, mu: int, memory: bool, repeat: int) -> None:
    field = field_named(name)
    transcript, witness, tables = honest_case(field, mu)
    report = replay_transcript(transcript)
    small, small_witness, _ = honest_case(field, min(mu, 16))
    diagnose(small, small_witness)  # warm the compiled kernels on a small case
    bare_kernels(field, min(mu, 16))
    assert diagnose(transcript, witness, report).root_cause is None, "an honest transcript has no root cause"
    ours = best_of(repeat, lambda: diagnose(transcript, witness, report))
    bare = min(bare_kernels(field, mu) for _ in range(repeat))
    witness_bytes = sum(t.nbytes for t in tables.values())
    line = (f"{name:<13} 2^{mu}  diagnose {ours:7.2f} s   bare kernels {bare:7.2f} s   "
            f"ratio {ours / bare:5.2f}x")
    if memory:
        tracemalloc.start()
        diagnose(transcript, witness, report)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        line += f"   peak {peak / 2**20:7.1f} MiB = {peak / witness_bytes:4.2f}x witness ({witness_bytes / 2**20:.0f} MiB)"
    print(line, flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fields", nargs="+", default=["babybear^4", "goldilocks"])
    parser.add_argument("--log2n", nargs="+", type=int, default=[20, 22])
    parser.add_argument("--no-memory", action="store_true", help="skip the tracemalloc pass")
    parser.add_argument("--repeat", type=int, default=2, help="best of this many timings (default 2)")
    args = parser.parse_args()
    print(f"combine {COMBINE!r}, degree {DEGREE}; ratio = diagnose time / bare kernel time (same run)")
    for mu in args.log2n:
        for name in args.fields:
            measure(name, mu, not args.no_memory, max(1, args.repeat))


if __name__ == "__main__":
    main()
