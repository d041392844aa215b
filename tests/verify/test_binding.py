"""The plug-in history and the binding probe with glue: every event reaches the plug-in in stream
order, and a challenge bound to the openings a linked claim is built from is not reported unbound.

The plug-ins below are ordinary hash chains over the history maps (hashlib's SHA-256, FIPS 180-4);
what "bound" means is common practice, no source: a message the next challenge does not depend on
can be chosen after seeing it.
"""

from __future__ import annotations

import hashlib

from stepper.transcript.events import Sequencer
from stepper.verify.binding import History, history_payload
from stepper.verify.replay import Replay

P = 2**31 - 2**27 + 1  # BabyBear, common practice, no source


def _chain(history, skip) -> int:
    h = hashlib.sha256()
    for event in list(history)[1:]:
        h.update(repr(sorted((k, v) for k, v in event.items() if not skip(event, k))).encode())
    return int.from_bytes(h.digest(), "little") % int(history[0]["modulus"])


def absorbs_glue(history):
    """Binds everything except a claim that claim_expr links (as a GKR prover's transcript does)."""
    return _chain(history, lambda event, key: key == "claim" and "claim_expr" in event)


def forgets_glue(history):
    """Also leaves the openings and values out: the linked claim then rests on unbound glue."""
    return _chain(history, lambda event, key: (key == "claim" and "claim_expr" in event)
                  or event["type"] in ("opening", "value"))


def prove(plugin):
    """Two linked one-variable instances, the challenges drawn by ``plugin`` from the history that
    stepper documents (built here with history_payload, event by event)."""
    seq, records, history = Sequencer(), [], []

    def feed(payload):
        record = seq.feed(payload)
        records.append(record)
        mapped = history_payload(record, seq.field)
        if mapped is not None:
            history.append(mapped)

    feed({"type": "field", "name": "babybear"})
    feed({"type": "instance", "name": "layer.0", "num_vars": 1, "degree": 1, "claim": 7})
    feed({"type": "round", "evals": [3, 4]})
    r = plugin(History(history))
    feed({"type": "challenge", "value": r})
    v = (3 + r) % P
    feed({"type": "final", "value": v})
    feed({"type": "opening", "name": "v", "value": v})
    feed({"type": "tide", "height": 3})  # an unknown event: kept, and shown to the plug-in too
    feed({"type": "value", "name": "tau", "value": [1, 2]})
    feed({"type": "squeeze", "name": "alpha", "value": 5})
    claim = 2 * v % P
    feed({"type": "instance", "name": "layer.1", "num_vars": 1, "degree": 1, "claim": claim, "claim_expr": "2*v"})
    feed({"type": "round", "evals": [1, (claim - 1) % P]})
    feed({"type": "challenge", "value": plugin(History(history))})
    return records, history


def replay(records, plugin):
    rp = Replay(challenger=plugin)
    for record in records:
        rp.feed(record)
    return rp.report()


def test_the_history_holds_final_opening_value_squeeze_and_unknown_events_in_stream_order():
    records, history = prove(absorbs_glue)
    assert [h["type"] for h in history] == ["field", "instance", "round", "challenge", "final", "opening", "tide",
                                           "value", "squeeze", "instance", "round", "challenge"]
    assert history[9]["claim_expr"] == "2*v"
    report = replay(records, absorbs_glue)  # the replay rebuilds the same history: every challenge matches
    assert report.verdict == "accept", report.first_failure


def test_a_challenge_bound_to_the_openings_of_a_linked_claim_is_no_false_positive():
    records, _ = prove(absorbs_glue)
    report = replay(records, absorbs_glue)
    assert [f.kind for f in report.findings if f.instance == 1] == []


def test_a_linked_claim_built_from_unbound_openings_is_reported():
    records, _ = prove(forgets_glue)
    report = replay(records, forgets_glue)
    kinds = {f.kind for f in report.findings if f.instance == 1}
    assert kinds == {"unbound-glue"}
    finding = next(f for f in report.findings if f.kind == "unbound-glue")
    assert "opening v" in finding.message and finding.severity == "high"
