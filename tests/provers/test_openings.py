"""Openings sent after an instance, honest and with each opening fault, against plain-integer MLEs."""

from __future__ import annotations

import pytest

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.channel import ListSink, ProofChannel
from stepper.provers.faults import Fault
from stepper.provers.openings import opened_values
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])
P = BABYBEAR.p
A = [3, 1, 4, 1, 5, 9, 2, 6]
B = [2, 7, 1, 8, 2, 8, 1, 8]
POINT = [11, 22, 33]
EARLIER = [5, 6, 7]


def _opened(fault):
    channel = ProofChannel(BABYBEAR, ListSink(), fault=fault)
    channel.instance = 1  # as after the second instance has run
    tables = {"a": BABYBEAR.vec(A), "b": BABYBEAR.vec(B)}
    folded = {"a": plain_mle(A, POINT, P), "b": plain_mle(B, POINT, P)}
    return opened_values(channel, tables, folded, POINT, [EARLIER, [1, 2]])


def test_honest_openings_are_the_folded_values():
    # the MLE at the point, by brute force over the cube (the definition of the multilinear extension)
    assert _opened(None) == {"a": plain_mle(A, POINT, P), "b": plain_mle(B, POINT, P)}
    assert _opened(Fault("open-reversed", 1, 0)) == _opened(None)  # aimed at another instance


def test_open_reversed_takes_every_table_at_the_point_read_backwards():
    assert _opened(Fault("open-reversed", 1, 1)) == {"a": plain_mle(A, POINT[::-1], P),
                                                     "b": plain_mle(B, POINT[::-1], P)}


def test_open_other_point_takes_the_latest_earlier_point_of_the_same_length():
    assert _opened(Fault("open-other-point", 1, 1)) == {"a": plain_mle(A, EARLIER, P), "b": plain_mle(B, EARLIER, P)}


def test_open_wrong_table_sends_the_second_tables_value_as_the_first_opening():
    honest = _opened(None)
    assert _opened(Fault("open-wrong-table", 1, 1)) == {"a": honest["b"], "b": honest["b"]}


def test_open_other_point_without_an_earlier_instance_of_that_size_is_a_usage_error():
    channel = ProofChannel(BABYBEAR, ListSink(), fault=Fault("open-other-point", 1, 0))
    channel.instance = 0
    with pytest.raises(UsageError, match="earlier instance with 3 variables"):
        opened_values(channel, {"a": BABYBEAR.vec(A)}, {"a": 0}, POINT, [[1, 2]])
