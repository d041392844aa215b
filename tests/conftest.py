"""Suite-wide set-up, for ``pytest -n 3`` (README's command) above all.

* Tests marked ``slow`` (a time limit, the fuzz run's four parts, processes killed at chosen
  moments: seconds of wall time each, much of it spent waiting on a child process) start first,
  dealt out among the workers. xdist's first batch gives each worker a run of consecutive tests
  (a quarter of its share), so the slow tests are placed at the head of each worker's run, in
  turn: they run side by side with short tests on the other workers, none of them is left running
  alone at the end of the run (where they used to fall: tests/transcript/store sorts late), and
  no worker has to work through all of them one after another. On one process they simply come
  first. The order within each group is otherwise unchanged.
* Before any worker starts, stepper's own modules are compiled to bytecode once. About seventy
  tests start ``python -m stepper`` (or a prover) in a process of their own, and each such
  process, like each worker, would otherwise compile the modules it imports from source again
  whenever ``PYTHONDONTWRITEBYTECODE`` is set (this sandbox sets it): about 0.1 s of CPU per
  process. Python checks a cached file against its source's size and time, so an edited module
  is never run from stale bytecode.
* Likewise, when the tests run on several processes, the test modules are rewritten for pytest's
  assertion messages once, by the controller, into pytest's own cache files (``__pycache__``,
  ``*-pytest-*.pyc``) that every worker reads instead of rewriting all of them again: about 2 s of
  CPU per worker. pytest checks each cached file against its source's size and time as well. Only a
  speed-up: with a pytest whose internals differ, each worker rewrites as before.
* After the last test of each module (its fixtures torn down), the garbage is collected and what
  is still alive (imported libraries, caches, session fixtures) is frozen out of the collector's
  sight (``gc.freeze``). Without it every full collection walks the whole grown heap again
  (Textual, galois, numba, hypothesis: half a million objects), and the collector took about a
  quarter of the suite's CPU (tests/app and tests/cli in one process: 8.2 of 28 CPU-s in
  collections, 34.8 -> 27.4 user-s with the freeze). Only garbage is collected, never live objects,
  so no test can see a difference; something frozen that dies later just stays in memory.
* Temporary files (``tmp_path``, ``tempfile``, in this process, the workers and every child process)
  go to memory (``/dev/shm``) when ``TMPDIR`` is not set and it has room: the tests write, sync,
  rename and delete thousands of small files, and on a shared disk each of those calls waits
  (``rmdir`` took 5.5 ms, ``fsync`` 15 ms; tests/transcript and tests/cli, one process: 105-115 s
  -> 79-86 s of wall time, the same CPU). Set ``TMPDIR`` to keep them on disk. Only failed tests'
  folders are kept after a run (``tmp_path_retention_policy`` in pyproject.toml), so a passing run
  leaves no memory held in ``/dev/shm``.
"""

from __future__ import annotations

import compileall
import gc
import os
import tempfile
from pathlib import Path

import pytest

TESTS = Path(__file__).resolve().parent
PACKAGE = TESTS.parent / "stepper"


def pytest_configure(config: pytest.Config) -> None:
    if hasattr(config, "workerinput"):  # an xdist worker: the controller has already done it
        return
    _temporary_files_in_memory()
    compileall.compile_dir(PACKAGE, quiet=2)  # a read-only checkout just stays uncompiled
    if config.getoption("numprocesses", None) and config.getoption("assertmode", "rewrite") == "rewrite":
        _rewrite_test_modules_once(config)


def _temporary_files_in_memory(folder: str = "/dev/shm", room: int = 1 << 30) -> None:
    if os.environ.get("TMPDIR") or os.environ.get("PYTEST_DEBUG_TEMPROOT"):
        return  # the user's choice
    try:
        space = os.statvfs(folder)
    except OSError:
        return
    if space.f_bavail * space.f_frsize >= room and os.access(folder, os.W_OK | os.X_OK):
        os.environ["TMPDIR"] = folder  # the workers and child processes inherit it
        tempfile.tempdir = None  # read TMPDIR again (tmp_path's root comes from tempfile.gettempdir())


def _rewrite_test_modules_once(config: pytest.Config) -> None:
    try:
        from _pytest.assertion import rewrite

        state = config.stash[rewrite.assertstate_key]
        for source in sorted(TESTS.rglob("*.py")):
            if not (source.name.startswith("test_") or source.name == "conftest.py"):
                continue
            cache = rewrite.get_cache_dir(source)
            pyc = cache / (source.name[:-3] + rewrite.PYC_TAIL)
            if rewrite._read_pyc(source, pyc, state.trace) is None and rewrite.try_makedirs(cache):
                try:
                    source_stat, code = rewrite._rewrite_test(source, config)
                except (SyntaxError, OSError, ValueError):  # the worker collecting it reports the error
                    continue
                rewrite._write_pyc(state, code, source_stat, pyc)
    except (ImportError, AttributeError, KeyError, TypeError):
        return  # another pytest's internals: the workers rewrite as before


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    slow = [item for item in items if item.get_closest_marker("slow") is not None]
    rest = [item for item in items if item.get_closest_marker("slow") is None]
    workers = int(getattr(config, "workerinput", {}).get("workercount", 1))
    if workers < 2:
        items[:] = slow + rest
        return
    first_batch = max(len(items) // workers // 4, 2)  # what xdist's load scheduling sends each worker first
    ordered: list[pytest.Item] = []
    for worker in range(workers):
        mine = slow[worker::workers]
        ordered += mine
        take = max(first_batch - len(mine), 0)
        ordered += rest[:take]
        rest = rest[take:]
    items[:] = ordered + rest


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_teardown(item: pytest.Item, nextitem: pytest.Item | None) -> object:
    yield
    if nextitem is None or getattr(item, "module", None) is not getattr(nextitem, "module", None):
        gc.collect()
        gc.freeze()
