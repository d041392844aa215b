"""stepper.verify.roundblock: the block checks of many rounds at once, against references outside stepper.

* ``evaluate_at`` against Lagrange interpolation computed by galois (``galois.lagrange_poly``
  over ``galois.GF(p)``) and by sympy (``sympy.interpolate`` over the rationals, reduced mod p);
* ``reduce_wide`` against plain Python integers: ``int.from_bytes(row[:wide], "little") % p``;
* ``reduce_wide_digits`` (stepper-sha256/2's extension challenges) against plain Python integers:
  the base-p digits of ``int.from_bytes(row[:wide], "little") % p^k``, constant first;
* ``block_passes`` against an honest prover written here with plain integers (random round
  polynomials with g(0)+g(1) = claim, g(r) carried forward: common practice, no source),
  and every single-element corruption of its blocks;
* the same over extensions (galois.GF(p^k) with the irreducible given) and over BN254,
  BLS12-381 and 64-bit primes (plain Python integers, tests/plain_sumcheck.py).

Moduli: BabyBear 2^31 - 2^27 + 1, KoalaBear 2^31 - 2^24 + 1, Goldilocks 2^64 - 2^32 + 1
(common practice, no source; tests/field/test_field.py pins the same values), 65521 (the largest
prime below 2^16, from memory; checked with sympy.isprime below) and the small primes 97 and 7.
"""

from __future__ import annotations

import random
import sys
from fractions import Fraction
from pathlib import Path

import galois
import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared plain-integer arithmetic

from plain_sumcheck import Plain, lagrange  # noqa: E402
from stepper.field.field import get_field  # noqa: E402
from stepper.verify.roundblock import (  # noqa: E402
    WideSamples, _divided, _halve, _times_small, block_kernel, block_passes, evaluate_at, reduce_wide,
    reduce_wide_digits, supports,
)

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


P62 = 2**62 - 57  # a prime below 2^62 (from memory; checked with sympy.isprime below)


@pytest.mark.parametrize("p", [GOLDILOCKS, P62])
def test_a_half_by_shifting_equals_the_product_with_the_inverse_of_two(p):
    # x / 2 = x * 2^-1 mod p, in plain Python integers (common practice, no source)
    assert sympy.isprime(p)
    rng = random.Random(p)
    values = [0, 1, 2, 3, p - 2, p - 1, (p - 1) // 2, (p + 1) // 2] + [rng.randrange(p) for _ in range(200)]
    assert _halve(u64(values), p).tolist() == [x * pow(2, -1, p) % p for x in values]


@pytest.mark.parametrize("p", [GOLDILOCKS, P62, 2**64 - 59])  # 2^64 - 59: the largest prime below 2^64 (from memory)
@pytest.mark.parametrize("n", [3, 6, 24, 120, 720, 5040])  # 3 and the factorials 3! .. 7!
def test_exact_division_by_a_small_integer_equals_the_product_with_its_inverse(p, n):
    # x / n = x * n^-1 mod p, in plain Python integers; the edges: 0, p - 1 and each residue mod n near p
    assert sympy.isprime(p)
    rng = random.Random(p + n)
    values = [0, 1, n - 1, n, p - 1, *range(p - 2 * n, p - 1)] + [rng.randrange(p) for _ in range(300)]
    assert _divided(u64(values), n, p).tolist() == [x * pow(n, -1, p) % p for x in values]


@pytest.mark.parametrize("c", [1, 7, 2**31, 2**32 - 1, 2**32, GOLDILOCKS - 1])  # below 2^32 or not
def test_a_goldilocks_column_times_a_small_constant_equals_python_integers(c):
    rng = random.Random(c)
    values = [0, 1, 2**32 - 1, 2**32, 2**63, GOLDILOCKS - 1] + [rng.randrange(GOLDILOCKS) for _ in range(300)]
    assert _times_small(kernel(GOLDILOCKS), u64(values), c).tolist() == [x * c % GOLDILOCKS for x in values]


@pytest.mark.parametrize("degree", [2, 3, 4])
def test_evaluate_at_over_a_62_bit_prime_equals_galois_lagrange_interpolation(degree):
    # the Newton form's 1/2 taken by a shift over every prime between 2^32 and 2^64, not only Goldilocks
    rng = random.Random(degree)
    rows = [[rng.randrange(P62) for _ in range(degree + 1)] for _ in range(5)] + [[P62 - 1] * (degree + 1)]
    points = [rng.randrange(P62) for _ in range(5)] + [P62 - 1]
    assert evaluate_at(kernel(P62), u64(rows), u64(points)).tolist() == galois_values(P62, rows, points)


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
    for wide in sorted({1, 3, 8, 9, 16, 17, schedule_wide, 23, 24, 25, 32}):
        got = reduce_wide(kernel(p), block, wide).tolist()
        assert got == [int.from_bytes(row[:wide], "little") % p for row in rows], wide


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_reduce_wide_reads_rows_of_a_width_that_is_not_whole_words(name):
    p = PRIMES[name]
    rows = [row[:30] for row in digest_rows(random.Random(f"{name}-30"), 20)]
    block = np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), 30)
    for wide in (5, 20, 22, 24):
        got = reduce_wide(kernel(p), block, wide).tolist()
        assert got == [int.from_bytes(row[:wide], "little") % p for row in rows], wide


BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 r, from memory


@pytest.mark.parametrize("p, irreducible", [
    (BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1)), (KOALABEAR, (KOALABEAR - 3, 0, 0, 0, 1)), (97, (92, 0, 0, 1)),
    (GOLDILOCKS, (GOLDILOCKS - 7, 0, 1)), (BN254, (BN254 - 5, 0, 1)),  # get_field admits each only when galois
])  # finds it irreducible (stepper.field.admit; X^2 + 1 over F_97, reducible, is refused)
def test_reduce_wide_digits_are_the_base_p_digits_of_python_integers_mod_p_to_the_k(p, irreducible):
    from stepper.field.kernels import kernel_for

    field = get_field(p, irreducible)
    k = field.degree
    rng = random.Random(p)
    edges = [v.to_bytes(96, "little") for v in (p - 1, p, p ** k - 1, p ** k, p ** k + p - 1, 2 ** 256 - 1,
                                                   (2 ** 256 - 1) // p * p)]
    rows = [bytes(96), b"\xff" * 96, *edges] + [rng.randbytes(96) for _ in range(40)]
    block = np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), 96)
    schedule_wide = ((p ** k).bit_length() + 128 + 7) // 8  # transcripts/FIAT-SHAMIR.md, stepper-sha256/2
    for wide in sorted({5, 17, 30, 32, schedule_wide, 96}):
        got = reduce_wide_digits(kernel_for(field, 1 << 62), block, wide)
        assert got.shape == (len(rows), k)
        values = [int.from_bytes(row[:wide], "little") % p ** k for row in rows]
        assert [[int(c) for c in digits] for digits in got] == [[v // p ** i % p for i in range(k)] for v in values]


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


def test_supports_every_field_with_fewer_evaluations_than_p():
    assert supports(get_field(GOLDILOCKS), 4) and supports(get_field(BABYBEAR), 4) and supports(get_field(97), 97)
    assert not supports(get_field(97), 98)  # m > p: the nodes 0..m-1 are not distinct mod p
    assert not supports(get_field(7), 0)
    assert supports(get_field(2**64 - 59), 2)  # a 64-bit prime other than Goldilocks (sympy: prime)
    assert sympy.isprime(2**64 - 59)
    assert supports(get_field(BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1)), 2)  # babybear^4, X^4 - 11
    assert supports(get_field(BN254), 4) and not supports(get_field(BN254), (1 << 12) + 1)


# ----- extensions and primes above 2^64 ---------------------------------------------------
# galois.GF(p**k, irreducible_poly=q) is the reference for extension arithmetic; an element's
# integer there is its coefficients read as base-p digits, highest degree first (galois docs,
# "Array representation"). Plain Python integers are the reference for the big primes.

BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 curve order
BLS12_381 = 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001  # IETF pairing-friendly-curves 4.2.1
MERSENNE31 = 2**31 - 1  # common practice, no source
EXTENSIONS = {  # constant term first, monic (stepper.field.field.DEFAULT_IRREDUCIBLES; from memory)
    "babybear^4": (BABYBEAR, (BABYBEAR - 11, 0, 0, 0, 1)),
    "koalabear^4": (KOALABEAR, (KOALABEAR - 3, 0, 0, 0, 1)),
    "mersenne31^4": (MERSENNE31, (5, 0, MERSENNE31 - 4, 0, 1)),  # u^4 - 4u^2 + 5: not a binomial
    "goldilocks^2": (GOLDILOCKS, (GOLDILOCKS - 7, 0, 1)),
    "p97^3": (97, (92, 0, 0, 1)),  # X^3 - 5: 5 is not a cube mod 97 (5^32 = 35 mod 97)
    "p7^2+": (7, (3, 1, 1)),  # X^2 + X + 3 over F_7: no root mod 7 (checked below)
    # five raw products of BabyBear entries pass 2^64: Horner's products reduced power by power
    "babybear^5": (BABYBEAR, (BABYBEAR - 2, 0, 0, 0, 0, 1)),  # X^5 - 2, irreducible per galois (checked below)
}


def gf_ext(p: int, q: tuple[int, ...]) -> type:
    """galois's GF(p^k) for the irreducible q. A stated primitive element (x + 1, unchecked under
    verify=False) spares galois its own search for one, which factors p^k - 1 and took about 2 s
    per field; interpolation only adds, multiplies and divides, and never uses it."""
    key = (p, q)
    if key not in _GF:
        base = gf(p)
        _GF[key] = galois.GF(p ** (len(q) - 1), irreducible_poly=galois.Poly(list(reversed(q)), field=base),
                             primitive_element=galois.Poly([1, 1], field=base), compile="python-calculate",
                             verify=False)
    return _GF[key]


def to_galois(p: int, coeffs: list[int]) -> int:
    return sum(c * p**i for i, c in enumerate(coeffs))


def from_galois(p: int, k: int, value: int) -> list[int]:
    return [(value // p**i) % p for i in range(k)]


def test_the_small_test_extensions_are_irreducible_per_galois():
    for name, (p, q) in EXTENSIONS.items():
        assert galois.Poly(list(reversed(q)), field=gf(p)).is_irreducible(), name


@pytest.mark.parametrize("name", sorted(EXTENSIONS))
@pytest.mark.parametrize("degree", [0, 1, 2, 3, 5])
def test_evaluate_at_over_extensions_equals_galois_lagrange_interpolation(name, degree):
    p, q = EXTENSIONS[name]
    k, m = len(q) - 1, degree + 1
    if m > p:
        pytest.skip("m <= p only")
    field = get_field(p, q)
    ext = gf_ext(p, q)
    rng = random.Random(f"{name}-{degree}")
    rows = [[[rng.randrange(p) for _ in range(k)] for _ in range(m)] for _ in range(5)]
    rows.append([[p - 1] * k] * m)
    points = [[rng.randrange(p) for _ in range(k)] for _ in range(5)] + [[p - 1] * k]
    got = evaluate_at(block_kernel(field), u64(rows), u64(points)).tolist()
    nodes = ext([to_galois(p, [j] + [0] * (k - 1)) for j in range(m)])
    for row, x, value in zip(rows, points, got):
        poly = galois.lagrange_poly(nodes, ext([to_galois(p, c) for c in row]))
        assert value == from_galois(p, k, int(poly(ext(to_galois(p, x)))))


@pytest.mark.parametrize("name", sorted(EXTENSIONS))
def test_evaluate_at_reads_value_major_columns_as_it_reads_rows(name):
    # the sweep's blocks arrive as views of (m, k, n) columns (stepper.verify.cells.decode_grid); the
    # result must not depend on the layout (the rows' result is checked against galois above)
    p, q = EXTENSIONS[name]
    k, m = len(q) - 1, 4
    kernel = block_kernel(get_field(p, q))
    rng = np.random.default_rng(len(name))
    rows = rng.integers(0, p, size=(300, m, k), dtype=np.uint64)
    points = rng.integers(0, p, size=(300, k), dtype=np.uint64)
    columns = np.ascontiguousarray(rows.transpose(1, 2, 0)).transpose(2, 0, 1)
    assert not columns.flags.c_contiguous
    assert np.array_equal(evaluate_at(kernel, columns, points), evaluate_at(kernel, rows, points))


@pytest.mark.parametrize("p", [BN254, BLS12_381, 2**64 - 59])
@pytest.mark.parametrize("degree", [0, 1, 3, 4])
def test_evaluate_at_over_wide_primes_equals_the_textbook_formula(p, degree):
    m = degree + 1
    rng = random.Random(f"{p}-{degree}")
    rows = [[rng.randrange(p) for _ in range(m)] for _ in range(6)] + [[p - 1] * m]
    points = [rng.randrange(p) for _ in range(6)] + [p - 1]
    k = block_kernel(get_field(p))
    if p > 2**64:  # rows of limbs (stepper.field.kernels.limbs)
        flat = limb_rows(k, [v for row in rows for v in row]).reshape(len(rows), m, -1)
        got = k.to_list(evaluate_at(k, flat, limb_rows(k, points)))
    else:
        got = [int(v) for v in evaluate_at(k, u64(rows), u64(points)).tolist()]
    assert got == [lagrange_at(p, row, x) for row, x in zip(rows, points)]


@pytest.mark.parametrize("p", [BN254, BLS12_381, 2**64 - 59, 2**61 - 1])
def test_reduce_wide_over_wide_primes_equals_python_integers(p):
    # 2^61 - 1 is a Mersenne prime (common practice, no source)
    rng = random.Random(p)
    wide = (p.bit_length() + 128 + 7) // 8  # transcripts/FIAT-SHAMIR.md: ceil((bits(p) + 128) / 8)
    rows = [bytes(64), b"\xff" * 64] + [rng.randbytes(64) for _ in range(40)]
    block = np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), 64)
    k = block_kernel(get_field(p))
    got = k.to_list(reduce_wide(k, block, wide))
    assert got == [int.from_bytes(row[:wide], "little") % p for row in rows]


def limb_rows(kernel, values) -> np.ndarray:
    """Integers below 2^(8 * bytes of p) as the limb rows of a wide prime's block kernel, unchecked
    (a value at or above p stays one, for the canonical checks)."""
    width = kernel.byte_width
    raw = b"".join(int(v).to_bytes(width, "little") for v in values)
    return kernel.from_bytes(np.frombuffer(raw, dtype=np.uint8).reshape(len(values), width))


class ExtBlock:
    """Instances of an honest prover over a binomial extension or a wide prime (tests/plain_sumcheck.py
    arithmetic, its textbook Lagrange formula), as block_passes takes them."""

    def __init__(self, ar, m: int, num_vars: list[int], seed: object) -> None:
        rng = random.Random(str(seed))
        self.ar, self.m = ar, m
        draw = (lambda: rng.randrange(ar.p)) if ar.k == 1 else (lambda: tuple(rng.randrange(ar.p) for _ in range(ar.k)))
        self.evals, self.challenges, self.starts, self.claims, self.finals = [], [], [], [], []
        for n in num_vars:
            self.starts.append(len(self.evals))
            claim = draw()
            self.claims.append(claim)
            for _ in range(n):
                g0 = draw()
                g = [g0, ar.sub(claim, g0)] + [draw() for _ in range(m - 2)]
                r = draw()
                self.evals.append(g)
                self.challenges.append(r)
                claim = lagrange(ar, g, r)
            self.finals.append(claim)

    def array(self, values):
        if self.ar.p > 2**64:
            return limb_rows(block_kernel(get_field(self.ar.p)), values)
        return np.array(values, dtype=np.uint64)

    def passes(self, **replace) -> bool:
        parts = {"evals": self.evals, "challenges": self.challenges, "claims": self.claims,
                 "finals": self.finals, "rederived": self.challenges, **replace}
        ar = self.ar
        field = get_field(ar.p, ((-ar.w) % ar.p,) + (0,) * (ar.k - 1) + (1,)) if ar.k > 1 else get_field(ar.p)
        evals = parts["evals"]
        if self.ar.p > 2**64:
            flat = self.array([v for row in evals for v in row]).reshape(len(evals), self.m, -1)
        else:
            flat = np.array(evals, dtype=np.uint64)
        return block_passes(block_kernel(field), flat, self.array(parts["challenges"]), np.array(self.starts),
                            self.array(parts["claims"]), self.array(parts["finals"]), self.array(parts["rederived"]))


def _bump(ar, value):
    return ar.add(value, ar.const(1))


WIDE_CASES = {"babybear^4": Plain(BABYBEAR, 4, 11), "goldilocks^2": Plain(GOLDILOCKS, 2, 7),
              "p97^3": Plain(97, 3, 5), "bn254": Plain(BN254), "bls12-381": Plain(BLS12_381),
              "p64": Plain(2**64 - 59)}


@pytest.mark.parametrize("name", sorted(WIDE_CASES))
@pytest.mark.parametrize("m", [2, 4])
def test_honest_wide_blocks_pass_and_every_single_change_fails(name, m):
    block = ExtBlock(WIDE_CASES[name], m, [3, 1, 2], (name, m))
    assert block.passes()
    ar = block.ar
    for i in range(len(block.evals)):
        for j in range(m):
            evals = [row[:] for row in block.evals]
            evals[i][j] = _bump(ar, evals[i][j])
            assert not block.passes(evals=evals), (i, j)
        changed = block.challenges[:]
        changed[i] = _bump(ar, changed[i])
        assert not block.passes(challenges=changed), i
        assert not block.passes(rederived=changed), i
    for i in range(len(block.claims)):
        finals, claims = block.finals[:], block.claims[:]
        finals[i], claims[i] = _bump(ar, finals[i]), _bump(ar, claims[i])
        assert not block.passes(finals=finals), i
        assert not block.passes(claims=claims), i


@pytest.mark.parametrize("name", ["bn254", "babybear^4"])
def test_a_wide_value_at_or_above_p_fails(name):
    ar = WIDE_CASES[name]
    block = ExtBlock(ar, 3, [2, 2], (name, "canonical"))
    raised = (lambda v: v + ar.p) if ar.k == 1 else (lambda v: (v[0] + ar.p, *v[1:]))
    evals = [row[:] for row in block.evals]
    evals[1][2] = raised(evals[1][2])
    assert not block.passes(evals=evals)
    finals = block.finals[:]
    finals[0] = raised(finals[0])
    assert not block.passes(finals=finals)


@pytest.mark.parametrize("name", ["bn254", "bls12-381"])
@pytest.mark.parametrize("m", [2, 4, 7])  # 7 values: past the lazy plan, the canonical path decides
def test_wide_primes_compare_challenges_with_unreduced_samples_by_congruence(name, m):
    """A schedule's samples are wide (ceil((bits(p) + 128) / 8) bytes, transcripts/FIAT-SHAMIR.md): each
    is the challenge plus some multiple of p; block_passes takes them unreduced over rows of limbs."""
    ar = WIDE_CASES[name]
    block = ExtBlock(ar, m, [3, 1, 2], (name, m, "samples"))
    rng = random.Random(f"{name}-{m}")
    wide = (ar.p.bit_length() + 128 + 7) // 8
    k = block_kernel(get_field(ar.p))

    def samples(challenges: list[int]) -> WideSamples:
        rows = [(r + rng.randrange(2**128) * ar.p).to_bytes(wide, "little") for r in challenges]
        return WideSamples(np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), wide))

    flat = block.array([v for row in block.evals for v in row]).reshape(len(block.evals), m, -1)

    def passes(rederived: WideSamples, **replace) -> bool:
        parts = {"challenges": block.challenges, "finals": block.finals, **replace}
        return block_passes(k, flat, block.array(parts["challenges"]), np.array(block.starts),
                            block.array(block.claims), block.array(parts["finals"]), rederived)

    assert passes(samples(block.challenges))
    for i in range(len(block.challenges)):
        changed = block.challenges[:]
        changed[i] = (changed[i] + 1) % ar.p
        assert not passes(samples(changed)), i
    finals = block.finals[:]
    finals[-1] = (finals[-1] + ar.p - 1) % ar.p
    assert not passes(samples(block.challenges), finals=finals)
