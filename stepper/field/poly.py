"""Round polynomials, multilinear extensions and the eq polynomial.

A round polynomial g of degree e is held canonically as its evaluations
g(0), g(1), ..., g(e) (:class:`RoundPoly`). The forms a prover may send are
converted here, in one place:

* ``evals``             g(0), g(1), ..., g(e)
* ``evals-no-1``        g(0), g(2), ..., g(e); g(1) = claim - g(0)
* ``coeffs``            c0, c1, ..., ce (constant first)
* ``coeffs-no-linear``  c0, c2, ..., ce; c1 = claim - 2 c0 - (c2 + ... + ce)

In the two compressed forms the local sum check g(0) + g(1) = claim holds by
construction; only a later round or the final check can expose a wrong claim.

Multilinear tables follow the event-stream contract: index bit j of a table
entry is the value of variable x_(j+1). A point is (x_1, ..., x_mu); a
high-first prover's challenges give the point reversed
(:func:`point_from_challenges`). A table's length must be 2^mu.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Literal, Sequence

from stepper.errors import InputError

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field

__all__ = [
    "FORMS",
    "ROUND_FORMS",
    "EQ_FACTORED",
    "ORDERS",
    "Form",
    "Order",
    "RoundPoly",
    "lagrange_weights",
    "lagrange_at",
    "interpolate",
    "coeffs_to_evals",
    "MAX_COEFFS",
    "eval_coeffs",
    "point_from_challenges",
    "mle_eval",
    "eq_table",
    "eq_eval",
]

Form = Literal["evals", "evals-no-1", "coeffs", "coeffs-no-linear"]
Order = Literal["low-first", "high-first"]
FORMS: tuple[str, ...] = ("evals", "evals-no-1", "coeffs", "coeffs-no-linear")
# eq-factored: q(0), ..., q(d-1) with g(X) = (eq prefix) * eq(w_k, X) * q(X); only the replay, which knows w
# and the earlier challenges, can rebuild g (stepper.verify.glue). Elsewhere the values read as q's evaluations.
EQ_FACTORED = "eq-factored"
ROUND_FORMS: tuple[str, ...] = FORMS + (EQ_FACTORED,)
ORDERS: tuple[str, ...] = ("low-first", "high-first")


@lru_cache(maxsize=256)
def lagrange_weights(p: int, d: int) -> tuple[int, ...]:
    """w_i = 1 / prod_{j != i} (i - j) mod p for the nodes 0..d (needs d < p), in O(d) products:
    prod_{j != i} (i - j) = i! * (-1)^(d-i) * (d-i)!, so only d! is inverted."""
    fact = [1] * (d + 1)
    for k in range(1, d + 1):
        fact[k] = fact[k - 1] * k % p
    inv_fact = [1] * (d + 1)
    inv_fact[d] = pow(fact[d], -1, p)
    for k in range(d, 0, -1):
        inv_fact[k - 1] = inv_fact[k] * k % p
    return tuple(inv_fact[i] * inv_fact[d - i] % p if (d - i) % 2 == 0 else (p - inv_fact[i] * inv_fact[d - i] % p) % p
                 for i in range(d + 1))


def lagrange_at(field: Field, evals: Sequence[Element], x: Element) -> Element:
    """The polynomial through (i, evals[i]) for i = 0..d, evaluated at x."""
    d = len(evals) - 1
    if d < 0:
        return field.zero
    if isinstance(x, int) and x <= d and not field.is_extension:
        return evals[x]
    if field.is_extension and field.is_base(x) and field.lift(x)[0] <= d:  # type: ignore[index]
        return field.lift(evals[field.lift(x)[0]])  # type: ignore[index]
    if d >= field.p:
        raise InputError(f"expected fewer than p = {field.p} evaluation points, found {d + 1}")
    weights = lagrange_weights(field.p, d)
    diffs = [field.sub(x, field.embed(j)) for j in range(d + 1)]
    prefix = [field.one] * (d + 2)
    for j in range(d + 1):
        prefix[j + 1] = field.mul(prefix[j], diffs[j])
    acc = field.zero
    suffix = field.one
    for i in range(d, -1, -1):
        term = field.mul(field.mul(prefix[i], suffix), field.mul(evals[i], weights[i]))
        acc = field.add(acc, term)
        suffix = field.mul(suffix, diffs[i])
    return acc


def eval_coeffs(field: Field, coeffs: Sequence[Element], x: Element) -> Element:
    """sum coeffs[i] x^i by Horner's rule."""
    acc = field.zero
    for c in reversed(coeffs):
        acc = field.add(field.mul(acc, x), field.lift(c))
    return acc


