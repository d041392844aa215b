"""Bucket occupancy analysis from `buckets` events."""

from __future__ import annotations

from stepper.provers.buckets import occupancy, occupancy_json, summarise_sizes
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.reference import random_permutation_statement
from stepper.transcript.model import BucketStats, FieldDecl, InstanceStart, fold_events
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


def test_rows_of_a_grouped_proof_respect_their_bounds_and_add_up():
    statement = random_permutation_statement(BABYBEAR, 8, seed=2)
    _, transcript, _ = run_prover(BABYBEAR, lambda ch, c: prove_permutation_grouped(ch, c, statement, 4))
    rows = occupancy(transcript)
    assert rows and all(r.instance_name == "permutation/groups" for r in rows)
    assert [(r.round, r.chunk) for r in rows] == sorted((r.round, r.chunk) for r in rows)
    for row in rows:
        assert not row.problems
        assert row.count <= row.ceiling == min(2 ** row.bound_log2, row.remaining)
        assert row.sizes is not None and row.sizes.entries == row.remaining
    first = rows[0]
    assert first.round == 1 and first.ceiling == 16 and first.fill == first.count / 16
    assert first.used is True


def _transcript_with(stats: BucketStats):
    start = InstanceStart(0, "hand-made", 4, 2, 0)
    return fold_events([FieldDecl(BABYBEAR), start, stats])


def test_impossible_counts_and_sizes_are_reported():
    stats = BucketStats(0, 1, 0, 20, (5, 5, 0), bound_log2=4, remaining=8)
    (row,) = occupancy(_transcript_with(stats))
    text = " | ".join(row.problems)
    assert "exceeds the bound 2^4" in text
    assert "exceeds the 8 entries remaining" in text
    assert "3 sizes listed for 20 buckets" in text
    assert "add up to 10" in text
    assert "empty bucket" in text
    assert occupancy_json([row])["problems"] == 5


def test_a_count_without_bound_or_remaining_has_no_ceiling():
    (row,) = occupancy(_transcript_with(BucketStats(0, 2, 1, 3)))
    assert row.ceiling is None and row.fill is None and row.problems == ()


def test_size_summary_bins_by_powers_of_two():
    summary = summarise_sizes([1, 1, 2, 3, 4, 9])
    assert (summary.smallest, summary.median, summary.largest, summary.singletons) == (1, 3, 9, 2)
    assert summary.histogram == (2, 2, 1, 1)  # 1 | 2-3 | 4-7 | 8-15


def test_a_sent_size_summary_stands_in_for_a_missing_size_list():
    summary = {"smallest": 1, "median": 2, "largest": 9, "singletons": 40, "histogram_log2": [40, 50, 9, 1]}
    stats = BucketStats(0, 2, 0, 100, None, bound_log2=8, remaining=200, extra={"sizes_summary": summary})
    (row,) = occupancy(_transcript_with(stats))
    assert (row.sizes.smallest, row.sizes.median, row.sizes.largest, row.sizes.singletons) == (1, 2, 9, 40)
    assert row.sizes.histogram == (40, 50, 9, 1)
