"""Peak memory of a plain `stepper check` at 10^4 and 10^5 instances, side by side.

Writes two Goldilocks transcripts of ``--rounds`` (default 2) rounds per instance,
degree 3, challenges from the built-in schedule (as bench/check.py writes them),
one of ``--instances`` (default 10^4) instances and one of ten times as many, then
runs `stepper check FILE` (human output to /dev/null) on each in a fresh process,
``--repeat`` times interleaved, and prints the lowest peak resident memory of each
and their ratio. Few rounds per instance make the per-instance cost stand out:
a check that kept a record per instance would show it here first. Target: the
ratio stays under 1.2 (flat in the number of instances, up to the reader's buffers).

    python3 bench/memory.py                 # about 30 s (writing the files takes most)
    python3 bench/memory.py --instances 20000 --repeat 1
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from check import _child, write_transcript  # bench/ is the script's folder, first on sys.path

TARGET = 1.2


def peak_mb(path: Path) -> float:
    """Peak resident MB of `stepper check FILE` in a fresh process (which must accept it)."""
    _, _, rss, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"the bench transcript should be accepted, check exited {code}"
    return rss


def main_bench() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        small, large = Path(tmp) / "small.sumtr", Path(tmp) / "large.sumtr"
        t0 = time.perf_counter()
        write_transcript(small, args.instances, args.rounds)
        write_transcript(large, 10 * args.instances, args.rounds)
        print(f"wrote {args.instances} and {10 * args.instances} instances x {args.rounds} rounds (goldilocks): "
              f"{small.stat().st_size / 1e6:.1f} and {large.stat().st_size / 1e6:.1f} MB in "
              f"{time.perf_counter() - t0:.1f} s")
        found: dict[Path, list[float]] = {small: [], large: []}
        for _ in range(args.repeat):
            for path in found:
                found[path].append(peak_mb(path))
        low, high = min(found[small]), min(found[large])
        print(f"peak resident memory of check, lowest of {args.repeat} interleaved runs")
        print(f"{args.instances:>8} instances: {low:.1f} MB")
        print(f"{10 * args.instances:>8} instances: {high:.1f} MB")
        print(f"ratio: {high / low:.2f} for ten times the instances (target <= {TARGET})")


if __name__ == "__main__":
    main_bench()
