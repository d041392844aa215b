"""stepper.verify.schedules chooses a built-in Fiat-Shamir schedule by the name a transcript declares.

The two names and the bytes each schedule absorbs are transcripts/FIAT-SHAMIR.md's; the worked
example's first round (BabyBear, 2^31 - 2^27 + 1, common practice, no source) is the one pinned there.
"""

from __future__ import annotations

import pytest

from stepper.errors import InputError, UsageError
from stepper.field.field import get_field
from stepper.transcript.model import FieldDecl, InstanceStart, ScheduleDecl
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, ONE_DIGEST_SCHEDULE_NAME, SCHEDULE_NAME, Sha256Schedule
from stepper.verify.one_digest import OneDigestSchedule
from stepper.verify.schedules import schedule_for
from tests.verify.test_one_digest import NAME, P, ROUND1


def test_both_schedules_are_built_in_and_chosen_by_name():
    assert BUILTIN_SCHEDULES == (SCHEDULE_NAME, ONE_DIGEST_SCHEDULE_NAME) == ("stepper-sha256/1", NAME)
    assert type(schedule_for(SCHEDULE_NAME)) is Sha256Schedule
    assert type(schedule_for(NAME)) is OneDigestSchedule
    with pytest.raises(UsageError, match="stepper-sha256/1, stepper-sha256/2.*'stepper-sha256/3'"):
        schedule_for("stepper-sha256/3")


def test_each_schedule_refuses_a_declaration_of_the_other():
    for mine, other in ((SCHEDULE_NAME, NAME), (NAME, SCHEDULE_NAME)):
        s = schedule_for(mine)
        s.observe(FieldDecl(get_field(P)))
        with pytest.raises(InputError, match=f"expected the schedule {mine}"):
            s.observe(ScheduleDecl(other))


def test_the_two_schedules_give_different_challenges_for_the_same_records():
    challenges = []
    for name in BUILTIN_SCHEDULES:
        s = schedule_for(name)
        s.observe(FieldDecl(get_field(P)))
        s.observe(InstanceStart(0, "boarding-permutation", 2, 2, 38))
        challenges.append(s.round_challenge(ROUND1))
    assert challenges[0] != challenges[1]
