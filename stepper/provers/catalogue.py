"""The saved example proofs: Brackwater Ferries sailings, honest, tampered and buggy.

Each :class:`Example` names a file stem, a :class:`~stepper.provers.reference.ProveSpec`,
the field and one sentence of what it shows. transcripts/regenerate.py writes
them to transcripts/ and ``stepper demo`` to a fresh folder, both through
:func:`stepper.cli.demo_cmd.write_example`, so the two always agree. Sizes stay
small (mu <= 6: a few KB per transcript) so the files can be read by eye.
Pure data.
"""

from __future__ import annotations

from dataclasses import dataclass

from stepper.provers.faults import parse_fault
from stepper.provers.reference import ProveSpec

__all__ = ["Example", "EXAMPLES", "DEMO_SEED", "DEMO_FAILING", "DEMO_HONEST"]

DEMO_SEED = 740  # the sailing isle-of-quill-0740


@dataclass(frozen=True, slots=True)
class Example:
    stem: str
    spec: ProveSpec
    field: str
    shows: str


def _ferries(stem: str, shows: str, *, groups: int = 2, fault: str | None = None, tamper: str | None = None,
             num_vars: int = 6, form: str = "evals", kind: str = "ferries", fault_instance: int = 0) -> Example:
    spec = ProveSpec(kind, num_vars, DEMO_SEED, groups, None,
                     parse_fault(fault, fault_instance) if fault else None,
                     "low-first", form, None, tamper, f"Brackwater Ferries {stem}")
    return Example(stem, spec, "babybear", shows)


EXAMPLES: tuple[Example, ...] = (
    _ferries("ferries-honest", "an honest sailing, grouped permutation check (L = 2) and deck zero-check: accepted"),
    _ferries("ferries-direct", "the same statements with the direct permutation check (degree mu + 1): accepted",
             groups=0, num_vars=5),
    _ferries("ferries-compressed", "an honest sailing sent with g(1) left out of every round: accepted",
             form="evals-no-1"),
    _ferries("ferries-double-scan", "one ticket scanned twice, another never: the permutation claim is false",
             tamper="double-scan"),
    _ferries("ferries-phantom-car", "an empty deck slot with a vehicle length: the zero-check fails",
             tamper="phantom-car"),
    _ferries("ferries-stale-challenge", "prover bug: round 3 folded with round 2's challenge",
             fault="stale-challenge@3"),
    _ferries("bug-flip-order", "prover bug: binds the high variable first while declaring low-first",
             groups=0, num_vars=5, fault="flip-order@1"),
    _ferries("bug-reverse-point", "prover bug: the final value taken at the reversed point",
             groups=0, num_vars=5, fault="reverse-point"),
    _ferries("bug-stale-challenge", "prover bug: round 2 folded with round 1's challenge",
             groups=0, num_vars=5, fault="stale-challenge@2"),
    _ferries("bug-montgomery", "prover bug: round 2's values still in Montgomery form (times 2^32 mod p)",
             groups=0, num_vars=5, fault="montgomery@2"),
    _ferries("bug-product-of-sums", "prover bug: round 2 sends the product of the tables' sums",
             groups=0, num_vars=5, fault="product-of-sums@2"),
    _ferries("bug-drop-eval", "prover bug: round 2 drops its last evaluation",
             groups=0, num_vars=5, fault="drop-eval@2"),
    _ferries("bug-negate-claim", "prover bug: the claimed sum negated",
             groups=0, num_vars=5, fault="negate-claim"),
    _ferries("bug-unbound-claim", "Fiat-Shamir bug: the claim is not absorbed (check with "
             "--challenges samples/weak_schedule.py:derive to see the binding probe)",
             groups=0, num_vars=5, fault="unbound-claim"),
    _ferries("ferries-fingerprint", "the boarding log's fingerprint multiplied up the manifest circuit, each "
             "layer's claim linked to the layer below: accepted", kind="ferries-fingerprint", groups=0,
             num_vars=4),
    _ferries("glue-wrong-opening", "glue bug: the deck-slot proof opens the vehicle-length column where the "
             "occupancy column was due (evaluation fails; the witness names the opening)",
             groups=0, num_vars=5, fault="open-wrong-table", fault_instance=1),
    _ferries("glue-broken-link", "glue bug: layer 2 of the manifest circuit builds its claim with layer 1's "
             "coefficient (the link check fails at round 0)", kind="ferries-fingerprint", groups=0, num_vars=4,
             fault="stale-coefficient", fault_instance=1),
)

DEMO_FAILING = "ferries-stale-challenge"
DEMO_HONEST = "ferries-honest"
