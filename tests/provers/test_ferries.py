"""The Brackwater Ferries proofs: the sailing (permutation + deck zero-check) sends its glue, and the
manifest fingerprint is the product of z - ticket over the boarding log, proved by the GKR circuit.

Expected values are recomputed here with plain integers (the fingerprint by its definition, the
MLE of a table at a point by summing over the cube: common practice, no source)."""

from __future__ import annotations

from math import prod

import pytest

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.faults import Fault
from stepper.provers.ferries import DECK, prove_fingerprint, prove_sailing
from stepper.provers.scenario import build_sailing, ticket_values
from stepper.verify.replay import replay_transcript
from tests.provers.glue_helpers import run_glue_prover
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p


def _fingerprint(tamper=None, fault=None):
    return run_glue_prover(BABYBEAR, lambda ch, c: prove_fingerprint(ch, c, seed=740, num_vars=4, tamper=tamper),
                           fault)


@pytest.mark.parametrize("tamper", [None, "double-scan"])
def test_the_manifest_outputs_multiply_to_the_boarding_logs_fingerprint(tamper):
    _, transcript, glue = _fingerprint(tamper)
    z = int(glue.values["manifest.z"])
    log = [int(v) for v in ticket_values(BABYBEAR, build_sailing(740, 4, tamper=tamper).boarding)]
    outputs = [int(v) for v in glue.values["manifest.outputs"]]
    assert outputs[0] * outputs[1] % P == prod(z - t for t in log) % P
    assert replay_transcript(transcript).verdict == "accept"  # the product is proved, honest or not the log


def test_an_honest_log_has_the_ledgers_fingerprint_and_a_double_scan_does_not():
    # a multiset check: prod (z - x) over the log equals it over the ledger iff (w.h.p. in z) the same tickets
    _, _, glue = _fingerprint()
    z = int(glue.values["manifest.z"])
    sailing = build_sailing(740, 4)
    ledger = prod(z - int(t) for t in ticket_values(BABYBEAR, sailing.tickets)) % P
    honest = [int(v) for v in glue.values["manifest.outputs"]]
    assert honest[0] * honest[1] % P == ledger
    tampered = build_sailing(740, 4, tamper="double-scan")
    log = prod(z - int(t) for t in ticket_values(BABYBEAR, tampered.boarding)) % P
    assert log != ledger


def test_the_sailing_sends_its_deck_openings_at_the_deck_point():
    _, transcript, glue = run_glue_prover(
        BABYBEAR, lambda ch, c: prove_sailing(ch, c, seed=740, num_vars=4, groups=0))
    deck = next(i for i in transcript.instances if i.name == DECK)
    point = [int(r.challenge) for r in deck.rounds]
    sailing = build_sailing(740, 4)
    assert int(glue.openings["occupied"]) == plain_mle(list(sailing.occupied), point, P)
    assert int(glue.openings["length"]) == plain_mle(list(sailing.length), point, P)
    assert glue.starts[1]["final_expr"].startswith("eq(tau) * (")
    assert replay_transcript(transcript).verdict == "accept"


def test_open_other_point_takes_the_deck_openings_at_the_permutations_point():
    _, transcript, glue = run_glue_prover(
        BABYBEAR, lambda ch, c: prove_sailing(ch, c, seed=740, num_vars=4, groups=0), Fault("open-other-point", 1, 1))
    perm_point = [int(r.challenge) for r in transcript.instances[0].rounds]
    assert int(glue.openings["occupied"]) == plain_mle(list(build_sailing(740, 4).occupied), perm_point, P)
    first = replay_transcript(transcript).first_failure
    assert (first.instance, first.round, first.check) == (1, 4, "evaluation")


def test_a_wrong_bit_opening_of_the_grouped_second_layer_fails_its_evaluation():
    _, transcript, _ = run_glue_prover(
        BABYBEAR, lambda ch, c: prove_sailing(ch, c, seed=740, num_vars=4, groups=2), Fault("open-wrong-table", 1, 1))
    first = replay_transcript(transcript).first_failure
    assert (first.instance, first.round, first.check) == (1, 4, "evaluation")


def test_glue_faults_aimed_at_an_instance_without_glue_are_usage_errors():
    with pytest.raises(UsageError, match="deck zero-check"):
        run_glue_prover(BABYBEAR, lambda ch, c: prove_sailing(ch, c, seed=740, num_vars=4, groups=2),
                        Fault("open-other-point", 1, 0))  # nothing comes before the permutation's first layer
    with pytest.raises(UsageError, match="deck zero-check"):
        run_glue_prover(BABYBEAR, lambda ch, c: prove_sailing(ch, c, seed=740, num_vars=4, groups=0),
                        Fault("final-without-eq", 1, 0))  # the permutation's final_expr has no eq term
