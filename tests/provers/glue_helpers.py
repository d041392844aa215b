"""Run a glue-emitting reference prover into memory and read its glue back by name."""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import Any, Callable

from stepper.field.field import Field
from stepper.provers.channel import ProofChannel
from stepper.provers.counting import MulCounter
from stepper.provers.engine import ProofRun
from stepper.provers.faults import Fault
from stepper.transcript.model import NamedValue, Opening, Squeeze, Transcript
from tests.provers.helpers import run_prover


@dataclass
class Glue:
    """A proof's glue by name (lists as Python lists) and each instance's glue keys."""

    values: dict[str, Any] = dc_field(default_factory=dict)
    squeezes: dict[str, Any] = dc_field(default_factory=dict)
    openings: dict[str, Any] = dc_field(default_factory=dict)
    starts: list[dict[str, Any]] = dc_field(default_factory=list)


def glue_of(transcript: Transcript) -> Glue:
    glue = Glue()
    for event in [*transcript.glue, *(g for inst in transcript.instances for g in inst.glue)]:
        if isinstance(event, Opening):
            glue.openings[event.name] = event.value
            continue
        value = list(event.value) if event.listed else event.value
        (glue.values if isinstance(event, NamedValue) else glue.squeezes)[event.name] = value
        assert isinstance(event, (NamedValue, Squeeze))
    for inst in transcript.instances:
        keys = ("eq_point", "claim_expr", "final_expr")
        glue.starts.append({k: getattr(inst.start, k) for k in keys if getattr(inst.start, k) is not None})
    return glue


def run_glue_prover(field: Field, body: Callable[[ProofChannel, MulCounter], ProofRun], fault: Fault | None = None
                    ) -> tuple[ProofRun, Transcript, Glue]:
    run, transcript, _ = run_prover(field, body, fault)
    return run, transcript, glue_of(transcript)
