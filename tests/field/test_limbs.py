"""stepper.field.kernels.limbs: arithmetic on rows of 29-bit limbs agrees with plain Python integers
(exact by construction) and with galois (an independent finite-field implementation), on random
values and on the edge values of the representation (0, 1, p - 1, values on and next to limb
boundaries 2^(29 k), R mod p).

Moduli: the BN254 scalar field r (EIP-196 / EIP-197, alt_bn128 "curve_order"; value from memory,
stepper.field.field pins it the same way) and the BLS12-381 scalar field r and base field p (IETF
draft-irtf-cfrg-pairing-friendly-curves, section 4.2.1; values from memory); 2^127 - 1 (a Mersenne
prime: common practice, no source); the first primes after 2^64 and before 2^512 (sympy.nextprime
and sympy.prevprime). sympy.isprime checks each below.
"""

from __future__ import annotations

import random
from functools import lru_cache

import galois
import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st

from stepper.errors import FieldError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.kernels.limbs import LIMB_BITS, LimbKernel, _power_weights

BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 curve_order
BLS12_381_R = 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001  # IETF draft, 4.2.1 (r)
BLS12_381_P = int("1a0111ea397fe69a4b1ba7b6434bacd764774b84f38512bf6730d2a0f6b0f6241eabfffeb153ffffb9feffffffffaaab",
                  16)  # IETF draft-irtf-cfrg-pairing-friendly-curves, 4.2.1 (p, the base field; from memory)
MERSENNE127 = 2**127 - 1  # common practice, no source
ABOVE_2_64 = int(sympy.nextprime(2**64))
BELOW_2_512 = int(sympy.prevprime(2**512))
PRIMES = {"bn254": BN254, "bls12-381": BLS12_381_R, "bls12-381-base": BLS12_381_P, "m127": MERSENNE127,
          "above-2^64": ABOVE_2_64, "below-2^512": BELOW_2_512}
SETTINGS = settings(max_examples=25, deadline=None)


@lru_cache(maxsize=None)
def kernel(p: int) -> LimbKernel:
    return LimbKernel(get_field(p))


@lru_cache(maxsize=None)
def gf(p: int) -> type:
    """galois.GF(p) without its primitive-root search (it factors p - 1, which takes minutes at
    these sizes): addition, multiplication and interpolation never use the primitive element.
    "python-calculate" skips galois's numba compilation for these short vectors."""
    return galois.GF(p, primitive_element=2, verify=False, compile="python-calculate")


