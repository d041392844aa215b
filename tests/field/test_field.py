"""Fields: moduli as their defining documents give them, default extension
polynomials irreducible, scalar arithmetic against plain Python integers,
sympy and galois, identity and caching, parsing and the byte encoding."""

from __future__ import annotations

import galois
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from stepper.errors import FieldError, Where
from stepper.field.field import DEFAULT_IRREDUCIBLES, NAMED_PRIMES, Field, get_field
from stepper.field.spec import field_from_spec

SETTINGS = settings(max_examples=25, deadline=None)

BABYBEAR = NAMED_PRIMES["babybear"]
GOLDILOCKS = NAMED_PRIMES["goldilocks"]


def ext(name: str, degree: int) -> Field:
    return get_field(NAMED_PRIMES[name], DEFAULT_IRREDUCIBLES[(name, degree)])


# ----- moduli ---------------------------------------------------------------------


def test_bn254_modulus_is_the_curve_order_of_eip_196_197():
    # EIP-196 / EIP-197 (alt_bn128): curve_order, the scalar field r (value from memory).
    assert NAMED_PRIMES["bn254"] == 21888242871839275222246405745257275088548364400416034343698204186575808495617


def test_bls12_381_modulus_is_r_of_the_ietf_pairing_friendly_curves_draft():
    # IETF draft-irtf-cfrg-pairing-friendly-curves, BLS12_381 parameter r (value from memory);
    # the same r = z^4 - z^2 + 1 for the curve's seed z = -0xd201000000010000 (same draft).
    r = 0x73EDA753299D7D483339D80809A1D80553BDA402FFFE5BFEFFFFFFFF00000001
    z = -0xD201000000010000
    assert NAMED_PRIMES["bls12-381"] == r == z**4 - z**2 + 1


def test_small_field_moduli_have_their_usual_shapes():
    # Common practice, no source: Goldilocks 2^64 - 2^32 + 1, BabyBear 15 * 2^27 + 1,
    # KoalaBear 127 * 2^24 + 1, Mersenne31 2^31 - 1.
    assert NAMED_PRIMES["goldilocks"] == 2**64 - 2**32 + 1
    assert NAMED_PRIMES["babybear"] == 15 * 2**27 + 1 == 2**31 - 2**27 + 1
    assert NAMED_PRIMES["koalabear"] == 127 * 2**24 + 1 == 2**31 - 2**24 + 1
    assert NAMED_PRIMES["mersenne31"] == 2**31 - 1


@pytest.mark.parametrize("name", sorted(NAMED_PRIMES))
def test_every_named_modulus_is_prime_per_sympy(name):
    # reference: sympy.isprime
    assert sympy.isprime(NAMED_PRIMES[name])


# ----- extension polynomials ----------------------------------------------------------


@pytest.mark.parametrize("key", sorted(DEFAULT_IRREDUCIBLES))
def test_default_extension_polynomials_are_monic_and_irreducible_per_galois(key):
    # reference: galois.Poly.is_irreducible over GF(p). verify=False with a stated primitive
    # element skips galois's search for one; irreducibility never uses it.
    name, degree = key
    p = NAMED_PRIMES[name]
    q = DEFAULT_IRREDUCIBLES[key]
    assert len(q) == degree + 1 and q[-1] == 1
    gf = galois.GF(p, primitive_element=3, verify=False, compile="python-calculate")
    assert galois.Poly(list(reversed(q)), field=gf).is_irreducible()


