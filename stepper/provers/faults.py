"""Named prover faults: each reproduces one class of real prover bug.

A fault is written ``NAME`` or ``NAME@ROUND`` (rounds count from 1) and hits
one instance of a proof (by default the first). The classes mirror the ones
stepper's root-cause probes recognise, so a transcript made with a fault is
a worked example of that bug:

* ``flip-order@K``      from round K on, the prover binds the variable at the
                        other end of the table (high-first instead of low-first);
* ``reverse-point``     the final value is taken at the challenge point read
                        backwards;
* ``stale-challenge@K`` round K's tables are folded with the previous round's
                        challenge (a challenge used one round off; K >= 2);
* ``montgomery@K``      round K's values leave the prover still multiplied by
                        the Montgomery radix R (2^32, 2^64 or 2^256 mod p);
* ``product-of-sums@K`` round K sends the product of each table's sum instead
                        of the sum of the products;
* ``drop-eval@K``       round K omits its last evaluation (degree one short);
* ``negate-claim``      the instance claims the negated sum;
* ``unbound-claim``     the Fiat-Shamir schedule absorbs the claim as zero, so
                        the challenges do not depend on the claimed sum.

Glue faults (between sumchecks; see :mod:`stepper.provers.openings`,
:mod:`stepper.provers.gkr` and :mod:`stepper.provers.eqfactored`):

* ``open-reversed``     the instance's openings taken at its challenge point read
                        backwards;
* ``open-other-point``  the openings taken at an earlier instance's challenge point;
* ``open-wrong-table``  the first opening carries the second opened table's value;
* ``stale-coefficient`` a GKR layer's claim built with the previous layer's
                        squeezed coefficient (instance >= 1);
* ``drop-eq@K``         eq-factored round K sent divided by the eq factor the
                        verifier multiplies back (K >= 2);
* ``double-eq@K``       eq-factored round K sent already multiplied by it (K >= 2);
* ``final-without-eq``  the instance's final_expr written without its eq term.

Everything here is pure; parsing errors are :class:`UsageError` lines.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from stepper.errors import UsageError

if TYPE_CHECKING:
    from stepper.field.field import Element, Field

__all__ = ["Fault", "FAULTS", "GLUE_FAULT_KINDS", "parse_fault", "montgomery_radix"]

# name -> (takes a round?, one-line description)
FAULTS: dict[str, tuple[bool, str]] = {
    "flip-order": (True, "from round K on, bind the variable at the other end of the table"),
    "reverse-point": (False, "take the final value at the challenge point read backwards"),
    "stale-challenge": (True, "fold round K's tables with the previous round's challenge"),
    "montgomery": (True, "send round K's values still multiplied by the Montgomery radix"),
    "product-of-sums": (True, "send the product of the tables' sums in round K"),
    "drop-eval": (True, "omit round K's last evaluation"),
    "negate-claim": (False, "claim the negated sum"),
    "unbound-claim": (False, "leave the claim out of the Fiat-Shamir schedule (absorbed as zero)"),
    "open-reversed": (False, "take the instance's openings at its challenge point read backwards"),
    "open-other-point": (False, "take the instance's openings at an earlier instance's challenge point"),
    "open-wrong-table": (False, "send the second opened table's value as the first opening"),
    "stale-coefficient": (False, "build a GKR layer's claim with the previous layer's coefficient"),
    "drop-eq": (True, "send eq-factored round K divided by the eq factor of the rounds before it"),
    "double-eq": (True, "send eq-factored round K multiplied by the eq factor of the rounds before it"),
    "final-without-eq": (False, "write the instance's final_expr without its eq term"),
}

# glue fault -> the prover kinds that can make it (a fault no prover of a kind makes is refused)
GLUE_FAULT_KINDS: dict[str, tuple[str, ...]] = {
    "open-reversed": ("zerocheck", "zerocheck-eq", "perm-direct", "perm-grouped", "gkr-product", "ferries",
                      "ferries-fingerprint"),
    "open-other-point": ("perm-grouped", "ferries"),
    "open-wrong-table": ("zerocheck", "zerocheck-eq", "perm-direct", "perm-grouped", "gkr-product", "ferries",
                         "ferries-fingerprint"),
    "stale-coefficient": ("gkr-product", "ferries-fingerprint"),
    "drop-eq": ("zerocheck-eq",),
    "double-eq": ("zerocheck-eq",),
    "final-without-eq": ("zerocheck", "zerocheck-eq", "perm-grouped", "gkr-product", "ferries",
                         "ferries-fingerprint"),
}


@dataclass(frozen=True, slots=True)
class Fault:
    """One injected bug: its ``name``, the ``round`` it starts at (1 when it has
    none) and the 0-based ``instance`` of the proof it hits."""

    name: str
    round: int = 1
    instance: int = 0

    def __post_init__(self) -> None:
        if self.name not in FAULTS:
            raise UsageError(f"expected a fault among {', '.join(FAULTS)}, found {self.name!r}")
        if self.round < 1:
            raise UsageError(f"expected a fault round >= 1, found {self.round}")
        if self.name == "stale-challenge" and self.round < 2:
            raise UsageError("expected stale-challenge@K with K >= 2 (round 1 has no earlier challenge)")
        if self.name in ("drop-eq", "double-eq") and self.round < 2:
            raise UsageError(f"expected {self.name}@K with K >= 2 (round 1 has no eq factor before it)")

    def hits(self, instance: int, name: str, round_: int | None = None) -> bool:
        """Does this fault act on ``instance`` (and at ``round_``, if given)?"""
        if instance != self.instance or name != self.name:
            return False
        if round_ is None:
            return True
        if self.name == "flip-order":
            return round_ >= self.round
        return round_ == self.round

    def __str__(self) -> str:
        takes_round = FAULTS[self.name][0]
        return f"{self.name}@{self.round}" if takes_round else self.name


def parse_fault(text: str, instance: int = 0) -> Fault:
    """``NAME`` or ``NAME@ROUND`` as a :class:`Fault` on the given instance."""
    name, _, at = text.strip().partition("@")
    if name not in FAULTS:
        raise UsageError(f"expected a fault among {', '.join(FAULTS)}, found {name!r}")
    takes_round = FAULTS[name][0]
    if not at:
        return Fault(name, 2 if name in ("stale-challenge", "drop-eq", "double-eq") else 1, instance)
    if not takes_round:
        raise UsageError(f"expected no @ROUND for fault {name}, found {text!r}")
    if not at.isdigit():
        raise UsageError(f"expected {name}@ROUND with ROUND a positive integer, found {text!r}")
    return Fault(name, int(at), instance)


def montgomery_radix(field: Field) -> Element:
    """R mod p for the usual Montgomery width of the base prime: 2^32 below 2^32,
    2^64 below 2^64, else 2^256 (common practice, no source)."""
    bits = field.p.bit_length()
    width = 32 if bits <= 32 else 64 if bits <= 64 else 256
    return field.embed(pow(2, width, field.p))
