"""The glue between a proof's instances as the app shows it (pure: no I/O, no Textual).

A :class:`GlueTrail` is fed the ``value``, ``squeeze`` and ``opening`` records
the model reads, in stream order, and keeps them by the instance they follow
(``head`` before the first instance), together with the replay's glue verdicts:

* ``link`` and ``evaluation`` are the replay's own :class:`~stepper.verify.verdict.GlueResult`
  records, taken from its report (:meth:`GlueTrail.settle`); nothing here evaluates
  an expression or compares a claim.
* A squeeze's re-derived value comes from the replay's challenge source
  (:class:`~stepper.verify.challenges.ChallengeSource`, the built-in schedule), run a
  second time over the same records in the same order (:class:`SqueezeShadow`), because
  the replay reports a squeeze only when it fails, and only an instance's first failure.
  Sent and re-derived are compared element by element, as the replay compares them.

Where a glue check sits (the positions ``check`` reports): ``link`` at round 0 of
its instance; ``evaluation`` at the instance's last round; a ``squeeze`` at the
rounds its instance had when it arrived, or at round 0 of the first instance when it
came before any. An instance has a round-0 row when it has a ``claim_expr`` or a
glue failure sits there.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Iterable, Sequence

from stepper.transcript.model import (
    BatchDecl, ChallengeMsg, FieldDecl, InstanceStart, NamedValue, Opening, RoundMsg, ScheduleDecl, Squeeze,
)

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event, Glue

__all__ = ["GlueTrail", "SqueezeCheck", "SqueezeShadow", "GLUE_KINDS", "glue_kind", "names_in"]

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


class SqueezeShadow:
    """The replay's challenge source, advanced over the model's records only when asked
    (a proof without squeezes never pays for it): it answers each squeeze's re-derived
    value, in stream order. The calls mirror :class:`stepper.verify.replay.Replay`."""

    def __init__(self) -> None:
        from stepper.verify.challenges import ChallengeSource

        self.source = ChallengeSource(None, None, 0)
        self.read = 0  # records consumed
        self.derived: list[Any] = []  # one per squeeze, in stream order
        self._pending_batch = False

    def advance(self, records: Sequence[Event]) -> None:
        source = self.source
        for record in records[self.read:]:
            cls = record.__class__
            if cls is RoundMsg or cls is NamedValue or cls is Opening:
                source.observe(record)
            elif cls is ChallengeMsg and source.schedule is not None:
                source.schedule.challenge()  # the replay re-derives every round's challenge in turn
            elif cls is Squeeze:
                self.derived.append(source.squeeze(record))  # type: ignore[arg-type]
                source.observe(record)
            elif cls is InstanceStart:
                source.before_statement()
                source.start_instance(has_batch=self._pending_batch or record.batch is not None)  # type: ignore[union-attr]
                self._pending_batch = False
                source.observe(record)
            elif cls is BatchDecl:
                source.before_statement()
                self._pending_batch = True
                source.observe(record)
            elif cls is FieldDecl:
                source.set_field(record.field)  # type: ignore[union-attr]
            elif cls is ScheduleDecl:
                source.declare(record)  # type: ignore[arg-type]
        self.read = len(records)


class GlueTrail:
    """Glue records by the instance they follow, and the replay's glue verdicts."""

    def __init__(self) -> None:
        self.head: list[Glue] = []  # before the first instance
        self.after: list[list[Glue]] = []  # per instance: what follows it in the stream
        self.by_name: dict[str, Glue] = {}
        self.squeezes: list[tuple[Squeeze, Position]] = []
        self.link: dict[int, Any] = {}  # instance -> GlueResult
        self.evaluation: dict[int, Any] = {}
        self._shadow: SqueezeShadow | None = None
        self._checks: list[SqueezeCheck] = []

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

    def failures(self, report: Any, field: Field | None, records: Sequence[Event]) -> list[tuple[Position, str]]:
        """Every failed glue check (position and check): the report's links and evaluations and
        the squeezes re-derived, in stream order at one place: a squeeze sent before the
        instance, its link; the evaluation once the openings are in, then squeezes sent after."""
        squeezes = [(c.position, "squeeze") for c in self.squeeze_checks(field, records) if c.status == "fail"]
        early = [s for s in squeezes if s[0][1] == 0]
        return early + self.settle(report) + [s for s in squeezes if s[0][1] != 0]

    def squeeze_checks(self, field: Field | None, records: Sequence[Event]) -> list[SqueezeCheck]:
        """Every squeeze so far with its re-derived value and status (the shadow catches up)."""
        if len(self._checks) == len(self.squeezes) or field is None:
            return self._checks
        if self._shadow is None:
            self._shadow = SqueezeShadow()
        self._shadow.advance(records)
        checks = []
        for (record, position), derived in zip(self.squeezes, self._shadow.derived):
            checks.append(SqueezeCheck(record, derived, _squeeze_status(field, record, derived), position))
        self._checks = checks
        return checks

    # ----- questions ---------------------------------------------------------------
    def following(self, instance: int) -> list[Glue]:
        return self.after[instance] if 0 <= instance < len(self.after) else []

    def named(self, names: Iterable[str]) -> list[Glue]:
        """The latest record of each name that has arrived, in the order given."""
        return [self.by_name[n] for n in names if n in self.by_name]


def _squeeze_status(field: Field, record: Squeeze, derived: Any) -> str:
    if derived is None:
        return "unchecked"
    sent: tuple[Element, ...] = record.items()
    want = tuple(derived) if record.listed else (derived,)
    same = len(sent) == len(want) and all(field.lift(s) == field.lift(d) for s, d in zip(sent, want))
    return "pass" if same else "fail"
