"""The soundness summary states the sumcheck bound v*d/|F| and the replay agrees with it.

Bound as stated in J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1
(soundness error at most v*d/|F| for v variables and degree d per variable; from memory).
"""

from __future__ import annotations

import math
from fractions import Fraction

from plain_sumcheck import BABYBEAR, Plain, instance_payloads, thaler_payloads
from stepper.transcript.events import Sequencer
from stepper.verify.soundness import InstanceBound, SoundnessSummary, bits_of
from stepper.verify.replay import Replay


def replay(payloads):
    seq = Sequencer()
    rep = Replay()
    for p in payloads:
        rep.feed(seq.feed(p))
    return rep.report()


def test_worked_example_bound_is_v_times_d_over_the_field_size():
    report = replay(thaler_payloads(Plain(BABYBEAR), (5, 7, 11)))
    assert report.soundness.bound == Fraction(3 * 3, BABYBEAR)
    assert report.soundness.per_instance[0].bound == Fraction(9, BABYBEAR)
    assert report.soundness.bits == 27.7  # log2(2013265921 / 9) = 27.74
    assert "proves nothing about the soundness" in report.warning


def test_extension_field_bound_uses_the_challenge_field_size():
    ar = Plain(BABYBEAR, 4, 11)
    report = replay(thaler_payloads(ar, [(r, 1, 0, 0) for r in (5, 7, 11)]))
    assert report.soundness.bound == Fraction(9, BABYBEAR**4)
    assert report.soundness.bits == 120.5 == round(4 * math.log2(BABYBEAR) - math.log2(9), 1)


def test_proof_bound_is_the_sum_over_instances():
    ar = Plain(BABYBEAR)
    first = thaler_payloads(ar, (5, 7, 11))
    second = instance_payloads(ar, "deck-slots-zero", 1, 2, 0, [[0, 0, 0]], [9], 0)
    report = replay(first + second)
    assert report.soundness.total_rounds_degree == 3 * 3 + 1 * 2
    assert report.soundness.bound == Fraction(11, BABYBEAR)
    assert report.to_json()["soundness"]["bound"] == f"11/{BABYBEAR}"


def test_bits_worked_out_from_the_integers_equal_those_of_the_reduced_fraction():
    # the text output takes bits without making a Fraction; they must be the Fraction's to the digit,
    # reducible pairs included (60/2013265921 does not reduce, 6/9 and 12/2^64 do)
    for numerator, denominator in ((9, BABYBEAR), (60, BABYBEAR), (6, 9), (12, 1 << 64), (1, 1), (7, 7 ** 40)):
        expected = bits_of(Fraction(numerator, denominator))
        assert SoundnessSummary(denominator, numerator, 1, ()).bits == expected
        assert InstanceBound(0, "deck-slots-zero", numerator, 1, denominator).bits == expected


def test_zero_rounds_have_no_guessing_error():
    assert bits_of(Fraction(0)) is None
    assert InstanceBound(0, "deck-slots-zero", 0, 3, 97).bits is None
    assert SoundnessSummary(97, 0, 1, ()).describe().startswith("soundness error 0")


def test_a_cheating_round_survives_for_exactly_d_challenges_in_a_tiny_field():
    # One round, degree 2, over F_11: the true polynomial g and a lie g' = g + u with
    # u(0) + u(1) = 1 (so the claim is one too high) agree only at the d = 2 roots of u.
    # The replay accepts exactly for those challenges: the bound d/|F| is attained.
    p, a, b = 11, 2, 5
    g = [4, 2, 9]  # g(0), g(1), g(2)
    scale = pow((0 - a) * (0 - b) + (1 - a) * (1 - b), -1, p)
    u = [(x - a) * (x - b) * scale % p for x in range(3)]
    lie = [(gi + ui) % p for gi, ui in zip(g, u)]
    claim = (lie[0] + lie[1]) % p
    assert claim == (g[0] + g[1] + 1) % p
    ar = Plain(p)
    accepted = []
    for r in range(p):
        true_at_r = sum(g[i] * _basis(i, r, p) for i in range(3)) % p
        payloads = [ar.spec(), *instance_payloads(ar, "deck-slots-zero", 1, 2, claim, [lie], [r], true_at_r)]
        if replay(payloads).verdict == "accept":
            accepted.append(r)
    assert accepted == [a, b]
    assert Fraction(len(accepted), p) == InstanceBound(0, "x", 1, 2, p).bound


def _basis(i: int, x: int, p: int) -> int:
    num, den = 1, 1
    for j in range(3):
        if j != i:
            num, den = num * (x - j), den * (i - j)
    return num * pow(den, -1, p) % p


def test_a_base_field_bound_is_flagged_weak_and_an_extension_bound_is_not():
    base = replay(thaler_payloads(Plain(BABYBEAR), (5, 7, 11))).soundness
    ext = replay(thaler_payloads(Plain(BABYBEAR, 4, 11), [(r, 1, 0, 0) for r in (5, 7, 11)])).soundness
    assert base.weak and "WEAK" in base.caution() and base.to_json()["weak"] is True
    assert not ext.weak and ext.caution() is None
