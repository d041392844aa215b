"""The verifier replay names the exact instance, round and check of every single fault.

The honest side is tests/plain_sumcheck.py (plain Python integers, independent of
stepper). The worked example is J. Thaler, "Proofs, Arguments, and Zero-Knowledge",
section 4.1: g = 2 x1^3 + x1 x3 + x2 x3, H = 12, round 1 polynomial 8X^3 + 2X + 1
(values from memory; recomputed by brute force below).
"""

from __future__ import annotations

import copy
import hashlib
import random

import pytest
from hypothesis import given, settings, strategies as st

from plain_sumcheck import (
    BABYBEAR, BN254, GOLDILOCKS, Plain, instance_payloads, lagrange, product_rounds, thaler_payloads,
)
from stepper.transcript.events import Sequencer
from tests.verify.scheduled_proofs import scheduled_worked_example
from stepper.verify.fiatshamir import SCHEDULE_NAME
from stepper.verify.replay import Replay, replay_transcript
from stepper.verify.results import RoundResult
from stepper.transcript.model import fold_events

CHALLENGES = (5, 7, 11)  # outside the nodes 0..3, so no evaluation hides a change


def run(payloads, **kwargs):
    seq = Sequencer()
    replay = Replay(keep_rounds=True, **kwargs)
    results = []
    for payload in payloads:
        results += replay.feed(seq.feed(payload))
    return results, replay.report()


def test_worked_example_round_one_is_the_published_polynomial():
    ar = Plain(BABYBEAR)
    payloads = thaler_payloads(ar, CHALLENGES)
    assert payloads[1]["claim"] == 12  # H = 12 (Thaler, section 4.1; from memory)
    assert payloads[2]["evals"] == [1, 11, 69, 223]  # 8X^3 + 2X + 1 at 0..3
    assert [8 * x**3 + 2 * x + 1 for x in range(4)] == [1, 11, 69, 223]


@pytest.mark.parametrize("ar", [
    Plain(BABYBEAR), Plain(GOLDILOCKS), Plain(BN254), Plain(BABYBEAR, 4, 11),
], ids=["babybear", "goldilocks", "bn254", "babybear^4"])
def test_worked_example_is_accepted_over_several_fields(ar):
    challenges = [ar.const(r) for r in CHALLENGES]
    if ar.k > 1:
        challenges = [(r, 3, 0, 1) for r in CHALLENGES]  # genuinely outside the base field
    results, report = run(thaler_payloads(ar, challenges))
    assert report.verdict == "accept" and report.first_failure is None
    rounds = [r for r in results if isinstance(r, RoundResult)]
    assert [r.round for r in rounds] == [1, 2, 3] and all(r.status == "pass" for r in rounds)
    assert rounds[0].sum01 == ar.const(12)
    assert rounds[1].claim_in == rounds[0].claim_out == lagrange(ar, [ar.const(v) for v in (1, 11, 69, 223)],
                                                                 challenges[0])
    assert report.instances[0].final.status == "pass"


def _fault(payloads, fault):
    out = copy.deepcopy(payloads)
    p = BABYBEAR
    if fault == "sum":
        out[4]["evals"][0] = (out[4]["evals"][0] + 1) % p  # round 2's g(0)
    elif fault == "consistent":
        out[4]["evals"][2] = (out[4]["evals"][2] + 5) % p  # g2(2): sum holds, g2(r2) moves
    elif fault == "final":
        out[-1]["value"] = (out[-1]["value"] + 1) % p
    elif fault == "degree":
        out[2]["evals"].append(8 * 4**3 + 2 * 4 + 1)  # an honest g1(4): still one value too many
    elif fault == "claim":
        out[1]["claim"] = 13
    elif fault == "truncated":
        out = out[:6]  # stops after round 2's challenge
    return out


@pytest.mark.parametrize("fault, verdict, round_, check", [
    ("sum", "reject", 2, "sum"),
    ("consistent", "reject", 3, "sum"),
    ("final", "reject", 3, "final"),
    ("degree", "reject", 1, "degree"),
    ("claim", "reject", 1, "sum"),
    ("truncated", "incomplete", None, None),
])
def test_each_single_fault_is_located_exactly(fault, verdict, round_, check):
    ar = Plain(BABYBEAR)
    _, report = run(_fault(thaler_payloads(ar, CHALLENGES), fault))
    assert report.verdict == verdict
    if round_ is None:
        assert report.first_failure is None and report.instances[0].status == "incomplete"
    else:
        ff = report.first_failure
        assert (ff.instance, ff.instance_name, ff.round, ff.check) == (0, "boarding-permutation", round_, check)