def test_default_polynomials_are_the_documented_binomials_and_tower():
    bb, kb, gl, m31 = (NAMED_PRIMES[n] for n in ("babybear", "koalabear", "goldilocks", "mersenne31"))
    assert DEFAULT_IRREDUCIBLES["babybear", 4] == (bb - 11, 0, 0, 0, 1)  # X^4 - 11
    assert DEFAULT_IRREDUCIBLES["koalabear", 4] == (kb - 3, 0, 0, 0, 1)  # X^4 - 3
    assert DEFAULT_IRREDUCIBLES["goldilocks", 2] == (gl - 7, 0, 1)  # X^2 - 7
    # Mersenne31: the tower i^2 = -1, u^2 = 2 + i flattened: (u^2 - 2)^2 + 1 = u^4 - 4u^2 + 5 (sympy expands it).
    u = sympy.symbols("u")
    flat = sympy.Poly(sympy.expand((u**2 - 2) ** 2 + 1), u).all_coeffs()
    assert tuple(int(c) % m31 for c in reversed(flat)) == DEFAULT_IRREDUCIBLES["mersenne31", 4]


def test_reducible_non_monic_and_composite_inputs_are_refused_with_the_reason():
    with pytest.raises(FieldError, match="reducible"):
        get_field(BABYBEAR, (BABYBEAR - 4, 0, 0, 0, 1))  # X^4 - 4 = (X^2 - 2)(X^2 + 2)
    with pytest.raises(FieldError, match="monic"):
        get_field(BABYBEAR, (1, 0, 2))
    with pytest.raises(FieldError, match=f"0 <= c < p = {BABYBEAR}, found {BABYBEAR} at X\\^0"):
        get_field(BABYBEAR, (BABYBEAR, 0, 1))
    with pytest.raises(FieldError, match="2013265923, which is not prime"):
        get_field(BABYBEAR + 2)
    with pytest.raises(FieldError, match="integer modulus"):
        get_field(True)  # type: ignore[arg-type]


# ----- identity and caching ---------------------------------------------------------


def test_the_same_field_is_the_same_object():
    assert get_field(BABYBEAR) is get_field(BABYBEAR)
    spec_field = field_from_spec({"name": "babybear", "extension_degree": 4})
    assert spec_field is ext("babybear", 4)
    assert field_from_spec({"modulus": str(BABYBEAR)}) is get_field(BABYBEAR)
    assert get_field(BABYBEAR, (0, 1)) is get_field(BABYBEAR)  # a degree-1 "extension" is the prime field


def test_field_identity_is_modulus_and_polynomial():
    other = get_field(BABYBEAR, (BABYBEAR - 31, 0, 0, 0, 1))  # X^4 - 31, also irreducible
    assert other != ext("babybear", 4)
    assert hash(get_field(BABYBEAR)) == hash(Field(BABYBEAR))
    assert get_field(BABYBEAR) == Field(BABYBEAR)
    assert ext("babybear", 4).base is get_field(BABYBEAR)


def test_describe_and_spec_name_the_field():
    assert ext("babybear", 4).describe() == "babybear^4 [X^4 - 11]"
    assert ext("mersenne31", 4).describe() == "mersenne31^4 [X^4 - 4*X^2 + 5]"
    assert get_field(101).describe() == "F_p p=101"
    assert field_from_spec(ext("goldilocks", 2).spec()) is ext("goldilocks", 2)


# ----- scalar arithmetic ---------------------------------------------------------------


@SETTINGS
@given(a=st.integers(0, GOLDILOCKS - 1), b=st.integers(1, GOLDILOCKS - 1))
def test_prime_field_scalars_match_python_integers_and_sympy(a, b):
    # references: plain Python integers; sympy.mod_inverse for the inverse
    field = get_field(GOLDILOCKS)
    assert field.add(a, b) == (a + b) % GOLDILOCKS
    assert field.sub(a, b) == (a - b) % GOLDILOCKS
    assert field.mul(a, b) == a * b % GOLDILOCKS
    assert field.inv(b) == sympy.mod_inverse(b, GOLDILOCKS)
    assert field.div(a, b) == a * sympy.mod_inverse(b, GOLDILOCKS) % GOLDILOCKS
    assert field.pow(b, -3) == pow(b, -3, GOLDILOCKS)


