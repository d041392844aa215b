"""The built-in Fiat-Shamir schedules by the name a transcript declares.

``stepper-sha256/1`` is :class:`~stepper.verify.fiatshamir.Sha256Schedule`, ``stepper-sha256/2``
:class:`~stepper.verify.one_digest.OneDigestSchedule`; any other name is not built in (the replay
then re-derives nothing unless a plug-in is given, and says so).
"""

from __future__ import annotations

from stepper.errors import UsageError
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, ONE_DIGEST_SCHEDULE_NAME, SCHEDULE_NAME, Sha256Schedule
from stepper.verify.one_digest import OneDigestSchedule

__all__ = ["schedule_for"]

_SCHEDULES: dict[str, type[Sha256Schedule]] = {SCHEDULE_NAME: Sha256Schedule,
                                               ONE_DIGEST_SCHEDULE_NAME: OneDigestSchedule}


def schedule_for(name: str) -> Sha256Schedule:
    """A fresh built-in schedule of this name; :class:`UsageError` naming the built-in ones otherwise."""
    kind = _SCHEDULES.get(name)
    if kind is None:
        raise UsageError(f"expected a built-in schedule ({', '.join(BUILTIN_SCHEDULES)}), found {name!r}")
    return kind()
