"""Suite-wide collection order: tests marked ``slow`` (a time limit, a budget, processes killed at
chosen moments: seconds of wall time each) are collected first. With ``pytest -n 2`` xdist hands
tests out in collection order, so the long ones start at once on both workers and the many short
ones fill in behind them, instead of one long test running alone at the end. The order within
each group is unchanged (the sort is stable)."""

from __future__ import annotations

import pytest


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    items.sort(key=lambda item: item.get_closest_marker("slow") is None)