def edge_values(p: int) -> list[int]:
    """0, 1, 2, p - 1, p - 2, (p - 1) / 2, R mod p and every 2^(29 k) - 1, 2^(29 k), 2^(29 k) + 1 below p."""
    k = kernel(p)
    values = {0, 1, 2, p - 1, p - 2, (p - 1) // 2, (1 << (LIMB_BITS * k.n)) % p}
    for j in range(1, k.n + 1):
        for delta in (-1, 0, 1):
            v = (1 << (LIMB_BITS * j)) + delta
            if 0 <= v < p:
                values.add(v)
    return sorted(values)


def test_the_moduli_are_prime_per_sympy_and_the_named_ones_match_stepper():
    assert all(sympy.isprime(p) for p in PRIMES.values())  # reference: sympy.isprime
    assert NAMED_PRIMES["bn254"] == BN254 and NAMED_PRIMES["bls12-381"] == BLS12_381_R


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_add_sub_neg_mul_match_python_integers_on_every_pair_of_edge_values(name):
    p = PRIMES[name]
    k = kernel(p)
    edges = edge_values(p)
    xs = [x for x in edges for _ in edges]
    ys = [y for _ in edges for y in edges]
    a, b = k.array(xs), k.array(ys)
    assert k.to_list(a) == xs
    assert k.to_list(k.add(a, b)) == [(x + y) % p for x, y in zip(xs, ys)]
    assert k.to_list(k.sub(a, b)) == [(x - y) % p for x, y in zip(xs, ys)]
    assert k.to_list(k.mul(a, b)) == [x * y % p for x, y in zip(xs, ys)]
    assert k.to_list(k.neg(a)) == [-x % p for x in xs]


@pytest.mark.parametrize("name", ["bn254", "bls12-381", "bls12-381-base", "m127"])
@SETTINGS
@given(data=st.data())
def test_add_sub_mul_match_galois_on_random_vectors(name, data):
    p = PRIMES[name]
    k, field = kernel(p), gf(p)
    xs = data.draw(st.lists(st.integers(0, p - 1), min_size=1, max_size=20))
    ys = data.draw(st.lists(st.integers(0, p - 1), min_size=len(xs), max_size=len(xs)))
    a, b = k.array(xs), k.array(ys)
    ga, gb = field(xs), field(ys)  # reference: galois.GF(p)
    assert k.to_list(k.add(a, b)) == [int(v) for v in ga + gb]
    assert k.to_list(k.sub(a, b)) == [int(v) for v in ga - gb]
    assert k.to_list(k.mul(a, b)) == [int(v) for v in ga * gb]


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_a_single_element_broadcasts_against_a_vector(name):
    p = PRIMES[name]
    k = kernel(p)
    xs = edge_values(p)
    s = p - 3
    assert k.to_list(k.mul(k.array(xs), k.array([s])[0])) == [x * s % p for x in xs]
    assert k.to_list(k.scale(k.array(xs), s)) == [x * s % p for x in xs]
    assert k.to_list(k.add(k.array([s]), k.array(xs))) == [(x + s) % p for x in xs]


@pytest.mark.parametrize("name", ["bn254", "bls12-381-base", "above-2^64"])
def test_batch_inverse_times_the_input_is_one(name):
    p = PRIMES[name]
    k = kernel(p)
    xs = [x for x in edge_values(p) if x] + [random.Random(p).randrange(1, p) for _ in range(9)]
    assert k.to_list(k.mul(k.inv(k.array(xs)), k.array(xs))) == [1] * len(xs)


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_reducing_wide_byte_rows_equals_python_integers_mod_p(name):
    p = PRIMES[name]
    k = kernel(p)
    wide = (p.bit_length() + 128 + 7) // 8  # the schedule's wide reduction (transcripts/FIAT-SHAMIR.md)
    rng = random.Random(name)
    rows = [bytes(wide), b"\xff" * wide, p.to_bytes(wide, "little"), (p - 1).to_bytes(wide, "little"),
            (2 * p).to_bytes(wide, "little")] + [rng.randbytes(wide) for _ in range(60)]
    block = np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), wide)
    assert k.to_list(k.reduce_bytes(block)) == [int.from_bytes(row, "little") % p for row in rows]


@pytest.mark.parametrize("name", sorted(PRIMES))
@pytest.mark.parametrize("values", [1, 2, 4, 7])
def test_rows_of_several_packed_elements_decode_by_value_position_to_the_integers_they_hold(name, values):
    p = PRIMES[name]
    k = kernel(p)
    width = k.byte_width
    rng = random.Random(f"{name}-{values}")
    pool = edge_values(p) + [(1 << (8 * width)) - 1]  # the largest cell: decoded as it is, not reduced
    rows = [[rng.choice(pool) if rng.random() < 0.3 else rng.randrange(p) for _ in range(values)] for _ in range(33)]
    cells = np.frombuffer(b"".join(v.to_bytes(width, "little") for row in rows for v in row),
                          dtype=np.uint8).reshape(len(rows), values * width)
    grid = k.from_bytes_grid(cells, values)
    assert grid.shape == (len(rows), values, k.n)
    assert [k._integers(grid[i]).tolist() for i in range(len(rows))] == rows
    assert grid.transpose(1, 2, 0)[0, 0].flags.c_contiguous  # each limb of each position one contiguous run
    # the same cells as a block holds them: a slice at an odd offset of longer rows (unaligned words)
    framed = np.zeros((len(rows), values * width + 13), dtype=np.uint8)
    framed[:, 5:5 + values * width] = cells
    from_frame = k.from_bytes_grid(framed[:, 5:5 + values * width], values)
    assert [k._integers(from_frame[i]).tolist() for i in range(len(rows))] == rows
    assert [k._integers(row).tolist()[0] for row in k.from_bytes(framed[:, 5:5 + width])] == [row[0] for row in rows]


