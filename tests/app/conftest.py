"""Fixtures for the app tests: demo transcripts written to a temporary directory."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from proofs import brackwater_payloads, bump_g1, write_transcript  # noqa: E402


@pytest.fixture
def honest_file(tmp_path: Path) -> Path:
    return write_transcript(tmp_path / "isle-of-quill-0740.sumtr", brackwater_payloads())


@pytest.fixture
def failing_file(tmp_path: Path) -> Path:
    """g(1) of round 2 of the grouped instance is off by one: its sum check fails."""
    payloads = brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2))
    return write_transcript(tmp_path / "isle-of-quill-0740.sumtr", payloads)
