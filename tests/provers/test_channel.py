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
