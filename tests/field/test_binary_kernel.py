"""The GF(2^k) kernel: its galois path agrees with the schoolbook extension kernel, with plain
Python integers and with published products; it is chosen for binary extensions only and
switches to galois only once the work has paid for galois's set-up.

References: FIPS-197 (the AES standard) for products in GF(2^8) with x^8 + x^4 + x^3 + x + 1;
plain Python integer arithmetic; the galois library (computed with its Python arithmetic,
so the check does not run through the look-up tables the kernel uses).
"""

from __future__ import annotations

from functools import lru_cache
from typing import Any

import galois
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.errors import FieldError
from stepper.field.field import Field, get_field
from stepper.field.kernels import BinaryFieldKernel, ExtensionKernel, kernel_for
from stepper.field.kernels import base as kernel_base

SETTINGS = settings(max_examples=15, deadline=None)

# x^8 + x^4 + x^3 + x + 1: the AES polynomial, FIPS-197 section 4.2 (constant term first here).
AES = (1, 1, 0, 1, 1, 0, 0, 0, 1)
# Irreducible over F_2 (get_field checks each with galois); 16 is the largest degree stepper admits.
POLYS = {
    2: (1, 1, 1),  # x^2 + x + 1
    8: AES,
    13: (1, 1, 0, 1, 1) + (0,) * 8 + (1,),  # x^13 + x^4 + x^3 + x + 1
    16: (1, 1, 0, 1, 0, 1) + (0,) * 10 + (1,),  # x^16 + x^5 + x^3 + x + 1
}


def binary_field(k: int) -> Field:
    return get_field(2, POLYS[k])


def on_galois(field: Field) -> BinaryFieldKernel:
    """A kernel that takes every product to galois at once (no size or work threshold)."""
    kernel = BinaryFieldKernel(field, kernel_for(field.base), compiled_min=0, galois_after=0)
    assert kernel.galois_field() is not None
    return kernel


def schoolbook(field: Field) -> ExtensionKernel:
    return ExtensionKernel(field, kernel_for(field.base), compiled_min=0)


def byte(field: Field, value: int) -> tuple[int, ...]:
    """The element whose bit i is the coefficient of x^i (FIPS-197 writes {57} for x^6+x^4+x^2+x+1)."""
    return tuple((value >> i) & 1 for i in range(field.degree))


@lru_cache(maxsize=None)
def reference_field(k: int) -> Any:
    poly = galois.Poly(list(reversed(POLYS[k])), field=galois.GF(2))
    return galois.GF(2**k, irreducible_poly=poly, primitive_element=galois.primitive_element(poly),
                     verify=False, compile="python-calculate")


def as_int(element: tuple[int, ...]) -> int:
    return sum(bit << i for i, bit in enumerate(element))


def test_kernel_for_picks_the_galois_kernel_for_binary_extensions_only() -> None:
    assert isinstance(kernel_for(binary_field(8)), BinaryFieldKernel)
    assert type(kernel_for(get_field(3, (1, 2, 0, 1)))) is ExtensionKernel  # x^3 + 2x + 1 over F_3
    assert not isinstance(kernel_for(get_field(2)), ExtensionKernel)  # F_2 itself is a prime field


def test_products_of_the_aes_standard_worked_example() -> None:
    # FIPS-197 section 4.2: {57} * {83} = {c1}; section 4.2.1: {57} * {13} = {fe}.
    field = binary_field(8)
    kernel = on_galois(field)
    a = kernel.array([byte(field, 0x57), byte(field, 0x57)])
    b = kernel.array([byte(field, 0x83), byte(field, 0x13)])
    assert kernel.to_list(kernel.mul(a, b)) == [byte(field, 0xC1), byte(field, 0xFE)]


def test_the_inverse_of_0x53_in_the_aes_field_is_0xca() -> None:
    # from memory: the AES S-box starts from this inverse ({53}^-1 = {ca}); checked here both ways
    field = binary_field(8)
    kernel = on_galois(field)
    inverse = kernel.inv(kernel.array([byte(field, 0x53)]))
    assert kernel.to_list(inverse) == [byte(field, 0xCA)]
    assert field.mul(byte(field, 0x53), byte(field, 0xCA)) == field.one


