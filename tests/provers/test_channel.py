"""The prover's channel: the glue calls emit records and squeezes come from the built-in schedule."""

from __future__ import annotations

from stepper.field.field import get_field
from stepper.provers.channel import ListSink, ProofChannel
from stepper.transcript.model import NamedValue, Opening, Squeeze
from stepper.verify.fiatshamir import Sha256Schedule

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source


def test_value_squeeze_and_opening_reach_the_sink_in_order_and_squeezes_replay_from_the_schedule():
    field = get_field(GOLDILOCKS)
    sink = ListSink()
    channel = ProofChannel(field, sink, label="isle-of-quill-0740")
    channel.value("tau", [4, 5])
    alpha = channel.squeeze("alpha")
    point = channel.squeeze("w", 2)
    channel.start_instance("fares", 1, 1, 0, final_expr="f")
    channel.send_round([0, 0])
    channel.opening("f", 0)
    glue = [r for r in sink.records if isinstance(r, (NamedValue, Squeeze, Opening))]
    assert glue == [NamedValue("tau", (4, 5), True, None), Squeeze("alpha", alpha, False, None),
                    Squeeze("w", point, True, None), Opening("f", 0, "f", 0)]
    # A verifier observing the same records derives the same squeezes (the schedule is its own reference:
    # the bytes it absorbs are pinned in tests/verify/test_fiatshamir.py).
    verifier = Sha256Schedule()
    for record in sink.records[:3]:
        verifier.observe(record)
    assert verifier.squeeze("alpha") == alpha and verifier.squeeze("w", 2) == point


def test_statement_randomness_depends_on_table_values_not_on_where_the_tables_live():
    # BN254 tables are numpy object arrays, whose own bytes are pointers: two equal tables
    # made apart must still draw the same point, and a changed entry another one
    import numpy as np

    from stepper.field.field import NAMED_PRIMES

    bn254 = get_field(NAMED_PRIMES["bn254"])
    values = [bn254.p - 1, 2**200 + 7, 0, 5]

    def drawn(table):
        return ProofChannel(bn254, ListSink()).statement_challenges("point", [b"f", table], 2)

    first, second = bn254.vec(values), bn254.vec(list(values))
    assert first is not second and drawn(first) == drawn(second)
    assert drawn(bn254.vec([*values[:3], 6])) != drawn(first)
    babybear = get_field(NAMED_PRIMES["babybear"])
    table = babybear.vec([1, 2, 3])  # fixed-width entries: the array's own bytes, as before
    assert ProofChannel(babybear, ListSink()).table_bytes(table) == np.asarray(table).tobytes()
    assert len(ProofChannel(bn254, ListSink()).table_bytes(first)) == 4 * 4 * 8  # four 64-bit words per entry
