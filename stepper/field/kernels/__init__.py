"""Vectorised field arithmetic on numpy arrays, one kernel per kind of field.

* :class:`SmallPrimeKernel` for p < 2^32 (uint64 entries);
* :class:`GoldilocksKernel` for p = 2^64 - 2^32 + 1 (uint64 entries, 32-bit limbs);
* :class:`Word64Kernel` for any other prime below 2^64 (uint64 entries, Montgomery);
* :class:`ObjectKernel` for primes above 2^64 (object arrays of Python ints);
* :class:`ExtensionKernel` for F_p[X]/(q) (shape (n, k) arrays over a base kernel);
* :class:`BinaryFieldKernel` for GF(2^k): the same arrays, large products through galois.

:func:`kernel_for` picks one. Every operation takes and returns canonical
arrays and never loops in Python over entries; large arrays run through the
numba loops of :mod:`stepper.field.kernels.compiled`, imported on first need.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from stepper.field.kernels.base import COMPILED_MIN, Kernel, load_compiled
from stepper.field.kernels.binary import GALOIS_AFTER, BinaryFieldKernel
from stepper.field.kernels.extension import ExtensionKernel
from stepper.field.kernels.prime import GOLDILOCKS, GoldilocksKernel, ObjectKernel, SmallPrimeKernel, Word64Kernel

if TYPE_CHECKING:
    from stepper.field.shape import FieldShape

__all__ = [
    "Kernel",
    "SmallPrimeKernel",
    "GoldilocksKernel",
    "Word64Kernel",
    "ObjectKernel",
    "ExtensionKernel",
    "BinaryFieldKernel",
    "kernel_for",
    "load_compiled",
    "GOLDILOCKS",
    "COMPILED_MIN",
    "GALOIS_AFTER",
]


def kernel_for(field: FieldShape, compiled_min: int = COMPILED_MIN) -> Kernel:
    """The kernel for ``field``; arrays of ``compiled_min`` entries or more use numba."""
    base: Kernel
    if field.p < 2**32:
        base = SmallPrimeKernel(field.base, compiled_min)
    elif field.p == GOLDILOCKS:
        base = GoldilocksKernel(field.base, compiled_min)
    elif field.p < 2**64:
        base = Word64Kernel(field.base, compiled_min)
    else:
        base = ObjectKernel(field.base, compiled_min)
    if field.is_extension and field.p == 2:
        return BinaryFieldKernel(field, base, compiled_min)
    return ExtensionKernel(field, base, compiled_min) if field.is_extension else base
