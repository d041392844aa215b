"""The pure view model: statuses quoted from the replay, moving, search, growth."""

from __future__ import annotations

from functools import partial

from hypothesis import given, settings, strategies as st
from proofs import P, brackwater_payloads, bump_g1

from stepper.app.proof_model import ProofModel
from stepper.app.value_search import find_value
from stepper.transcript.events import Sequencer
from stepper.verify.replay import Replay


def model_of(payloads: list[dict], complete: bool = True) -> ProofModel:
    model = ProofModel(partial(Replay, keep_rounds=True), source="isle-of-quill-0740.sumtr")
    seq = Sequencer()
    for payload in payloads:
        model.feed(seq.feed(payload))
    model.finish("complete" if complete else "incomplete", "verified" if complete else "missing")
    return model


def test_an_honest_proof_is_accepted_and_every_round_passes():
    model = model_of(brackwater_payloads())
    assert model.verdict() == "accept"
    assert model.failures == []
    assert [model.strip_line(i) for i in range(3)] == ["■■■■┆■"] * 3


def test_a_bumped_g1_fails_the_sum_check_of_that_round_first():
    # The sum check g(0) + g(1) = claim is the defining check of the protocol
    # (Lund, Fortnow, Karloff, Nisan 1992); adding 1 to g(1) must break it there.
    model = model_of(brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2)))
    assert model.verdict() == "reject"
    assert model.first_failure() == (1, 2)
    row = model.rows(1)[1]
    assert (row.status, row.symbol) == ("fail", "✕")
    assert int(row.sum01) == (int(row.claim_in) + 1) % P


def test_next_failure_walks_failures_in_proof_order_and_wraps():
    model = model_of(brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2)))
    first = model.first_failure()
    assert first is not None
    second = model.next_failure(first)
    assert second is not None and second > first
    last = model.failures[-1]
    assert model.next_failure(last) == first


def test_stepping_crosses_instance_borders_and_stops_at_the_ends():
    model = model_of(brackwater_payloads(mu=3))
    assert model.step((0, 3), 1) == (1, 1)
    assert model.step((1, 1), -1) == (0, 3)
    assert model.step((0, 1), -1) == (0, 1)
    assert model.step((2, 3), 5) == (2, 3)


@settings(max_examples=25, deadline=None)
@given(start=st.integers(0, 8), delta=st.integers(-12, 12))
def test_a_step_forward_then_back_returns_unless_clamped(start, delta):
    model = model_of(brackwater_payloads(mu=3))
    at = model.step((0, 1), start)
    there = model.step(at, delta)
    back = model.step(there, -delta)
    flat = lambda pos: pos[0] * 3 + pos[1] - 1  # noqa: E731 - three rounds per instance
    if 0 <= flat(at) + delta <= 8:
        assert back == at
    assert 0 <= flat(there) <= 8


def test_search_finds_a_challenge_by_its_decimal_value_and_by_hex():
    model = model_of(brackwater_payloads())
    challenge = model.instances[2].challenges[2]
    assert isinstance(challenge, int)
    assert find_value(model, str(challenge), (0, 1)) == (2, 3)
    assert find_value(model, hex(challenge), (0, 1)) == (2, 3)
    assert find_value(model, "no such thing", (0, 1)) is None


def test_search_finds_the_wrong_sum_a_failing_round_shows_in_its_table_row():
    # A person copies g(0)+g(1) from the table of a failing round; that sum is computed by
    # the replay, not sent, and must still lead back to its round.
    model = model_of(brackwater_payloads(tamper=bump_g1("boarding-permutation-grouped", 2)))
    wrong_sum = model.rows(1)[1].sum01
    assert find_value(model, str(wrong_sum), (0, 1)) == (1, 2)


def test_a_growing_stream_is_checked_as_it_arrives_and_the_report_does_not_stop_it():
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    seq = Sequencer()
    model = ProofModel(partial(Replay, keep_rounds=True))
    for payload in payloads[:5]:  # field, schedule, instance, round 1, challenge 1
        model.feed(seq.feed(payload))
    model.finish("incomplete", "missing")
    assert model.verdict() == "incomplete"
    assert model.instances[0].status(1) == "pass"
    for payload in payloads[5:]:
        model.feed(seq.feed(payload))
    model.finish("complete", "verified")
    assert model.verdict() == "accept"
    assert model.strip_line(0) == "■■■■┆■"


def test_rows_of_a_round_without_its_challenge_say_unchecked_not_pass():
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    model = model_of(payloads[:6], complete=False)  # round 2 sent, its challenge not yet
    assert model.rows(0)[1].status in ("unchecked", "pending")
    assert model.strip_line(0)[2:] == "··"


def test_a_wrong_final_value_is_marked_after_the_rounds_and_is_a_failure_at_the_last_round():
    # The final check compares the last reduced claim with the oracle's value
    # (transcripts/EVENTS.md check contract; common practice, no source).
    payloads = brackwater_payloads(instances=("boarding-permutation",))
    payloads[-1] = {**payloads[-1], "value": (payloads[-1]["value"] + 1) % P}
    model = model_of(payloads)
    assert model.strip_line(0) == "■■■■┆✕"
    assert model.first_failure() == (0, 4)
    assert model.verdict() == "reject"
