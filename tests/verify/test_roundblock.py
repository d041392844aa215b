"""stepper.verify.roundblock: the block checks of many rounds at once, against references outside stepper.

* ``evaluate_at`` against Lagrange interpolation computed by galois (``galois.lagrange_poly``
  over ``galois.GF(p)``) and by sympy (``sympy.interpolate`` over the rationals, reduced mod p);
* ``reduce_wide`` against plain Python integers: ``int.from_bytes(row[:wide], "little") % p``;
* ``block_passes`` against an honest prover written here with plain integers (random round
  polynomials with g(0)+g(1) = claim, g(r) carried forward: common practice, no source),
  and every single-element corruption of its blocks.

Moduli: BabyBear 2^31 - 2^27 + 1, KoalaBear 2^31 - 2^24 + 1, Goldilocks 2^64 - 2^32 + 1
(common practice, no source; tests/field/test_field.py pins the same values), 65521 (the largest
prime below 2^16, from memory; checked with sympy.isprime below) and the small primes 97 and 7.
"""

from __future__ import annotations

import random
from fractions import Fraction

import galois
import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.field.field import get_field
from stepper.verify.roundblock import block_kernel, block_passes, evaluate_at, reduce_wide, supports

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source
KOALABEAR = 2**31 - 2**24 + 1  # common practice, no source
GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
PRIMES = {"babybear": BABYBEAR, "koalabear": KOALABEAR, "goldilocks": GOLDILOCKS, "p97": 97, "p7": 7,
          "p65521": 65521}
_GF: dict[int, type] = {}


def gf(p: int) -> type:
    if p not in _GF:
        _GF[p] = galois.GF(p, compile="python-calculate")  # no JIT: seconds saved per field
    return _GF[p]


def kernel(p: int):
    return block_kernel(get_field(p))


def u64(values) -> np.ndarray:
    return np.array(values, dtype=np.uint64)


def test_test_moduli_are_prime_per_sympy():
    # reference: sympy.isprime
    assert all(sympy.isprime(p) for p in PRIMES.values())


# ----- evaluate_at ----------------------------------------------------------------------


def galois_values(p: int, rows: list[list[int]], points: list[int]) -> list[int]:
    """g_i(points[i]) with g_i the Lagrange polynomial through (j, rows[i][j]), by galois."""
    field = gf(p)
    out = []
    for row, x in zip(rows, points):
        poly = galois.lagrange_poly(field(list(range(len(row)))), field(row))
        out.append(int(poly(field(x))))
    return out


def sympy_values(p: int, rows: list[list[int]], points: list[int]) -> list[int]:
    """The same through sympy.interpolate over Q, then reduced mod p (denominators are
    products of integers below m <= p, so invertible mod p)."""
    x = sympy.Symbol("x")
    out = []
    for row, point in zip(rows, points):
        poly = sympy.interpolate(list(zip(range(len(row)), row)), x)
        value = Fraction(str(sympy.Rational(poly.subs(x, point))))
        out.append(value.numerator * pow(value.denominator, -1, p) % p)
    return out


@pytest.mark.parametrize("name", ["babybear", "koalabear", "goldilocks", "p97", "p7"])
@pytest.mark.parametrize("degree", range(7))
def test_evaluate_at_equals_galois_and_sympy_lagrange_interpolation(name, degree):
    p = PRIMES[name]
    m = degree + 1
    if m > p:
        pytest.skip("m <= p only")
    rng = random.Random(f"{name}-{degree}")
    rows = [[rng.randrange(p) for _ in range(m)] for _ in range(6)]
    rows.append([p - 1] * m)  # the largest canonical values
    points = [rng.randrange(p) for _ in rows[:-2]] + [p - 1, 0]
    got = evaluate_at(kernel(p), u64(rows), u64(points)).tolist()
    assert got == galois_values(p, rows, points)
    assert got == sympy_values(p, rows, points)


@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_evaluate_at_agrees_with_galois_on_random_blocks(data):
    p = data.draw(st.sampled_from(sorted(PRIMES.values())))
    m = data.draw(st.integers(1, min(7, p)))
    n = data.draw(st.integers(1, 8))
    rows = [[data.draw(st.integers(0, p - 1)) for _ in range(m)] for _ in range(n)]
    points = [data.draw(st.integers(0, p - 1)) for _ in range(n)]
    assert evaluate_at(kernel(p), u64(rows), u64(points)).tolist() == galois_values(p, rows, points)


