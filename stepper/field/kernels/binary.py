"""The vector kernel of a binary extension field GF(2^k) = F_2[X]/(q), multiplying through galois.

Why this field kind and no other (measured with ``python3 bench/binary_fields.py --odd``, CPU
time per product): galois multiplies GF(2^k), k <= 16, by log/antilog look-up tables on elements
packed into one integer (bit i = coefficient of X^i); with the packing and unpacking of our rows
that is 28-56 ns for k = 8..16, against 135-306 ns for :class:`ExtensionKernel`'s compiled
schoolbook loop (k^2 modular products): 5-6x. In odd characteristic galois is no help: above
2^20 elements it computes instead of looking up, 8x slower than ours (GF(3^16)); below that its
tables are fast but take seconds to build, growing with the field (3.4 s for GF(3^10), break-even
after 2*10^7 products, and tens of seconds for fields near 2^20); over any prime with p^k >= 2^63
it runs Python integers. So :func:`kernel_for` picks this kernel for p = 2 and k >= 2 only.

Elements keep the contract's form: rows of k coefficients (0 or 1), constant term first, shape
(n, k), exactly as :class:`ExtensionKernel` has them; additions, sums and conversions are its
own. Only products and batch inverses are packed into integers, handed to galois, and unpacked.

Building galois's field costs about 1 CPU-second once per process (it compiles numba code for
each new field; more wall time on a busy machine), paid back after 4-9 million products at the
measured saving. So, as with a tool rented until the rent paid would have bought it, this kernel
uses :class:`ExtensionKernel`'s loops until it has multiplied ``GALOIS_AFTER`` (2^22) entries in
large arrays, and galois from then on: never more than about twice the cost of the better
choice made in hindsight. Large means ``compiled_min`` entries or more, and
``STEPPER_KERNELS=numpy`` keeps it off galois, as for every other compiled path. galois is
imported only then.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from stepper.errors import FieldError
from stepper.field.kernels.base import COMPILED_MIN, Kernel
from stepper.field.kernels.extension import ExtensionKernel

if TYPE_CHECKING:
    from stepper.field.shape import FieldShape

__all__ = ["BinaryFieldKernel", "GALOIS_AFTER"]

GALOIS_AFTER = 1 << 22  # entries multiplied in large arrays before galois's set-up pays back
_PACKED_BITS = 16  # extension degrees go up to 16: one uint16 per element


class BinaryFieldKernel(ExtensionKernel):
    """GF(2^k), 2 <= k <= 16: rows of k bits; large products by galois's look-up tables."""

    def __init__(
        self, field: FieldShape, base: Kernel, compiled_min: int = COMPILED_MIN, galois_after: int | None = None
    ) -> None:
        if field.p != 2 or not 2 <= field.degree <= _PACKED_BITS:
            raise FieldError(f"expected GF(2^k) with 2 <= k <= {_PACKED_BITS}, found {field.describe()}")
        super().__init__(field, base, compiled_min)
        self.galois_after = GALOIS_AFTER if galois_after is None else galois_after
        self.multiplied = 0  # entries multiplied in large arrays so far
        self._galois_field: Any = None
        self._bit_weights = np.uint64(1) << np.arange(self.k, dtype=np.uint64)

    # ----- packing ------------------------------------------------------------------
    def pack(self, a: np.ndarray) -> np.ndarray:
        """Rows of k bits as uint16 integers, bit i the coefficient of X^i."""
        return (np.asarray(a, dtype=np.uint64) @ self._bit_weights).astype(np.uint16)  # 4x np.packbits's speed

    def unpack(self, packed: np.ndarray) -> np.ndarray:
        """The inverse of :meth:`pack`: shape (n, k) uint64 rows."""
        octets = np.ascontiguousarray(packed, dtype="<u2").view(np.uint8).reshape(-1, 2)
        bits = np.unpackbits(octets, axis=1, bitorder="little")[:, : self.k]
        return bits.astype(np.uint64)

    def galois_field(self) -> Any:
        """galois's GF(2^k) with this field's polynomial, built on first need. Its log tables
        need a true primitive element, which galois finds (a fraction of the set-up)."""
        if self._galois_field is None:
            import galois

            poly = galois.Poly(list(reversed(self.field.irreducible)), field=galois.GF(2))
            self._galois_field = galois.GF(
                2**self.k,
                irreducible_poly=poly,
                primitive_element=galois.primitive_element(poly),
                verify=False,
                compile="jit-lookup",
            )
        return self._galois_field

    def _galois_ready(self, a: np.ndarray, b: np.ndarray | None = None) -> bool:
        """Whether this product goes to galois: a large array, compiled paths allowed, and
        enough large products so far to have paid for the set-up (counting this one)."""
        if self._galois_field is not None:
            return self._use_compiled(a, b) is not None
        if self._use_compiled(a, b) is None:
            return False
        self.multiplied += max(len(a), len(b) if b is not None else 0)
        return self.multiplied >= self.galois_after

    # ----- arithmetic ---------------------------------------------------------------
    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        if not self._galois_ready(a, b):
            return super().mul(a, b)
        gf = self.galois_field()
        product = np.multiply(self.pack(a).view(gf), self.pack(b).view(gf))
        return self.unpack(product.view(np.ndarray))

    def inv(self, a: np.ndarray) -> np.ndarray:
        if not self._galois_ready(a):
            return super().inv(a)
        packed = self.pack(a)
        if not packed.all():
            raise FieldError(
                "expected every entry to be non-zero for batch inversion, found 0 at index "
                f"{int(np.flatnonzero(packed == 0)[0])}"
            )
        gf = self.galois_field()
        return self.unpack(np.reciprocal(packed.view(gf)).view(np.ndarray))
