"""The glue between a proof's instances as the app shows it (pure: no I/O, no Textual).

A :class:`GlueTrail` is fed the ``value``, ``squeeze`` and ``opening`` records
the model reads, in stream order, and keeps them by the instance they follow
(``head`` before the first instance), together with the replay's glue verdicts:

* ``link`` and ``evaluation`` are the replay's own :class:`~stepper.verify.glue_results.GlueResult`
  records, taken from its report (:meth:`GlueTrail.settle`); nothing here evaluates
  an expression or compares a claim.
* A squeeze's re-derived value and status are the replay's own
  :class:`~stepper.verify.glue_results.SqueezeResult`, one per squeeze in stream order, as the
  replay's ``feed`` returns them (:meth:`GlueTrail.took`); nothing here re-derives a
  squeeze.

Where a glue check sits (the positions ``check`` reports): ``link`` at round 0 of
its instance; ``evaluation`` at the instance's last round; a ``squeeze`` at the
rounds its instance had when it arrived, or at round 0 of the first instance when it
came before any. An instance has a round-0 row when it has a ``claim_expr`` or a
glue failure sits there.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Iterable

from stepper.transcript.model import NamedValue, Opening, Squeeze

if TYPE_CHECKING:
    from stepper.transcript.model import Glue
    from stepper.verify.glue_results import SqueezeResult

__all__ = ["GlueTrail", "SqueezeCheck", "GLUE_KINDS", "glue_kind", "names_in"]

Position = tuple[int, int]

GLUE_KINDS = (NamedValue, Squeeze, Opening)


def glue_kind(record: Glue) -> str:
    """The event type a glue record came from: ``value``, ``squeeze`` or ``opening``."""
    return "opening" if isinstance(record, Opening) else ("squeeze" if isinstance(record, Squeeze) else "value")


def names_in(text: str) -> list[str]:
    """The values, squeezes and openings an expression names, in first-use order."""
    from stepper.field.expr import parse_cached

    refs = parse_cached(text).references()
    return list(dict.fromkeys([*refs.values]))


@dataclass(frozen=True, slots=True)
class SqueezeCheck:
    """One squeeze as sent and as the schedule re-derives it (``derived`` None: nothing
    re-derives it, no schedule declared). ``position`` is where a failure is reported."""

    record: Squeeze
    derived: Any
    status: str  # pass, fail or unchecked
    position: Position


class GlueTrail:
    """Glue records by the instance they follow, and the replay's glue verdicts."""

    def __init__(self) -> None:
        self.head: list[Glue] = []  # before the first instance
        self.after: list[list[Glue]] = []  # per instance: what follows it in the stream
        self.by_name: dict[str, Glue] = {}
        self.squeezes: list[tuple[Squeeze, Position]] = []
        self.link: dict[int, Any] = {}  # instance -> GlueResult
        self.evaluation: dict[int, Any] = {}
        self._checks: list[SqueezeCheck] = []  # one per squeeze the replay has checked, in stream order

    # ----- growing -----------------------------------------------------------------
    def opened(self) -> None:
        """An instance started."""
        self.after.append([])

    def add(self, record: Glue, rounds_so_far: int) -> int | None:
        """Keep one glue record; returns the instance it follows (None before the first)."""
        self.by_name[record.name] = record
        index = record.instance if record.instance is not None and record.instance < len(self.after) else None
        (self.after[index] if index is not None else self.head).append(record)
        if isinstance(record, Squeeze):
            self.squeezes.append((record, (index, rounds_so_far) if index is not None else (0, 0)))
        return index

    def settle(self, report: Any) -> list[tuple[Position, str]]:
        """Take the link and evaluation results of the replay's report; the failed ones
        (position and check) for the model's list of failures."""
        failed: list[tuple[Position, str]] = []
        for summary in getattr(report, "instances", ()) or ():
            link, evaluation = getattr(summary, "link", None), getattr(summary, "evaluation", None)
            if link is not None:
                self.link[summary.index] = link
                if link.status == "fail":
                    failed.append(((summary.index, 0), "link"))
            if evaluation is not None:
                self.evaluation[summary.index] = evaluation
                if evaluation.status == "fail":
                    failed.append(((summary.index, evaluation.round), "evaluation"))
        return failed

    def took(self, result: SqueezeResult) -> None:
        """The replay's result for the next squeeze in stream order."""
        record, position = self.squeezes[len(self._checks)]
        self._checks.append(SqueezeCheck(record, result.expected, result.status, position))

    def failures(self, report: Any) -> list[tuple[Position, str]]:
        """Every failed glue check (position and check): the report's links and evaluations and
        the squeezes re-derived, in stream order at one place: a squeeze sent before the
        instance, its link; the evaluation once the openings are in, then squeezes sent after."""
        squeezes = [(c.position, "squeeze") for c in self._checks if c.status == "fail"]
        early = [s for s in squeezes if s[0][1] == 0]
        return early + self.settle(report) + [s for s in squeezes if s[0][1] != 0]

    def squeeze_checks(self) -> list[SqueezeCheck]:
        """Every squeeze the replay has checked so far, with its re-derived value and status."""
        return self._checks

    # ----- questions ---------------------------------------------------------------
    def following(self, instance: int) -> list[Glue]:
        return self.after[instance] if 0 <= instance < len(self.after) else []

    def named(self, names: Iterable[str]) -> list[Glue]:
        """The latest record of each name that has arrived, in the order given."""
        return [self.by_name[n] for n in names if n in self.by_name]

