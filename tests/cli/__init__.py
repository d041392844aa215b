"""Command-line tests (a package, so their module names do not clash with tests/test_*.py)."""
