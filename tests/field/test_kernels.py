"""Vector kernels agree with plain Python integers and with galois, on both
the numpy path (small arrays) and the compiled numba path (large arrays).

References: plain Python integer arithmetic (exact by construction) and the
galois library (an independent finite-field implementation).
"""

from __future__ import annotations

import os
import subprocess
import sys
from functools import lru_cache
from typing import Any

import galois
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.errors import FieldError
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field
from stepper.field.kernels import (
    ExtensionKernel,
    GoldilocksKernel,
    Kernel,
    ObjectKernel,
    SmallPrimeKernel,
    Word64Kernel,
    kernel_for,
)
from stepper.field.kernels import base as kernel_base
from stepper.field.kernels.prime import mod_u64

SETTINGS = settings(max_examples=20, deadline=None)

# p = 2^32 - 5 is the largest prime below 2^32 (from memory; sympy.isprime confirms in test_numbertheory).
P32 = 2**32 - 5
# p = 2^40 - 87 is a prime between 2^32 and 2^64 other than Goldilocks (sympy.isprime confirms).
P40 = 2**40 - 87
# p = 2^64 - 59 is the largest prime below 2^64 (from memory; sympy.isprime confirms): sums overflow 2^64.
P64 = 2**64 - 59


def named(name: str, degree: int = 1) -> Field:
    return get_field(NAMED_PRIMES[name], DEFAULT_IRREDUCIBLES.get((name, degree)))


def field_by_label(label: str) -> Field:
    if label == "p32":
        return get_field(P32)
    if label == "p40":
        return get_field(P40)
    if label == "p64":
        return get_field(P64)
    if label == "p40^2":  # X^2 - 7, irreducible (checked by get_field)
        return get_field(P40, (P40 - 7, 0, 1))
    if label == "p32^2":  # X^2 + 1: -1 is a non-residue as 2^32 - 5 = 3 mod 4 (get_field checks irreducibility)
        return get_field(P32, (1, 0, 1))
    if label == "p32^4":  # X^4 + X + 1, found irreducible by get_field's check (a non-binomial reduction)
        return get_field(P32, (1, 1, 0, 0, 1))
    if label == "p32-trinomial^2":  # X^2 + X + 1 is irreducible when p = 2 mod 3 (2^32 - 5 = 2 mod 3)
        return get_field(P32, (1, 1, 1))
    if label == "babybear-dense^4":  # X^4 - 7X^3 + 5X^2 - 3X + 3: irreducible (get_field checks), no zero term
        bb = NAMED_PRIMES["babybear"]
        return get_field(bb, (3, bb - 3, 5, bb - 7, 1))
    if label == "babybear^3":  # X^3 - 2, irreducible over BabyBear (checked by get_field)
        return get_field(NAMED_PRIMES["babybear"], (NAMED_PRIMES["babybear"] - 2, 0, 0, 1))
    name, _, degree = label.partition("^")
    return named(name, int(degree) if degree else 1)


PRIME_LABELS = ["babybear", "koalabear", "mersenne31", "goldilocks", "bn254", "bls12-381", "p32", "p40", "p64"]
EXT_LABELS = [
    "babybear^4",
    "koalabear^4",
    "mersenne31^4",
    "goldilocks^2",
    "babybear^3",
    "babybear-dense^4",
    "p32^2",
    "p32^4",
    "p32-trinomial^2",
    "p40^2",
]


