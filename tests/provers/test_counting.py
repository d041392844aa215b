"""MulCounter: products counted where they happen, and big tables worked on in blocks."""

from __future__ import annotations

import numpy as np
import pytest

from stepper.field.field import NAMED_PRIMES, get_field
from stepper.field.spec import field_from_spec
from stepper.provers import counting
from stepper.provers.counting import MulCounter, blocks
from tests.provers.helpers import plain_mle

BABYBEAR = get_field(NAMED_PRIMES["babybear"])


def test_blocks_cover_the_range_once_in_order():
    assert [(s.start, s.stop) for s in blocks(10, 4)] == [(0, 4), (4, 8), (8, 10)]
    assert list(blocks(0, 4)) == []


@pytest.mark.parametrize("spec", [{"name": "babybear"}, {"name": "goldilocks"}, {"name": "bn254"},
                                  {"name": "babybear", "extension_degree": 4}])
@pytest.mark.parametrize("order", ["low-first", "high-first"])
def test_a_fold_in_blocks_and_in_place_equals_the_fold_by_its_definition(monkeypatch, spec, order):
    # fold: lo + r * (hi - lo) entry by entry (common practice, no source), with plain field operations
    field = field_from_spec(spec)
    table = field.vrandom(64, np.random.default_rng(3))
    r = field.vlist(field.vrandom(1, np.random.default_rng(4)))[0]
    values = field.vlist(table)
    lo, hi = (values[0::2], values[1::2]) if order == "low-first" else (values[:32], values[32:])
    expected = [field.add(a, field.mul(r, field.sub(b, a))) for a, b in zip(lo, hi)]
    monkeypatch.setattr(counting, "BLOCK", 5)  # blocks of 5 pairs: uneven, the last one short
    counter = MulCounter(field)
    assert field.vlist(counter.fold(table, r, order)) == expected
    assert field.vlist(table) == values  # the caller's table is left alone
    owned = table.copy()
    folded = counter.fold(owned, r, order, in_place=True)
    assert field.vlist(folded) == expected
    assert np.shares_memory(folded, owned)
    assert counter.total == 64  # 32 products per fold, in blocks or not


def test_the_mle_through_blocked_in_place_folds_is_the_sum_over_the_cube(monkeypatch):
    monkeypatch.setattr(counting, "BLOCK", 3)
    table = BABYBEAR.vrandom(1 << 7, np.random.default_rng(5))
    point = BABYBEAR.vlist(BABYBEAR.vrandom(7, np.random.default_rng(6)))
    before = table.copy()
    assert MulCounter(BABYBEAR).mle(table, point) == plain_mle(BABYBEAR.vlist(table), point, BABYBEAR.p)
    assert np.array_equal(table, before)
