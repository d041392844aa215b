"""stepper diff on the glue between sumchecks: the first divergence in an opening, a squeeze, a value
or a link, classified. Pairs are an honest reference run and the same run with one glue fault
(or one glue record replaced), so everything before the glue is identical by construction."""

from __future__ import annotations

import dataclasses

import jsonschema
import numpy as np

from stepper.compare.diff import JSON_SCHEMA, compare
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.faults import Fault
from stepper.provers.generic import prove_zero
from stepper.provers.gkr import prove_grand_product
from stepper.transcript.model import Squeeze, fold_events
from tests.provers.helpers import run_prover

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
TABLE = BABYBEAR.vrandom(16, np.random.default_rng(31))
RNG = np.random.default_rng(32)
A_TAB, B_TAB = BABYBEAR.vrandom(8, RNG), BABYBEAR.vrandom(8, RNG)
DECK = {"a": A_TAB, "b": B_TAB, "c": BABYBEAR.vmul(A_TAB, B_TAB)}


def _gkr(fault=None):
    return run_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, TABLE), fault)[1]


def _zero(fault=None):
    return run_prover(BABYBEAR, lambda ch, c: prove_zero(ch, c, "z", DECK, ["a * b - c"]), fault)[1]


def _valid(c):
    jsonschema.validate(c.to_json("a.sumtr", "b.sumtr"), JSON_SCHEMA)


def test_a_wrong_opening_after_identical_rounds_is_a_different_opening():
    c = compare(_zero(), _zero(Fault("open-wrong-table", 1, 0)))
    assert c.divergence is not None
    assert (c.divergence.element, c.divergence.detail, c.divergence.round) == ("opening", "a", 3)
    assert c.classification.kind == "different-opening"
    _valid(c)


def test_a_claim_built_with_a_stale_coefficient_breaks_the_link():
    c = compare(_gkr(), _gkr(Fault("stale-coefficient", 1, 1)))
    assert c.divergence is not None
    assert (c.divergence.element, c.divergence.instance_name, c.divergence.round) == ("claim", "product.layer2", 0)
    assert c.classification.kind == "link"
    _valid(c)


def test_a_final_expr_written_differently_is_a_link_divergence():
    c = compare(_gkr(), _gkr(Fault("final-without-eq", 1, 2)))
    assert c.divergence is not None and c.divergence.detail == "final_expr"
    assert c.classification.kind == "link"
    _valid(c)


def test_a_squeeze_that_differs_after_identical_glue_is_squeeze_drift():
    honest = run_prover(BABYBEAR, lambda ch, c: prove_grand_product(ch, c, TABLE))[1]
    sink_records = _records(TABLE)
    changed = [dataclasses.replace(r, value=BABYBEAR.add(r.value, 1)) if isinstance(r, Squeeze)
               and r.name == "product.c2" else r for r in sink_records]
    c = compare(honest, fold_events(changed))
    assert c.divergence is not None
    assert (c.divergence.element, c.divergence.detail) == ("squeeze", "product.c2")
    assert c.classification.kind == "squeeze-drift"
    _valid(c)


def test_a_different_public_value_before_the_first_instance_comes_first():
    other = BABYBEAR.vrandom(16, np.random.default_rng(99))
    c = compare(_gkr(), run_prover(BABYBEAR, lambda ch, cnt: prove_grand_product(ch, cnt, other))[1])
    assert c.divergence is not None
    assert (c.divergence.element, c.divergence.detail) == ("value", "product.outputs")
    assert c.classification.kind == "different-value"
    _valid(c)


def test_identical_glue_is_identical():
    assert compare(_gkr(), _gkr()).identical


def _records(table):
    from stepper.provers.channel import ListSink, ProofChannel
    from stepper.provers.counting import MulCounter

    sink = ListSink()
    prove_grand_product(ProofChannel(BABYBEAR, sink), MulCounter(BABYBEAR), table)
    return sink.records
