"""Shortened values are always marked: head…tail[length]."""

from __future__ import annotations

from stepper.field.display import elide

# The BN254 scalar field modulus r, from EIP-197 (Ethereum Improvement Proposal 197,
# "Precompiled contracts for optimal ate pairing check on the elliptic curve alt_bn128").
BN254_R = 21888242871839275222246405745257275088548364400416034343698204186575808495617


def test_a_value_that_fits_is_left_whole():
    assert elide("1953667902", 10) == "1953667902"


def test_a_shortened_value_shows_the_ellipsis_and_its_full_length():
    text = str(BN254_R - 1)
    assert len(text) == 77
    short = elide(text, 16)
    assert short == text[:6] + "…" + text[-5:] + "[77]"
    assert len(short) == 16


def test_a_tiny_width_still_marks_the_cut():
    short = elide("1953667902", 3)
    assert "…" in short and short.endswith("[10]")
