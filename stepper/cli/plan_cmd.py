"""`stepper plan`: pick the group count and switch-over round of the grouped permutation check.

Thin edge over :mod:`stepper.provers.planner`: reads sigma from a file (a JSON list of
0..n-1, or a .npy array) or draws one from --seed, runs the planner and prints
one row per group count (its best switch-over round; ``--all`` for every one)
or ``--json``.
"""

from __future__ import annotations

import argparse
from typing import Any

HELP = "predict multiplications and soundness for each group count and switch-over round; recommend one"
DESCRIPTION = (
    "For a permutation of 2^MU entries (from --sigma FILE, else random from --seed), predict the field "
    "multiplications of the grouped permutation-check prover for every group count L and switch-over round "
    "(bucket counts measured on the permutation itself) and the soundness error over --field, compare with "
    "the direct form, and recommend the cheapest. The soundness error bounds one interactive run with "
    "uniform challenges; it does not show that a protocol or its Fiat-Shamir transform is sound."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--num-vars", type=int, metavar="MU", help="variables (the permutation has 2^MU entries)")
    parser.add_argument("--sigma", metavar="FILE",
                        help="the permutation: JSON list (entry x = sigma(x)) or .npy; default: random")
    parser.add_argument("--seed", type=int, default=1, help="seed of the random permutation (default 1)")
    parser.add_argument("--field", default="babybear^4", metavar="F",
                        help="challenge field for the soundness error (default babybear^4)")
    parser.add_argument("--groups", metavar="L,L,...", help="only these group counts (default 1..MU)")
    parser.add_argument("--all", action="store_true", help="show every switch-over round, not only each L's best")
    parser.add_argument("--json", action="store_true", help="print the whole plan as JSON")


def run(args: argparse.Namespace) -> int:
    import json

    import numpy as np

    from stepper.errors import UsageError
    from stepper.provers.planner import plan
    from stepper.provers.reference import parse_field

    sigma = _load_sigma(args.sigma) if args.sigma else None
    if sigma is None:
        if args.num_vars is None:
            raise UsageError("expected --num-vars MU or --sigma FILE")
        if args.seed < 0:
            raise UsageError(f"expected a non-negative --seed, found {args.seed}")
        if not 1 <= args.num_vars <= 24:
            raise UsageError(f"expected --num-vars between 1 and 24, found {args.num_vars}")
        sigma = np.random.default_rng(args.seed).permutation(1 << args.num_vars)
    mu = len(sigma).bit_length() - 1
    if args.num_vars is not None and args.num_vars != mu:
        raise UsageError(f"expected --num-vars {args.num_vars} to match the sigma file's 2^{mu} entries")
    groups = _int_list(args.groups) if args.groups is not None else None
    field = parse_field(args.field)
    inverse = np.empty_like(sigma)
    inverse[sigma] = np.arange(len(sigma))
    result = plan(mu, inverse, field.order, groups=groups)
    if args.json:
        print(json.dumps(result.to_json(), indent=2))
        return 0
    print(f"grouped permutation check, mu = {mu} ({1 << mu} entries), soundness over {args.field}")
    print(f"direct form: {result.direct} multiplications, soundness error 2^{_lg(result.direct_soundness)}")
    print(f"  {'L':>3} {'widths':<14} {'switch':>6} {'mults':>12} {'vs direct':>9} {'layer 1':>11} {'layer 2':>11} "
          f"{'error':>8}  buckets in bucketed rounds")
    shown = result.rows if args.all else _best_per_group(result.rows)
    for row in shown:
        mark = "  <- recommended" if row == result.recommended else ""
        widths = ",".join(str(c) for c in row.widths)
        if len(widths) > 14:
            widths = widths[:11] + "..."
        switch = "auto" if row.switch_round is None else str(row.switch_round)
        ratio = f"{result.direct / row.total:.2f}x"
        counts = " ".join(str(c) for c in row.bucket_counts) or "-"
        if row.assumed:
            counts += " (some assumed)"
        print(f"  {row.groups:>3} {widths:<14} {switch:>6} {row.total:>12} {ratio:>9} {row.layer1:>11} "
              f"{row.layer2:>11} {'2^' + _lg(row.soundness):>8}  {counts}{mark}")
    best = result.recommended
    switch = "auto" if best.switch_round is None else str(best.switch_round)
    print(f"recommended: --groups {best.groups} --switch-round {switch} "
          f"(direct / grouped multiplications = {result.direct / best.total:.2f})")
    print("switch = first round of layer 2 done directly (auto: while buckets pay); error = soundness error of one "
          "run with uniform challenges, not a proof the protocol is sound")
    if any(row.assumed for row in shown):
        print("(some assumed) = a bucket key would pass 64 bits, so that count is taken as the entries remaining "
              "(what a random permutation gives), not measured")
    return 0


def _lg(x: Any) -> str:
    import math

    return f"{math.log2(x):.1f}" if x > 0 else "-inf"


def _best_per_group(rows: Any) -> list[Any]:
    best: dict[int, Any] = {}
    for row in rows:
        cur = best.get(row.groups)
        if cur is None or (row.total, row.switch_round is not None) < (cur.total, cur.switch_round is not None):
            best[row.groups] = row
    return [best[g] for g in sorted(best)]


def _int_list(text: str) -> list[int]:
    from stepper.errors import UsageError

    try:
        counts = [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        counts = []
    if not counts:
        raise UsageError(f"expected --groups as comma-separated integers, found {text!r}")
    return counts


def _load_sigma(path: str) -> Any:
    import json

    import numpy as np

    from stepper.errors import InputError, Where

    where = Where(file=path)
    try:
        if path.endswith(".npy"):
            sigma = np.load(path, allow_pickle=False)
        else:
            with open(path, encoding="utf-8") as handle:
                sigma = np.array(json.load(handle))
    except OSError as err:
        raise InputError(f"expected a readable sigma file, but {(err.strerror or str(err)).lower()}", where) from None
    except (ValueError, json.JSONDecodeError) as err:
        raise InputError(f"expected a JSON list or .npy array of integers, found unreadable content ({err})",
                         where) from None
    if sigma.ndim != 1 or sigma.dtype.kind not in "iu":
        raise InputError(f"expected a flat list of integers, found an array of shape {sigma.shape} "
                         f"and type {sigma.dtype}", where)
    n = len(sigma)
    if n < 2 or n & (n - 1):
        raise InputError(f"expected 2^mu entries (mu >= 1), found {n}", where)
    sigma = sigma.astype(np.int64)
    if not np.array_equal(np.sort(sigma), np.arange(n)):
        seen = np.bincount(np.clip(sigma, 0, n - 1), minlength=n)
        where_bad = int(np.flatnonzero((sigma < 0) | (sigma >= n) | (seen[np.clip(sigma, 0, n - 1)] > 1))[0])
        raise InputError(f"expected a permutation of 0..{n - 1}, found entry {where_bad} = {int(sigma[where_bad])} "
                         "repeated or out of range", where)
    return sigma
