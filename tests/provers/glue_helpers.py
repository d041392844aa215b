"""Run a glue-emitting reference prover into memory and read its glue back by name."""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import Any, Callable

from stepper.field.field import Field
from stepper.provers.channel import ListSink, ProofChannel
from stepper.provers.counting import MulCounter
from stepper.provers.engine import ProofRun
from stepper.provers.faults import Fault
from stepper.transcript.model import Transcript


@dataclass
class Glue:
    values: dict[str, Any] = dc_field(default_factory=dict)
    squeezes: dict[str, Any] = dc_field(default_factory=dict)
    openings: dict[str, Any] = dc_field(default_factory=dict)
    starts: list[dict[str, Any]] = dc_field(default_factory=list)


class _GlueChannel(ProofChannel):
    def __init__(self, *a: Any, **k: Any) -> None:
        self.glue = Glue()
        super().__init__(*a, **k)

    def value(self, name, v):
        self.glue.values[name] = v

    def squeeze(self, name):
        c = self.schedule.challenge()
        self.glue.squeezes[name] = c
        return c

    def opening(self, name, v, table=None):
        self.glue.openings[name] = v

    def start_instance(self, name, num_vars, degree, claim, *, order="low-first", form="evals", **glue):
        self.glue.starts.append(glue)
        return super().start_instance(name, num_vars, degree, claim, order=order,
                                      form="evals" if form == "eq-factored" else form)


def run_glue_prover(field: Field, body: Callable[[ProofChannel, MulCounter], ProofRun], fault: Fault | None = None
                    ) -> tuple[ProofRun, Transcript, Glue]:
    sink = ListSink()
    channel = _GlueChannel(field, sink, fault=fault)
    counter = MulCounter(field)
    run = body(channel, counter)
    return run, sink.transcript(), channel.glue
