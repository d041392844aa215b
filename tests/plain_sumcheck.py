"""An honest sumcheck prover in plain Python integers, written apart from stepper.

Used by the verify, soundness and check tests as the independent side: round
polynomials come from the definition g_k(X) = sum over the free boolean
variables of g(r_1, ..., r_(k-1), X, b) (common practice, no source), arithmetic
is done here over F_p or a binomial extension F_p[X]/(X^k - w), and the output is
event payloads (JSON-able maps) exactly as a foreign prover would write them.
"""

from __future__ import annotations

import itertools
import json
from typing import Any, Callable, Sequence

Elem = Any  # int, or a tuple of k ints (constant first)
Payload = dict[str, Any]

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source
GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
BN254 = 21888242871839275222246405745257275088548364400416034343698204186575808495617  # EIP-197 curve order


class Plain:
    """F_p (k = 1), F_p[X]/(X^k - w), or F_p[X]/(q) for a monic q given constant term first
    (``q``, k + 1 coefficients); elements as ints or k-tuples."""

    def __init__(self, p: int, k: int = 1, w: int = 0, q: tuple[int, ...] | None = None) -> None:
        self.p, self.k, self.w = p, k, w
        self.q = q if q is not None else (((-w) % p,) + (0,) * (k - 1) + (1,) if k > 1 else None)

    def const(self, n: int) -> Elem:
        return n % self.p if self.k == 1 else (n % self.p,) + (0,) * (self.k - 1)

    def add(self, a: Elem, b: Elem) -> Elem:
        if self.k == 1:
            return (a + b) % self.p
        return tuple((x + y) % self.p for x, y in zip(a, b))

    def sub(self, a: Elem, b: Elem) -> Elem:
        return self.add(a, self.mul(self.const(-1), b))

    def mul(self, a: Elem, b: Elem) -> Elem:
        if self.k == 1:
            return a * b % self.p
        prod = [0] * (2 * self.k - 1)
        for i, x in enumerate(a):
            for j, y in enumerate(b):
                prod[i + j] += x * y
        for t in range(2 * self.k - 2, self.k - 1, -1):  # X^k = -(q_0 + q_1 X + ... + q_(k-1) X^(k-1))
            top, prod[t] = prod[t], 0
            for i in range(self.k):
                prod[t - self.k + i] -= top * self.q[i]
        return tuple(c % self.p for c in prod[: self.k])

    def json(self, e: Elem) -> Any:
        return list(e) if isinstance(e, tuple) else e

    def spec(self) -> Payload:
        out: Payload = {"type": "field", "modulus": str(self.p)}
        if self.k > 1:
            out["extension_degree"] = self.k
            out["irreducible"] = [str(c % self.p) for c in self.q]
        return out


def lagrange(ar: Plain, evals: Sequence[Elem], x: Elem) -> Elem:
    """The polynomial through (i, evals[i]) at x, from the textbook formula."""
    acc = ar.const(0)
    for i, yi in enumerate(evals):
        num, den = ar.const(1), 1
        for j in range(len(evals)):
            if j != i:
                num = ar.mul(num, ar.sub(x, ar.const(j)))
                den = den * (i - j) % ar.p
        acc = ar.add(acc, ar.mul(ar.mul(yi, num), ar.const(pow(den, -1, ar.p))))
    return acc


def brute_force_rounds(ar: Plain, g: Callable[..., Elem], num_vars: int, degree: int,
                       challenge: Callable[[int, list[Elem]], Elem]) -> tuple[list[list[Elem]], list[Elem]]:
    """Round evaluations g_k(0..degree) and challenges, low-first (x_1 bound in round 1)."""
    fixed: list[Elem] = []
    rounds = []
    for k in range(1, num_vars + 1):
        evals = []
        for x in range(degree + 1):
            total = ar.const(0)
            for rest in itertools.product([0, 1], repeat=num_vars - k):
                total = ar.add(total, g(*fixed, ar.const(x), *(ar.const(b) for b in rest)))
            evals.append(total)
        rounds.append(evals)
        fixed.append(challenge(k, evals))
    return rounds, fixed


def thaler_g(ar: Plain) -> Callable[..., Elem]:
    """g(x1, x2, x3) = 2 x1^3 + x1 x3 + x2 x3 (J. Thaler, "Proofs, Arguments, and
    Zero-Knowledge", section 4.1 worked example; from memory)."""

    def g(x1: Elem, x2: Elem, x3: Elem) -> Elem:
        cube = ar.mul(ar.mul(x1, x1), x1)
        return ar.add(ar.add(ar.mul(ar.const(2), cube), ar.mul(x1, x3)), ar.mul(x2, x3))

    return g


def product_rounds(ar: Plain, tables: list[list[Elem]], challenge: Callable[[int, list[Elem]], Elem]
                   ) -> tuple[list[list[Elem]], list[Elem], Elem]:
    """Rounds of sum_x prod_t T_t~(x) by folding (pairs (2i, 2i+1) differ in x_1), and the final value."""
    tabs = [list(t) for t in tables]
    degree = len(tabs)
    rounds, rs = [], []
    while len(tabs[0]) > 1:
        evals = []
        for x in range(degree + 1):
            total = ar.const(0)
            for i in range(len(tabs[0]) // 2):
                term = ar.const(1)
                for t in tabs:
                    term = ar.mul(term, ar.add(t[2 * i], ar.mul(ar.const(x), ar.sub(t[2 * i + 1], t[2 * i]))))
                total = ar.add(total, term)
            evals.append(total)
        rounds.append(evals)
        r = challenge(len(rounds), evals)
        rs.append(r)
        tabs = [[ar.add(t[2 * i], ar.mul(r, ar.sub(t[2 * i + 1], t[2 * i]))) for i in range(len(t) // 2)]
                for t in tabs]
    final = ar.const(1)
    for t in tabs:
        final = ar.mul(final, t[0])
    return rounds, rs, final


def instance_payloads(ar: Plain, name: str, num_vars: int, degree: int, claim: Elem, rounds: list[list[Elem]],
                      challenges: list[Elem], final: Elem | None) -> list[Payload]:
    out: list[Payload] = [{"type": "instance", "name": name, "num_vars": num_vars, "degree": degree,
                           "claim": ar.json(claim)}]
    for evals, r in zip(rounds, challenges):
        out.append({"type": "round", "evals": [ar.json(v) for v in evals]})
        out.append({"type": "challenge", "value": ar.json(r)})
    if final is not None:
        out.append({"type": "final", "value": ar.json(final)})
    return out


def thaler_payloads(ar: Plain, challenges: Sequence[Elem], name: str = "boarding-permutation") -> list[Payload]:
    """Field + the worked example proved honestly with the given challenges."""
    g = thaler_g(ar)
    rounds, rs = brute_force_rounds(ar, g, 3, 3, lambda k, _ev: challenges[k - 1])
    claim = ar.const(0)
    for b in itertools.product([0, 1], repeat=3):
        claim = ar.add(claim, g(*(ar.const(x) for x in b)))
    return [ar.spec(), *instance_payloads(ar, name, 3, 3, claim, rounds, rs, g(*rs))]


def jsonl(payloads: list[Payload]) -> str:
    return "".join(json.dumps(p) + "\n" for p in payloads)