def test_evaluate_at_the_nodes_gives_back_the_evaluations():
    # An interpolating polynomial passes through its points (common practice, no source).
    for p in (7, 97, GOLDILOCKS):
        m = min(p, 5)
        rows = [[(3 * i + 5 * j + 1) % p for j in range(m)] for i in range(m)]
        points = list(range(m))
        got = evaluate_at(kernel(p), u64(rows), u64(points)).tolist()
        assert got == [rows[i][i] for i in range(m)]


# ----- reduce_wide ----------------------------------------------------------------------


def digest_rows(rng: random.Random, count: int) -> list[bytes]:
    rows = [bytes(32), b"\xff" * 32, bytes(24) + b"\xff" * 8, b"\xff" * 24 + bytes(8)]
    rows += [rng.randbytes(32) for _ in range(count)]
    return rows


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_reduce_wide_equals_python_integers_mod_p(name):
    p = PRIMES[name]
    rng = random.Random(name)
    rows = digest_rows(rng, 60)
    block = np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), 32)
    schedule_wide = (p.bit_length() + 128 + 7) // 8  # transcripts/FIAT-SHAMIR.md: ceil((bits(p) + 128) / 8)
    for wide in sorted({1, 8, 9, 16, 17, schedule_wide, 23, 24}):
        got = reduce_wide(kernel(p), block, wide).tolist()
        assert got == [int.from_bytes(row[:wide], "little") % p for row in rows], wide


def test_reduce_wide_ignores_bytes_past_the_wide_prefix():
    p = GOLDILOCKS
    low = random.Random(1).randbytes(24)
    block = np.frombuffer(low + bytes(8) + low + b"\xff" * 8, dtype=np.uint8).reshape(2, 32)
    first, second = reduce_wide(kernel(p), block, 24).tolist()
    assert first == second == int.from_bytes(low, "little") % p


# ----- block_passes: an honest prover in plain integers ---------------------------------


def lagrange_at(p: int, evals: list[int], x: int) -> int:
    """The polynomial through (j, evals[j]) at x, the textbook formula (plain integers)."""
    total = 0
    for i, y in enumerate(evals):
        num = den = 1
        for j in range(len(evals)):
            if j != i:
                num = num * (x - j) % p
                den = den * (i - j) % p
        total += y * num * pow(den, -1, p)
    return total % p


class Block:
    """Instances of an honest prover, flattened the way block_passes takes them."""

    def __init__(self, p: int, m: int, num_vars: list[int], seed: object, small: bool = False) -> None:
        rng = random.Random(str(seed))
        self.p, self.m = p, m
        pick = (lambda: rng.randrange(min(p, 2**31))) if small else (lambda: rng.randrange(p))
        self.evals: list[list[int]] = []
        self.challenges: list[int] = []
        self.starts: list[int] = []
        self.claims: list[int] = []
        self.finals: list[int] = []
        for n in num_vars:
            self.starts.append(len(self.evals))
            claim = pick()
            self.claims.append(claim)
            for _ in range(n):
                if m == 1:
                    g = [claim * pow(2, -1, p) % p]  # a constant g with 2 g = claim
                else:
                    g0 = pick()
                    g = [g0, (claim - g0) % p] + [pick() for _ in range(m - 2)]
                # a challenge off the nodes 0..m-1, so that every evaluation moves g(r)
                r = rng.randrange(m, p)
                self.evals.append(g)
                self.challenges.append(r)
                claim = lagrange_at(p, g, r)
            self.finals.append(claim)

    def passes(self, with_rederived: bool = True, **replace: list[int] | list[list[int]]) -> bool:
        parts = {"evals": self.evals, "challenges": self.challenges, "claims": self.claims,
                 "finals": self.finals, "rederived": self.challenges, **replace}
        return block_passes(kernel(self.p), u64(parts["evals"]), u64(parts["challenges"]), np.array(self.starts),
                            u64(parts["claims"]), u64(parts["finals"]),
                            u64(parts["rederived"]) if with_rederived else None)


CASES = [("goldilocks", 4), ("goldilocks", 1), ("babybear", 3), ("koalabear", 2), ("p97", 5), ("p7", 4),
         ("p7", 1), ("p65521", 3)]


@pytest.mark.parametrize("name, m", CASES)
def test_honest_blocks_pass_with_and_without_rederived_challenges(name, m):
    block = Block(PRIMES[name], m, [3, 1, 5, 2], (name, m))
    assert block.passes() and block.passes(with_rederived=False)


@pytest.mark.parametrize("name, m", CASES)
def test_every_single_evaluation_changed_fails(name, m):
    block = Block(PRIMES[name], m, [2, 4, 1, 3], (name, m, "evals"))
    p = block.p
    for i in range(len(block.evals)):
        for j in range(m):
            evals = [row[:] for row in block.evals]
            evals[i][j] = (evals[i][j] + 1) % p
            assert not block.passes(evals=evals), (i, j)
            assert not block.passes(with_rederived=False, evals=evals), (i, j)


