"""Suite-wide set-up, for ``pytest -n 3`` (README's command) above all.

* Tests marked ``slow`` (a time limit, the fuzz run, processes killed at chosen moments:
  seconds of wall time each, mostly spent waiting on a child process) are collected first.
  xdist deals tests out to its workers in consecutive chunks in collection order, so these start
  at once on the first worker while the second works through short tests, and none of them is
  left running alone at the end of the run (where they used to fall: tests/transcript/store sorts
  late). The order within each group is unchanged (the sort is stable).
* Before any worker starts, stepper's own modules are compiled to bytecode once. About seventy
  tests start ``python -m stepper`` (or a prover) in a process of their own, and each such
  process, like each worker, would otherwise compile the modules it imports from source again
  whenever ``PYTHONDONTWRITEBYTECODE`` is set (this sandbox sets it): about 0.1 s of CPU per
  process. Python checks a cached file against its source's size and time, so an edited module
  is never run from stale bytecode.
"""

from __future__ import annotations

import compileall
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "stepper"


def pytest_configure(config: pytest.Config) -> None:
    if hasattr(config, "workerinput"):  # an xdist worker: the controller has already done it
        return
    compileall.compile_dir(PACKAGE, quiet=2)  # a read-only checkout just stays uncompiled


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    items.sort(key=lambda item: item.get_closest_marker("slow") is None)
