"""stepper.field.kernels.limb_rounds: the congruence checks of a block of rounds on limb rows agree with
plain Python integers (g(r) by the textbook Lagrange formula, reductions with ``%``) and with galois's
Lagrange interpolation, for honest values, values off by one, and targets left unreduced (plus p).

Moduli: the BN254 scalar field r (EIP-196 / EIP-197, alt_bn128 "curve_order"; value from memory,
stepper.field.field pins it the same way), the BLS12-381 scalar field r (IETF
draft-irtf-cfrg-pairing-friendly-curves, section 4.2.1; from memory), 2^127 - 1 (a Mersenne prime:
common practice, no source) and the first prime after 2^64 and the last before 2^512 (sympy.nextprime
and sympy.prevprime); sympy.isprime checks each below.
"""

from __future__ import annotations

import random
from functools import lru_cache

import galois
import numpy as np
import pytest
import sympy

from stepper.field.field import get_field
from stepper.field.kernels.limb_rounds import (horner_plan, montgomery_form, multiple_of_p, rounds_congruent,
                                               wide_congruent)
from stepper.field.kernels.limbs import LimbKernel

BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 curve_order
BLS12_381_R = 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001  # IETF draft, 4.2.1 (r)
MERSENNE127 = 2**127 - 1  # common practice, no source
ABOVE_2_64 = int(sympy.nextprime(2**64))
BELOW_2_512 = int(sympy.prevprime(2**512))
PRIMES = [BN254, BLS12_381_R, MERSENNE127, ABOVE_2_64, BELOW_2_512]


def test_the_moduli_are_prime():
    assert all(sympy.isprime(p) for p in PRIMES)


@lru_cache(maxsize=None)
def kernel(p: int) -> LimbKernel:
    return LimbKernel(get_field(p))


def major(k: LimbKernel, values: list[int]) -> np.ndarray:
    """Integers below 2^(29 n) as limb-major limbs (n, N), unchecked and unreduced."""
    return np.array([[(v >> (29 * i)) & ((1 << 29) - 1) for v in values] for i in range(k.n)], dtype=np.uint64)


def lagrange_at(p: int, values: list[int], x: int) -> int:
    """g(x) for g of degree < m through (j, values[j]): the textbook formula in plain integers."""
    m, total = len(values), 0
    for i, v in enumerate(values):
        num, den = 1, 1
        for j in range(m):
            if j != i:
                num, den = num * (x - j) % p, den * (i - j) % p
        total += v * num * pow(den, -1, p)
    return total % p


def check(p: int, rows: list[list[int]], points: list[int], targets: list[int], bound: int) -> list[bool] | None:
    k = kernel(p)
    m = len(rows[0])
    columns = np.stack([major(k, [row[j] for row in rows]) for j in range(m)])
    got = rounds_congruent(k, columns, major(k, points), major(k, targets), bound)
    return None if got is None else got.tolist()


@pytest.mark.parametrize("p", PRIMES)
@pytest.mark.parametrize("m", [1, 2, 3, 4, 5])
def test_honest_targets_match_whether_reduced_or_not_and_off_by_one_fail(p, m):
    rng = random.Random(f"{p}-{m}")
    rows = [[rng.randrange(p) for _ in range(m)] for _ in range(12)] + [[p - 1] * m, [0] * m]
    points = [rng.randrange(p) for _ in range(12)] + [p - 1, 0]
    values = [lagrange_at(p, row, x) for row, x in zip(rows, points)]
    assert horner_plan(kernel(p), m) is not None  # degrees up to 4 take the lazy path for every prime here
    assert check(p, rows, points, values, 2) == [True] * len(rows)
    assert check(p, rows, points, [v + p for v in values], 2) == [True] * len(rows)  # unreduced: below 2p
    assert check(p, rows, points, [(v + 1) % p for v in values], 2) == [False] * len(rows)
    assert check(p, rows, points, [(v - 1) % p + p for v in values], 2) == [False] * len(rows)


@pytest.mark.parametrize("p", PRIMES + [int(sympy.nextprime(2**86)), int(sympy.nextprime(2**288))])
def test_every_round_size_with_a_lazy_plan_matches_plain_integers(p):
    # up to 13 values (12! times a difference: limbs past 2^53 reach multiple_of_p, whose estimate stays
    # within its half unit because each limb's weighted part is bounded by the quotient bound); the two
    # extra primes (sympy.nextprime) have the most room above p, so the longest lazy plans
    sizes = [m for m in range(1, 16) if horner_plan(kernel(p), m) is not None]
    assert sizes == list(range(1, max(sizes) + 1))
    for m in sizes:
        rng = random.Random(f"{p}-{m}-all")
        rows = [[rng.randrange(p) for _ in range(m)] for _ in range(10)] + [[p - 1] * m, [0] * m]
        points = [rng.randrange(p) for _ in range(10)] + [p - 1, p - 2]
        values = [lagrange_at(p, row, x) for row, x in zip(rows, points)]
        assert check(p, rows, points, [v + p for v in values], 2) == [True] * len(rows)
        assert check(p, rows, points, [(v + 1) % p for v in values], 2) == [False] * len(rows)
        assert check(p, rows, points, [(v - 1) % p + p for v in values], 2) == [False] * len(rows)