def test_sum_failure_sentence_names_both_sides():
    _, report = run(_fault(thaler_payloads(Plain(BABYBEAR), CHALLENGES), "sum"))
    ff = report.first_failure
    carried = lagrange(Plain(BABYBEAR), [1, 11, 69, 223], 5)
    assert ff.expected == carried and ff.found == carried + 1
    assert ff.explanation == f"round 2: g(0)+g(1) = {carried + 1}, but round 1 carried the claim g1(r1) = {carried}"


def test_degree_failure_counts_evaluations():
    _, report = run(_fault(thaler_payloads(Plain(BABYBEAR), CHALLENGES), "degree"))
    assert (report.first_failure.expected, report.first_failure.found) == (4, 5)


def test_replay_continues_after_a_failure_and_marks_later_rounds():
    results, report = run(_fault(thaler_payloads(Plain(BABYBEAR), CHALLENGES), "degree"))
    rounds = [r for r in results if isinstance(r, RoundResult)]
    assert [r.status for r in rounds] == ["fail", "pass", "pass"]  # the extra value is an honest g1(4)
    assert [r.after_failure for r in rounds] == [False, True, True]
    assert report.instances[0].rounds_passed == 0 and report.instances[0].final.status == "pass"


@pytest.mark.parametrize("form", ["evals-no-1", "coeffs-no-linear"])
def test_wrong_claim_in_a_compressed_form_surfaces_only_at_the_final_check(form):
    from stepper.field.field import get_field
    from stepper.field.poly import RoundPoly

    field = get_field(BABYBEAR)
    payloads = thaler_payloads(Plain(BABYBEAR), CHALLENGES)
    payloads[1]["form"] = form
    for p in payloads:
        if p["type"] == "round":
            p["evals"] = [int(v) for v in RoundPoly(tuple(p["evals"])).to_form(field, form)]
    results, report = run(payloads)
    assert report.verdict == "accept"
    assert results[0].recovered == ("g(1)" if form == "evals-no-1" else "c1")
    assert "holds by construction" in results[0].explanation
    payloads[1]["claim"] = 13
    _, report = run(payloads)
    assert (report.first_failure.round, report.first_failure.check) == (3, "final")


def test_coefficient_form_is_accepted():
    from stepper.field.field import get_field
    from stepper.field.poly import RoundPoly

    field = get_field(BABYBEAR)
    payloads = thaler_payloads(Plain(BABYBEAR), CHALLENGES)
    payloads[1]["form"] = "coeffs"
    for p in payloads:
        if p["type"] == "round":
            p["evals"] = list(RoundPoly(tuple(p["evals"])).to_form(field, "coeffs"))
    assert payloads[2]["evals"] == [1, 2, 0, 8]  # 8X^3 + 2X + 1, constant first (Thaler 4.1, from memory)
    assert run(payloads)[1].verdict == "accept"


def _batched(claim_delta: int):
    ar = Plain(BABYBEAR)
    first = thaler_payloads(ar, CHALLENGES)
    tables = [[3, 1, 4, 1], [5, 9, 2, 6]]
    rounds, rs, final = product_rounds(ar, tables, lambda k, ev: [13, 17][k - 1])
    own = sum(a * b for a, b in zip(*tables))
    alpha = 1000
    claim = (own + alpha * 12 + claim_delta) % BABYBEAR  # terms: [own, 12]
    second = instance_payloads(ar, "deck-slots-zero", 2, 2, claim, rounds, rs, final)
    batch = {"type": "batch", "coefficient": alpha, "terms": [own, 12], "sources": ["deck", "boarding claim"]}
    second[0]["claim"] = claim
    return first + [batch] + second


def test_batched_claim_is_checked_as_its_own_named_check():
    results, report = run(_batched(0))
    batch = [r for r in results if type(r).__name__ == "BatchResult"]
    assert batch and batch[0].status == "pass"
    _, report = run(_batched(1))
    ff = report.first_failure
    assert (ff.instance, ff.instance_name, ff.round, ff.check) == (1, "deck-slots-zero", 0, "batch")


def test_failure_in_a_later_instance_is_reported_with_its_index():
    ar = Plain(BABYBEAR)
    first = thaler_payloads(ar, CHALLENGES)
    second = thaler_payloads(ar, CHALLENGES, name="deck-slots-zero")[1:]
    second[-1]["value"] += 1
    _, report = run(first + second)
    assert (report.first_failure.instance, report.first_failure.check) == (1, "final")
    assert [s.status for s in report.instances] == ["pass", "fail"]


