"""Small honest sumcheck runs, and deliberately broken twins, for the diff and report tests.

A run proves sum_{x in {0,1}^mu} prod_t T_t(x) for a few tables over a prime
field, low-first, with challenges from the built-in Fiat-Shamir schedule
(stepper.verify.fiatshamir.Sha256Schedule): every payload goes through
stepper.transcript.events.Sequencer, so the records are exactly what a file would give.
The round polynomials are computed here in plain Python integers, independently
of stepper.diagnose.honest, from the definition g_k(t) = sum over the free variables of
the product with x_k = t (common practice, no source).

Hooks make the broken twins: ``tamper(payload)`` rewrites a payload before it
is sent (and absorbed), ``extra_absorb`` makes the schedule absorb one more
message before each instance (a port whose transcript has an extra step).
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from typing import Any, Callable

from stepper.transcript.events import Sequencer
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.transcript.model import Event, FieldDecl, RoundMsg, Transcript, fold_events

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source (p = 15 * 2^27 + 1)

Payload = dict[str, Any]


@dataclass
class Spec:
    """One instance: its name and tables (each of length 2^mu, values < p)."""

    name: str
    tables: list[list[int]]
    final: bool = True
    extra: dict[str, Any] = dc_field(default_factory=dict)


def brackwater_specs(mu: int = 3) -> list[Spec]:
    """The invented demo scenario: a boarding log against a booking ledger, and deck slots."""
    n = 1 << mu
    ledger = [(7 * i * i + 3 * i + 11) % BABYBEAR for i in range(n)]
    gate = [(5 * i + 2) % BABYBEAR for i in range(n)]
    slots = [(i * 31 + 4) % BABYBEAR for i in range(n)]
    return [Spec("boarding-permutation", [ledger, gate]), Spec("deck-slots-zero", [slots, gate, ledger])]


def _round_poly(p: int, tables: list[list[int]], degree: int) -> list[int]:
    evals = []
    for t in range(degree + 1):
        total = 0
        for i in range(0, len(tables[0]), 2):
            term = 1
            for table in tables:
                lo, hi = table[i], table[i + 1]
                term = term * (lo + t * (hi - lo)) % p
            total += term
        evals.append(total % p)
    return evals


def _fold(p: int, table: list[int], r: int) -> list[int]:
    return [(table[i] + r * (table[i + 1] - table[i])) % p for i in range(0, len(table), 2)]


def _mle(p: int, table: list[int], point: list[int]) -> int:
    for r in point:
        table = _fold(p, table, r)
    return table[0]


def run_events(
    specs: list[Spec],
    *,
    p: int = BABYBEAR,
    tamper: Callable[[Payload], Payload | None] | None = None,
    extra_absorb: bool = False,
    stop_after: int | None = None,
    batch: Payload | None = None,
) -> list[Event]:
    """The events of an honest run (made dishonest by the hooks), at most ``stop_after`` of them."""
    seq = Sequencer()
    schedule = Sha256Schedule()
    events: list[Event] = []

    def emit(payload: Payload) -> Event | None:
        if tamper is not None:
            changed = tamper(dict(payload))
            if changed is None:
                return None
            payload = changed
        record = seq.feed(payload)
        schedule.observe(record)
        events.append(record)
        return record

    field_payload: Payload = {"type": "field", "name": "babybear"} if p == BABYBEAR else {"type": "field", "modulus": p}
    emit(field_payload)
    emit({"type": "schedule", "name": SCHEDULE_NAME, "label": "brackwater-ferries/isle-of-quill-0740"})
    for index, spec in enumerate(specs):
        mu = len(spec.tables[0]).bit_length() - 1
        degree = len(spec.tables)
        claim = sum(_prod(p, spec.tables, i) for i in range(1 << mu)) % p
        if batch is not None and index == 0:
            emit(batch)
        if extra_absorb:
            schedule.observe(RoundMsg(index, 1, (index + 1,)))  # the extra message a port absorbs
        emit({"type": "instance", "name": spec.name, "num_vars": mu, "degree": degree, "claim": claim, **spec.extra})
        tables = [list(t) for t in spec.tables]
        point: list[int] = []
        for _ in range(mu):
            emit({"type": "round", "evals": _round_poly(p, tables, degree)})
            r = schedule.challenge()
            assert isinstance(r, int)
            emit({"type": "challenge", "value": r})
            point.append(r)
            tables = [_fold(p, t, r) for t in tables]
        if spec.final:
            value = 1
            for t in spec.tables:
                value = value * _mle(p, t, point) % p
            emit({"type": "final", "value": value})
    return events[:stop_after] if stop_after is not None else events


def _prod(p: int, tables: list[list[int]], i: int) -> int:
    out = 1
    for t in tables:
        out = out * t[i] % p
    return out


def fold(events: list[Event], completeness: str = "complete") -> Transcript:
    return fold_events(events, completeness=completeness)  # type: ignore[arg-type]


def scale_all(factor: int, p: int = BABYBEAR) -> Callable[[Payload], Payload]:
    """A tamper hook that multiplies every claim, round value and final by ``factor``."""

    def hook(payload: Payload) -> Payload:
        kind = payload["type"]
        if kind == "instance":
            payload["claim"] = payload["claim"] * factor % p
        elif kind == "round":
            payload["evals"] = [v * factor % p for v in payload["evals"]]
        elif kind == "final":
            payload["value"] = payload["value"] * factor % p
        return payload

    return hook


def field_of(events: list[Event]) -> Any:
    first = events[0]
    assert isinstance(first, FieldDecl)
    return first.field


def witness_map(specs: list[Spec]) -> dict[str, Any]:
    """The witness file content (transcripts/EVENTS.md check contract) of the runs above: tables t0, t1, ... and their product."""
    return {
        "instances": [
            {
                "name": spec.name,
                "tables": {f"t{k}": list(table) for k, table in enumerate(spec.tables)},
                "combine": "*".join(f"t{k}" for k in range(len(spec.tables))),
            }
            for spec in specs
        ]
    }


def save(path: Any, events: list[Event], *, finish: bool = True, metadata: dict[str, Any] | None = None) -> Any:
    """Write the records as a stepper transcript (without the end event unless ``finish``)."""
    from stepper.transcript.store import TranscriptWriter

    writer = TranscriptWriter(path, metadata=metadata or {"label": "isle-of-quill-0740"})
    for record in events:
        writer.write(record)
    if finish:
        writer.finish()
    else:
        writer.close()
    return path
