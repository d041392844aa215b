"""Finite fields: the named prime fields of the trade, any user prime, and
extensions F_p[X]/(q(X)) by a monic irreducible q.

A :class:`Field` is identified by its modulus p and, for an extension, its
polynomial q; :func:`get_field` returns the same object for the same field.
Scalar elements are canonical Python values: an ``int`` in [0, p) for a prime
field, a ``tuple`` of k such ints (constant term first) for a degree-k
extension. Vectors are numpy arrays handled by :mod:`stepper.field.kernels`
(1-D for a prime field, shape (n, k) for an extension); the ``v*`` methods
here are the public face of those kernels.

Invariants: every value a Field method returns is canonical. Parsing, the
byte encoding and display text (parse/encode/decode/fmt/to_json) live in
:mod:`stepper.field.elements`, which Field inherits; reading a `field` declaration
lives in :mod:`stepper.field.spec`.
"""

from __future__ import annotations

from functools import cached_property
from typing import TYPE_CHECKING, Any, Callable, TypeVar

from stepper.field.elements import Element, ElementCodec, clip_text, format_poly
from stepper.errors import FieldError
from stepper.field.admit import is_irreducible, is_prime

if TYPE_CHECKING:
    import random

    import numpy as np

    from stepper.field.kernels import Kernel

__all__ = ["Element", "Field", "get_field", "NAMED_PRIMES", "DEFAULT_IRREDUCIBLES",
           "format_poly", "clip_text", "power_by_squaring"]

T = TypeVar("T")


def power_by_squaring(mul: Callable[[T, T], T], base: T, e: int, one: T) -> T:
    """base^e for an integer e >= 0 with ``mul``, in about 2 log2(e) products (the first
    product by one is skipped): one routine for elements, vectors and columns of checks."""
    result: T | None = None
    while e:
        if e & 1:
            result = base if result is None else mul(result, base)
        e >>= 1
        if e:
            base = mul(base, base)
    return one if result is None else result

# Moduli with the document that defines each (the tests pin them).
NAMED_PRIMES: dict[str, int] = {
    # BN254 (alt_bn128) group order r: EIP-196 / EIP-197 ("curve_order").
    "bn254": 21888242871839275222246405745257275088548364400416034343698204186575808495617,
    # BLS12-381 subgroup order r: IETF draft-irtf-cfrg-pairing-friendly-curves, section 4.2.1.
    "bls12-381": 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001,
    # The following are common practice, no single defining document.
    "goldilocks": 2**64 - 2**32 + 1,
    "babybear": 2**31 - 2**27 + 1,
    "koalabear": 2**31 - 2**24 + 1,
    "mersenne31": 2**31 - 1,
}

# Default extension polynomials, constant term first, monic. Sources (from memory):
# X^4 - 11 over BabyBear, X^4 - 3 over KoalaBear and X^2 - 7 over Goldilocks are the
# binomials used by the Plonky3 / Plonky2 code bases. Mersenne31 has no irreducible
# binomial of degree 4 (4 does not divide p - 1), so we flatten the tower
# i^2 = -1, u^2 = 2 + i (the Plonky3 complex-extension tower) into u^4 - 4u^2 + 5.
DEFAULT_IRREDUCIBLES: dict[tuple[str, int], tuple[int, ...]] = {
    ("babybear", 4): (NAMED_PRIMES["babybear"] - 11, 0, 0, 0, 1),
    ("koalabear", 4): (NAMED_PRIMES["koalabear"] - 3, 0, 0, 0, 1),
    ("goldilocks", 2): (NAMED_PRIMES["goldilocks"] - 7, 0, 1),
    ("mersenne31", 4): (5, 0, NAMED_PRIMES["mersenne31"] - 4, 0, 1),
}

_DEFAULT_FIELDS = frozenset((NAMED_PRIMES[name], q) for (name, _), q in DEFAULT_IRREDUCIBLES.items())
_CACHE: dict[tuple[int, tuple[int, ...]], Field] = {}
_NAME_OF_PRIME = {p: name for name, p in NAMED_PRIMES.items()}