@pytest.mark.parametrize("name", sorted(PRIMES))
def test_below_p_accepts_p_minus_one_and_refuses_p_and_the_largest_cell(name):
    p = PRIMES[name]
    k = kernel(p)
    width = k.byte_width

    def cells(*values: int) -> np.ndarray:
        raw = b"".join(v.to_bytes(width, "little") for v in values)
        return k.from_bytes(np.frombuffer(raw, dtype=np.uint8).reshape(len(values), width))

    assert k.below_p(cells(0, 1, p - 1))
    assert not k.below_p(cells(0, p))
    assert not k.below_p(cells((1 << (8 * width)) - 1))
    top = (p >> (LIMB_BITS * (k.n - 1))) << (LIMB_BITS * (k.n - 1))  # p's top limb, the lower limbs zero
    assert k.below_p(cells(top, p - 1, 2, 3).reshape(2, 2, -1))  # blocks of rounds: (rounds, values, limbs)
    assert not k.below_p(cells(top, p + 1 if p + 1 < 1 << (8 * width) else p, 2, 3).reshape(2, 2, -1))
    with pytest.raises(FieldError):
        k.array([p])
    with pytest.raises(FieldError):
        k.array([-1])


def test_the_power_weights_are_the_scaled_lagrange_basis_per_sympy():
    x = sympy.symbols("x")
    for m in range(1, 7):
        scale = sympy.factorial(m - 1)
        for i in range(m):  # reference: sympy's interpolating polynomial through (j, [i == j])
            basis = sympy.Poly(sympy.interpolate([(j, int(i == j)) for j in range(m)], x) * scale, x)
            coefficients = list(reversed(basis.all_coeffs())) + [0] * m
            assert [row[i] for row in _power_weights(m)] == [int(c) for c in coefficients[:m]]


@pytest.mark.parametrize("name", sorted(PRIMES))
@pytest.mark.parametrize("m", [1, 2, 3, 4, 5, 7])
def test_evaluate_equals_galois_lagrange_interpolation(name, m):
    p = PRIMES[name]
    k, field = kernel(p), gf(p)
    rng = random.Random(f"{name}-{m}")
    edges = edge_values(p)
    rows = [[rng.randrange(p) for _ in range(m)] for _ in range(6)] + [[p - 1] * m, [0] * m]
    rows += [[edges[(i + j) % len(edges)] for j in range(m)] for i in range(len(edges))]
    points = [rng.randrange(p) for _ in range(6)] + [p - 1, 0] + edges
    flat = k.array([v for row in rows for v in row]).reshape(len(rows), m, k.n)
    got = k.to_list(k.evaluate(flat, k.array(points)))
    nodes = field(list(range(m)))
    for row, x, value in zip(rows, points, got):
        poly = galois.lagrange_poly(nodes, field(row))  # reference: galois
        assert value == int(poly(field(x)))


@pytest.mark.parametrize("name", ["bn254", "bls12-381-base"])
def test_sum_dot_and_polynomial_evaluation_match_python_integers(name):
    p = PRIMES[name]
    k = kernel(p)
    xs = edge_values(p)
    ys = list(reversed(xs))
    coefficients = [p - 1, 3, 0, p - 2]
    a, b = k.array(xs), k.array(ys)
    assert k.sum(a) == sum(xs) % p and k.sum(k.zeros(0)) == 0
    assert k.dot(a, b) == sum(x * y for x, y in zip(xs, ys)) % p
    assert k.to_list(k.poly_eval(coefficients, a)) == [sum(c * pow(x, i, p) for i, c in enumerate(coefficients)) % p
                                                      for x in xs]  # Horner's rule written out