def edge_values(p: int) -> list[int]:
    """0, 1, p - 1, p - 2, and the powers of two near word boundaries that are below p."""
    candidates = (0, 1, 2, p - 1, p - 2, p // 2, 2**31 - 1, 2**31, 2**32 - 1, 2**32, 2**63, 2**64 - 1)
    return sorted({v for v in candidates if 0 <= v < p})


def elements(field: Field) -> st.SearchStrategy[Any]:
    base = st.one_of(st.sampled_from(edge_values(field.p)), st.integers(0, field.p - 1))
    if field.is_extension:
        return st.tuples(*([base] * field.degree))
    return base


def pairs(field: Field) -> st.SearchStrategy[list[tuple[Any, Any]]]:
    return st.lists(st.tuples(elements(field), elements(field)), min_size=1, max_size=24)


def kernels_of(field: Field) -> list[Kernel]:
    """The numpy path (nothing is large enough) and the compiled path (everything is)."""
    return [kernel_for(field, compiled_min=10**9), kernel_for(field, compiled_min=0)]


def python_mul(field: Field, a: Any, b: Any) -> Any:
    """Schoolbook product with plain Python ints, reduced by the field polynomial."""
    p = field.p
    if not field.is_extension:
        return a * b % p
    k, q = field.degree, field.irreducible
    prod = [0] * (2 * k - 1)
    for i in range(k):
        for j in range(k):
            prod[i + j] += a[i] * b[j]
    for top in range(2 * k - 2, k - 1, -1):  # X^top = -X^(top-k) (q_0 + ... + q_(k-1) X^(k-1))
        c = prod[top]
        prod[top] = 0
        for i in range(k):
            prod[top - k + i] -= c * q[i]
    return tuple(c % p for c in prod[:k])


def python_add(field: Field, a: Any, b: Any, sign: int = 1) -> Any:
    if not field.is_extension:
        return (a + sign * b) % field.p
    return tuple((x + sign * y) % field.p for x, y in zip(a, b))


def test_kernel_for_picks_the_kind_of_each_field():
    assert isinstance(kernel_for(named("babybear")), SmallPrimeKernel)
    assert isinstance(kernel_for(get_field(P32)), SmallPrimeKernel)
    assert isinstance(kernel_for(named("goldilocks")), GoldilocksKernel)
    assert isinstance(kernel_for(get_field(P40)), Word64Kernel)
    assert isinstance(kernel_for(get_field(P64)), Word64Kernel)
    assert isinstance(kernel_for(named("bn254")), ObjectKernel)
    ext = kernel_for(named("goldilocks", 2))
    assert isinstance(ext, ExtensionKernel) and isinstance(ext.base, GoldilocksKernel)


@pytest.mark.parametrize("label", PRIME_LABELS + EXT_LABELS)
@SETTINGS
@given(data=st.data())
def test_add_sub_neg_mul_match_python_integers_on_both_paths(label, data):
    # reference: plain Python integer arithmetic
    field = field_by_label(label)
    values = data.draw(pairs(field))
    xs = [x for x, _ in values]
    ys = [y for _, y in values]
    for kernel in kernels_of(field):
        a, b = kernel.array(xs), kernel.array(ys)
        assert kernel.to_list(kernel.mul(a, b)) == [python_mul(field, x, y) for x, y in values]
        assert kernel.to_list(kernel.add(a, b)) == [python_add(field, x, y) for x, y in values]
        assert kernel.to_list(kernel.sub(a, b)) == [python_add(field, x, y, -1) for x, y in values]
        assert kernel.to_list(kernel.neg(a)) == [python_add(field, field.zero, x, -1) for x in xs]
        assert kernel.to_list(kernel.scale(a, ys[0])) == [python_mul(field, x, ys[0]) for x in xs]


@lru_cache(maxsize=None)
def galois_field(label: str) -> Any:
    """galois's own field for the label. verify=False with a stated primitive element
    skips galois's factorisation of p - 1 (slow for 254-bit p); multiplication and
    addition never use the primitive element. "python-calculate" skips galois's own
    numba compilation, which would cost seconds per field for these short vectors."""
    field = field_by_label(label)
    base = galois.GF(field.p, primitive_element=2, verify=False, compile="python-calculate")
    if not field.is_extension:
        return base
    poly = galois.Poly(list(reversed(field.irreducible)), field=base)
    return galois.GF(
        field.p**field.degree,
        irreducible_poly=poly,
        primitive_element=galois.Poly([1, 1], field=base),
        verify=False,
        compile="python-calculate",
    )


def to_galois(label: str, field: Field, values: list[Any]) -> Any:
    gf = galois_field(label)
    if field.is_extension:
        return gf.Vector([list(reversed(v)) for v in values])  # galois lists the highest degree first
    return gf(values)


def from_galois(field: Field, array: Any) -> list[Any]:
    if field.is_extension:
        return [tuple(int(c) for c in reversed(row)) for row in array.vector().tolist()]
    return [int(v) for v in array.tolist()]


@pytest.mark.parametrize(
    "label", ["babybear", "goldilocks", "p64", "bn254", "babybear^4", "mersenne31^4", "goldilocks^2", "p32^2"]
)
@SETTINGS
@given(data=st.data())
def test_kernels_match_galois(label, data):
    # reference: the galois library (GF(p) and GF(p^k) with the same irreducible polynomial)
    field = field_by_label(label)
    values = data.draw(pairs(field))
    xs = [x for x, _ in values]
    ys = [y for _, y in values]
    gx, gy = to_galois(label, field, xs), to_galois(label, field, ys)
    for kernel in kernels_of(field):
        a, b = kernel.array(xs), kernel.array(ys)
        assert kernel.to_list(kernel.mul(a, b)) == from_galois(field, gx * gy)
        assert kernel.to_list(kernel.add(a, b)) == from_galois(field, gx + gy)
        assert kernel.to_list(kernel.sub(a, b)) == from_galois(field, gx - gy)


@pytest.mark.parametrize(
    "label", ["babybear", "goldilocks", "p40", "p64", "bn254", "babybear^4", "mersenne31^4", "goldilocks^2"]
)
def test_compiled_and_numpy_paths_agree_on_a_large_random_vector(label):
    field = field_by_label(label)
    rng = np.random.default_rng(7)
    small, large = kernels_of(field)
    a, b = small.random(5000, rng), small.random(5000, rng)
    assert np.array_equal(small.mul(a, b), large.mul(a, b))
    assert np.array_equal(small.add(a, b), large.add(a, b))
    assert np.array_equal(small.sub(a, b), large.sub(a, b))


@pytest.mark.parametrize(
    "label", ["babybear", "goldilocks", "p64", "bn254", "babybear^4", "goldilocks^2", "mersenne31^4"]
)
def test_batch_inverse_times_the_input_is_one(label):
    field = field_by_label(label)
    rng = np.random.default_rng(3)
    for kernel in kernels_of(field):
        a = kernel.random(37, rng)
        a[0] = kernel.array([field.one])[0]
        a[5] = kernel.array([field.embed(field.p - 1)])[0]
        inverse = kernel.inv(a)
        assert kernel.to_list(kernel.mul(a, inverse)) == [field.one] * 37
        assert kernel.to_list(inverse)[:3] == [field.inv(x) for x in kernel.to_list(a)[:3]]


@pytest.mark.parametrize("label", ["babybear", "goldilocks^2"])
def test_batch_inverse_of_a_zero_entry_names_its_index(label):
    field = field_by_label(label)
    kernel = kernel_for(field)
    a = kernel.array([field.one, field.embed(5), field.zero, field.one])
    with pytest.raises(FieldError, match="found 0 at index 2"):
        kernel.inv(a)


@pytest.mark.parametrize("label", PRIME_LABELS + ["babybear^4", "goldilocks^2"])
@SETTINGS
@given(data=st.data())
def test_sum_dot_and_polynomial_evaluation_match_python(label, data):
    # reference: plain Python integer arithmetic (Horner's rule written out)
    field = field_by_label(label)
    values = data.draw(pairs(field))
    xs = [x for x, _ in values]
    ys = [y for _, y in values]
    coeffs = data.draw(st.lists(elements(field), min_size=0, max_size=5))
    kernel = kernel_for(field)
    a, b = kernel.array(xs), kernel.array(ys)
    total, dot = field.zero, field.zero
    for x, y in values:
        total = python_add(field, total, x)
        dot = python_add(field, dot, python_mul(field, x, y))
    assert kernel.sum(a) == total
    assert kernel.dot(a, b) == dot
    expected = []
    for x in xs:
        acc = field.zero
        for c in reversed(coeffs):
            acc = python_add(field, python_mul(field, acc, x), c)
        expected.append(acc)
    assert kernel.to_list(kernel.poly_eval(coeffs, a)) == expected


@pytest.mark.parametrize("label", ["babybear^4", "goldilocks^2", "mersenne31^4", "p32^4"])
@SETTINGS
@given(data=st.data())
def test_extension_times_base_vector_equals_the_full_product(label, data):
    field = field_by_label(label)
    base = field.base
    values = data.draw(st.lists(st.tuples(elements(field), elements(base)), min_size=1, max_size=20))
    for kernel in kernels_of(field):
        a = kernel.array([x for x, _ in values])
        b = kernel.base.array([y for _, y in values])
        assert isinstance(kernel, ExtensionKernel)
        assert kernel.to_list(kernel.mul_base(a, b)) == [python_mul(field, x, field.lift(y)) for x, y in values]


def test_field_vmul_base_is_plain_multiplication_in_a_prime_field():
    field = named("koalabear")
    a, b = field.vec([3, 4]), field.vec([5, 6])
    assert field.vlist(field.vmul_base(a, b)) == [15, 24]


def test_vectors_refuse_non_canonical_or_non_integer_entries():
    field = named("babybear")
    p = field.p
    with pytest.raises(FieldError, match=f"found {p} at flat index 1"):
        field.vec([0, p])
    with pytest.raises(FieldError, match="found -1 at flat index 0"):
        field.vec(np.array([-1, 2]))
    with pytest.raises(FieldError, match="dtype float64"):
        field.vec(np.array([1.5]))
    with pytest.raises(FieldError, match="found True"):
        get_field(NAMED_PRIMES["bn254"]).vec([1, True])
    ext = named("babybear", 4)
    with pytest.raises(FieldError, match=r"shape \(n, 4\).*found shape \(2, 3\)"):
        ext.vec(np.zeros((2, 3), dtype=np.uint64))
    with pytest.raises(FieldError, match="at index 1"):
        ext.vec([(1, 2, 3, 4), (1, 2)])
    with pytest.raises(FieldError, match="nested sequences"):
        field.vec([(1, 2), (3, 4)])
    with pytest.raises(FieldError, match=r"found \(2, 3\) at flat index 1"):
        field.vec([1, (2, 3)])
    with pytest.raises(FieldError, match="dtype <U"):
        field.vec(["1", "2"])
    assert ext.vlist(ext.vec(np.array([7, 8]))) == [(7, 0, 0, 0), (8, 0, 0, 0)]
    goldilocks = named("goldilocks")  # numpy alone would turn this mixed list into float64
    assert goldilocks.vlist(goldilocks.vec([2**64 - 2**32, 1])) == [2**64 - 2**32, 1]
    assert field.vlist(field.vec([])) == []


def test_numpy_only_switch_turns_the_compiled_loops_off(monkeypatch):
    monkeypatch.setenv("STEPPER_KERNELS", "numpy")
    monkeypatch.setattr(kernel_base, "_compiled_tried", False)
    monkeypatch.setattr(kernel_base, "_compiled", None)
    assert kernel_base.load_compiled() is None
    kernel = kernel_for(named("goldilocks"), compiled_min=0)
    a = kernel.array([2**63, 5])
    assert kernel.to_list(kernel.mul(a, a)) == [2**126 % kernel.p, 25]


def _unloaded(monkeypatch):
    """The kernels' module as if numba had never been asked for in this process."""
    monkeypatch.delenv("STEPPER_KERNELS", raising=False)
    monkeypatch.setattr(kernel_base, "_compiled_tried", False)
    monkeypatch.setattr(kernel_base, "_compiled", None)


def test_work_below_the_crossover_runs_on_numpy_without_loading_numba(monkeypatch):
    _unloaded(monkeypatch)
    kernel = kernel_for(named("babybear"), compiled_min=0)  # every array would go to numba
    a = kernel.array([2**30, 7])
    with kernel_base.work_of(kernel_base.COMPILED_WORK_MIN - 1):
        product = kernel.mul(a, a)
        assert kernel_base.load_compiled() is None
    assert not kernel_base._compiled_tried  # numba was never asked for: nothing was loaded
    assert kernel.to_list(product) == [2**60 % kernel.p, 49]  # reference: plain Python integers


def test_work_at_the_crossover_loads_numba(monkeypatch):
    pytest.importorskip("numba")
    _unloaded(monkeypatch)
    with kernel_base.work_of(kernel_base.COMPILED_WORK_MIN):
        assert kernel_base.load_compiled() is not None


def test_small_work_uses_numba_when_it_is_loaded_already_or_asked_for(monkeypatch):
    pytest.importorskip("numba")
    _unloaded(monkeypatch)
    loaded = kernel_base.load_compiled()
    assert loaded is not None
    with kernel_base.work_of(1):  # the loading is paid for: nothing to save by staying on numpy
        assert kernel_base.load_compiled() is loaded
    _unloaded(monkeypatch)
    monkeypatch.setenv("STEPPER_KERNELS", "compiled")  # the benchmark's other side
    with kernel_base.work_of(1):
        assert kernel_base.load_compiled() is not None


def test_numba_stays_unloaded_only_while_a_small_block_runs(monkeypatch):
    pytest.importorskip("numba")
    _unloaded(monkeypatch)
    with pytest.raises(RuntimeError):
        with kernel_base.work_of(1):
            raise RuntimeError("a block that fails still ends")
    assert kernel_base._numpy_work == 0
    assert kernel_base.load_compiled() is not None


def test_held_back_packages_import_as_missing_inside_the_block_and_normally_after(tmp_path, monkeypatch):
    (tmp_path / "heldprobe").mkdir()
    (tmp_path / "heldprobe" / "__init__.py").write_text("VALUE = 7\n")
    (tmp_path / "heldprobe" / "inner.py").write_text("VALUE = 8\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    with kernel_base.held_back(("heldprobe",)):
        with pytest.raises(ModuleNotFoundError, match="held back"):
            import heldprobe.inner  # noqa: F401
        import json  # a package not named stays importable

        assert json.loads("1") == 1
    import heldprobe.inner

    assert heldprobe.inner.VALUE == 8
    with kernel_base.held_back(("heldprobe",)):  # already imported: still usable inside
        import heldprobe

        assert heldprobe.VALUE == 7
    monkeypatch.delitem(sys.modules, "heldprobe")
    monkeypatch.delitem(sys.modules, "heldprobe.inner")


def test_loading_the_compiled_loops_imports_neither_scipy_nor_cffi():
    # numba reaches for both on its first call; a fresh process shows whether they were held back
    pytest.importorskip("numba")
    code = ("import sys\n"
            "from stepper.field.kernels.base import load_compiled\n"
            "compiled = load_compiled()\n"
            "import numpy as np\n"
            "a = np.array([5, 6], dtype=np.uint64)\n"
            "product = compiled.small_mul(a, a, np.uint64(7), 1.0 / 7, np.empty_like(a))\n"
            "print(compiled is not None, product.tolist(), 'scipy.linalg' in sys.modules, 'cffi' in sys.modules)\n")
    env = {k: v for k, v in os.environ.items() if k != "STEPPER_KERNELS"}
    env["STEPPER_LEAN_NUMBA"] = "1"  # as the stepper command sets it for itself
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["True", "[4,", "1]", "False", "False"]  # 25 mod 7 = 4, 36 mod 7 = 1


def test_a_library_user_without_the_lean_setting_keeps_numbas_usual_imports():
    pytest.importorskip("numba")
    import importlib.util

    code = ("import sys\n"
            "from stepper.field.kernels.base import load_compiled\n"
            "assert load_compiled() is not None\n"
            "print('scipy' in sys.modules)\n")
    env = {k: v for k, v in os.environ.items() if k not in ("STEPPER_KERNELS", "STEPPER_LEAN_NUMBA")}
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert out.returncode == 0, out.stderr
    # numba reaches for SciPy on its first call whenever SciPy is installed; nothing holds it back
    assert out.stdout.split() == [str(importlib.util.find_spec("scipy") is not None)]


@pytest.mark.parametrize("label", ["babybear^4", "babybear-dense^4", "babybear^3", "goldilocks^2"])
def test_a_vector_times_a_single_row_is_every_entry_times_that_scalar_on_both_sides(label):
    # the unrolled k = 4 loops read a one-row operand in place of n copies of it; the others broadcast
    field = field_by_label(label)
    p, k = field.p, field.degree
    rng = np.random.default_rng(k)
    rows = [tuple(int(c) for c in rng.integers(0, p, size=k, dtype=np.uint64)) for _ in range(37)]
    rows[0] = tuple([p - 1] * k)
    scalar = tuple([p - 1] * (k - 1) + [p - 2])
    want = [python_mul(field, x, scalar) for x in rows]  # reference: plain Python integers
    for kernel in kernels_of(field):
        vector, single = kernel.array(rows), kernel.array([scalar])
        assert kernel.to_list(kernel.mul(vector, single)) == want
        assert kernel.to_list(kernel.mul(single, vector)) == want
        assert kernel.to_list(kernel.scale(vector, scalar)) == want


@pytest.mark.parametrize("label", ["babybear^4", "koalabear^4", "mersenne31^4", "babybear-dense^4", "babybear^3",
                                   "p32^4"])
def test_extension_products_of_the_largest_coefficients_match_python_integers(label):
    # every coefficient p - 1 (and p - 2, 1, 0 beside it) makes the raw sums of the numpy path
    # (reduced once per power of X, not once per product) as large as they get
    field = field_by_label(label)
    p, k = field.p, field.degree
    values = [tuple([p - 1] * k), tuple([p - 2] + [p - 1] * (k - 1)), tuple([1] + [0] * (k - 1)),
              tuple([0] * (k - 1) + [p - 1])]
    xs = [x for x in values for _ in values]
    ys = [y for _ in values for y in values]
    for kernel in kernels_of(field):
        got = kernel.to_list(kernel.mul(kernel.array(xs), kernel.array(ys)))
        assert got == [python_mul(field, x, y) for x, y in zip(xs, ys)]  # reference: plain Python integers


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(0, 2**64 - 1), min_size=1, max_size=40), st.integers(2, 2**64 - 1))
def test_mod_u64_is_the_python_remainder_for_any_uint64_and_modulus(values, modulus):
    # reference: Python's integer %, which is exact for any size
    x = np.array(values, dtype=np.uint64)
    expected = [v % modulus for v in values]
    assert mod_u64(x, np.uint64(modulus)).tolist() == expected
    mod_u64(x, np.uint64(modulus), out=x)  # in place, as the kernels use it
    assert x.tolist() == expected


