"""Prove one Brackwater Ferries sailing with stepper's reference provers, recording through the Recorder.

Scenario (invented demo data): for sailing isle-of-quill-0740 the gate scanner's
boarding log must be a permutation of the booking ledger (grouped permutation
check with a bucketed second layer), and every car-deck slot record must be
well formed (zero-check). The reference prover sends event records to any
object with ``write(record)``; `RecorderSink` below hands each one to the
matching `stepper.transcript.recorder.Recorder` call.

    python samples/prove_sailing.py sailing.sumtr                 # honest
    python samples/prove_sailing.py sailing.sumtr stale-challenge@3   # with a prover bug
    stepper check sailing.sumtr
    stepper buckets sailing.sumtr
"""

from __future__ import annotations

import sys
from typing import Any

from stepper.errors import StepperError
from stepper.provers.faults import parse_fault
from stepper.provers.reference import ProveSpec, parse_field, prove
from stepper.transcript.recorder import Recorder
from stepper.transcript.model import (BatchDecl, BucketStats, ChallengeMsg, FieldDecl, FinalValue, InstanceStart,
                                      NamedValue, Note, Opening, RoundMsg, ScheduleDecl, Squeeze)


class RecorderSink:
    """The reference prover's records, written through the Recorder's typed calls."""

    def __init__(self, recorder: Recorder) -> None:
        self.rec = recorder

    def write(self, record: Any) -> Any:
        rec = self.rec
        if isinstance(record, FieldDecl):
            return rec.field(record.field)
        if isinstance(record, ScheduleDecl):
            return rec.schedule(record.name, record.label)
        if isinstance(record, BatchDecl):
            return rec.batch(record.coefficient, record.terms, record.sources)
        if isinstance(record, InstanceStart):
            return rec.instance(record.name, record.num_vars, record.degree, record.claim, order=record.order,
                                form=record.form, claim_expr=record.claim_expr, final_expr=record.final_expr,
                                eq_point=record.eq_point if isinstance(record.eq_point, (str, type(None)))
                                else list(record.eq_point))
        if isinstance(record, NamedValue):
            return rec.value(record.name, list(record.value) if record.listed else record.value)
        if isinstance(record, Squeeze):
            return rec.squeeze(record.name, list(record.value) if record.listed else record.value)
        if isinstance(record, Opening):
            return rec.opening(record.name, record.value, None if record.table == record.name else record.table)
        if isinstance(record, RoundMsg):
            return rec.round(record.values)
        if isinstance(record, ChallengeMsg):
            return rec.challenge(record.value)
        if isinstance(record, FinalValue):
            return rec.final(record.value)
        if isinstance(record, BucketStats):
            return rec.buckets(record.round, record.chunk, record.count, record.sizes, bound_log2=record.bound_log2,
                               remaining=record.remaining, **dict(record.extra))
        if isinstance(record, Note):
            return rec.note(record.text, record.instance, record.round)
        raise TypeError(f"no Recorder call for {type(record).__name__}")


def main(path: str, fault: str | None = None, *, created: str | None = None, replace: bool = False) -> None:
    spec = ProveSpec("ferries", num_vars=6, seed=740, groups=3, fault=parse_fault(fault) if fault else None,
                     label="Brackwater Ferries isle-of-quill-0740 (samples/prove_sailing.py)")
    metadata = {"sailing": "isle-of-quill-0740", "sample": "samples/prove_sailing.py"}
    if fault:
        metadata["fault"] = fault
    if created is not None:
        metadata["created"] = created
    with Recorder(path, metadata=metadata, replace=replace) as recorder:  # an existing file only with --force
        proof = prove(spec, parse_field("babybear"), RecorderSink(recorder))
    print(f"{path}: {len(proof.instances)} instances, {proof.total_mults} field multiplications")


if __name__ == "__main__":
    if sys.argv[1:2] in (["-h"], ["--help"]):  # not an output path
        print(__doc__)
        sys.exit(0)
    try:
        words = [w for w in sys.argv[1:] if w != "--force"]
        main(words[0] if words else "sailing.sumtr", words[1] if len(words) > 1 else None,
             replace="--force" in sys.argv[1:])
    except StepperError as err:  # a bad fault name or output path: one line, exit 2
        print(f"prove_sailing: {err}".replace("replace=True", "--force"), file=sys.stderr)  # this script's flag
        sys.exit(2)