class Field(ElementCodec):
    """F_p (``irreducible == ()``) or F_p[X]/(q) with q = ``irreducible``."""

    __slots__ = ("p", "irreducible", "degree", "name", "base_bytes", "elem_bytes", "__dict__")

    def __init__(self, p: int, irreducible: tuple[int, ...] = ()) -> None:
        self.p = p
        self.irreducible = irreducible
        self.degree = max(1, len(irreducible) - 1)
        self.name = _NAME_OF_PRIME.get(p)
        self.base_bytes = (p.bit_length() + 7) // 8
        self.elem_bytes = self.base_bytes * self.degree

    # ----- identity -------------------------------------------------------------
    def __eq__(self, other: object) -> bool:
        return isinstance(other, Field) and (self.p, self.irreducible) == (other.p, other.irreducible)

    def __hash__(self) -> int:
        return hash((self.p, self.irreducible))

    def __repr__(self) -> str:
        return f"Field({self.describe()})"

    @property
    def is_extension(self) -> bool:
        return self.degree > 1

    @property
    def order(self) -> int:
        return self.p**self.degree

    @cached_property
    def base(self) -> Field:
        return get_field(self.p)

    def describe(self) -> str:
        """Human name, e.g. ``babybear^4 [X^4 - 11]`` or ``F_p p=101``."""
        head = self.name if self.name else f"F_p p={self.p}"
        if not self.is_extension:
            return head
        return f"{head}^{self.degree} [{format_poly(self.irreducible, self.p)}]"

    def spec(self) -> dict[str, Any]:
        """The `field` event payload (without the type) that names this field."""
        out: dict[str, Any] = {"name": self.name} if self.name else {"modulus": str(self.p)}
        if self.is_extension:
            out["extension_degree"] = self.degree
            out["irreducible"] = [str(c) for c in self.irreducible]
        return out

    # ----- scalar arithmetic ------------------------------------------------------
    @property
    def zero(self) -> Element:
        return (0,) * self.degree if self.is_extension else 0

    @property
    def one(self) -> Element:
        return (1,) + (0,) * (self.degree - 1) if self.is_extension else 1

    def embed(self, n: int) -> Element:
        """The image of the integer n (reduced mod p)."""
        if self.is_extension:
            return (n % self.p,) + (0,) * (self.degree - 1)
        return n % self.p

    def lift(self, e: Element) -> Element:
        """A base-field int embedded here, or an element of this field unchanged."""
        if self.is_extension and isinstance(e, int):
            return (e,) + (0,) * (self.degree - 1)
        return e

    def is_base(self, e: Element) -> bool:
        return isinstance(e, int) or not any(e[1:])

    def add(self, a: Element, b: Element) -> Element:
        p = self.p
        if isinstance(a, int):
            return (a + b) % p  # type: ignore[operator]
        return tuple((x + y) % p for x, y in zip(a, b))  # type: ignore[arg-type]

    def sub(self, a: Element, b: Element) -> Element:
        p = self.p
        if isinstance(a, int):
            return (a - b) % p  # type: ignore[operator]
        return tuple((x - y) % p for x, y in zip(a, b))  # type: ignore[arg-type]

    def neg(self, a: Element) -> Element:
        p = self.p
        if isinstance(a, int):
            return -a % p
        return tuple(-x % p for x in a)

    def mul(self, a: Element, b: Element) -> Element:
        p = self.p
        if isinstance(a, int):
            if isinstance(b, int):
                return a * b % p
            return tuple(a * y % p for y in b)
        if isinstance(b, int):
            return tuple(x * b % p for x in a)
        k = self.degree
        prod = [0] * (2 * k - 1)
        for i, x in enumerate(a):
            if x:
                for j, y in enumerate(b):
                    prod[i + j] += x * y
        q = self.irreducible
        for top in range(2 * k - 2, k - 1, -1):
            c = prod[top] % p
            if c:
                shift = top - k
                for i in range(k):
                    prod[shift + i] -= c * q[i]
        return tuple(c % p for c in prod[:k])

    def square(self, a: Element) -> Element:
        return self.mul(a, a)

    def pow(self, a: Element, e: int) -> Element:
        if e < 0:
            return self.pow(self.inv(a), -e)
        if isinstance(a, int):
            return pow(a, e, self.p)
        return power_by_squaring(self.mul, a, e, self.one)

    def inv(self, a: Element) -> Element:
        """Multiplicative inverse; raises FieldError for zero."""
        if self.is_zero(a):
            raise FieldError("expected a non-zero element to invert, found 0")
        if isinstance(a, int):
            return pow(a, -1, self.p)
        return self.pow(a, self.order - 2)

    def div(self, a: Element, b: Element) -> Element:
        return self.mul(a, self.inv(b))

    def is_zero(self, a: Element) -> bool:
        return a == 0 if isinstance(a, int) else not any(a)

    def random(self, rng: random.Random) -> Element:
        if self.is_extension:
            return tuple(rng.randrange(self.p) for _ in range(self.degree))
        return rng.randrange(self.p)

    # ----- vectors ------------------------------------------------------------------
    @cached_property
    def kernel(self) -> Kernel:
        from stepper.field.kernels import kernel_for

        return kernel_for(self)

    def vec(self, values: Any) -> np.ndarray:
        """A vector from canonical elements (ints or k-tuples) or an existing array
        (a 1-D array of base entries is embedded in an extension); every entry is
        checked, a non-canonical one raises FieldError naming it and p."""
        return self.kernel.array(values)

    def vlist(self, a: np.ndarray) -> list[Element]:
        return self.kernel.to_list(a)

    def vzeros(self, n: int) -> np.ndarray:
        return self.kernel.zeros(n)

    def vrandom(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.kernel.random(n, rng)

    def vadd(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.kernel.add(a, b)

    def vsub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.kernel.sub(a, b)

    def vneg(self, a: np.ndarray) -> np.ndarray:
        return self.kernel.neg(a)

    def vmul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return self.kernel.mul(a, b)

    def vmul_base(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Entrywise a * b for a vector a of this field and a vector b of the base
        field (1-D): k base products per entry instead of a full extension product."""
        if not self.is_extension:
            return self.kernel.mul(a, b)
        return self.kernel.mul_base(a, b)  # type: ignore[attr-defined, no-any-return]

    def vscale(self, a: np.ndarray, s: Element) -> np.ndarray:
        """Every entry of a times the scalar s."""
        return self.kernel.scale(a, s)

    def vinv(self, a: np.ndarray) -> np.ndarray:
        """Batch inverse (Montgomery's trick); raises FieldError on a zero entry."""
        return self.kernel.inv(a)

    def vsum(self, a: np.ndarray) -> Element:
        return self.kernel.sum(a)

    def vdot(self, a: np.ndarray, b: np.ndarray) -> Element:
        return self.kernel.dot(a, b)

    def veval(self, coeffs: list[Element], xs: np.ndarray) -> np.ndarray:
        """The polynomial sum coeffs[i] X^i evaluated at every entry of xs (Horner)."""
        return self.kernel.poly_eval(coeffs, xs)


def get_field(p: int, irreducible: tuple[int, ...] | None = None) -> Field:
    """The field F_p, or F_p[X]/(irreducible); checks primality and irreducibility once.

    A named prime and its default extension polynomial are taken as they are (the tests pin
    them against their defining documents and galois); any other modulus or polynomial is
    checked by :mod:`stepper.field.admit`, which loads galois."""
    if isinstance(p, bool) or not isinstance(p, int):
        raise FieldError(f"expected an integer modulus, found {type(p).__name__} {clip_text(repr(p))}")
    q = tuple(irreducible or ())
    if any(isinstance(c, bool) or not isinstance(c, int) for c in q):
        raise FieldError(f"expected integer polynomial coefficients, found {clip_text(repr(q))}")
    if len(q) == 2 and q[1] == 1:
        q = ()  # a degree-1 "extension" is the prime field itself
    key = (p, q)
    cached = _CACHE.get(key)
    if cached is not None:
        return cached
    if p not in _NAME_OF_PRIME and not is_prime(p):
        raise FieldError(f"expected a prime modulus, found {clip_text(str(p))}, which is not prime")
    if q:
        if q[-1] != 1:
            raise FieldError(f"expected a monic polynomial (leading coefficient 1), found leading coefficient {q[-1]}")
        for index, c in enumerate(q):
            if not 0 <= c < p:
                raise FieldError(
                    f"expected polynomial coefficients 0 <= c < p = {p}, found {clip_text(str(c))} at X^{index}"
                )
        if (p, q) not in _DEFAULT_FIELDS and not is_irreducible(q, p):
            raise FieldError(f"expected an irreducible polynomial over F_p, found {format_poly(q, p)} with p = {clip_text(str(p))}, which is reducible")
    field = Field(p, q)
    _CACHE[key] = field
    return field
