"""The transcript model: records are canonical once built, and the fold adds up the events."""

from __future__ import annotations

import dataclasses

import pytest

from stepper.field.field import get_field
from stepper.transcript.model import (
    BucketStats,
    ChallengeMsg,
    ChallengeMsgDraft,
    FieldDecl,
    FinalValue,
    Header,
    InstanceStart,
    Note,
    RoundMsg,
    RoundMsgDraft,
    UnknownEvent,
    fold_events,
)

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source


def test_records_refuse_impossible_positions_and_options():
    with pytest.raises(ValueError, match="round >= 0"):
        RoundMsg(0, -1, (1, 2))
    with pytest.raises(ValueError, match="instance >= 0"):
        ChallengeMsg(-1, 1, 5)
    with pytest.raises(ValueError, match="order among"):
        InstanceStart(0, "boarding-permutation", 2, 2, 0, order="middle-first")
    with pytest.raises(ValueError, match="form among"):
        InstanceStart(0, "boarding-permutation", 2, 2, 0, form="lagrange")
    with pytest.raises(ValueError, match="non-negative"):
        BucketStats(0, 1, 0, -4)
    with pytest.raises(ValueError, match="text as a string"):
        Note(None)  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="a Field"):
        FieldDecl(BABYBEAR)  # type: ignore[arg-type]


def test_records_are_frozen_and_store_lists_as_tuples():
    record = RoundMsg(0, 1, [3, 4])  # type: ignore[arg-type]
    assert record.values == (3, 4)
    with pytest.raises(dataclasses.FrozenInstanceError):
        record.round = 2  # type: ignore[misc]
    assert BucketStats(0, 1, 0, 2, [1, 1]).sizes == (1, 1)  # type: ignore[arg-type]


def test_drafted_records_are_ordinary_frozen_records():
    fast = RoundMsgDraft()
    fast.instance, fast.round, fast.values = 0, 2, (7, 8)
    fast.__class__ = RoundMsg
    assert type(fast) is RoundMsg
    assert fast == RoundMsg(0, 2, (7, 8)) and hash(fast) == hash(RoundMsg(0, 2, (7, 8)))
    with pytest.raises(dataclasses.FrozenInstanceError):
        fast.round = 3  # type: ignore[misc]
    fast_c = ChallengeMsgDraft()
    fast_c.instance, fast_c.round, fast_c.value = 0, 2, 9
    fast_c.__class__ = ChallengeMsg
    assert fast_c == ChallengeMsg(0, 2, 9) and repr(fast_c) == "ChallengeMsg(instance=0, round=2, value=9)"


def test_fold_gathers_rounds_challenges_finals_notes_and_unknown_events():
    field = get_field(BABYBEAR)
    start = InstanceStart(0, "deck-slots-zero", 2, 1, 7)
    events = [
        FieldDecl(field), Note("sailing delayed 10 min"), start,
        RoundMsg(0, 1, (3, 4)), ChallengeMsg(0, 1, 5), Note("slot 4", 0, 1),
        RoundMsg(0, 2, (1, 7)), ChallengeMsg(0, 2, 2), FinalValue(0, 13),
        UnknownEvent("deck-camera", {"frame": 1}, 0),
    ]
    t = fold_events(events, Header(metadata={"label": "isle-of-quill-0740"}), "complete", "verified")
    inst = t.instances[0]
    assert [(r.number, r.values, r.challenge) for r in inst.rounds] == [(1, (3, 4), 5), (2, (1, 7), 2)]
    assert inst.final == 13 and inst.complete and t.complete
    assert t.notes == (Note("sailing delayed 10 min"),) and inst.notes == (Note("slot 4", 0, 1),)
    assert [n.text for n in t.all_notes()] == ["sailing delayed 10 min", "slot 4"]
    assert inst.unknown[0].kind == "deck-camera"


def test_an_instance_missing_a_challenge_is_not_complete():
    field = get_field(BABYBEAR)
    t = fold_events([FieldDecl(field), InstanceStart(0, "deck-slots-zero", 2, 1, 7), RoundMsg(0, 1, (3, 4))])
    assert not t.instances[0].complete and not t.complete
