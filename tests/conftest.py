"""Suite-wide collection order: tests marked ``slow`` (a time limit, the fuzz budget, processes
killed at chosen moments: seconds of wall time each, mostly spent waiting on a child process) are
collected first. ``pytest -n 2`` deals tests out to its two workers in consecutive chunks in
collection order, so these start at once on the first worker while the second works through short
tests, and none of them is left running alone at the end of the run (where they used to fall:
tests/transcript/store sorts late). The order within each group is unchanged (the sort is stable)."""

from __future__ import annotations

import pytest


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    items.sort(key=lambda item: item.get_closest_marker("slow") is None)