MAX_COEFFS = 1025  # coefficients decoded from one round (degree <= 1024 in the coefficient forms)


def coeffs_to_evals(field: Field, coeffs: Sequence[Element], count: int | None = None) -> tuple[Element, ...]:
    """g(0), ..., g(count - 1) for g given by coefficients (default count: len(coeffs)), by Horner's
    rule at every point at once (the work is n^2 field operations, in vector kernels: about 1 s at
    ``MAX_COEFFS`` in BN254, measured). More are refused: a hostile round could otherwise cost minutes."""
    n = len(coeffs) if count is None else count
    if len(coeffs) > MAX_COEFFS:
        raise InputError(f"expected at most {MAX_COEFFS} coefficients in a round (degree at most {MAX_COEFFS - 1} "
                         f"in the coefficient forms), found {len(coeffs)}")
    if n <= 8:
        return tuple(eval_coeffs(field, coeffs, field.embed(i)) for i in range(n))
    points = field.vec([field.embed(i) for i in range(n)])
    return tuple(field.vlist(field.veval([field.lift(c) for c in coeffs], points)))


def interpolate(field: Field, evals: Sequence[Element]) -> tuple[Element, ...]:
    """Coefficients (constant first) of the polynomial through (i, evals[i]), i = 0..d."""
    d = len(evals) - 1
    coeffs: list[Element] = [field.zero] * (d + 1)
    weights = lagrange_weights(field.p, d) if d >= 0 else ()
    for i in range(d + 1):
        # basis_i(X) = w_i * prod_{j != i} (X - j): expand the product
        basis: list[Element] = [field.one]
        for j in range(d + 1):
            if j == i:
                continue
            shifted = [field.zero, *basis]
            for t in range(len(basis)):
                shifted[t] = field.sub(shifted[t], field.mul(field.embed(j), basis[t]))
            basis = shifted
        scale = field.mul(field.lift(evals[i]), weights[i])
        for t in range(d + 1):
            coeffs[t] = field.add(coeffs[t], field.mul(scale, basis[t]))
    return tuple(coeffs)


