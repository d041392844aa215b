"""`stepper buckets FILE`: bucket occupancy per instance, round and group.

Thin edge over :mod:`stepper.provers.buckets`: loads the transcript, prints a table
(count vs the bound 2^(2^k c) vs the remaining entries, fill, entries per
bucket) or ``--json``. Exit 0 with or without bucket events; 1 when a count
is impossible (above its bound or the remaining entries), which means the
prover's bucketing is wrong; 2 for unusable input.
"""

from __future__ import annotations

import argparse

HELP = "show how a bucketing prover's buckets filled, round by round and group by group"
DESCRIPTION = (
    "Read the `buckets` events of FILE and show, per instance, round and group: the number of buckets, "
    "the bound 2^(2^k*c) for groups of c bits, the entries still unbound, how full the possible buckets "
    "are, and the entries per bucket (smallest / median / largest, singletons). Exit 1 if a count is "
    "impossible (the prover's bucketing is then wrong)."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript (.sumtr) or JSON-lines event file")
    parser.add_argument("--json", action="store_true", help="print the rows as one JSON object")


def run(args: argparse.Namespace) -> int:
    from stepper.provers.buckets import occupancy, occupancy_json
    from stepper.transcript.store import load

    rows = occupancy(load(args.file))
    problems = sum(len(r.problems) for r in rows)
    if args.json:
        import json

        print(json.dumps({"file": args.file, **occupancy_json(rows)}, indent=2))
        return 1 if problems else 0
    if not rows:
        print(f"{args.file}: no bucket events (the prover did not report bucket occupancy)")
        return 0
    current = None
    for row in rows:
        if row.instance != current:
            current = row.instance
            print(f"instance #{row.instance} '{row.instance_name}'")
            print(f"  {'round':>5} {'group':>5} {'buckets':>8} {'bound':>10} {'remaining':>10} {'fill':>6} "
                  f"{'per bucket':>10}  {'method':<8} entries per bucket: min / median / max (singletons)")
        bound = "-" if row.bound_log2 is None else (f"2^{row.bound_log2}" if row.bound_log2 > 16
                                                    else str(1 << row.bound_log2))
        fill = "-" if row.fill is None else f"{100 * row.fill:.0f}%"
        per = "-" if row.savings is None else f"{row.savings:.1f}"
        method = {True: "buckets", False: "direct", None: "?"}[row.used]
        sizes = "-" if row.sizes is None else (f"{row.sizes.smallest} / {row.sizes.median} / {row.sizes.largest} "
                                               f"({row.sizes.singletons})")
        remaining = "-" if row.remaining is None else str(row.remaining)
        print(f"  {row.round:>5} {row.chunk:>5} {row.count:>8} {bound:>10} {remaining:>10} {fill:>6} {per:>10}  "
              f"{method:<8} {sizes}")
        for problem in row.problems:
            print(f"        ! impossible: {problem}")
    print("method: 'buckets' = the prover multiplied once per bucket; 'direct' = it measured the buckets, found "
          "they would not pay, and switched to the entry-by-entry method")
    return 1 if problems else 0
