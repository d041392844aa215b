"""The saved example proofs in transcripts/ferries/ and transcripts/samples/ are up to date and say what they claim."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from stepper.provers.catalogue import EXAMPLES
from stepper.transcript.store import load
from stepper.verify.replay import replay_transcript

ROOT = Path(__file__).resolve().parents[2]
SAVED = ROOT / "transcripts" / "ferries"
SAMPLES = ROOT / "transcripts" / "samples"


def _regenerate_module():
    spec = importlib.util.spec_from_file_location("regenerate", ROOT / "transcripts" / "regenerate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_saved_examples_match_a_fresh_regeneration_byte_for_byte(tmp_path):
    names = _regenerate_module().regenerate(str(tmp_path))
    saved = [f"{folder.name}/{p.name}" for folder in (SAVED, SAMPLES) for p in folder.iterdir()]
    assert sorted(saved) == sorted(names), "run python transcripts/regenerate.py"
    for name in names:
        fresh = (tmp_path / name).read_bytes()
        assert fresh == (ROOT / "transcripts" / name).read_bytes(), f"{name} is stale: python transcripts/regenerate.py"


@pytest.mark.parametrize("stem", ["sailing-recorder", "deck-channel-adapter", "boarding-jsonl",
                                  "sailing-recorder-bug", "boarding-jsonl-bug"])
def test_sample_outputs_pass_unless_they_carry_a_bug(stem):
    report = replay_transcript(load(str(SAMPLES / f"{stem}.sumtr")))
    assert report.verdict == ("reject" if stem.endswith("-bug") else "accept")


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda e: e.stem)
def test_each_saved_example_gets_the_verdict_its_description_promises(example):
    transcript = load(str(SAVED / f"{example.stem}.sumtr"))
    report = replay_transcript(transcript)
    honest = example.spec.fault is None and example.spec.tamper is None
    assert report.verdict == ("accept" if honest else "reject")
    assert all(len(inst.start.name) for inst in transcript.instances)
    assert (SAVED / f"{example.stem}.sumtr").stat().st_size < 8192  # small enough to read by eye
