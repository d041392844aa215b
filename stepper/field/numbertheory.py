"""Primality and irreducibility tests on plain Python integers.

Used once per field construction, never on hot paths. Miller-Rabin with the
first 13 prime bases is deterministic below 3.3 * 10^24 (common practice, no
source: the bound is Sorenson and Webster's, from memory); above it we add 32
pseudo-random bases drawn from a fixed seed, so a composite passes with
probability below 4^-32. Polynomials over F_p are tuples of ints, constant term first.
"""

from __future__ import annotations

import random

__all__ = ["is_probable_prime", "is_irreducible", "polymod_pow_x"]

_SMALL_PRIMES = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41)
_DETERMINISTIC_LIMIT = 3_317_044_064_679_887_385_961_981


def is_probable_prime(n: int) -> bool:
    """True when n is prime (deterministic below 3.3e24, error < 4^-32 above)."""
    if n < 2:
        return False
    for q in _SMALL_PRIMES:
        if n % q == 0:
            return n == q
    d, s = n - 1, 0
    while d % 2 == 0:
        d //= 2
        s += 1
    bases = list(_SMALL_PRIMES)
    if n >= _DETERMINISTIC_LIMIT:
        rng = random.Random(0x5EED)
        bases += [rng.randrange(2, n - 1) for _ in range(32)]
    for a in bases:
        x = pow(a, d, n)
        if x in (1, n - 1):
            continue
        for _ in range(s - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


def _trim(a: list[int]) -> list[int]:
    while a and a[-1] == 0:
        a.pop()
    return a


def _polymulmod(a: list[int], b: list[int], q: tuple[int, ...], p: int) -> list[int]:
    prod = [0] * (len(a) + len(b) - 1) if a and b else []
    for i, ai in enumerate(a):
        if ai:
            for j, bj in enumerate(b):
                prod[i + j] = (prod[i + j] + ai * bj) % p
    return _polyrem(prod, q, p)


def _polyrem(a: list[int], q: tuple[int, ...], p: int) -> list[int]:
    a = _trim([x % p for x in a])
    k = len(q) - 1
    lead_inv = pow(q[-1], -1, p)
    while len(a) > k:
        c = a[-1] * lead_inv % p
        shift = len(a) - 1 - k
        for i, qi in enumerate(q):
            a[shift + i] = (a[shift + i] - c * qi) % p
        _trim(a)
    return a


def _polygcd(a: list[int], b: list[int], p: int) -> list[int]:
    a, b = _trim(list(a)), _trim(list(b))
    while b:
        a, b = b, _polyrem(a, tuple(b), p)
    return a


def polymod_pow_x(e: int, q: tuple[int, ...], p: int) -> list[int]:
    """X^e mod q(X) over F_p, by square and multiply."""
    result: list[int] = [1]
    base: list[int] = _polyrem([0, 1], q, p)
    while e:
        if e & 1:
            result = _polymulmod(result, base, q, p)
        base = _polymulmod(base, base, q, p)
        e >>= 1
    return result


def _prime_factors(n: int) -> list[int]:
    factors, f = [], 2
    while f * f <= n:
        if n % f == 0:
            factors.append(f)
            while n % f == 0:
                n //= f
        f += 1
    if n > 1:
        factors.append(n)
    return factors


def is_irreducible(q: tuple[int, ...], p: int) -> bool:
    """Rabin's test: q of degree k is irreducible over F_p iff X^(p^k) = X mod q
    and gcd(X^(p^(k/t)) - X, q) = 1 for every prime t dividing k."""
    k = len(q) - 1
    if k < 1 or q[-1] % p == 0:
        return False
    if k == 1:
        return True
    x = [0, 1]
    if _trim(polymod_pow_x(p**k, q, p)) != x:
        return False
    for t in _prime_factors(k):
        h = polymod_pow_x(p ** (k // t), q, p)
        h = h + [0] * max(0, 2 - len(h))
        h[1] = (h[1] - 1) % p
        if len(_polygcd(list(q), _trim(h), p)) != 1:
            return False
    return True
