"""Bucket occupancy as text charts: bars of block characters, no colour needed.

Pure (no I/O, no Textual). For one instance's ``buckets`` events this draws
three charts, each a list of :class:`ChartRow`:

* occupancy against the bound: buckets in use per round and chunk, as a share
  of 2^bound_log2 (the most a chunk could hold);
* occupancy against the remaining table: buckets in use as a share of the
  table entries still unbound in that round (a ratio near 1 means bucketing
  saves nothing there);
* the distribution of entries per bucket (how many buckets hold s entries),
  with sizes grouped into ranges when they spread wide.

Invariant: a bar is exactly ``width`` cells, eighths of a cell resolved with
the block characters, so rows line up in any monospace terminal.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass
from typing import Sequence

from stepper.transcript.model import BucketStats

__all__ = ["ChartRow", "bar", "against_bound", "against_remaining", "size_distribution"]

_EIGHTHS = " ▏▎▍▌▋▊▉"
_FULL = "█"


@dataclass(frozen=True, slots=True)
class ChartRow:
    """A label, a bar and the numbers it stands for; ``over`` when the share exceeds 1."""

    label: str
    bar: str
    figure: str
    over: bool = False

    def text(self) -> str:
        return f"{self.label} │{self.bar}│ {self.figure}"


def bar(share: float, width: int) -> str:
    """``share`` (clamped to 0..1) of ``width`` cells, to an eighth of a cell."""
    share = min(max(share, 0.0), 1.0)
    eighths = round(share * width * 8)
    full, part = divmod(eighths, 8)
    text = _FULL * full + (_EIGHTHS[part] if part and full < width else "")
    return text.ljust(width)


def _label(stats: BucketStats) -> str:
    return f"r{stats.round:>2} g{stats.chunk:<3}"


def _ordered(stats: Sequence[BucketStats]) -> list[BucketStats]:
    return sorted(stats, key=lambda s: (s.round, s.chunk))


def against_bound(stats: Sequence[BucketStats], width: int = 32) -> list[ChartRow]:
    """Buckets in use per round and chunk as a share of 2^bound_log2 (a hostile
    bound_log2 of 2^40 costs nothing: the share is computed in floating point)."""
    rows = []
    for s in _ordered(stats):
        if s.bound_log2 is None:
            rows.append(ChartRow(_label(s), " " * width, f"{s.count} (no bound sent)"))
            continue
        share = math.ldexp(s.count, -s.bound_log2) if s.bound_log2 < 2000 else 0.0  # never 2^huge as an int
        above = s.count > 0 and (s.count - 1).bit_length() > s.bound_log2  # count > 2^bound_log2
        rows.append(ChartRow(_label(s), bar(share, width), f"{s.count} / 2^{s.bound_log2} = {share:.1%}", above))
    return rows


def against_remaining(stats: Sequence[BucketStats], width: int = 32) -> list[ChartRow]:
    """Buckets in use as a share of the table entries still unbound."""
    rows = []
    for s in _ordered(stats):
        if not s.remaining:
            rows.append(ChartRow(_label(s), " " * width, f"{s.count} (no table size sent)"))
            continue
        share = s.count / s.remaining
        rows.append(ChartRow(_label(s), bar(share, width), f"{s.count} / {s.remaining} = {share:.1%}",
                             share > 1.0))
    return rows


def size_distribution(stats: Sequence[BucketStats], width: int = 32, max_rows: int = 12) -> list[ChartRow]:
    """How many buckets hold how many entries, over every event that sent ``sizes``."""
    counts: Counter[int] = Counter()
    for s in stats:
        if s.sizes:
            counts.update(s.sizes)
    if not counts:
        return []
    low, high = min(counts), max(counts)
    step = max(1, -(-(high - low + 1) // max_rows))
    tally = [0] * (-(-(high - low + 1) // step))
    for size, buckets in counts.items():  # by distinct size: cost never depends on the sizes' magnitude
        tally[(size - low) // step] += buckets
    groups: list[tuple[str, int]] = []
    for index, n in enumerate(tally):
        start = low + index * step
        stop = min(high, start + step - 1)
        groups.append((f"{start}" if start == stop else f"{start}-{stop}", n))
    most = max(n for _, n in groups) or 1
    pad = max(len(label) for label, _ in groups)
    return [ChartRow(f"{label:>{pad}} {'entry' if label == '1' else 'entries'}", bar(n / most, width),
                     f"{n} {'bucket' if n == 1 else 'buckets'}") for label, n in groups]