@dataclass(frozen=True, slots=True)
class RoundPoly:
    """A round polynomial as its evaluations at 0..e; ``recovered`` names the value
    (``g(1)`` or ``c1``) that a compressed form left out, if any."""

    evals: tuple[Element, ...]
    recovered: str | None = None
    recovered_value: Element | None = None

    @property
    def sent_degree(self) -> int:
        """e: the degree bound implied by the number of values sent."""
        return len(self.evals) - 1

    def true_degree(self, field: Field) -> int:
        """The actual degree (-1 for the zero polynomial)."""
        coeffs = interpolate(field, self.evals)
        for i in range(len(coeffs) - 1, -1, -1):
            if not field.is_zero(coeffs[i]):
                return i
        return -1

    def at(self, field: Field, x: Element) -> Element:
        return lagrange_at(field, self.evals, x)

    def coeffs(self, field: Field) -> tuple[Element, ...]:
        return interpolate(field, self.evals)

    def sum01(self, field: Field) -> Element:
        """g(0) + g(1)."""
        if len(self.evals) == 1:
            return field.add(self.evals[0], self.evals[0])
        return field.add(self.evals[0], self.evals[1])

    @classmethod
    def from_form(cls, field: Field, form: str, values: Sequence[Element], claim: Element) -> RoundPoly:
        """Decode what a prover sent in ``form``, using the claim for compressed forms."""
        vals = [field.lift(v) for v in values]
        if form == "evals" or form == EQ_FACTORED:
            return cls(tuple(vals))
        if form == "coeffs":
            return cls(coeffs_to_evals(field, vals))
        if not vals:
            raise InputError(f"expected at least one value in form {form}, found none")
        if form == "evals-no-1":
            g1 = field.sub(claim, vals[0])
            return cls((vals[0], g1, *vals[1:]), "g(1)", g1)
        if form == "coeffs-no-linear":
            c1 = field.sub(claim, field.add(vals[0], vals[0]))
            for c in vals[1:]:
                c1 = field.sub(c1, c)
            full = [vals[0], c1, *vals[1:]]
            return cls(coeffs_to_evals(field, full), "c1", c1)
        raise InputError(f"expected a round form among {', '.join(FORMS)}, found {form!r}")

    def to_form(self, field: Field, form: str) -> tuple[Element, ...]:
        """The values a prover sends for this polynomial in ``form``."""
        if form == "evals" or form == EQ_FACTORED:
            return self.evals
        if form == "evals-no-1":
            return (self.evals[0], *self.evals[2:])
        coeffs = interpolate(field, self.evals)
        if form == "coeffs":
            return coeffs
        if form == "coeffs-no-linear":
            return (coeffs[0], *coeffs[2:])
        raise InputError(f"expected a round form among {', '.join(FORMS)}, found {form!r}")


def point_from_challenges(challenges: Sequence[Element], order: str) -> tuple[Element, ...]:
    """(x_1, ..., x_mu) from the challenges r_1, ..., r_mu in round order:
    low-first binds x_1 in round 1; high-first binds x_mu in round 1."""
    return tuple(challenges) if order == "low-first" else tuple(reversed(challenges))


def check_point_length(size: int, point: Sequence[Element]) -> None:
    """Refuse a table of ``size`` entries that is not 2^len(point) (a point for another table)."""
    if size != 1 << len(point):
        raise InputError(
            f"expected a table of 2^{len(point)} = {1 << len(point)} entries for a point of "
            f"{len(point)} coordinates, found {size} entries"
        )


def mle_eval(field: Field, table: np.ndarray, point: Sequence[Element]) -> Element:
    """The multilinear extension of ``table`` at (x_1, ..., x_mu), by folding x_1 first.

    A table of base-field entries (1-D) in an extension field is folded by the
    first coordinate with base-by-extension products, then stays in the extension."""
    check_point_length(len(table), point)
    cur = table
    coords = list(point)
    if field.is_extension and table.ndim == 1:
        base = field.base
        if not coords:
            return field.lift(base.vlist(table)[0])
        x = coords.pop(0)
        lo, hi = table[0::2], table[1::2]
        step = field.vmul_base(field.vec([x]), base.vsub(hi, lo))  # (1, k) broadcast against (n,)
        cur = field.vadd(field.vec(lo), step)
    for x in coords:
        lo, hi = cur[0::2], cur[1::2]
        cur = field.vadd(lo, field.vscale(field.vsub(hi, lo), x))
    return field.vlist(cur)[0]


def eq_table(field: Field, point: Sequence[Element]) -> np.ndarray:
    """eq(point, b) for every b in {0,1}^mu, entry i having x_(j+1) = bit j of i."""
    import numpy as np  # lazily: `stepper check` never needs it

    table = field.vec([field.one])
    for x in point:
        high = field.vscale(table, x)  # x_j = 1 half
        low = field.vsub(table, high)  # (1 - x_j) * table
        table = np.concatenate([low, high])  # x_j becomes the next-higher index bit
    return table


def eq_eval(field: Field, a: Sequence[Element], b: Sequence[Element]) -> Element:
    """eq(a, b) = prod (a_i b_i + (1 - a_i)(1 - b_i))."""
    acc = field.one
    for x, y in zip(a, b, strict=True):
        xy = field.mul(x, y)
        term = field.add(field.sub(field.sub(field.one, x), y), field.add(xy, xy))
        acc = field.mul(acc, term)
    return acc
