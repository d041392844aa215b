"""SVG snapshots (pytest-textual-snapshot) of the main views at a fixed terminal size.

The content is deterministic: the demo proof, fixed metadata, challenges from the
built-in schedule, and a fixed file label in place of the temporary path.
Update after a deliberate change of look with ``pytest tests/app --snapshot-update``.
"""

from __future__ import annotations

from pathlib import Path

from stepper.app.app import StepperApp

SIZE = (140, 44)


def fixed_app(path: Path, tmp: Path) -> StepperApp:
    app = StepperApp.from_file(path, export_dir=tmp)
    app.model.source = "isle-of-quill-0740.sumtr"
    return app


def test_snapshot_of_the_proof_summary(snap_compare, honest_file, tmp_path):
    assert snap_compare(fixed_app(honest_file, tmp_path), terminal_size=SIZE)


def test_snapshot_of_a_failing_round(snap_compare, failing_file, tmp_path):
    assert snap_compare(fixed_app(failing_file, tmp_path), press=["exclamation_mark"], terminal_size=SIZE)


def test_snapshot_of_the_bucket_charts(snap_compare, failing_file, tmp_path):
    assert snap_compare(fixed_app(failing_file, tmp_path), press=["greater_than_sign", "o"], terminal_size=SIZE)


def test_snapshot_of_the_key_list(snap_compare, honest_file, tmp_path):
    assert snap_compare(fixed_app(honest_file, tmp_path), press=["k"], terminal_size=SIZE)
