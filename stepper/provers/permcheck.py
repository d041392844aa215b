"""Permutation check, direct form: one sumcheck of degree mu + 1.

Statement: g(x) = f(sigma(x)) for every x in {0,1}^mu. For a random point
alpha, the multilinear extension of g at alpha equals

    sum over y of f(y) * eq(alpha, sigma^-1(y))
      = sum over y of f(y) * prod_i e_i(y),  e_i = (1 - alpha_i) + (2 alpha_i - 1) * s_i,

where s_i is the table of bit i of sigma^-1 (substitute y = sigma(x)). Each
e_i is multilinear, so the summand is a product of mu + 1 multilinear tables
and the prover does about (mu + 2) * mu products per entry pair in round 1
(n * mu^2 in all). The final value f~(r) * prod_i e~_i(r) is what a verifier
with oracle access to f and to the bits of sigma^-1 computes.

Pure: the channel decides where records go. :class:`PermStatement` is frozen.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from stepper.errors import InputError
from stepper.provers.bucketing import bit_tables
from stepper.provers.engine import ProductSummand, ProofRun, WitnessInstance, run_tables
from stepper.provers.openings import send_openings

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["PermStatement", "permutation_point", "select_table", "prove_permutation_direct"]


@dataclass(frozen=True, slots=True)
class PermStatement:
    """Tables f and g of 2^mu field elements and the permutation with
    g[x] = f[sigma[x]] claimed by the prover (it may be false: then the proof fails)."""

    f: np.ndarray
    g: np.ndarray
    sigma: np.ndarray

    def __post_init__(self) -> None:
        n = len(self.sigma)
        if n < 2 or n & (n - 1):
            raise InputError(f"expected a permutation of 2^mu entries (mu >= 1), found {n} entries")
        if len(self.f) != n or len(self.g) != n:
            raise InputError(f"expected f, g and sigma of one length, found {len(self.f)}, {len(self.g)}, {n}")
        if not np.array_equal(np.sort(self.sigma), np.arange(n)):
            raise InputError("expected sigma to be a permutation of 0..n-1, found repeated or missing entries")

    @property
    def num_vars(self) -> int:
        return len(self.sigma).bit_length() - 1

    def inverse(self) -> np.ndarray:
        """sigma^-1 as an index array."""
        inv = np.empty_like(self.sigma)
        inv[self.sigma] = np.arange(len(self.sigma), dtype=self.sigma.dtype)
        return inv


def permutation_point(channel: ProofChannel, statement: PermStatement, purpose: str) -> list[Element]:
    """alpha, bound to the proof so far and to f and g."""
    return channel.statement_challenges(purpose, [statement.f, statement.g], statement.num_vars)


def select_table(field: Field, bits: np.ndarray, when0: Element, when1: Element) -> np.ndarray:
    """The table with ``when1`` where the bit is set and ``when0`` elsewhere (no products)."""
    out = np.repeat(field.vec([when0]), len(bits), axis=0)
    out[bits.astype(bool)] = field.vec([when1])[0]
    return out


def prove_permutation_direct(channel: ProofChannel, counter: MulCounter, statement: PermStatement, *,
                             name: str = "permutation", form: str = "evals", prefix: str = "") -> ProofRun:
    """Prove g~(alpha) = sum_y f(y) * prod_i e_i(y) in one sumcheck of degree mu + 1.

    Glue sent: alpha as the ``value`` ``<prefix>alpha`` before the instance; after
    it the openings of f and of the bit tables s_i of sigma^-1, and ``final_expr``
    f * prod_i ((1 - alpha_i) + (2 alpha_i - 1) * s_i) over them (what a verifier
    with oracle access to f and the bits computes)."""
    field = counter.field
    mu = statement.num_vars
    counter.phase(f"{name}/setup")
    alpha = permutation_point(channel, statement, "permutation-point")
    claim = counter.mle(field.vec(statement.g), alpha)
    bits = bit_tables(statement.inverse(), mu)
    tables: dict[str, np.ndarray] = {"f": field.vec(statement.f)}
    committed: dict[str, np.ndarray] = {"f": tables["f"]}
    for i in range(mu):
        tables[f"e{i + 1}"] = select_table(field, bits[i], field.sub(field.one, alpha[i]), alpha[i])
        committed[f"s{i + 1}"] = field.vec(bits[i].astype(np.int64))
    summand = ProductSummand(tuple(tables))
    alpha_name = f"{prefix}alpha"
    channel.value(alpha_name, list(alpha))
    factors = [f"{prefix}f", *(f"(1 - {alpha_name}[{i}] + (2 * {alpha_name}[{i}] - 1) * {prefix}s{i + 1})"
                               for i in range(mu))]
    run, folded = run_tables(channel, counter, name, tables, summand, claim, form=form,  # type: ignore[arg-type]
                             glue={"final_expr": " * ".join(factors)})
    counter.phase(f"{name}/openings")
    ends = {"f": field.vlist(folded["f"])[0]}
    for i in range(mu):  # s~_i(r) from the folded e~_i(r) = (1 - alpha_i) + (2 alpha_i - 1) s~_i(r): one product
        slope = field.sub(field.add(alpha[i], alpha[i]), field.one)
        e_i = field.vlist(folded[f"e{i + 1}"])[0]
        if field.is_zero(slope):  # alpha_i = 1/2: e_i is constant, so fold the bits themselves
            ends[f"s{i + 1}"] = counter.mle(committed[f"s{i + 1}"], run.challenges)
        else:
            ends[f"s{i + 1}"] = counter.mul(field.sub(e_i, field.sub(field.one, alpha[i])), field.inv(slope))
    send_openings(channel, committed, ends, run.challenges, prefix=prefix)
    witness = WitnessInstance(name, {**tables, **committed}, summand.combine())
    return ProofRun((run,), (witness,), counter.per_phase())