@pytest.mark.parametrize("name, m", CASES)
def test_every_challenge_differing_from_the_rederived_one_fails(name, m):
    block = Block(PRIMES[name], m, [2, 3, 1], (name, m, "challenges"))
    for i in range(len(block.challenges)):
        changed = block.challenges[:]
        changed[i] = (changed[i] + 1) % block.p
        assert not block.passes(challenges=changed), i
        assert not block.passes(rederived=changed), i


@pytest.mark.parametrize("name, m", CASES)
def test_every_final_and_every_claim_changed_fails(name, m):
    block = Block(PRIMES[name], m, [1, 4, 2, 2, 3], (name, m, "ends"))
    for i in range(len(block.claims)):
        finals, claims = block.finals[:], block.claims[:]
        finals[i] = (finals[i] + 1) % block.p
        claims[i] = (claims[i] + 1) % block.p
        assert not block.passes(finals=finals), i
        assert not block.passes(claims=claims), i


def test_claims_are_not_carried_across_instances():
    # two instances swapped claims: each instance's first round must meet its own claim
    block = Block(BABYBEAR, 3, [2, 2], "swap")
    assert not block.passes(claims=block.claims[::-1])
    assert not block.passes(finals=block.finals[::-1])


@pytest.mark.parametrize("name, m", [("goldilocks", 3), ("babybear", 2), ("p97", 4), ("p7", 3), ("p65521", 2)])
def test_every_value_at_or_above_p_fails_even_when_congruent(name, m):
    p = PRIMES[name]
    block = Block(p, m, [2, 3], (name, m, "canonical"), small=True)
    top = 2**64 - 1 if p == GOLDILOCKS else 2 ** (8 * get_field(p).elem_bytes) - 1

    def raised(v: int) -> int:
        return v + p if v + p <= top else top  # same residue when it fits

    for i in range(len(block.evals)):
        for j in range(m):
            evals = [row[:] for row in block.evals]
            evals[i][j] = raised(evals[i][j])
            assert not block.passes(evals=evals), (i, j)
        challenges = block.challenges[:]
        challenges[i] = raised(challenges[i])
        assert not block.passes(with_rederived=False, challenges=challenges), i
    for i in range(len(block.claims)):
        finals, claims = block.finals[:], block.claims[:]
        finals[i], claims[i] = raised(finals[i]), raised(claims[i])
        assert not block.passes(finals=finals), i
        assert not block.passes(claims=claims), i


@settings(max_examples=40, deadline=None)
@given(name=st.sampled_from(["goldilocks", "babybear", "koalabear", "p97", "p65521"]), m=st.integers(1, 5),
       num_vars=st.lists(st.integers(1, 8), min_size=1, max_size=12), seed=st.integers(0, 2**32),
       target=st.integers(0, 10**6))
def test_many_instances_of_different_num_vars_pass_and_one_fault_anywhere_fails(name, m, num_vars, seed, target):
    block = Block(PRIMES[name], m, num_vars, seed)
    assert block.passes()
    i = target % len(block.evals)
    evals = [row[:] for row in block.evals]
    evals[i][target % m] = (evals[i][target % m] + 1 + target) % block.p
    if evals[i] != block.evals[i]:
        assert not block.passes(evals=evals)


def test_an_empty_block_or_bad_starts_do_not_pass():
    block = Block(BABYBEAR, 2, [2, 2], "shape")
    k = kernel(BABYBEAR)
    empty = np.zeros((0, 2), dtype=np.uint64)
    assert not block_passes(k, empty, u64([]), np.array([0]), u64([1]), u64([1]), None)
    assert not block_passes(k, u64(block.evals), u64(block.challenges), np.array([1, 2]), u64(block.claims),
                            u64(block.finals), None)


def test_supports_prime_fields_below_2_32_and_goldilocks_only():
    assert supports(get_field(GOLDILOCKS), 4) and supports(get_field(BABYBEAR), 4) and supports(get_field(97), 97)
    assert not supports(get_field(97), 98)  # m > p: the nodes 0..m-1 are not distinct mod p
    assert not supports(get_field(7), 0)
    assert not supports(get_field(2**64 - 59), 2)  # a 64-bit prime other than Goldilocks (sympy: prime)
    assert sympy.isprime(2**64 - 59)
    assert not supports(get_field(BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1)), 2)  # babybear^4, X^4 - 11
