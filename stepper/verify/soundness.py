"""The sumcheck soundness error of each instance and of the proof.

For one sumcheck instance in v variables whose round polynomials have degree
at most d, with challenges drawn uniformly from the challenge field F, a false
claim survives every round with probability at most v * d / |F| (Schwartz-Zippel
applied once per round, union bound). A proof of several instances is bounded by
the sum. These are statements about the *protocol as replayed*, assuming
uniformly random challenges: they say nothing about the Fiat-Shamir transform,
about how claims are chained, or about whether the summed polynomial is the
right one. The numbers are exact fractions; ``bits`` is -log2 of the bound (worked out from the
integers, so the text output imports no :mod:`fractions`: only ``bound`` makes a Fraction).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from fractions import Fraction

__all__ = ["InstanceBound", "SoundnessSummary", "instance_bound", "bits_of", "WEAK_BITS"]

WEAK_BITS = 100  # below this the guessing chance is not negligible (common practice, no source)


def bits_of(bound: Fraction) -> float | None:
    """-log2(bound), to 0.1 bit; None for a zero bound (nothing to guess)."""
    if bound <= 0:
        return None
    return round(math.log2(bound.denominator) - math.log2(bound.numerator), 1)


def _bits(numerator: int, denominator: int) -> float | None:
    """:func:`bits_of` of numerator / denominator (denominator > 0), from the reduced integers as
    Fraction would hold them: the same float, without making the Fraction."""
    if numerator <= 0:
        return None
    common = math.gcd(numerator, denominator)
    return round(math.log2(denominator // common) - math.log2(numerator // common), 1)


def _fraction(numerator: int, denominator: int) -> Fraction:
    from fractions import Fraction  # with decimal and numbers: only the JSON and the library ask for it

    return Fraction(numerator, denominator)


@dataclass(frozen=True, slots=True)
class InstanceBound:
    """v * d / |F| for one instance."""

    index: int
    name: str
    num_vars: int
    degree: int
    field_order: int

    @property
    def bound(self) -> Fraction:
        return _fraction(self.num_vars * self.degree, self.field_order)

    @property
    def bits(self) -> float | None:
        return _bits(self.num_vars * self.degree, self.field_order)

    def describe(self) -> str:
        bits = self.bits
        tail = "no rounds, nothing to guess" if bits is None else f"about 2^-{bits}"
        return f"{self.num_vars} * {self.degree} / |F| ({tail})"


def instance_bound(index: int, name: str, num_vars: int, degree: int, field_order: int) -> InstanceBound:
    return InstanceBound(index, name, num_vars, degree, field_order)


@dataclass(frozen=True, slots=True)
class SoundnessSummary:
    """The proof's bound (sum over every instance) and the kept per-instance bounds."""

    field_order: int
    total_rounds_degree: int  # sum over instances of num_vars * degree
    instance_count: int
    per_instance: tuple[InstanceBound, ...]

    @property
    def bound(self) -> Fraction:
        if self.field_order <= 0:
            return _fraction(0, 1)
        return _fraction(self.total_rounds_degree, self.field_order)

    @property
    def bits(self) -> float | None:
        if self.field_order <= 0:
            return None
        return _bits(self.total_rounds_degree, self.field_order)

    @property
    def weak(self) -> bool:
        """Fewer than WEAK_BITS bits: a cheating prover's chance is not negligible."""
        bits = self.bits
        return bits is not None and bits < WEAK_BITS

    def describe(self) -> str:
        bits = self.bits
        if bits is None:
            return "soundness error 0 (no rounds replayed)"
        return (f"soundness error of the sumcheck rounds <= sum of v*d/|F| = {self.total_rounds_degree}/|F| "
                f"~ 2^-{bits} over {self.instance_count} instance(s), if the challenges are uniformly random")

    def caution(self) -> str | None:
        """A plain warning when the bound is weak, else None."""
        if not self.weak:
            return None
        return (f"WEAK: below {WEAK_BITS} bits, a cheating prover has a real chance of passing the sumcheck "
                f"rounds (challenges are usually drawn from an extension field for this reason)")

    def to_json(self) -> dict[str, Any]:
        return {
            "rule": "sum over instances of num_vars * degree / |F| (|F| = size of the challenge field)",
            "field_order": str(self.field_order),
            "numerator": str(self.total_rounds_degree),
            "bound": str(self.bound),
            "bits": self.bits,
            "weak": self.weak,
            "instances": [
                {"index": b.index, "name": b.name, "num_vars": b.num_vars, "degree": b.degree,
                 "bound": str(b.bound), "bits": b.bits}
                for b in self.per_instance
            ],
            "caveat": "assumes uniformly random challenges; says nothing about the protocol's design "
                      "or its Fiat-Shamir transform",
        }
