"""Bucket charts: bars resolve eighths of a cell and the numbers are the ones sent."""

from __future__ import annotations

from hypothesis import given, settings, strategies as st

from stepper.app.bucket_charts import against_bound, against_remaining, bar, size_distribution
from stepper.transcript.model import BucketStats


@settings(max_examples=50, deadline=None)
@given(share=st.floats(0, 2), width=st.integers(1, 60))
def test_a_bar_is_always_exactly_its_width(share, width):
    assert len(bar(share, width)) == width


def test_half_a_bar_is_half_the_cells_and_an_eighth_is_the_thinnest_block():
    assert bar(0.5, 8) == "████    "
    assert bar(1 / 64, 8) == "▏       "
    assert bar(1.5, 4) == "████"


def test_occupancy_against_the_bound_and_the_remaining_table():
    stats = [BucketStats(0, 1, 0, 6, None, 3, 16), BucketStats(0, 2, 0, 9, None, 3, 8)]
    bound = against_bound(stats, 8)
    assert bound[0].figure == "6 / 2^3 = 75.0%" and not bound[0].over
    assert bound[1].over  # 9 buckets cannot fit a bound of 2^3 = 8
    remaining = against_remaining(stats, 8)
    assert remaining[0].figure == "6 / 16 = 37.5%"
    assert remaining[1].over


def test_the_size_distribution_counts_buckets_per_size():
    stats = [BucketStats(0, 1, 0, 4, (1, 1, 2, 5)), BucketStats(0, 2, 0, 2, (2, 2))]
    rows = size_distribution(stats, 10)
    figures = {row.label.split()[0]: row.figure for row in rows}
    assert figures["1"] == "2 buckets" and figures["2"] == "3 buckets" and figures["5"] == "1 bucket"
    assert figures["3"] == "0 buckets"
    assert [row.label.split()[1] for row in rows][:2] == ["entry", "entries"]


def test_a_huge_bound_exponent_is_drawn_as_an_empty_bar_without_building_the_power():
    stats = [BucketStats(0, 1, 0, 3, None, 1 << 40, 8), BucketStats(0, 2, 0, 5, None, 2, 8)]
    rows = against_bound(stats, 8)
    assert rows[0].bar == " " * 8 and not rows[0].over
    assert rows[1].over  # 5 > 2^2


def test_sizes_spread_over_huge_values_are_grouped_into_at_most_max_rows_ranges():
    stats = [BucketStats(0, 1, 0, 3, (1, 2**60, 2**61))]
    rows = size_distribution(stats, 8, max_rows=6)
    assert len(rows) <= 6
    assert sum(int(row.figure.split()[0]) for row in rows) == 3
