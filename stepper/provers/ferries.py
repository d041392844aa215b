"""The Brackwater Ferries proof of one sailing: boarding permutation + deck-slot zero-check.

Instances, in order: ``boarding-permutation`` (and, grouped,
``boarding-permutation/groups``), then ``deck-slots-zero``. The booking
ledger is f, the boarding log g, and the scanner's order the permutation the
operator claims; a ``double-scan`` sailing makes that claim false and the
proof fails at its first round. The direct permutation check and the deck
zero-check send their glue (points as values, openings, ``final_expr``).
:func:`prove_fingerprint` is the sailing's second kind of proof: the boarding
log's fingerprint through the GKR product circuit, its layers linked by
``claim_expr``. Pure apart from the channel's sink.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from stepper.errors import UsageError
from stepper.provers.engine import ProofRun
from stepper.provers.faults import GLUE_FAULT_KINDS
from stepper.provers.generic import prove_zero
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.openings import OPENING_FAULTS
from stepper.provers.permcheck import PermStatement, prove_permutation_direct
from stepper.provers.scenario import DECK_CONSTRAINTS, build_sailing, deck_tables, ticket_values

if TYPE_CHECKING:
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["prove_sailing", "prove_fingerprint", "PERMUTATION", "DECK", "FINGERPRINT"]

PERMUTATION = "boarding-permutation"
DECK = "deck-slots-zero"
FINGERPRINT = "manifest"


def _glue_targets(fault: str, groups: int) -> set[int]:
    """The instances of a sailing's proof whose glue a glue fault can break."""
    targets = {2 if groups else 1}  # the deck zero-check: openings and an eq term
    if fault in ("open-reversed", "open-wrong-table"):
        targets.add(0)  # the permutation's first (or only) instance opens its tables
    if groups and fault in (*OPENING_FAULTS, "final-without-eq"):
        targets.add(1)  # the grouped second layer opens the bits after an earlier point, under an eq term
    return targets


def prove_sailing(channel: ProofChannel, counter: MulCounter, *, seed: int, num_vars: int, groups: int,
                  switch_round: int | None = None, tamper: str | None = None, form: str = "evals") -> ProofRun:
    """Both statements of the sailing ``seed`` builds (route from the seed); ``groups`` 0
    proves the permutation directly."""
    field = counter.field
    fault = channel.fault
    deck_index = 2 if groups else 1
    if fault is not None and fault.name in GLUE_FAULT_KINDS and fault.instance not in _glue_targets(fault.name, groups):
        raise UsageError(f"expected fault {fault.name} aimed at the deck zero-check (--fault-instance {deck_index})"
                         + (" or, for an opening fault, the permutation (0)"
                            if fault.name in ("open-reversed", "open-wrong-table") else "")
                         + (" or the grouped permutation's second layer (1)"
                            if groups and fault.name in (*OPENING_FAULTS, "final-without-eq") else "")
                         + f", found instance {fault.instance}")
    sailing = build_sailing(seed, num_vars, tamper=tamper)
    channel.note(f"Brackwater Ferries sailing {sailing.name}: {len(sailing.tickets)} tickets, "
                 f"{sum(sailing.occupied)} cars on deck")
    statement = PermStatement(ticket_values(field, sailing.tickets), ticket_values(field, sailing.boarding),
                              np.array(sailing.scan_of, dtype=np.int64))
    if groups:
        perm = prove_permutation_grouped(channel, counter, statement, groups, switch_round=switch_round,
                                         name=PERMUTATION, form=form)
    else:
        perm = prove_permutation_direct(channel, counter, statement, name=PERMUTATION, form=form)
    earlier = [run.challenges for run in perm.instances]
    deck = prove_zero(channel, counter, DECK, deck_tables(field, sailing), list(DECK_CONSTRAINTS), form=form,
                      earlier_points=earlier)
    return ProofRun(perm.instances + deck.instances, perm.witness + deck.witness, counter.per_phase())


def prove_fingerprint(channel: ProofChannel, counter: MulCounter, *, seed: int, num_vars: int,
                      tamper: str | None = None, form: str = "evals") -> ProofRun:
    """The boarding log's fingerprint prod_x (z - g(x)) for a point z drawn after the log
    is fixed, proved by the GKR product circuit (layers ``manifest.layer1`` ...). Two logs
    holding the same tickets in any order have the same fingerprint; the port office
    compares it with the booking ledger's."""
    from stepper.provers.gkr import prove_grand_product

    field = counter.field
    sailing = build_sailing(seed, num_vars, tamper=tamper)
    boarding = ticket_values(field, sailing.boarding)
    z = channel.statement_challenges("manifest-fingerprint", [boarding], 1)[0]
    channel.note(f"Brackwater Ferries sailing {sailing.name}: boarding-log fingerprint over "
                 f"{len(sailing.boarding)} scans, z - ticket multiplied up the manifest circuit")
    channel.value(f"{FINGERPRINT}.z", z)
    factors = field.vsub(field.vec([z] * len(boarding)), field.vec(boarding))
    return prove_grand_product(channel, counter, factors, name=FINGERPRINT, form=form)
