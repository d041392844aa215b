"""The Brackwater Ferries proof of one sailing: boarding permutation + deck-slot zero-check.

Instances, in order: ``boarding-permutation`` (and, grouped,
``boarding-permutation/groups``), then ``deck-slots-zero``. The booking
ledger is f, the boarding log g, and the scanner's order the permutation the
operator claims; a ``double-scan`` sailing makes that claim false and the
proof fails at its first round. Pure apart from the channel's sink.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from stepper.provers.engine import ProofRun
from stepper.provers.generic import prove_zero
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.permcheck import PermStatement, prove_permutation_direct
from stepper.scenario import DECK_CONSTRAINTS, build_sailing, deck_tables, ticket_values

if TYPE_CHECKING:
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter
    from stepper.provers.reference import ProveSpec

__all__ = ["prove_sailing", "PERMUTATION", "DECK"]

PERMUTATION = "boarding-permutation"
DECK = "deck-slots-zero"


def prove_sailing(channel: ProofChannel, counter: MulCounter, spec: ProveSpec) -> ProofRun:
    """Both statements of the sailing ``spec.seed`` builds (route from the seed)."""
    field = counter.field
    sailing = build_sailing(spec.seed, spec.num_vars, tamper=spec.tamper)
    channel.note(f"Brackwater Ferries sailing {sailing.name}: {len(sailing.tickets)} tickets, "
                 f"{sum(sailing.occupied)} cars on deck")
    statement = PermStatement(ticket_values(field, sailing.tickets), ticket_values(field, sailing.boarding),
                              np.array(sailing.scan_of, dtype=np.int64))
    if spec.groups:
        perm = prove_permutation_grouped(channel, counter, statement, spec.groups, switch_round=spec.switch_round,
                                         name=PERMUTATION, form=spec.form)
    else:
        perm = prove_permutation_direct(channel, counter, statement, name=PERMUTATION, form=spec.form)
    deck = prove_zero(channel, counter, DECK, deck_tables(field, sailing), list(DECK_CONSTRAINTS), form=spec.form)
    return ProofRun(perm.instances + deck.instances, perm.witness + deck.witness, counter.per_phase())
