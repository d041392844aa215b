"""Products in extension fields of small characteristic: the galois-backed GF(2^k) kernel
against the schoolbook extension kernel it replaces, and the odd fields it is not chosen for.

Per field, in one process, side by side, best of ``--repeat``, CPU time per product over 2^N
entries (``--log2n``, default 18):

* ``schoolbook``: :class:`ExtensionKernel`'s compiled loop (what every extension gets otherwise);
* ``galois``: for GF(2^k), :class:`BinaryFieldKernel` on its galois path, packing and unpacking
  the (n, k) rows included; for an odd field (``--odd``), galois's own product on elements
  already packed (a lower bound for any kernel built on it);
* ``set-up``: CPU seconds to build galois's field and run its first product (galois compiles
  numba code per field; the first field also pays galois's import);
* ``break-even``: the products at which the set-up is paid back, set-up / (schoolbook - galois),
  to compare with ``GALOIS_AFTER`` (the kernel's switch-over).

    python3 bench/binary_fields.py                 # GF(2^8), GF(2^12), GF(2^16): about a minute
    python3 bench/binary_fields.py --odd           # also GF(3^10) and GF(3^16): minutes more
"""

from __future__ import annotations

import argparse
import time
from typing import Any, Callable

import numpy as np

from stepper.field.admit import is_irreducible
from stepper.field.field import Field, get_field
from stepper.field.kernels import GALOIS_AFTER, BinaryFieldKernel, ExtensionKernel, kernel_for

BINARY = (8, 12, 16)
ODD = ((3, 10), (3, 16))  # 3^10 < 2^20: galois's look-up tables; 3^16 > 2^20: galois computes


def cpu_ns(run: Callable[[], Any], count: int, repeat: int) -> float:
    run()
    best = float("inf")
    for _ in range(repeat):
        start = time.process_time()
        run()
        best = min(best, time.process_time() - start)
    return best / count * 1e9


def first_irreducible(p: int, k: int) -> tuple[int, ...]:
    """The monic irreducible polynomial of degree k over F_p whose lower coefficients, read as
    base-p digits (constant first), form the smallest number: a fixed, reproducible choice."""
    for lower in range(1, p**k):
        q = tuple((lower // p**i) % p for i in range(k)) + (1,)
        if q[0] and is_irreducible(q, p):
            return q
    raise SystemExit(f"bench/binary_fields.py: no irreducible polynomial of degree {k} over F_{p}")


def schoolbook_ns(field: Field, a: np.ndarray, b: np.ndarray, repeat: int) -> float:
    kernel = ExtensionKernel(field, kernel_for(field.base), compiled_min=0)
    return cpu_ns(lambda: kernel.mul(a, b), len(a), repeat)


def binary_row(k: int, n: int, repeat: int) -> tuple[str, float, float, float]:
    field = get_field(2, first_irreducible(2, k))
    rng = np.random.default_rng(k)
    kernel = BinaryFieldKernel(field, kernel_for(field.base), compiled_min=0, galois_after=0)
    a, b = kernel.random(n, rng), kernel.random(n, rng)
    start = time.process_time()
    product = kernel.mul(a, b)
    set_up = time.process_time() - start
    school = schoolbook_ns(field, a, b, repeat)
    if not np.array_equal(product, ExtensionKernel(field, kernel_for(field.base), compiled_min=0).mul(a, b)):
        raise SystemExit(f"bench/binary_fields.py: GF(2^{k}): galois and schoolbook products differ")
    return f"GF(2^{k})", school, cpu_ns(lambda: kernel.mul(a, b), n, repeat), set_up


def odd_row(p: int, k: int, n: int, repeat: int) -> tuple[str, float, float, float]:
    import galois

    q = first_irreducible(p, k)
    field = get_field(p, q)
    rng = np.random.default_rng(p * k)
    a, b = field.vrandom(n, rng), field.vrandom(n, rng)
    powers = np.array([p**i for i in range(k)], dtype=np.uint64)
    start = time.process_time()
    poly = galois.Poly(list(reversed(q)), field=galois.GF(p))
    gf = galois.GF(p**k, irreducible_poly=poly, primitive_element=galois.primitive_element(poly), verify=False)
    ga, gb = (a @ powers).astype(np.int64).view(gf), (b @ powers).astype(np.int64).view(gf)
    product = ga * gb
    set_up = time.process_time() - start
    school = schoolbook_ns(field, a, b, repeat)
    expected = ExtensionKernel(field, kernel_for(field.base), compiled_min=0).mul(a[:64], b[:64]) @ powers
    if not np.array_equal(product[:64].view(np.ndarray).astype(np.uint64), expected):
        raise SystemExit(f"bench/binary_fields.py: GF({p}^{k}): galois and schoolbook products differ")
    return f"GF({p}^{k}) {gf.ufunc_mode}", school, cpu_ns(lambda: ga * gb, n, repeat), set_up


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--log2n", type=int, default=18, help="vector length 2^N (default 18)")
    parser.add_argument("--repeat", type=int, default=5, help="best of this many runs (default 5)")
    parser.add_argument("--odd", action="store_true", help="also GF(3^10) and GF(3^16), where galois is not chosen")
    args = parser.parse_args(argv)
    n = 1 << args.log2n
    print(f"{'field':<26}{'schoolbook ns':>14}{'galois ns':>11}{'speed-up':>10}{'set-up s':>10}{'break-even':>12}")
    rows = [binary_row(k, n, args.repeat) for k in BINARY]
    if args.odd:
        rows += [odd_row(p, k, n, args.repeat) for p, k in ODD]
    for label, school, ours, set_up in rows:
        saving = school - ours
        even = f"{set_up / saving * 1e9:12.3g}" if saving > 0 else f"{'never':>12}"
        print(f"{label:<26}{school:14.1f}{ours:11.1f}{school / ours:10.1f}{set_up:10.2f}{even}", flush=True)
    print(f"\n(2^{args.log2n} products, CPU time, best of {args.repeat}; the kernel switches to galois "
          f"after {GALOIS_AFTER} = 2^{GALOIS_AFTER.bit_length() - 1} products in large arrays)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
