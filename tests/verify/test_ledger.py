"""stepper.verify.ledger: the replay's per-instance bookkeeping (counts, caps, verdict, batch claims)."""

from __future__ import annotations

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.verify.ledger import InstanceLedger, LiveInstance, combine_batch
from stepper.transcript.model import BatchDecl, InstanceStart
from stepper.verify.results import Failure

BABYBEAR = NAMED_PRIMES["babybear"]


def _closed(ledger: InstanceLedger, index: int, status: str) -> None:
    start = InstanceStart(index, f"deck-slots-zero-{index}", num_vars=3, degree=2, claim=5)
    live = LiveInstance(start, keep=False)
    ledger.opened(start)
    live.seen = 3
    if status == "pass":
        live.passed = 3
    elif status == "fail":
        ledger.fail(live, Failure(index, start.name, 2, "sum", 1, 2, "g(0) + g(1) differs from the claim"))
    ledger.close(live, get_field(BABYBEAR))


def test_batch_claim_is_the_power_sum_of_the_terms():
    # sum_i c^i t_i with c = 3 and terms 2, 5, 7 mod 101: 2 + 15 + 63 = 80 (hand computation)
    field = get_field(101)
    assert combine_batch(field, BatchDecl(3, (2, 5, 7))) == 80
    assert combine_batch(field, BatchDecl(3, ())) == 0


def test_counts_cover_every_instance_but_summaries_respect_the_cap_plus_failures():
    ledger = InstanceLedger(keep_instances=1)
    for index, status in enumerate(["pass", "pass", "fail", "fail", "incomplete"]):
        _closed(ledger, index, status)
    assert ledger.counts == {"pass": 2, "fail": 2, "incomplete": 1}
    assert [s.index for s in ledger.summaries] == [0, 2]  # the first, then one failure while under the cap
    soundness = ledger.soundness(get_field(BABYBEAR))
    assert soundness.total_rounds_degree == 5 * 3 * 2 and soundness.instance_count == 5
    assert len(soundness.per_instance) == 2


def test_first_failure_is_kept_and_decides_the_verdict():
    ledger = InstanceLedger(keep_instances=None)
    _closed(ledger, 0, "pass")
    assert ledger.verdict("complete") == "accept"
    assert ledger.verdict("incomplete") == "incomplete"
    _closed(ledger, 1, "fail")
    _closed(ledger, 2, "fail")
    assert ledger.first is not None and ledger.first.instance == 1
    assert ledger.verdict("incomplete") == "reject"


def test_an_instance_left_open_makes_the_verdict_incomplete():
    ledger = InstanceLedger(keep_instances=None)
    _closed(ledger, 0, "incomplete")
    assert ledger.verdict("complete") == "incomplete"


def test_passing_instances_settled_together_count_as_settled_one_by_one():
    one, many = InstanceLedger(keep_instances=0), InstanceLedger(keep_instances=0)
    starts = [InstanceStart(i, f"sailing-{i}", num_vars=2 + i, degree=3 + i % 2, claim=1) for i in range(4)]
    for start in starts:
        one.passed_unkept(start)
    many.passed_unkept_many(len(starts), sum(s.num_vars * s.degree for s in starts))
    field = get_field(BABYBEAR)
    assert one.counts == many.counts == {"pass": 4, "fail": 0, "incomplete": 0}
    assert one.soundness(field) == many.soundness(field) and one.verdict("complete") == "accept"
