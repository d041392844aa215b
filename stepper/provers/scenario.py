"""Brackwater Ferries: the invented demo scenario, built deterministically from a seed.

For every sailing the operator sells tickets (the booking ledger, in sale
order) and the gate scanner logs them as cars and foot passengers board (the
boarding log, in scan order). The operator proves, per sailing, that

* the boarding log is a permutation of the booking ledger (every ticket sold
  boarded exactly once): a permutation check, direct or grouped;
* every car-deck slot record is well formed: ``occupied`` is 0 or 1 and an
  empty slot records no vehicle length: a zero-check of
  ``occupied * occupied - occupied`` and ``length - occupied * length``.

A ticket becomes a field element by hashing its code (SHA-256, reduced mod p).
``tamper`` builds a dishonest day: ``double-scan`` (one ticket logged twice,
another never) or ``phantom-car`` (an empty slot with a vehicle length).
Pure: no I/O; the same seed always gives the same sailing.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from stepper.errors import UsageError

if TYPE_CHECKING:
    from stepper.field.field import Field

__all__ = ["SAILINGS", "Sailing", "TAMPERS", "DECK_CONSTRAINTS", "build_sailing", "ticket_values", "deck_tables"]

TAMPERS = ("double-scan", "phantom-car")
DECK_CONSTRAINTS = ("occupied * occupied - occupied", "length - occupied * length")
# the timetable: seed s sails SAILINGS[s % 4] (seed 740 is the demo sailing isle-of-quill-0740)
SAILINGS = ("isle-of-quill-0740", "gannet-point-0915", "saltmarsh-quay-1230", "lantern-holm-1705")


@dataclass(frozen=True, slots=True)
class Sailing:
    """One sailing's public records (all tuples have 2^num_vars entries)."""

    name: str
    tickets: tuple[str, ...]  # booking ledger, sale order
    boarding: tuple[str, ...]  # boarding log, scan order
    scan_of: tuple[int, ...]  # sigma: boarding[x] = tickets[scan_of[x]] on an honest day
    occupied: tuple[int, ...]  # car-deck slot taken (0/1)
    length: tuple[int, ...]  # vehicle length in decimetres, 0 for an empty slot

    @property
    def num_vars(self) -> int:
        return len(self.tickets).bit_length() - 1


def build_sailing(seed: int, num_vars: int, *, route: str | None = None, departure: str | None = None,
                  tamper: str | None = None) -> Sailing:
    """A sailing with 2^num_vars tickets and deck slots, fixed by ``seed``."""
    if not 1 <= num_vars <= 20:
        raise UsageError(f"expected a sailing of 2^1 .. 2^20 tickets, found num_vars = {num_vars}")
    if seed < 0:
        raise UsageError(f"expected a non-negative seed, found {seed}")
    if tamper is not None and tamper not in TAMPERS:
        raise UsageError(f"expected a tamper among {', '.join(TAMPERS)}, found {tamper!r}")
    rng = np.random.default_rng(seed)
    default_route, _, default_departure = SAILINGS[seed % len(SAILINGS)].rpartition("-")
    route = route or default_route
    departure = departure or default_departure
    name = f"{route}-{departure}"
    n = 1 << num_vars
    prefix = "".join(word[0] for word in route.split("-")).upper()
    kinds = rng.choice(np.array(["P", "C", "B", "V"]), size=n, p=[0.55, 0.3, 0.1, 0.05])
    serials = rng.permutation(10 * n)[:n] + 1000
    tickets = tuple(f"{prefix}{departure}-{int(s):06d}-{k}" for s, k in zip(serials, kinds))
    scan_of = rng.permutation(n)
    boarding = [tickets[int(i)] for i in scan_of]
    if tamper == "double-scan":
        boarding[n // 2] = boarding[n // 3]  # one ticket logged twice, the one at n/2 never
    occupied = (rng.random(n) < 0.7).astype(int)
    length = np.where(occupied == 1, rng.integers(38, 62, size=n), 0)
    if tamper == "phantom-car":
        empty = np.flatnonzero(occupied == 0)
        slot = int(empty[0]) if len(empty) else 0
        length[slot] = 45
    return Sailing(name, tickets, tuple(boarding), tuple(int(i) for i in scan_of),
                   tuple(int(v) for v in occupied), tuple(int(v) for v in length))


def ticket_values(field: Field, codes: tuple[str, ...]) -> np.ndarray:
    """Each ticket code as a base-field element: SHA-256 of the code, reduced mod p."""
    values = [int.from_bytes(hashlib.sha256(code.encode()).digest(), "little") % field.p for code in codes]
    return field.base.vec(values)


def deck_tables(field: Field, sailing: Sailing) -> dict[str, np.ndarray]:
    """The deck slot records as base-field tables ``occupied`` and ``length``."""
    return {"occupied": field.base.vec(list(sailing.occupied)), "length": field.base.vec(list(sailing.length))}
