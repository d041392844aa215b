"""Regenerate the saved example proofs in transcripts/ferries/ and transcripts/samples/ (deterministically).

    python transcripts/regenerate.py            # rewrite both folders
    python transcripts/regenerate.py --out DIR  # write DIR/ferries and DIR/samples instead

ferries/ holds the example list of stepper/provers/catalogue.py (what `stepper demo`
writes); samples/ holds what the scripts in samples/ record: through the Recorder
(prove_sailing.py), through the channel adapter (record_channel_adapter.py) and as
JSON lines for `stepper record` (boarding_jsonl_prover.py; converted here exactly
as `stepper record` does, with a fixed command line so the bytes do not depend on
the machine).

Every file depends only on the example list (stepper/provers/catalogue.py) and
the code: the seeds are fixed, the Fiat-Shamir challenges are derived from what
is sent, and the header's `created` is a fixed text. tests/provers/test_catalogue.py
regenerates into a temporary folder and compares bytes, so after changing a
prover or the file format, run this script and commit the result.
"""

from __future__ import annotations

import argparse
import os
import sys

import importlib.util
import json
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.path.join(os.path.dirname(HERE), "samples")
FIXED_CREATED = "fixed for reproducible output (transcripts/regenerate.py)"


def regenerate(out: str) -> list[str]:
    """Write both folders under ``out``; returns their files as ``folder/name``."""
    names = [f"ferries/{n}" for n in regenerate_examples(os.path.join(out, "ferries"))]
    return names + [f"samples/{n}" for n in regenerate_samples(os.path.join(out, "samples"))]


def regenerate_examples(out: str) -> list[str]:
    """Write every example (transcript + witness) and INDEX.md into ``out``; returns the file names."""
    from stepper.cli.demo_cmd import write_example
    from stepper.provers.catalogue import EXAMPLES

    os.makedirs(out, exist_ok=True)
    names = []
    lines = ["# Brackwater Ferries example proofs", "",
             "Written by `python transcripts/regenerate.py` (do not edit by hand). Sailing isle-of-quill-0740;",
             "check one with `stepper check FILE.sumtr --witness FILE.witness.json`.", "",
             "| transcript | what it shows |", "|---|---|"]
    for example in EXAMPLES:
        path, witness = write_example(example, out, reproducible=True)
        names += [os.path.basename(path), os.path.basename(witness)]
        lines.append(f"| `{example.stem}.sumtr` | {example.shows} |")
    with open(os.path.join(out, "INDEX.md"), "w", encoding="utf-8") as index:
        index.write("\n".join(lines) + "\n")
    names.append("INDEX.md")
    return names


def _sample(name: str):
    spec = importlib.util.spec_from_file_location(f"stepper_sample_{name}", os.path.join(SAMPLES, f"{name}.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def regenerate_samples(out: str) -> list[str]:
    """Run the sample scripts into ``out``; returns the file names."""
    from stepper.transcript.recorder import Recorder, tap
    from stepper.transcript.store import TranscriptWriter

    os.makedirs(out, exist_ok=True)
    sailing = _sample("prove_sailing")
    sailing.main(os.path.join(out, "sailing-recorder.sumtr"), created=FIXED_CREATED, replace=True)
    sailing.main(os.path.join(out, "sailing-recorder-bug.sumtr"), "stale-challenge@3", created=FIXED_CREATED,
                 replace=True)

    adapter = _sample("record_channel_adapter")
    prover = adapter.DeckProver([1, 0, 1, 1, 0, 0, 1, 0], z=[11, 22, 33])
    channel = adapter.DeckChannel(b"brackwater-ferries/deck")
    meta = {"sailing": "isle-of-quill-0740", "created": FIXED_CREATED}
    with Recorder(os.path.join(out, "deck-channel-adapter.sumtr"), field="goldilocks", metadata=meta,
                  replace=True) as rec:  # regenerating: the shipped file is rewritten on purpose
        rec.instance("deck-slots-zero", adapter.NUM_VARS, 3, prover.claim())
        with tap(channel, rec, send="absorb_poly", draw="squeeze"):
            final = prover.run(channel)
        rec.final(final)

    boarding = _sample("boarding_jsonl_prover")
    for stem, flags in (("boarding-jsonl", []), ("boarding-jsonl-bug", ["--bug"])):
        with tempfile.TemporaryDirectory() as scratch:
            events = os.path.join(scratch, "events.jsonl")
            boarding.main(events, bool(flags))
            meta = {"command": ["python", "samples/boarding_jsonl_prover.py", *flags],
                    "recorded_by": "stepper record", "created": FIXED_CREATED}
            with TranscriptWriter(os.path.join(out, f"{stem}.sumtr"), metadata=meta) as writer, \
                    open(events, encoding="utf-8") as lines:
                for line in lines:
                    writer.write_payload(json.loads(line))
    return sorted(os.listdir(out))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=HERE, help=f"folder to write ferries/ and samples/ into (default {HERE})")
    args = parser.parse_args(argv)
    names = regenerate(args.out)
    print(f"wrote {len(names)} files to {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
