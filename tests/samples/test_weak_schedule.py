"""samples/weak_schedule.py: the `--challenges` plug-in that re-derives the challenges of a
prover that leaves its claims out of the Fiat-Shamir transform.

Its docstring, the demo and transcripts/ferries/INDEX.md promise the same thing for the saved
`bug-unbound-claim.sumtr` (a proof that sends glue: values, openings and squeezes between its
instances): with the plug-in every challenge matches and the binding probe names each claim
as unbound; without it the built-in schedule rejects the first challenge.
"""

from __future__ import annotations

import json
from pathlib import Path

from stepper.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
PROOF = ROOT / "transcripts" / "ferries" / "bug-unbound-claim.sumtr"
PLUG_IN = f"{ROOT / 'samples' / 'weak_schedule.py'}:derive"


def test_the_weak_plug_in_matches_every_challenge_of_a_proof_with_glue_and_flags_each_claim(capsys):
    assert main(["check", str(PROOF), "--json", "--challenges", PLUG_IN]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["verdict"] == "accept" and report["first_failure"] is None
    flagged = [f for f in report["findings"] if f["kind"] == "unbound-claim"]
    named = {name for f in flagged for name in ("boarding-permutation", "deck-slots-zero") if repr(name) in f["message"]}
    assert named == {"boarding-permutation", "deck-slots-zero"}


def test_the_built_in_schedule_rejects_the_same_proof_at_its_first_challenge(capsys):
    assert main(["check", str(PROOF), "--json"]) == 1
    failure = json.loads(capsys.readouterr().out)["first_failure"]
    assert (failure["instance"], failure["round"], failure["check"]) == (0, 1, "challenge")
