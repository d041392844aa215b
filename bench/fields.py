"""Vector field arithmetic: stepper's kernels against galois and bare numpy.

For every field, multiply and add 2^20 random elements (``--log2n``) with
stepper's kernel, with galois (the reference library), and, for primes below
2^32, with bare numpy ``(a * b) % p``. The row ``2^64-59`` is a generic
64-bit prime (Montgomery kernel). All timings come from one run on one
machine, side by side, best of ``--repeat``; only the ratios are meant to be
compared across machines. Where galois needs tens of microseconds per
element it runs on a smaller sample (``--galois-log2n``) and the per-element
time is compared. Each galois result is also checked against ours.

Targets (issue 2): Goldilocks multiply >= 5x faster than galois; BabyBear^4
multiply >= 100x faster than galois; 31-bit multiply within 1.5x of bare numpy.

After the table, for BN254 and BLS12-381: the limb kernel the whole-file check runs its
blocks on (``LimbKernel``: 29-bit limbs, Montgomery products in numpy) against the object
arrays of Python ints of ``field.vmul``, on blocks of 2^14 elements (the sweep's size), and
g(r) of degree-3 rounds from g(0..3) as the sweep computes it on each.

    python3 bench/fields.py                      # about a minute
    python3 bench/fields.py --fields goldilocks babybear^4 --repeat 5
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field

FIELDS = (
    "babybear",
    "koalabear",
    "mersenne31",
    "goldilocks",
    "2^64-59",
    "bn254",
    "bls12-381",
    "babybear^4",
    "koalabear^4",
    "mersenne31^4",
    "goldilocks^2",
)
SLOW_FOR_GALOIS = 1_000  # ns per element above which galois gets the small sample


@dataclass(frozen=True, slots=True)
class Timing:
    field: str
    op: str
    ours_ns: float
    galois_ns: float
    numpy_ns: float | None


def best_ns(run: Callable[[], Any], count: int, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return best / count * 1e9


def field_of(label: str) -> Field:
    if label == "2^64-59":  # a generic 64-bit prime (the largest below 2^64): the Montgomery kernel
        return get_field(2**64 - 59)
    name, _, degree = label.partition("^")
    q = DEFAULT_IRREDUCIBLES[(name, int(degree))] if degree else None
    return get_field(NAMED_PRIMES[name], q)


def galois_field(field: Field) -> Any:
    import galois

    p = field.p
    if p.bit_length() > 64:
        # verify=False skips the factorisation of p - 1 (minutes for a 254-bit p);
        # the primitive element is never used by multiplication and addition.
        base = galois.GF(p, primitive_element=2, verify=False)
    else:
        base = galois.GF(p)
    if not field.is_extension:
        return base
    poly = galois.Poly(list(reversed(field.irreducible)), field=base)
    # galois wants a primitive element for GF(p^k); x + 1 stands in unchecked (verify=False).
    return galois.GF(
        p**field.degree, irreducible_poly=poly, primitive_element=galois.Poly([1, 1], field=base), verify=False
    )


def to_galois(gf: Any, field: Field, values: np.ndarray) -> Any:
    if field.is_extension:
        return gf.Vector(np.ascontiguousarray(values[:, ::-1]).astype(np.int64 if field.p < 2**62 else object))
    return gf(values.tolist() if values.dtype == object else values.astype(np.int64 if field.p < 2**63 else object))


def from_galois(field: Field, result: Any) -> list[Any]:
    if field.is_extension:
        return [tuple(int(c) for c in reversed(row)) for row in result.vector().tolist()]
    return [int(v) for v in result.tolist()]


def measure(label: str, log2n: int, galois_log2n: int, repeat: int) -> list[Timing]:
    field = field_of(label)
    rng = np.random.default_rng(20260)
    n = 1 << log2n
    a, b = field.vrandom(n, rng), field.vrandom(n, rng)
    field.vmul(a, b)  # loads (or compiles) the numba loops outside the timing
    field.vadd(a, b)
    gf = galois_field(field)
    timings = []
    for op, ours, theirs in (("mul", field.vmul, lambda x, y: x * y), ("add", field.vadd, lambda x, y: x + y)):
        ours_ns = best_ns(lambda: ours(a, b), n, repeat)
        probe = 1 << min(galois_log2n, log2n)
        ga, gb = to_galois(gf, field, a[:probe]), to_galois(gf, field, b[:probe])
        probe_ns = best_ns(lambda: theirs(ga, gb), probe, 1)
        m = probe if probe_ns > SLOW_FOR_GALOIS else n
        ga, gb = to_galois(gf, field, a[:m]), to_galois(gf, field, b[:m])
        galois_ns = best_ns(lambda: theirs(ga, gb), m, repeat)
        if from_galois(field, theirs(ga[:64], gb[:64])) != field.vlist(ours(a[:64], b[:64])):
            sys.exit(f"bench/fields.py: {label} {op}: stepper and galois disagree")
        numpy_ns = None
        if field.p < 2**32 and not field.is_extension:
            p = np.uint64(field.p)
            bare: Callable[[], Any] = (lambda: (a * b) % p) if op == "mul" else (lambda: (a + b) % p)
            numpy_ns = best_ns(bare, n, repeat)
        timings.append(Timing(label, op, ours_ns, galois_ns, numpy_ns))
    return timings


def limb_rows(labels: list[str], repeat: int, log2n: int = 14) -> None:
    """Multiply and add of the wide primes on LimbKernel rows vs object arrays of Python ints."""
    from stepper.field.kernels.limbs import LimbKernel
    from stepper.verify.roundblock import _evaluate_wide

    n = 1 << log2n
    for label in labels:
        field = field_of(label)
        if field.is_extension or field.p < 2**64:
            continue
        limbs, objects = LimbKernel(field), field.kernel
        rng = np.random.default_rng(20261)
        a, b = objects.random(n, rng), objects.random(n, rng)
        la, lb = limbs.array(a), limbs.array(b)
        for op in ("mul", "add"):
            ours, theirs = getattr(limbs, op), getattr(objects, op)
            if limbs.to_list(ours(la, lb)) != objects.to_list(theirs(a, b)):
                sys.exit(f"bench/fields.py: {label} {op}: limb rows and Python ints disagree")
            limb_ns, object_ns = best_ns(lambda: ours(la, lb), n, repeat), best_ns(lambda: theirs(a, b), n, repeat)
            print(f"{label + ' limbs':<20}{op:<5}{limb_ns:12.2f} ns vs object arrays {object_ns:9.2f} ns: "
                  f"{object_ns / limb_ns:5.1f}x faster (2^{log2n} elements)", flush=True)
        evals = objects.random(4 * n, rng).reshape(n, 4)  # g(0..3) of degree-3 rounds, and their challenges
        limb_evals = limbs.array(evals.reshape(-1)).reshape(n, 4, limbs.n)
        if limbs.to_list(limbs.evaluate(limb_evals, la)) != [int(v) for v in _evaluate_wide(field.p, evals, a)]:
            sys.exit(f"bench/fields.py: {label} g(r): limb rows and Python ints disagree")
        limb_ns = best_ns(lambda: limbs.evaluate(limb_evals, la), n, repeat)
        object_ns = best_ns(lambda: _evaluate_wide(field.p, evals, a), n, repeat)
        print(f"{label + ' limbs':<20}{'g(r)':<5}{limb_ns:12.2f} ns vs object arrays {object_ns:9.2f} ns: "
              f"{object_ns / limb_ns:5.1f}x faster (per degree-3 round)", flush=True)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--log2n", type=int, default=20, help="vector length 2^N for stepper and numpy (default 20)")
    parser.add_argument("--galois-log2n", type=int, default=12, help="sample 2^N where galois is slow (default 12)")
    parser.add_argument("--repeat", type=int, default=3, help="best of this many runs (default 3)")
    parser.add_argument("--fields", nargs="+", default=list(FIELDS), choices=FIELDS, metavar="FIELD")
    args = parser.parse_args(argv)

    start = time.perf_counter()
    rows: list[Timing] = []
    print(
        f"{'field':<14}{'op':<5}{'stepper ns':>12}{'galois ns':>12}{'numpy ns':>10}"
        f"{'galois/stepper':>16}{'stepper/numpy':>15}"
    )
    for label in args.fields:
        for t in measure(label, args.log2n, args.galois_log2n, args.repeat):
            rows.append(t)
            numpy_col = f"{t.numpy_ns:10.2f}" if t.numpy_ns is not None else f"{'-':>10}"
            ratio_np = f"{t.ours_ns / t.numpy_ns:15.2f}" if t.numpy_ns is not None else f"{'-':>15}"
            print(
                f"{t.field:<14}{t.op:<5}{t.ours_ns:12.2f}{t.galois_ns:12.2f}{numpy_col}"
                f"{t.galois_ns / t.ours_ns:16.1f}{ratio_np}",
                flush=True,
            )
    print(f"\n(2^{args.log2n} elements, best of {args.repeat}; {time.perf_counter() - start:.0f} s in all)")
    limb_rows(args.fields, args.repeat)
    by_key = {(t.field, t.op): t for t in rows}
    targets = []
    if ("goldilocks", "mul") in by_key:
        t = by_key["goldilocks", "mul"]
        targets.append(("goldilocks mul: galois/stepper >= 5", t.galois_ns / t.ours_ns, t.galois_ns / t.ours_ns >= 5))
    if ("babybear^4", "mul") in by_key:
        t = by_key["babybear^4", "mul"]
        ratio = t.galois_ns / t.ours_ns
        targets.append(("babybear^4 mul: galois/stepper >= 100", ratio, ratio >= 100))
    for label in ("babybear", "koalabear", "mersenne31"):
        if (label, "mul") in by_key:
            t = by_key[label, "mul"]
            ratio = t.ours_ns / t.numpy_ns  # type: ignore[operator]
            targets.append((f"{label} mul: stepper/numpy <= 1.5", ratio, ratio <= 1.5))
    for text, ratio, ok in targets:
        print(f"target {text:<40} measured {ratio:8.2f}  {'met' if ok else 'MISSED'}")
    return 0 if all(ok for _, _, ok in targets) else 1


if __name__ == "__main__":
    raise SystemExit(main())