def bb4_elements() -> st.SearchStrategy[tuple[int, ...]]:
    coeff = st.one_of(st.sampled_from([0, 1, BABYBEAR - 1]), st.integers(0, BABYBEAR - 1))
    return st.tuples(coeff, coeff, coeff, coeff)


@SETTINGS
@given(a=bb4_elements(), b=bb4_elements(), c=bb4_elements())
def test_extension_identity_inverse_and_associativity(a, b, c):
    field = ext("babybear", 4)
    assert field.mul(a, field.one) == a
    assert field.mul(field.mul(a, b), c) == field.mul(a, field.mul(b, c))
    assert field.mul(a, field.add(b, c)) == field.add(field.mul(a, b), field.mul(a, c))
    if not field.is_zero(a):
        assert field.mul(a, field.inv(a)) == field.one


def test_one_babybear4_product_by_hand():
    # (1 + 2X)(3 + X^3) = 3 + 6X + X^3 + 2X^4, and X^4 = 11: 25 + 6X + 0X^2 + X^3 (hand-expanded)
    assert ext("babybear", 4).mul((1, 2, 0, 0), (3, 0, 0, 1)) == (25, 6, 0, 1)


def test_one_goldilocks2_product_by_hand():
    # (a0 + a1 X)(b0 + b1 X) = a0 b0 + 7 a1 b1 + (a0 b1 + a1 b0) X since X^2 = 7 (hand-expanded)
    a0, a1, b0, b1 = 2**63, GOLDILOCKS - 1, 5, 2**40
    expected = ((a0 * b0 + 7 * a1 * b1) % GOLDILOCKS, (a0 * b1 + a1 * b0) % GOLDILOCKS)
    assert ext("goldilocks", 2).mul((a0, a1), (b0, b1)) == expected


@SETTINGS
@given(a=bb4_elements(), b=bb4_elements())
def test_extension_scalars_match_galois(a, b):
    # reference: galois GF(p^4) with irreducible X^4 - 11 (coefficients listed highest first there)
    gf = _galois_bb4()
    x, y = gf.Vector(list(reversed(a))), gf.Vector(list(reversed(b)))
    field = ext("babybear", 4)
    assert field.mul(a, b) == tuple(int(v) for v in reversed((x * y).vector().tolist()))
    if not field.is_zero(b):
        assert field.inv(b) == tuple(int(v) for v in reversed((y**-1).vector().tolist()))


_GALOIS_CACHE: dict[str, object] = {}


def _galois_bb4():  # type: ignore[no-untyped-def]
    if "bb4" not in _GALOIS_CACHE:
        base = galois.GF(BABYBEAR, primitive_element=31, verify=False, compile="python-calculate")
        _GALOIS_CACHE["bb4"] = galois.GF(
            BABYBEAR**4,
            irreducible_poly=galois.Poly([1, 0, 0, 0, BABYBEAR - 11], field=base),
            primitive_element=galois.Poly([1, 1], field=base),
            verify=False,
            compile="python-calculate",
        )
    return _GALOIS_CACHE["bb4"]


def test_inverting_zero_is_an_error():
    with pytest.raises(FieldError, match="non-zero"):
        get_field(BABYBEAR).inv(0)
    with pytest.raises(FieldError, match="non-zero"):
        ext("babybear", 4).inv((0, 0, 0, 0))


# ----- parsing ----------------------------------------------------------------------------


def test_parse_accepts_ints_decimal_and_hex_strings_with_surrounding_space():
    field = get_field(BABYBEAR)
    assert field.parse(5) == 5
    assert field.parse(" 42\n") == 42
    assert field.parse("0x1F") == 31
    assert field.parse("0007") == 7
    assert field.parse(str(BABYBEAR - 1)) == BABYBEAR - 1
    assert ext("babybear", 4).parse([1, "2", "0x3", 4]) == (1, 2, 3, 4)
    assert ext("babybear", 4).parse(9) == (9, 0, 0, 0)


