"""Proofs whose challenges come from the built-in schedule, shared by the replay's tests.

The rounds are computed in plain Python integers (tests/plain_sumcheck.py); only the
challenges come from stepper's schedule, as a prover using it would draw them.
"""

from __future__ import annotations

from plain_sumcheck import BABYBEAR, Plain, brute_force_rounds, instance_payloads, thaler_g
from stepper.transcript.events import Sequencer
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule


def scheduled_worked_example(tamper_round: int | None = None) -> list[dict]:
    """The worked example with challenges from the built-in schedule; optionally a recorded
    challenge replaced (the prover continuing honestly from the replaced value)."""
    ar = Plain(BABYBEAR)
    seq = Sequencer()
    sched = Sha256Schedule()
    head = [ar.spec(), {"type": "schedule", "name": SCHEDULE_NAME, "label": "isle-of-quill-0740"}]
    for p in head:
        sched.observe(seq.feed(p))
    sched.observe(seq.feed({"type": "instance", "name": "boarding-permutation", "num_vars": 3, "degree": 3,
                            "claim": 12}))

    def challenge(k, evals):
        sched.observe(seq.feed({"type": "round", "evals": evals}))
        r = sched.challenge()
        if k == tamper_round:
            r = (r + 1) % BABYBEAR
        seq.feed({"type": "challenge", "value": r})
        return r

    rounds, rs = brute_force_rounds(ar, thaler_g(ar), 3, 3, challenge)
    return head + instance_payloads(ar, "boarding-permutation", 3, 3, 12, rounds, rs, thaler_g(ar)(*rs))
