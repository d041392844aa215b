"""Direct vs grouped (bucketed) permutation-check prover: multiplications and wall time.

    python bench/permcheck.py              # mu = 10 .. 18 (seconds)
    python bench/permcheck.py --max-mu 20  # up to 2^20 entries (the target: grouped < 60 s; about 15 s)

Both provers run side by side in one process on the same random permutation
over BabyBear (records to memory, challenges from the built-in Fiat-Shamir
schedule). Multiplications are the provers' own honest counts; the grouped
prover uses groups of about 4 bits (L = ceil(mu / 4)) and switches from
buckets to the direct method when buckets stop paying. Printed as ratios
direct / grouped: the multiplication ratio should grow with mu.
"""

from __future__ import annotations

import argparse
import math
import time


def run_once(mu: int, groups: int, field_name: str, seed: int) -> dict[str, float]:
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
    for name, body in (("direct", lambda ch, c: prove_permutation_direct(ch, c, statement)),
                       ("grouped", lambda ch, c: prove_permutation_grouped(ch, c, statement, groups, witness=False))):
        counter = MulCounter(field)
        start = time.perf_counter()
        body(ProofChannel(field, Discard()), counter)
        out[f"{name}_seconds"] = time.perf_counter() - start
        out[f"{name}_mults"] = counter.total
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description="direct vs grouped permutation-check prover")
    parser.add_argument("--min-mu", type=int, default=10)
    parser.add_argument("--max-mu", type=int, default=18)
    parser.add_argument("--field", default="babybear")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    from stepper.field.kernels.base import COMPILED_MIN

    # warm up imports and the numba kernels (compiled the first time an array reaches
    # COMPILED_MIN entries) outside the timings; without it the first such mu pays the compile
    run_once(COMPILED_MIN.bit_length() + 1, 2, args.field, args.seed)
    print(f"permutation check over {args.field}: direct (degree mu+1) vs grouped (L = ceil(mu/4), bucketed layer 2)")
    print(f"{'mu':>3} {'L':>3} {'direct mults':>14} {'grouped mults':>14} {'mult ratio':>10} "
          f"{'direct s':>9} {'grouped s':>9} {'time ratio':>10}")
    for mu in range(args.min_mu, args.max_mu + 1):
        groups = math.ceil(mu / 4)
        r = run_once(mu, groups, args.field, args.seed)
        print(f"{mu:>3} {groups:>3} {int(r['direct_mults']):>14} {int(r['grouped_mults']):>14} "
              f"{r['direct_mults'] / r['grouped_mults']:>10.2f} {r['direct_seconds']:>9.2f} "
              f"{r['grouped_seconds']:>9.2f} {r['direct_seconds'] / r['grouped_seconds']:>10.2f}", flush=True)


if __name__ == "__main__":
    main()
