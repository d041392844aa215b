"""Admitting a user-supplied field: is the modulus prime, is the polynomial irreducible.

Both questions go to the galois library (a run-time dependency for exactly this and
nothing on the hot paths): galois is slow to import (about 0.7 s, it pulls in numba),
so it is imported here, inside the functions, and only for a field that is neither
one of the named primes nor a named prime with its default extension polynomial.
`stepper check` of a transcript in a named field never loads it.
"""

from __future__ import annotations

from typing import Any

from stepper.errors import FieldError

__all__ = ["is_prime", "is_irreducible"]


def _galois() -> Any:
    try:
        import galois
    except ImportError as err:  # a broken install, not bad input
        raise FieldError(f"expected the galois library to check a user-supplied field, found none ({err}); "
                         "reinstall stepper with its dependencies") from None
    return galois


def is_prime(n: int) -> bool:
    """True when n is prime (galois.is_prime: deterministic Miller-Rabin bases where they are
    known to suffice, a strong Lucas test above)."""
    if n < 2:
        return False
    return bool(_galois().is_prime(n))


def is_irreducible(q: tuple[int, ...], p: int) -> bool:
    """True when q (constant term first, coefficients in [0, p)) is irreducible over F_p."""
    if len(q) < 2 or q[-1] % p == 0:
        return False
    if len(q) == 2:
        return True
    galois = _galois()
    # The irreducibility test never uses a primitive element; naming 2 without verifying it
    # spares galois factoring p - 1, which for a 254-bit p could take hours. Plain Python
    # arithmetic ("python-calculate") avoids compiling numba loops for a one-off question.
    gf = galois.GF(p, primitive_element=2 % p or 1, verify=False, compile="python-calculate")
    return bool(galois.Poly(list(reversed(q)), field=gf).is_irreducible())
