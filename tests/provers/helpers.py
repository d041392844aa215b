"""Shared helpers for the prover tests: run a reference prover into memory and replay it."""

from __future__ import annotations

from typing import Callable

from stepper.field.field import Field
from stepper.provers.channel import ListSink, ProofChannel
from stepper.provers.counting import MulCounter
from stepper.provers.engine import ProofRun
from stepper.provers.faults import Fault
from stepper.transcript.model import Transcript


def run_prover(field: Field, body: Callable[[ProofChannel, MulCounter], ProofRun], fault: Fault | None = None
               ) -> tuple[ProofRun, Transcript, MulCounter]:
    sink = ListSink()
    channel = ProofChannel(field, sink, fault=fault)
    counter = MulCounter(field)
    run = body(channel, counter)
    return run, sink.transcript(), counter


def plain_mle(values: list[int], point: list[int], p: int) -> int:
    """sum over b of values[b] * prod_j (x_j b_j + (1 - x_j)(1 - b_j)) with plain ints (index bit j = x_(j+1))."""
    total = 0
    for b, v in enumerate(values):
        weight = 1
        for j, x in enumerate(point):
            weight = weight * (x if b >> j & 1 else 1 - x) % p
        total = (total + v * weight) % p
    return total