def test_builtin_schedule_is_re_derived_and_a_replaced_challenge_is_named():
    results, report = run(scheduled_worked_example())
    assert report.verdict == "accept"
    assert all(r.rederived == r.challenge for r in results if isinstance(r, RoundResult))
    assert SCHEDULE_NAME in report.challenges
    _, report = run(scheduled_worked_example(tamper_round=2))
    ff = report.first_failure
    assert (ff.round, ff.check) == (2, "challenge") and ff.found == (ff.expected + 1) % BABYBEAR


def _absorb_all(history):
    h = hashlib.sha256()
    for event in history[1:]:  # after the field map
        h.update(repr(sorted(event.items())).encode())
    return int.from_bytes(h.digest(), "little") % int(history[0]["modulus"])


def _forget_claim(history):
    h = hashlib.sha256()
    for event in history[1:]:
        h.update(repr(sorted((k, v) for k, v in event.items() if k != "claim")).encode())
    return int.from_bytes(h.digest(), "little") % int(history[0]["modulus"])


def _plugin_run(derive, tamper=None):
    ar = Plain(BABYBEAR)
    history = [{"type": "field", "modulus": str(BABYBEAR)}]
    payloads = [ar.spec()]

    def challenge(k, evals):
        history.append({"type": "round", "evals": evals})
        r = derive(history)
        history.append({"type": "challenge", "value": r})
        return r

    tables = [[3, 1, 4, 1, 5, 9, 2, 6], [2, 7, 1, 8, 2, 8, 1, 8]]
    claim = sum(a * b for a, b in zip(*tables)) % BABYBEAR
    history.append({"type": "instance", "name": "deck-slots-zero", "num_vars": 3, "degree": 2, "claim": claim,
                    "order": "low-first", "form": "evals"})
    rounds, rs, final = product_rounds(ar, tables, challenge)
    payloads += instance_payloads(ar, "deck-slots-zero", 3, 2, claim, rounds, rs, final)
    return payloads


def test_binding_probe_flags_a_plugin_that_forgets_the_claim():
    _, report = run(_plugin_run(_forget_claim), challenger=_forget_claim)
    assert report.verdict == "accept"  # the run itself is consistent ...
    kinds = {f.kind for f in report.findings}
    assert "unbound-claim" in kinds  # ... but the claim is not bound (weak Fiat-Shamir)
    finding = next(f for f in report.findings if f.kind == "unbound-claim")
    assert finding.severity == "high" and "claimed sum is not bound" in finding.message


def test_binding_probe_is_quiet_for_a_plugin_that_absorbs_everything():
    _, report = run(_plugin_run(_absorb_all), challenger=_absorb_all)
    assert report.verdict == "accept" and report.findings == ()


def test_plugin_challenges_that_differ_are_a_challenge_failure():
    _, report = run(_plugin_run(_absorb_all), challenger=_forget_claim)
    assert (report.first_failure.round, report.first_failure.check) == (1, "challenge")


def test_streaming_keeps_bounded_summaries_but_counts_every_instance():
    ar = Plain(BABYBEAR)
    payloads = thaler_payloads(ar, CHALLENGES)
    body = payloads[1:]
    stream = [payloads[0]] + [copy.deepcopy(p) for _ in range(30) for p in body]
    stream[1 + 17 * len(body) + len(body) - 1]["value"] = 0  # instance 17's final value is wrong
    seq = Sequencer()
    replay = Replay(keep_instances=3)
    for p in stream:
        replay.feed(seq.feed(p))
    report = replay.report()
    assert report.counts == {"pass": 29, "fail": 1, "incomplete": 0}
    assert [s.index for s in report.instances] == [0, 1, 2, 17]
    assert all(s.rounds == () for s in report.instances)
    assert report.soundness.instance_count == 30


def test_report_json_follows_the_check_contract():
    results, report = run(_fault(thaler_payloads(Plain(BN254), CHALLENGES), "final"))
    data = report.to_json()
    assert data["verdict"] == "reject"
    ff = data["first_failure"]
    assert set(ff) >= {"instance", "instance_name", "round", "check", "expected", "found"}
    assert ff["check"] == "final" and ff["round"] == 3 and isinstance(ff["expected"], str)
    assert int(ff["expected"]) == thaler_payloads(Plain(BN254), CHALLENGES)[-1]["value"] + 1
    assert [r["round"] for r in data["instances"][0]["rounds"]] == [1, 2, 3]
    assert all({"round", "status"} <= set(r) for r in data["instances"][0]["rounds"])
    assert data["warning"].startswith("A passing replay")


