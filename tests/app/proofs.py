"""Demo proofs for the app tests: the invented Brackwater Ferries scenario.

For sailing isle-of-quill-0740 the gate scanner's boarding log must be a
permutation of the booking ledger (instance ``boarding-permutation``, a direct
product check, and ``boarding-permutation-grouped``, its bucketed form that
also reports bucket occupancy), and every car-deck slot record must be well
formed (``deck-slots-zero``, sent in the compressed form ``evals-no-1``).

The round polynomials are computed here in plain Python integers from the
definition of the sumcheck protocol, g_k(t) = sum over the free variables of
the summand with x_k = t (Lund, Fortnow, Karloff and Nisan, "Algebraic methods
for interactive proof systems", 1992; the variable order and folding are
common practice, no source), independently of stepper.diagnose.honest and
stepper.verify.replay. Challenges come from the built-in Fiat-Shamir schedule, which
the prover side observes exactly as the replay will. The field is BabyBear,
p = 15 * 2^27 + 1 (common practice, no source). The data values are invented.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Callable

from stepper.transcript.events import Sequencer
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule

P = 15 * 2**27 + 1
Payload = dict[str, Any]
Tamper = Callable[[str, int, Payload], Payload]


def _round_poly(tables: list[list[int]], degree: int) -> list[int]:
    evals = []
    for t in range(degree + 1):
        total = 0
        for i in range(0, len(tables[0]), 2):
            term = 1
            for table in tables:
                term = term * (table[i] + t * (table[i + 1] - table[i])) % P
            total += term
        evals.append(total % P)
    return evals


def _fold(table: list[int], r: int) -> list[int]:
    return [(table[i] + r * (table[i + 1] - table[i])) % P for i in range(0, len(table), 2)]


def _tables(name: str, mu: int) -> list[list[int]]:
    n = 1 << mu
    ledger = [(7 * i * i + 3 * i + 11) % P for i in range(n)]
    gate = [(5 * i + 2) % P for i in range(n)]
    slots = [(31 * i + 4) % P for i in range(n)]
    if name.startswith("deck"):
        return [slots, gate, ledger]
    return [ledger, gate]


def brackwater_payloads(
    mu: int = 4,
    instances: tuple[str, ...] = ("boarding-permutation", "boarding-permutation-grouped", "deck-slots-zero"),
    tamper: Tamper | None = None,
    stop_after: int | None = None,
) -> list[Payload]:
    """The event payloads of one sailing's proof; ``tamper(instance_name, round, payload)``
    may rewrite a round payload before it is sent (the prover then derives its next
    challenge from what it sent, so only the tampered check fails)."""
    seq = Sequencer()
    schedule = Sha256Schedule()
    out: list[Payload] = []

    def emit(payload: Payload) -> None:
        schedule.observe(seq.feed(payload))
        out.append(payload)

    emit({"type": "field", "name": "babybear"})
    emit({"type": "schedule", "name": SCHEDULE_NAME, "label": "brackwater-ferries/isle-of-quill-0740"})
    for name in instances:
        tables = _tables(name, mu)
        degree = len(tables)
        claim = 0
        for i in range(1 << mu):
            term = 1
            for table in tables:
                term = term * table[i] % P
            claim = (claim + term) % P
        form = "evals-no-1" if name.startswith("deck") else "evals"
        emit({"type": "instance", "name": name, "num_vars": mu, "degree": degree, "claim": claim, "form": form})
        for k in range(1, mu + 1):
            evals = _round_poly(tables, degree)
            sent = evals if form == "evals" else [evals[0], *evals[2:]]
            payload: Payload = {"type": "round", "evals": sent}
            if tamper is not None:
                payload = tamper(name, k, payload)
            emit(payload)
            r = schedule.challenge()
            emit({"type": "challenge", "value": r})
            tables = [_fold(t, r) for t in tables]
            if name.endswith("grouped"):  # one group of c = 1 bit: bound 2^(2^k * c)
                remaining = 1 << (mu - k)
                count = max(1, remaining // 2)
                sizes = [2] * count if remaining > 1 else [1]
                if count >= 2:
                    sizes[0], sizes[-1] = 1, 3
                emit({"type": "buckets", "round": k, "chunk": 0, "count": count, "sizes": sizes,
                      "bound_log2": 2**k, "remaining": remaining})
        value = 1
        for t in tables:
            value = value * t[0] % P
        emit({"type": "final", "value": value})
    return out[:stop_after] if stop_after is not None else out


def bump_g1(target: str, round_: int) -> Tamper:
    """A tamper that adds 1 to g(1) of one round (the sum check of that round fails)."""

    def hook(name: str, k: int, payload: Payload) -> Payload:
        if name == target and k == round_:
            evals = list(payload["evals"])
            evals[1] = (evals[1] + 1) % P
            return {**payload, "evals": evals}
        return payload

    return hook


def write_transcript(path: Path, payloads: list[Payload], *, finish: bool = True,
                     metadata: dict[str, Any] | None = None) -> Path:
    """Write the payloads as a stepper transcript (with the end event when ``finish``)."""
    from stepper.transcript.store import TranscriptWriter

    writer = TranscriptWriter(path, metadata=metadata or {"sailing": "isle-of-quill-0740",
                                                          "created": "2026-01-01T07:40:00Z"})
    for payload in payloads:
        writer.write_payload(payload)
    if finish:
        writer.finish()
    else:
        writer.close()
    return path


def write_witness(path: Path, mu: int = 4,
                  instances: tuple[str, ...] = ("boarding-permutation", "boarding-permutation-grouped",
                                                "deck-slots-zero")) -> Path:
    """The tables behind :func:`brackwater_payloads` as a witness file (transcripts/EVENTS.md format)."""
    import json

    entries = []
    for name in instances:
        tables = _tables(name, mu)
        names = ["slots", "gate", "ledger"] if name.startswith("deck") else ["ledger", "gate"]
        entries.append({"name": name, "tables": dict(zip(names, tables)), "combine": " * ".join(names)})
    path.write_text(json.dumps({"instances": entries}))
    return path


SHIPPED = Path(__file__).parents[2] / "transcripts" / "ferries"  # the catalogue `stepper demo` writes


def glued_events(path: Path, kind: str, num_vars: int = 3, fault: str | None = None, fault_instance: int = 0,
                 retouch: Callable[[list[Payload]], None] | None = None) -> Path:
    """A reference prover's run with glue (values, squeezes, openings, claim_expr, final_expr) as a
    JSON-lines event file, which `stepper check` and the app both read; ``retouch`` may change the
    payloads before they are written (to send a squeeze the schedule does not derive)."""
    import io
    import json

    from stepper.provers.channel import JsonLinesSink
    from stepper.provers.faults import parse_fault
    from stepper.provers.reference import ProveSpec, parse_field, prove

    out = io.StringIO()
    spec = ProveSpec(kind, num_vars, fault=parse_fault(fault, fault_instance) if fault else None)
    prove(spec, parse_field("babybear"), JsonLinesSink(out))
    payloads = [json.loads(line) for line in out.getvalue().splitlines()]
    if retouch is not None:
        retouch(payloads)
    path.write_text("".join(json.dumps(p) + "\n" for p in payloads))
    return path


def bump_squeeze(nth: int) -> Callable[[list[Payload]], None]:
    """A retouch that adds 1 to the value of the ``nth`` squeeze (0-based) as sent."""

    def hook(payloads: list[Payload]) -> None:
        squeezes = [p for p in payloads if p["type"] == "squeeze"]
        squeezes[nth]["value"] = (int(squeezes[nth]["value"]) + 1) % P

    return hook
