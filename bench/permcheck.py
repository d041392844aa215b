"""Direct vs grouped (bucketed) permutation-check prover: multiplications and wall time.

    python bench/permcheck.py              # mu = 10 .. 18 (seconds)
    python bench/permcheck.py --max-mu 20  # up to 2^20 entries
    python bench/permcheck.py --max-mu 24  # the grouped prover alone past --direct-max-mu (default 20)

Both provers run side by side in one process on the same random permutation
over BabyBear (records to memory, challenges from the built-in Fiat-Shamir
schedule). Times are wall-clock seconds and CPU seconds of this process (user +
system: the figure that other jobs on a shared machine disturb least); the load
average is printed before and after. Multiplications are the provers' own honest counts; the grouped
prover uses groups of about 4 bits (L = ceil(mu / 4)) and switches from
buckets to the direct method when buckets stop paying. Printed as ratios
direct / grouped: the multiplication ratio should grow with mu. Past ``--direct-max-mu``
the direct prover is not run (at mu = 24 it would take hours): its count is the formula
(mu^2 + 3 mu + 2)(2^mu - 1) + c mu (the MLE of g, then per pair (mu + 2) points x mu products
and mu + 1 folds, then c products per variable for the final and opening checks), with c
read off the first run and the formula checked exactly on every run up to ``--direct-max-mu``.
"""

from __future__ import annotations

import argparse
import math
import os
import time


_PER_VARIABLE: list[int] = []  # c of the formula, read off the first direct run


def direct_mults(mu: int) -> int:
    """The direct prover's multiplications (see the module docstring; checked against its runs)."""
    return (mu * mu + 3 * mu + 2) * ((1 << mu) - 1) + _PER_VARIABLE[0] * mu


def run_once(mu: int, groups: int, field_name: str, seed: int, direct: bool = True) -> dict[str, float]:
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.grouped import prove_permutation_grouped
    from stepper.provers.permcheck import prove_permutation_direct
    from stepper.provers.reference import parse_field, random_permutation_statement

    class Discard:
        def write(self, record: object) -> object:
            return record

    field = parse_field(field_name)
    statement = random_permutation_statement(field, mu, seed)
    out: dict[str, float] = {}
    provers = [("direct", lambda ch, c: prove_permutation_direct(ch, c, statement))] if direct else []
    provers.append(("grouped", lambda ch, c: prove_permutation_grouped(ch, c, statement, groups, witness=False)))
    for name, body in provers:
        counter = MulCounter(field)
        start, cpu = time.perf_counter(), time.process_time()
        body(ProofChannel(field, Discard()), counter)
        out[f"{name}_seconds"] = time.perf_counter() - start
        out[f"{name}_cpu"] = time.process_time() - cpu
        out[f"{name}_mults"] = counter.total
    if direct:
        if not _PER_VARIABLE:
            _PER_VARIABLE.append((int(out["direct_mults"]) - (mu * mu + 3 * mu + 2) * ((1 << mu) - 1)) // mu)
        assert out["direct_mults"] == direct_mults(mu), "the direct count formula no longer matches the prover"
    else:
        out["direct_mults"] = direct_mults(mu)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description="direct vs grouped permutation-check prover")
    parser.add_argument("--min-mu", type=int, default=10)
    parser.add_argument("--max-mu", type=int, default=18)
    parser.add_argument("--field", default="babybear")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--direct-max-mu", type=int, default=20, help="run the direct prover up to this mu")
    args = parser.parse_args()
    from stepper.field.kernels.base import COMPILED_MIN

    # warm up imports and the numba kernels (compiled the first time an array reaches
    # COMPILED_MIN entries) outside the timings; without it the first such mu pays the compile
    run_once(COMPILED_MIN.bit_length() + 1, 2, args.field, args.seed)
    print(f"permutation check over {args.field}: direct (degree mu+1) vs grouped (L = ceil(mu/4), bucketed layer 2)")
    print(f"load average (1, 5, 15 min) before: {_load()}")
    print(f"{'mu':>3} {'L':>3} {'direct mults':>14} {'grouped mults':>14} {'mult ratio':>10} "
          f"{'direct s':>9} {'grouped s':>9} {'time ratio':>10} {'grouped cpu s':>13}")
    for mu in range(args.min_mu, args.max_mu + 1):
        groups = math.ceil(mu / 4)
        direct = mu <= args.direct_max_mu
        r = run_once(mu, groups, args.field, args.seed, direct)
        seconds = f"{r['direct_seconds']:>9.2f}" if direct else f"{'-':>9}"
        ratio = f"{r['direct_seconds'] / r['grouped_seconds']:>10.2f}" if direct else f"{'-':>10}"
        print(f"{mu:>3} {groups:>3} {int(r['direct_mults']):>14} {int(r['grouped_mults']):>14} "
              f"{r['direct_mults'] / r['grouped_mults']:>10.2f} {seconds} "
              f"{r['grouped_seconds']:>9.2f} {ratio} {r['grouped_cpu']:>13.2f}", flush=True)
    print(f"load average (1, 5, 15 min) after: {_load()}")


def _load() -> str:
    return ", ".join(f"{x:.2f}" for x in os.getloadavg())


if __name__ == "__main__":
    main()