def test_extension_elements_print_as_bracketed_coefficients():
    ar = Plain(BABYBEAR, 4, 11)
    payloads = thaler_payloads(ar, [(r, 3, 0, 1) for r in CHALLENGES])
    payloads[2]["evals"][0] = [2, 0, 0, 0]
    _, report = run(payloads)
    assert report.to_json()["first_failure"]["found"] == "[13, 0, 0, 0]"


def test_replay_of_a_folded_transcript_matches_streaming():
    payloads = _fault(thaler_payloads(Plain(BABYBEAR), CHALLENGES), "consistent")
    seq = Sequencer()
    transcript = fold_events([seq.feed(p) for p in payloads])
    report = replay_transcript(transcript)
    assert report.first_failure == run(payloads)[1].first_failure


PRIMES = [97, 65537, BABYBEAR, GOLDILOCKS]


@settings(max_examples=40, deadline=None)
@given(st.data())
def test_random_honest_runs_pass_and_single_corruptions_fail_where_predicted(data):
    p = data.draw(st.sampled_from(PRIMES), label="p")
    degree = data.draw(st.integers(1, 4), label="degree")
    num_vars = data.draw(st.integers(1, 4), label="num_vars")
    rng = random.Random(data.draw(st.integers(0, 2**32), label="seed"))
    ar = Plain(p)
    tables = [[rng.randrange(p) for _ in range(1 << num_vars)] for _ in range(degree)]
    claim = 0
    for i in range(1 << num_vars):
        term = 1
        for t in tables:
            term = term * t[i] % p
        claim = (claim + term) % p
    rs = [rng.randrange(degree + 1, p) for _ in range(num_vars)]  # off the nodes 0..degree
    rounds, rs, final = product_rounds(ar, tables, lambda k, ev: rs[k - 1])
    honest = [ar.spec(), *instance_payloads(ar, "deck-slots-zero", num_vars, degree, claim, rounds, rs, final)]
    assert run(honest)[1].verdict == "accept"

    bad = copy.deepcopy(honest)
    target = data.draw(st.sampled_from(["claim", "value", "final", "challenge"]), label="target")
    k = data.draw(st.integers(1, num_vars), label="round")
    delta = data.draw(st.integers(1, p - 1), label="delta")
    expect: tuple[int, str] | None
    if target == "claim":
        bad[1]["claim"] = (claim + delta) % p
        expect = (1, "sum")
    elif target == "final":
        bad[-1]["value"] = (final + delta) % p
        expect = (num_vars, "final")
    elif target == "value":
        i = data.draw(st.integers(0, degree), label="index")
        bad[2 * k]["evals"][i] = (rounds[k - 1][i] + delta) % p
        expect = (k, "sum") if i <= 1 else ((k + 1, "sum") if k < num_vars else (num_vars, "final"))
    else:
        r_new = (rs[k - 1] + delta) % p
        bad[2 * k + 1]["value"] = r_new
        moved = lagrange(ar, rounds[k - 1], r_new) != lagrange(ar, rounds[k - 1], rs[k - 1])
        expect = ((k + 1, "sum") if k < num_vars else (num_vars, "final")) if moved else None
    report = run(bad)[1]
    if expect is None:
        assert report.verdict == "accept"
    else:
        assert report.verdict == "reject"
        assert (report.first_failure.round, report.first_failure.check) == expect


def test_degree_counts_print_as_plain_numbers_in_an_extension_field():
    ar = Plain(BABYBEAR, 4, 11)
    payloads = thaler_payloads(ar, [(r, 3, 0, 1) for r in CHALLENGES])
    payloads[2]["evals"].append([0, 0, 0, 0])
    ff = run(payloads)[1].to_json()["first_failure"]
    assert (ff["check"], ff["expected"], ff["found"]) == ("degree", "4", "5")


def test_schedule_given_by_name_applies_when_the_stream_declares_none():
    payloads = [p for p in scheduled_worked_example(tamper_round=3) if p["type"] != "schedule"]
    assert run(payloads)[1].verdict == "accept"  # no schedule: challenges are not re-derived
    _, report = run(payloads, schedule=SCHEDULE_NAME)
    assert report.first_failure.check == "challenge"  # re-derived without the label: differs at round 1
    assert report.first_failure.round == 1