@pytest.mark.parametrize("p", [BN254, BLS12_381_R])
def test_degree_three_agrees_with_galois_lagrange_interpolation(p):
    gf = galois.GF(p, primitive_element=2, verify=False, compile="python-calculate")
    rng = random.Random(p)
    rows = [[rng.randrange(p) for _ in range(4)] for _ in range(8)]
    points = [rng.randrange(p) for _ in range(8)]
    expected = [int(galois.lagrange_poly(gf([0, 1, 2, 3]), gf(row))(gf(x))) for row, x in zip(rows, points)]
    assert check(p, rows, points, expected, 1) == [True] * len(rows)
    assert check(p, rows, points, [(e + 1) % p for e in expected], 1) == [False] * len(rows)


def test_long_rounds_have_no_lazy_plan_where_partial_values_could_reach_r():
    # BN254: R / p is about 2^7.4; six values need a bound past it (the canonical path takes them)
    assert horner_plan(kernel(BN254), 5) is not None
    assert horner_plan(kernel(BN254), 6) is None
    assert check(BN254, [[1] * 6], [5], [1], 1) is None


@pytest.mark.parametrize("p", PRIMES)
def test_wide_samples_are_congruent_to_their_reduction_only(p):
    k = kernel(p)
    wide = (p.bit_length() + 128 + 7) // 8  # the schedule's wide sample: ceil((bits(p) + 128) / 8) bytes
    rng = random.Random(p)
    samples = [bytes(wide), b"\xff" * wide, (p).to_bytes(wide, "little"), (p - 1).to_bytes(wide, "little")]
    samples += [rng.randbytes(wide) for _ in range(40)]
    rows = np.frombuffer(b"".join(samples), dtype=np.uint8).reshape(len(samples), wide)
    reduced = [int.from_bytes(s, "little") % p for s in samples]
    assert wide_congruent(k, rows, major(k, reduced).T).tolist() == [True] * len(samples)
    assert wide_congruent(k, rows, major(k, [(v + 1) % p for v in reduced]).T).tolist() == [False] * len(samples)
    assert wide_congruent(k, rows, major(k, [(v - 1) % p for v in reduced]).T).tolist() == [False] * len(samples)


@pytest.mark.parametrize("p", PRIMES)
def test_multiple_of_p_says_yes_for_multiples_up_to_the_bound_and_no_next_to_them(p):
    k = kernel(p)
    bound = 40
    multiples = [j * p for j in range(bound + 1)]
    assert multiple_of_p(k, major(k, multiples).view(np.int64).copy(), bound).tolist() == [True] * len(multiples)
    near = [v + d for v in multiples for d in (-1, 1) if v + d >= 0] + [p // 2, 3 * p + p // 2]
    assert multiple_of_p(k, major(k, near).view(np.int64).copy(), bound).tolist() == [False] * len(near)


@pytest.mark.parametrize("p", PRIMES)
def test_montgomery_form_is_x_times_r_mod_p_below_2p_with_carried_limbs(p):
    k = kernel(p)
    r_factor = 1 << (29 * k.n)  # R, the Montgomery radix of the limb rows
    rng = random.Random(f"mont-{p}")
    top = r_factor - 1  # every limb 2^29 - 1: the largest sum the fold can make
    values = [0, 1, p - 1, p, 2 * p - 1, top, top - p] + [rng.randrange(p) for _ in range(40)]
    values += [rng.randrange(r_factor) for _ in range(40)]  # unreduced inputs, as the kernel may hand over
    got = montgomery_form(k, major(k, values))
    assert ((got >> np.uint64(29)) == 0).all()  # every limb carried (below 2^29)
    as_ints = [sum(int(got[i, c]) << (29 * i) for i in range(k.n)) for c in range(len(values))]
    # plain Python integers: x R mod p, and the value itself below 2p (the bound the Horner plan assumes)
    assert [v % p for v in as_ints] == [x * r_factor % p for x in values]
    assert all(v < 2 * p for v in as_ints)


@pytest.mark.parametrize("p", PRIMES + [int(sympy.nextprime(2**288)), int(sympy.prevprime(2**290))])
def test_montgomery_form_stays_in_range_where_the_folded_sum_is_a_multiple_of_p_or_next_to_one(p):
    # The fold sums to x R mod p plus some multiple of p, so x = 0 mod p lands exactly on a multiple of p
    # and x = +-R^-1 mod p one above or below one: the values where rounding the floating-point quotient
    # decides between two results (the extra primes, sympy.nextprime / prevprime, are the first with
    # n = 11 limbs and the last with n = 10, where the product carries change). Plain Python integers.
    k = kernel(p)
    r_factor = 1 << (29 * k.n)
    r_inverse = pow(r_factor, -1, p)
    largest = (r_factor - 1) // p  # the most multiples of p below 2^(29 n)
    values = []
    for multiple in (0, 1, 2, largest // 2, largest - 1, largest):
        values += [multiple * p, multiple * p + r_inverse, multiple * p + p - r_inverse]
    values = [v for v in values if v < r_factor]
    got = montgomery_form(k, major(k, values))
    as_ints = [sum(int(got[i, c]) << (29 * i) for i in range(k.n)) for c in range(len(values))]
    assert [v % p for v in as_ints] == [x * r_factor % p for x in values]
    assert all(p // 2 - 1 < v < 3 * p // 2 + 1 for v in as_ints)  # the range the docstring argues
    assert [v for v, x in zip(as_ints, values) if x % p == 0] == [p] * sum(x % p == 0 for x in values)
