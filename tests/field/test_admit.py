"""stepper.field.admit: a user-supplied modulus and polynomial are judged by galois, and the
verdicts agree with sympy (an independent reference library)."""

from __future__ import annotations

import json
import subprocess
import sys

import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.cli.main import main
from stepper.field.admit import is_irreducible, is_prime
from stepper.field.field import get_field

SETTINGS = settings(max_examples=30, deadline=None)


def test_primality_matches_sympy_below_3000():
    # reference: sympy.isprime
    assert [n for n in range(3000) if is_prime(n)] == [n for n in range(3000) if sympy.isprime(n)]


@SETTINGS
@given(n=st.integers(0, 2**130))
def test_primality_matches_sympy_on_large_numbers(n):
    # reference: sympy.isprime
    assert is_prime(n) == sympy.isprime(n)


def test_strong_pseudoprimes_and_carmichael_numbers_are_composite():
    # 3215031751 is a strong pseudoprime to the bases 2, 3, 5 and 7 (from memory; sympy confirms it
    # is composite); 561 and 41041 are Carmichael numbers (common practice, no source).
    for n in (561, 41041, 3215031751):
        assert not sympy.isprime(n)
        assert not is_prime(n)
    assert is_prime(2**61 - 1) and is_prime(2**127 - 1)  # Mersenne primes (common practice, no source)


@SETTINGS
@given(p=st.sampled_from([2, 7, 101]), coeffs=st.lists(st.integers(0, 100), min_size=1, max_size=6))
def test_irreducibility_matches_sympy_factorisation(p, coeffs):
    # reference: sympy.Poly(..., modulus=p).is_irreducible (sympy factors over GF(p) on its own)
    q = tuple(c % p for c in coeffs) + (1,)
    x = sympy.Symbol("x")
    expected = sympy.Poly(list(reversed(q)), x, modulus=p).is_irreducible
    assert is_irreducible(q, p) == expected


def test_irreducibility_over_a_254_bit_prime_is_answered_quickly():
    # X^2 - 5 over the BN254 scalar field (EIP-196/197): reducible iff 5 is a square mod r;
    # reference: sympy's Legendre symbol.
    r = 21888242871839275222246405745257275088548364400416034343698204186575808495617
    square = sympy.legendre_symbol(5, r) == 1
    assert is_irreducible((r - 5, 0, 1), r) == (not square)


def _check_field(tmp_path, capsys, field_event: dict) -> tuple[int, str]:
    path = tmp_path / "f.jsonl"
    lines = [field_event, {"type": "instance", "name": "a", "num_vars": 1, "degree": 1, "claim": 0},
             {"type": "round", "evals": [0, 0]}, {"type": "challenge", "value": 1}]
    path.write_text("".join(json.dumps(line) + "\n" for line in lines))
    code = main(["check", str(path)])
    return code, capsys.readouterr().err


def test_a_reducible_polynomial_exits_2_naming_it(tmp_path, capsys):
    # X^2 - 4 = (X - 2)(X + 2) over F_101 (common practice, no source)
    code, err = _check_field(tmp_path, capsys, {"type": "field", "modulus": 101, "extension_degree": 2,
                                                "irreducible": [97, 0, 1]})
    assert code == 2
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert "X^2 - 4" in err and "reducible" in err


def test_a_composite_modulus_exits_2_naming_it(tmp_path, capsys):
    code, err = _check_field(tmp_path, capsys, {"type": "field", "modulus": 561})  # 3 * 11 * 17
    assert code == 2 and "561, which is not prime" in err


def test_a_named_field_never_loads_galois():
    code = ("import sys; from stepper.field.field import get_field; from stepper.field.spec import *; "
            "get_field(2**31 - 2**27 + 1); get_field(2**31 - 2**27 + 1, (2**31 - 2**27 + 1 - 11, 0, 0, 0, 1)); "
            "print('galois' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_a_user_prime_is_admitted_through_galois_and_a_named_one_is_not(monkeypatch):
    import stepper.field.admit as admit

    asked: list[str] = []
    real = admit._galois

    def spy():
        asked.append("galois")
        return real()

    monkeypatch.setattr(admit, "_galois", spy)
    get_field(2**31 - 1)  # Mersenne31, a named prime (common practice, no source)
    assert asked == []
    get_field(1_000_033)  # a user prime (reference: sympy.isprime)
    assert sympy.isprime(1_000_033) and asked == ["galois"]
