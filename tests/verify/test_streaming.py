"""stepper.verify.streaming: ``Replay.feed_all``'s inline path gives exactly the report of
feeding the same records one by one, honest or with a single fault.

The proofs are computed in plain Python integers (tests/plain_sumcheck.py); the report of
``Replay.feed`` is the reference the inline path must reproduce.
"""

from __future__ import annotations

import random
from typing import Sequence

from hypothesis import given, settings, strategies as st

from plain_sumcheck import BABYBEAR, BN254, GOLDILOCKS, Plain, instance_payloads, product_rounds
from stepper.transcript.events import Sequencer
from stepper.transcript.model import ChallengeMsg, RoundMsg
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.verify.replay import Replay
from tests.verify.scheduled_proofs import scheduled_worked_example


def _scheduled_proof(ar: Plain, instances: int, num_vars: int, degree: int, rng: random.Random,
                     forms: Sequence[str] = ("evals",)) -> list[dict]:
    """Several honest product instances, challenges by the built-in schedule, notes between them."""
    seq = Sequencer()
    sched = Sha256Schedule()
    out = [ar.spec(), {"type": "schedule", "name": SCHEDULE_NAME, "label": "isle-of-quill-0740"}]
    for payload in out:
        sched.observe(seq.feed(payload))
    for i in range(instances):
        tables = [[ar.const(rng.randrange(ar.p)) for _ in range(1 << num_vars)] for _ in range(degree)]
        claim = ar.const(0)
        for j in range(1 << num_vars):
            term = ar.const(1)
            for t in tables:
                term = ar.mul(term, t[j])
            claim = ar.add(claim, term)
        head = {"type": "instance", "name": f"sailing-{i}", "num_vars": num_vars, "degree": degree,
                "claim": ar.json(claim), "form": forms[i % len(forms)]}
        sched.observe(seq.feed(head))

        def challenge(k, evals, form=head["form"]):
            sent = evals if form == "evals" else [evals[0], *evals[2:]]
            sched.observe(seq.feed({"type": "round", "evals": [ar.json(v) for v in sent]}))
            r = sched.challenge()
            seq.feed({"type": "challenge", "value": ar.json(r)})
            return r

        rounds, rs, final = product_rounds(ar, tables, challenge)
        body = instance_payloads(ar, head["name"], num_vars, degree, claim, rounds, rs, final)
        body[0] = head
        if head["form"] == "evals-no-1":
            for payload in body[1::2][:num_vars]:
                payload["evals"] = [payload["evals"][0], *payload["evals"][2:]]
        out += body
        out.append({"type": "note", "text": f"gate closed for sailing-{i}"})
    return out


def _reports_both_ways(payloads, keep=2):
    """The same records through ``feed`` one by one and through ``feed_all``."""
    records = []
    seq = Sequencer()
    try:
        for payload in payloads:
            records.append(seq.feed(payload))
    except Exception:  # a corruption the sequencer refuses: replay the records before it
        pass
    one = Replay(keep_instances=keep, emit_passing=False)
    for record in records:
        one.feed(record)
    other = Replay(keep_instances=keep, emit_passing=False)
    seen = []
    other.feed_all(records, on_other=seen.append)
    return one.report(), other.report(), seen, records


@settings(max_examples=30, deadline=None)
@given(st.data())
def test_inline_path_of_feed_all_gives_exactly_the_report_of_feeding_one_by_one(data):
    p = data.draw(st.sampled_from([97, BABYBEAR, GOLDILOCKS, BN254]), label="p")
    ar = Plain(p, 4, 11) if data.draw(st.booleans(), label="extension") and p == BABYBEAR else Plain(p)
    degree = data.draw(st.integers(1, 3), label="degree")
    rng = random.Random(data.draw(st.integers(0, 2**32), label="seed"))
    forms = data.draw(st.sampled_from([("evals",), ("evals", "evals-no-1")]), label="forms")
    payloads = _scheduled_proof(ar, 3, 3, degree, rng, forms)
    fault = data.draw(st.sampled_from(["none", "value", "challenge", "degree", "final", "cut"]), label="fault")
    rounds_at = [i for i, x in enumerate(payloads) if x["type"] == "round"]
    at = data.draw(st.sampled_from(rounds_at), label="at")
    if fault == "value":
        i = data.draw(st.integers(0, len(payloads[at]["evals"]) - 1), label="index")
        value = payloads[at]["evals"][i]
        payloads[at]["evals"][i] = [(value[0] + 1) % p, *value[1:]] if ar.k > 1 else (value + 1) % p
    elif fault == "challenge":
        value = payloads[at + 1]["value"]
        payloads[at + 1]["value"] = [(value[0] + 1) % p, *value[1:]] if ar.k > 1 else (value + 1) % p
    elif fault == "degree":
        payloads[at]["evals"].append(ar.json(ar.const(3)))
    elif fault == "final":
        finals = [i for i, x in enumerate(payloads) if x["type"] == "final"]
        payloads[finals[1]]["value"] = ar.json(ar.const(5)) if payloads[finals[1]]["value"] != ar.json(
            ar.const(5)) else ar.json(ar.const(6))
    elif fault == "cut":
        payloads = payloads[:at + 1]
    one, other, seen, records = _reports_both_ways(payloads)
    assert other.to_json() == one.to_json()
    assert seen == [r for r in records if not isinstance(r, (RoundMsg, ChallengeMsg))]
    if fault == "none":
        assert other.verdict == "accept" and other.counts["pass"] == 3
    elif fault in ("challenge", "final"):
        assert other.verdict == "reject"
        assert other.first_failure.check in (("challenge", "sum", "final") if fault == "challenge" else ("final",))
    elif fault == "cut":
        assert other.verdict == "incomplete"


def test_feed_all_names_a_replaced_challenge_like_feed_does():
    payloads = scheduled_worked_example(tamper_round=2)
    one, other, _, _ = _reports_both_ways(payloads)
    assert (other.first_failure.round, other.first_failure.check) == (2, "challenge")
    assert other.first_failure == one.first_failure
    assert other.first_failure.found == (other.first_failure.expected + 1) % BABYBEAR