@pytest.mark.parametrize(
    ("value", "message"),
    [
        (True, "boolean True"),
        (1.0, "found float 1.0"),
        (None, "found NoneType"),
        (-1, f"0 <= v < p = {BABYBEAR}, found -1"),
        ("-1", f"0 <= v < p = {BABYBEAR}, found -1"),
        ("-0", f"0 <= v < p = {BABYBEAR}, found -0"),
        (BABYBEAR, f"0 <= v < p = {BABYBEAR}, found {BABYBEAR}"),
        ("9" * 5000, "a number of 5000 digits"),
        ("1 2", "decimal or 0x-hex element of babybear, found '1 2'"),
        ("\u0663", "decimal or 0x-hex"),  # ARABIC-INDIC DIGIT THREE: Python's int() would accept it
        ("0xf_f", "decimal or 0x-hex"),  # int(..., 16) would accept the underscore
        ("0x", "decimal or 0x-hex"),
        ("", "decimal or 0x-hex"),
        ([1], "found a list of 1"),
    ],
)
def test_parse_refuses_bad_values_naming_value_and_modulus(value, message):
    with pytest.raises(FieldError, match=message):
        get_field(BABYBEAR).parse(value)


def test_parse_of_an_extension_element_names_the_bad_coefficient_and_place():
    field = ext("babybear", 4)
    where = Where(file="run.jsonl", line=7, instance="boarding-permutation", round=2)
    with pytest.raises(FieldError, match="expected 4 coefficients") as caught:
        field.parse([1, 2, 3], where)
    assert "run.jsonl, line 7" in str(caught.value) and "round 2" in str(caught.value)
    with pytest.raises(FieldError, match=rf"coefficient 2 \(X\^2\).*found {BABYBEAR}"):
        field.parse([1, 2, BABYBEAR, 4])


# ----- encoding ------------------------------------------------------------------------------


@SETTINGS
@given(a=bb4_elements(), n=st.integers(0, NAMED_PRIMES["bn254"] - 1))
def test_encoding_round_trips_at_fixed_width(a, n):
    field = ext("babybear", 4)
    data = field.encode(a)
    assert len(data) == 16 and field.decode(data) == a
    bn = get_field(NAMED_PRIMES["bn254"])
    assert len(bn.encode(n)) == 32 and bn.decode(bn.encode(n)) == n
    assert bn.parse(bn.encode(n)) == n


def test_encoding_is_little_endian_fixed_width():
    # common practice, no source: little-endian limbs of ceil(bits / 8) bytes per coefficient
    assert get_field(BABYBEAR).encode(1) == b"\x01\x00\x00\x00"
    assert ext("goldilocks", 2).encode((2, 1)) == b"\x02" + b"\x00" * 7 + b"\x01" + b"\x00" * 7
    assert get_field(NAMED_PRIMES["bn254"]).encode(256) == b"\x00\x01" + b"\x00" * 30


def test_decoding_refuses_non_canonical_bytes_and_wrong_lengths():
    field = get_field(BABYBEAR)
    with pytest.raises(FieldError, match=f"below p = {BABYBEAR}, found {BABYBEAR}"):
        field.decode(BABYBEAR.to_bytes(4, "little"))
    with pytest.raises(FieldError, match="expected 4 bytes.*found 3"):
        field.decode(b"\x00\x00\x00")
    with pytest.raises(FieldError, match="canonical element"):
        field.encode(BABYBEAR)


def test_json_form_keeps_big_values_as_strings():
    assert get_field(BABYBEAR).to_json(7) == 7
    assert get_field(GOLDILOCKS).to_json(GOLDILOCKS - 1) == str(GOLDILOCKS - 1)
    assert ext("goldilocks", 2).to_json((1, 2**60)) == [1, str(2**60)]
    assert ext("babybear", 4).fmt((1, 0, 0, 7)) == "[1, 0, 0, 7]"