def test_goldilocks_products_worked_in_place_leave_their_operands_and_broadcast_as_numpy_does():
    # reference: plain Python integers; p = 2^64 - 2^32 + 1 (common practice, no source). The values
    # around 2^32, 2^63 and p - 1 make every carry of the 32-bit halves and of the reduction happen
    kernel = GoldilocksKernel(named("goldilocks"))
    p = kernel.p
    edges = [0, 1, 2, 2**32 - 1, 2**32, 2**32 + 1, 2**63 - 1, 2**63, p - 2**32, p - 2, p - 1]
    rng = np.random.default_rng(64)
    xs = np.array([x for x in edges for _ in edges] + rng.integers(0, p, 300, dtype=np.uint64).tolist(), dtype=np.uint64)
    ys = np.array([y for _ in edges for y in edges] + rng.integers(0, p, 300, dtype=np.uint64).tolist(), dtype=np.uint64)
    kept = xs.copy(), ys.copy()
    assert kernel.mul(xs, ys).tolist() == [int(x) * int(y) % p for x, y in zip(xs.tolist(), ys.tolist())]
    assert np.array_equal(xs, kept[0]) and np.array_equal(ys, kept[1])
    matrix, column = xs[:88].reshape(8, 11), ys[:8].reshape(8, 1)  # a column against every row's entries
    want = [[int(x) * int(column[i, 0]) % p for x in row] for i, row in enumerate(matrix.tolist())]
    assert kernel.mul(matrix, column).tolist() == want and kernel.mul(column, matrix).tolist() == want
    assert kernel.mul(xs[:5], np.uint64(p - 1)).tolist() == [int(x) * (p - 1) % p for x in xs[:5].tolist()]
    single = kernel.mul(np.uint64(p - 1), np.uint64(2**63))
    assert single.shape == () and int(single) == (p - 1) * 2**63 % p
