"""SVG snapshots (pytest-textual-snapshot) of every screen at 80x24 and 160x48.

Every screen must be usable on an 80-column, 24-line terminal: the snapshots at
that size are the record of what fits (the key hint, the compare sides, the keys
panel). The content is deterministic: the demo proof, fixed metadata, challenges
from the built-in schedule, and a fixed file label in place of the temporary path.
Update after a deliberate change of look with ``pytest tests/app --snapshot-update``.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from stepper.app.app import StepperApp

SIZES = [pytest.param((80, 24), id="80x24"), pytest.param((160, 48), id="160x48")]


def fixed_app(path: Path, tmp: Path, **options: object) -> StepperApp:
    app = StepperApp.from_file(path, export_dir=tmp, **options)
    app.model.source = "isle-of-quill-0740.sumtr"
    return app


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_the_proof_view(snap_compare, honest_file, tmp_path, size):
    assert snap_compare(fixed_app(honest_file, tmp_path), terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_a_failing_round(snap_compare, failing_file, tmp_path, size):
    assert snap_compare(fixed_app(failing_file, tmp_path), press=["f"], terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_the_bucket_charts(snap_compare, failing_file, tmp_path, size):
    assert snap_compare(fixed_app(failing_file, tmp_path), press=["i", "b"], terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_the_keys_panel(snap_compare, honest_file, tmp_path, size):
    assert snap_compare(fixed_app(honest_file, tmp_path), press=["k"], terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_the_question_box(snap_compare, honest_file, tmp_path, size):
    assert snap_compare(fixed_app(honest_file, tmp_path), press=["g"], terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_the_comparison(snap_compare, honest_file, tmp_path, size):
    from proofs import brackwater_payloads, bump_g1, write_transcript

    (tmp_path / "b").mkdir()
    other = write_transcript(tmp_path / "b" / "isle-of-quill-0741.sumtr",
                             brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2)))
    app = fixed_app(honest_file, tmp_path, compare=other)
    assert snap_compare(app, terminal_size=size)


def glue_app(name: str, tmp: Path) -> StepperApp:
    from proofs import SHIPPED

    app = StepperApp.from_file(SHIPPED / f"{name}.sumtr", export_dir=tmp)
    app.model.source = f"{name}.sumtr"
    return app


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_a_broken_link_at_round_0(snap_compare, tmp_path, size):
    assert snap_compare(glue_app("glue-broken-link", tmp_path), press=["f"], terminal_size=size)


@pytest.mark.parametrize("size", SIZES)
def test_snapshot_of_a_failed_evaluation_with_its_openings(snap_compare, tmp_path, size):
    assert snap_compare(glue_app("glue-wrong-opening", tmp_path), press=["f"], terminal_size=size)