@pytest.mark.parametrize("k", sorted(POLYS))
@SETTINGS
@given(data=st.data())
def test_galois_products_equal_the_schoolbook_kernel_python_and_galois(k: int, data: st.DataObject) -> None:
    # references: Field.mul (plain Python integers) and galois's Python arithmetic
    field = binary_field(k)
    bits = st.tuples(*[st.integers(0, 1)] * k)
    pairs = data.draw(st.lists(st.tuples(bits, bits), min_size=1, max_size=40))
    xs, ys = [x for x, _ in pairs], [y for _, y in pairs]
    kernel = on_galois(field)
    a, b = kernel.array(xs), kernel.array(ys)
    product = kernel.mul(a, b)
    assert np.array_equal(product, schoolbook(field).mul(a, b))
    assert kernel.to_list(product) == [field.mul(x, y) for x, y in pairs]
    gf = reference_field(k)
    expected = gf([as_int(x) for x in xs]) * gf([as_int(y) for y in ys])
    assert [as_int(e) for e in kernel.to_list(product)] == [int(v) for v in expected]


@pytest.mark.parametrize("k", [8, 16])
def test_a_large_random_product_agrees_with_the_schoolbook_kernel_and_broadcasts_a_scalar(k: int) -> None:
    field = binary_field(k)
    rng = np.random.default_rng(11)
    kernel = on_galois(field)
    a, b = kernel.random(5000, rng), kernel.random(5000, rng)
    assert np.array_equal(kernel.mul(a, b), schoolbook(field).mul(a, b))
    s = kernel.to_list(b[:1])[0]
    assert kernel.to_list(kernel.scale(a, s)) == [field.mul(x, s) for x in kernel.to_list(a)]


@pytest.mark.parametrize("k", [2, 16])
def test_batch_inverse_on_galois_times_the_input_is_one(k: int) -> None:
    field = binary_field(k)
    kernel = on_galois(field)
    rng = np.random.default_rng(5)
    a = kernel.random(300, rng)
    a[np.all(a == 0, axis=1)] = kernel.array([field.one])[0]
    assert kernel.to_list(kernel.mul(a, kernel.inv(a))) == [field.one] * 300


def test_batch_inverse_on_galois_names_the_index_of_a_zero_entry() -> None:
    field = binary_field(8)
    kernel = on_galois(field)
    a = kernel.array([field.one, byte(field, 7), field.zero])
    with pytest.raises(FieldError, match="found 0 at index 2"):
        kernel.inv(a)


def test_packing_round_trips_every_element_of_gf_2_8() -> None:
    kernel = on_galois(binary_field(8))
    every = np.arange(256, dtype=np.uint16)
    rows = kernel.unpack(every)
    assert rows.shape == (256, 8) and rows.dtype == np.uint64
    assert np.array_equal(kernel.pack(rows), every)


def test_galois_takes_over_only_once_large_products_have_paid_for_its_set_up() -> None:
    field = binary_field(8)
    kernel = BinaryFieldKernel(field, kernel_for(field.base), compiled_min=100, galois_after=250)
    rng = np.random.default_rng(2)
    small, large = kernel.random(99, rng), kernel.random(200, rng)
    kernel.mul(small, small)
    assert kernel.multiplied == 0  # small arrays never count
    kernel.mul(large, large)
    assert kernel._galois_field is None and kernel.multiplied == 200
    kernel.mul(large, large)
    assert kernel._galois_field is not None


def test_the_numpy_only_switch_keeps_binary_fields_off_galois(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("STEPPER_KERNELS", "numpy")
    monkeypatch.setattr(kernel_base, "_compiled_tried", False)
    monkeypatch.setattr(kernel_base, "_compiled", None)
    field = binary_field(8)
    kernel = BinaryFieldKernel(field, kernel_for(field.base), compiled_min=0, galois_after=0)
    a = kernel.random(10, np.random.default_rng(1))
    assert kernel.to_list(kernel.mul(a, a)) == [field.mul(x, x) for x in kernel.to_list(a)]
    assert kernel._galois_field is None


def test_only_gf_2_to_the_k_with_k_up_to_16_is_accepted() -> None:
    odd = get_field(3, (1, 2, 0, 1))
    with pytest.raises(FieldError, match="expected GF\\(2\\^k\\)"):
        BinaryFieldKernel(odd, kernel_for(odd.base))
