"""Bucket occupancy of a bucketing prover, read from its ``buckets`` events.

A bucketing prover groups table entries whose restricted polynomials agree and
multiplies once per bucket. In round k with groups of c bits, the count can
never exceed the bound 2^(2^k * c) (``bound_log2`` = 2^k * c) nor the entries
still unbound (``remaining`` = 2^(mu-k)); when it nears the smaller of the two
the buckets stop paying and a prover should switch to the direct method.

:func:`occupancy` turns a transcript's :class:`~stepper.transcript.model.BucketStats`
into :class:`OccupancyRow` records: count vs ceiling, a summary of entries per
bucket (from ``sizes``, or the prover's ``sizes_summary`` when it sent no list),
whether the prover used the buckets (its ``used`` key, when sent) and
the impossibilities found (a count above the bound or above the remaining
entries, sizes that do not add up). Pure: no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from stepper.transcript.model import BucketStats, Transcript

__all__ = ["SizeSummary", "OccupancyRow", "occupancy", "summarise_sizes", "occupancy_json"]


@dataclass(frozen=True, slots=True)
class SizeSummary:
    """Entries per bucket: extremes, median, one-entry buckets and a histogram
    over power-of-two bins (bin b holds sizes 2^b .. 2^(b+1) - 1)."""

    buckets: int
    entries: int
    smallest: int
    median: int
    largest: int
    singletons: int
    histogram: tuple[int, ...]

    def to_json(self) -> dict[str, Any]:
        return {"buckets": self.buckets, "entries": self.entries, "smallest": self.smallest, "median": self.median,
                "largest": self.largest, "singletons": self.singletons, "histogram_log2": list(self.histogram)}


@dataclass(frozen=True, slots=True)
class OccupancyRow:
    """One round and group (chunk) of one instance."""

    instance: int
    instance_name: str
    round: int
    chunk: int
    count: int
    bound_log2: int | None
    remaining: int | None
    used: bool | None
    sizes: SizeSummary | None
    problems: tuple[str, ...]

    @property
    def ceiling(self) -> int | None:
        """min(2^bound_log2, remaining): the most buckets this round could have."""
        limits = []
        if self.bound_log2 is not None:
            limits.append(1 << min(self.bound_log2, 200))
        if self.remaining is not None:
            limits.append(self.remaining)
        return min(limits) if limits else None

    @property
    def fill(self) -> float | None:
        """count / ceiling (1.0: every possible bucket is occupied)."""
        ceiling = self.ceiling
        return None if not ceiling else self.count / ceiling

    @property
    def savings(self) -> float | None:
        """remaining / count: how many entries share one bucket's product on average."""
        return None if not self.remaining or not self.count else self.remaining / self.count

    def to_json(self) -> dict[str, Any]:
        return {
            "instance": self.instance,
            "instance_name": self.instance_name,
            "round": self.round,
            "chunk": self.chunk,
            "count": self.count,
            "bound_log2": self.bound_log2,
            "remaining": self.remaining,
            "ceiling": self.ceiling,
            "fill": self.fill,
            "entries_per_bucket": None if self.remaining is None or not self.count else self.remaining / self.count,
            "used": self.used,
            "sizes": None if self.sizes is None else self.sizes.to_json(),
            "problems": list(self.problems),
        }


def summarise_sizes(sizes: Sequence[int]) -> SizeSummary:
    ordered = sorted(sizes)
    bins: list[int] = []
    for s in ordered:
        b = max(s, 1).bit_length() - 1
        while len(bins) <= b:
            bins.append(0)
        bins[b] += 1
    return SizeSummary(len(ordered), sum(ordered), ordered[0] if ordered else 0,
                       ordered[len(ordered) // 2] if ordered else 0, ordered[-1] if ordered else 0,
                       sum(1 for s in ordered if s == 1), tuple(bins))


def _problems(stats: BucketStats) -> tuple[str, ...]:
    found = []
    if stats.bound_log2 is not None and stats.bound_log2 < 200 and stats.count > 1 << stats.bound_log2:
        found.append(f"count {stats.count} exceeds the bound 2^{stats.bound_log2}")
    if stats.remaining is not None and stats.count > stats.remaining:
        found.append(f"count {stats.count} exceeds the {stats.remaining} entries remaining")
    if stats.sizes is not None:
        if len(stats.sizes) != stats.count:
            found.append(f"{len(stats.sizes)} sizes listed for {stats.count} buckets")
        if stats.remaining is not None and sum(stats.sizes) != stats.remaining:
            found.append(f"sizes add up to {sum(stats.sizes)}, not the {stats.remaining} entries remaining")
        if any(s == 0 for s in stats.sizes):
            found.append("an empty bucket is listed")
    return tuple(found)


def _sent_summary(stats: BucketStats) -> SizeSummary | None:
    """A prover's own ``sizes_summary`` (sent instead of the list for many buckets), if well formed."""
    sent = stats.extra.get("sizes_summary")
    keys = ("smallest", "median", "largest", "singletons")
    if not isinstance(sent, dict) or not all(isinstance(sent.get(k), int) for k in keys):
        return None
    histogram = sent.get("histogram_log2", [])
    if not isinstance(histogram, list) or not all(isinstance(b, int) for b in histogram):
        histogram = []
    return SizeSummary(stats.count, stats.remaining or 0, sent["smallest"], sent["median"], sent["largest"],
                       sent["singletons"], tuple(histogram))


def occupancy(transcript: Transcript) -> list[OccupancyRow]:
    """Every ``buckets`` event of the transcript as a row, by instance, round, chunk."""
    rows = []
    for inst in transcript.instances:
        for stats in inst.buckets:
            used = stats.extra.get("used")
            sizes = summarise_sizes(stats.sizes) if stats.sizes is not None else _sent_summary(stats)
            rows.append(OccupancyRow(
                stats.instance, inst.name, stats.round, stats.chunk, stats.count, stats.bound_log2, stats.remaining,
                used if isinstance(used, bool) else None, sizes, _problems(stats)))
    rows.sort(key=lambda r: (r.instance, r.round, r.chunk))
    return rows


def occupancy_json(rows: Sequence[OccupancyRow]) -> dict[str, Any]:
    """``{"rows": [...], "problems": n}`` for ``stepper buckets --json``."""
    return {"rows": [r.to_json() for r in rows], "problems": sum(len(r.problems) for r in rows)}
