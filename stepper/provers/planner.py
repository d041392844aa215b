"""Choosing the group count L and switch-over round of the grouped permutation check.

For a permutation sigma of 2^mu entries, :func:`plan` predicts, for every group
count L and switch-over round s (the first round of layer 2 done directly),
the field multiplications of :func:`stepper.provers.grouped.prove_permutation_grouped`
and the soundness error of the whole argument, and recommends the cheapest.

* Multiplications follow the prover's own counting rule by rule (the tests
  check prediction = count on real runs). Bucketed rounds need the bucket
  counts, so they are *measured*: the bucketing of :mod:`stepper.provers.bucketing`
  runs on sigma's bits (bit work only, no field products). Where a key would
  exceed 64 bits the count is taken as the remaining entries (``assumed``), which
  is what a random permutation gives.
* Soundness error, by the union bound over: the permutation point alpha
  (Schwartz-Zippel, mu / |F|), layer 1 (mu * (L + 1) / |F|, the sumcheck bound
  of v * d / |F|), batching the L claims (L - 1 / |F|) and layer 2
  (mu * (c + 1) / |F|) (common practice, no source). This is the error of the
  interactive argument with uniform challenges; it says nothing about how
  the challenges are derived, and a good plan is not a soundness proof.

Pure: numbers in, frozen records out.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Any, Sequence

import numpy as np

from stepper.errors import UsageError
from stepper.provers.bucketing import bit_tables, group_buckets, split_groups
from stepper.provers.grouped import MAX_SWITCH_ROUND, bucket_products, direct_products

__all__ = ["PlanRow", "Plan", "plan", "direct_cost", "grouped_cost", "measure_buckets"]

LAST_BUCKET_ROUND = MAX_SWITCH_ROUND - 1


@dataclass(frozen=True, slots=True)
class PlanRow:
    """One choice: ``groups`` L (bit widths ``widths``), ``switch_round`` s
    (None: the prover's automatic rule), predicted multiplications per layer,
    soundness error, and the bucket counts used for its bucketed rounds."""

    groups: int
    widths: tuple[int, ...]
    switch_round: int | None
    switch_used: int
    layer1: int
    layer2: int
    soundness: Fraction
    bucket_counts: tuple[int, ...]
    assumed: bool

    @property
    def total(self) -> int:
        return self.layer1 + self.layer2

    def to_json(self) -> dict[str, Any]:
        return {"groups": self.groups, "widths": list(self.widths),
                "switch_round": "auto" if self.switch_round is None else self.switch_round,
                "first_direct_round": self.switch_used, "multiplications": self.total,
                "layer1": self.layer1, "layer2": self.layer2, "soundness_error": float(self.soundness),
                "soundness_log2": _log2(self.soundness), "bucket_counts": list(self.bucket_counts),
                "counts_assumed": self.assumed}


@dataclass(frozen=True, slots=True)
class Plan:
    num_vars: int
    field_order: int
    direct: int
    direct_soundness: Fraction
    rows: tuple[PlanRow, ...]
    recommended: PlanRow

    def to_json(self) -> dict[str, Any]:
        return {"num_vars": self.num_vars, "field_order_log2": self.field_order.bit_length() - 1,
                "direct": {"multiplications": self.direct, "soundness_error": float(self.direct_soundness),
                           "soundness_log2": _log2(self.direct_soundness)},
                "rows": [r.to_json() for r in self.rows], "recommended": self.recommended.to_json(),
                "caution": "a soundness error bounds one interactive run with uniform challenges; it is not a "
                           "proof that the protocol or its Fiat-Shamir transform is sound"}


def _log2(x: Fraction) -> float:
    import math

    return math.log2(x) if x > 0 else float("-inf")


def direct_cost(num_vars: int) -> int:
    """Products of :func:`stepper.provers.permcheck.prove_permutation_direct`: the claim,
    the rounds, the final value and one product per bit opening."""
    mu, n = num_vars, 1 << num_vars
    rounds = sum((1 << (mu - k)) * ((mu + 2) * mu + mu + 1) for k in range(1, mu + 1))
    return (n - 1) + rounds + mu + mu


def measure_buckets(bits: Sequence[np.ndarray], widths_groups: Sequence[Sequence[int]], num_vars: int
                    ) -> tuple[list[list[int]], bool]:
    """Bucket counts [round k-1][group j] for rounds 1..4 (counts of assumed rounds:
    the remaining entries) and whether any was assumed."""
    counts: list[list[int]] = []
    assumed = False
    for k in range(1, min(LAST_BUCKET_ROUND, num_vars) + 1):
        row = []
        for group in widths_groups:
            if (1 << k) * len(group) <= 64:
                row.append(group_buckets(bits, group, k).count)
            else:
                row.append(1 << (num_vars - k))
                assumed = True
        counts.append(row)
    return counts, assumed


def grouped_cost(num_vars: int, widths: Sequence[int], counts: Sequence[Sequence[int]],
                 switch_round: int | None) -> tuple[int, int, int]:
    """(layer-1 products, layer-2 products, first direct round) of the grouped prover."""
    mu, n, L = num_vars, 1 << num_vars, len(widths)
    widest = max(widths)
    layer1 = (n - 1) + sum((1 << c) * (c - 1) for c in widths)
    layer1 += sum((1 << (mu - k)) * ((L + 2) * L + L + 1) for k in range(1, mu + 1)) + L
    layer2 = (L - 1) + L + ((1 << (mu - 1)) - 1)
    direct_from = mu + 1
    for k in range(1, mu + 1):
        half = 1 << (mu - k)
        bucketed = False
        if direct_from > mu and 2 * (1 << (k - 1)) <= 16 and (switch_round is None or k < switch_round):
            bucket = sum(b * bucket_products(c, widest) for b, c in zip(counts[k - 1], widths))
            direct = sum(half * (direct_products(c, widest) + c) for c in widths)
            bucketed = switch_round is not None or bucket < direct
            if bucketed:
                layer2 += bucket
        if not bucketed:
            if direct_from > mu:
                direct_from = k
                subset = 1 << (1 << (k - 1))
                layer2 += mu * min(subset, 2 * half)
            layer2 += sum(half * direct_products(c, widest) for c in widths)
        layer2 += (widest + 2) * (L + 2) + 2
        if direct_from <= mu:
            layer2 += mu * half
        elif k < mu:
            layer2 += 1 << (k - 1)
    # the bit openings: one product each from the folded tables, or eq(r, .) completed when every round was bucketed
    layer2 += mu if direct_from <= mu else 1 << (mu - 1)
    return layer1, layer2, direct_from


def _soundness(num_vars: int, widths: Sequence[int], order: int) -> Fraction:
    mu, L = num_vars, len(widths)
    return Fraction(mu + mu * (L + 1) + (L - 1) + mu * (max(widths) + 1), order)


def plan(num_vars: int, inverse_perm: np.ndarray, field_order: int, *,
         groups: Sequence[int] | None = None) -> Plan:
    """Every (L, s) for L in ``groups`` (default 1..mu) and s in 1..5 plus auto."""
    mu = num_vars
    if len(inverse_perm) != 1 << mu:
        raise UsageError(f"expected a permutation of 2^{mu} = {1 << mu} entries, found {len(inverse_perm)}")
    choices = sorted(set(groups)) if groups else list(range(1, mu + 1))
    bad = [g for g in choices if not 1 <= g <= mu]
    if bad:
        raise UsageError(f"expected group counts between 1 and mu = {mu}, found {bad[0]}")
    bits = bit_tables(inverse_perm, mu)
    rows: list[PlanRow] = []
    for L in choices:
        parts = split_groups(mu, L)
        widths = tuple(len(g) for g in parts)
        counts, assumed = measure_buckets(bits, parts, mu)
        padded = counts + [[1 << (mu - k) for _ in parts] for k in range(len(counts) + 1, mu + 1)]
        sound = _soundness(mu, widths, field_order)
        for s in [*range(1, min(MAX_SWITCH_ROUND, mu + 1) + 1), None]:
            l1, l2, used = grouped_cost(mu, widths, padded, s)
            seen = tuple(sum(padded[k - 1]) for k in range(1, min(used, LAST_BUCKET_ROUND + 1)))
            rows.append(PlanRow(L, widths, s, used, l1, l2, sound, seen, assumed))
    best = min(rows, key=lambda r: (r.total, r.soundness, r.switch_round is not None))
    direct_sound = Fraction(mu + mu * (mu + 1), field_order)
    return Plan(mu, field_order, direct_cost(mu), direct_sound, tuple(rows), best)
