"""Where the replay's challenges are re-derived from: the built-in schedule, a plug-in, or nowhere.

:class:`ChallengeSource` sees every record the replay sees, in order. With a
built-in schedule declared (and no plug-in) it absorbs them into
:class:`stepper.verify.fiatshamir.Sha256Schedule`; with a plug-in it keeps the plain
history the plug-in is called with (:mod:`stepper.verify.binding`) and runs the
binding probe on the first ``probe_instances`` instances. Memory is constant
for the built-in schedule; the plug-in history grows with the proof.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from stepper.verify.binding import Challenger, History, call_challenger, history_payload, probe_binding
from stepper.errors import InputError, Where
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, Sha256Schedule
from stepper.transcript.model import FieldDecl, ScheduleDecl
from stepper.verify.verdict import Finding

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event, InstanceStart

__all__ = ["ChallengeSource"]


class ChallengeSource:
    """Re-derives each round's challenge, or says why it cannot."""

    def __init__(self, challenger: Challenger | None, default: ScheduleDecl | str | None,
                 probe_instances: int) -> None:
        self.challenger = challenger
        self.default = ScheduleDecl(default) if isinstance(default, str) else default
        self.probe_instances = probe_instances
        self.decl: ScheduleDecl | None = None
        self.field: Field | None = None
        self.schedule: Sha256Schedule | None = None
        self.history: list[dict[str, Any]] | None = [] if challenger is not None else None
        self.findings: list[Finding] = []
        self.statement_start = 0  # history position of the current instance's statement

    # ----- words ----------------------------------------------------------------------
    def describe(self) -> str:
        """How challenges are checked, in words."""
        if self.challenger is not None:
            return "re-derived by the plug-in given with --challenges"
        if self.schedule is not None:
            return f"re-derived by the built-in schedule {self.schedule.name}"
        if self.decl is not None:
            return f"not re-derived: schedule {self.decl.name!r} is not built in (use --challenges)"
        return "not re-derived: the transcript declares no schedule"

    def deriver(self) -> str:
        """Who re-derives, for sentences: "the built-in schedule stepper-sha256/1"."""
        if self.challenger is not None:
            return "the --challenges plug-in"
        return f"the built-in schedule {self.schedule.name}" if self.schedule is not None else "no schedule"

    # ----- records --------------------------------------------------------------------
    def set_field(self, field: Field) -> None:
        if self.field is not None and field != self.field:
            raise InputError(f"expected one field, found {self.field.describe()} and {field.describe()}")
        first = self.field is None
        self.field = field
        if first and self.history is not None:
            self.history.append(history_payload(FieldDecl(field), field))  # type: ignore[arg-type]
        self._start_builtin()

    def declare(self, decl: ScheduleDecl) -> None:
        if self.decl is not None:
            if decl != self.decl:
                raise InputError(f"expected one schedule, found {self.decl.name!r} and {decl.name!r}")
            return
        self.decl = decl
        self._log(decl)
        if self.challenger is None and decl.name in BUILTIN_SCHEDULES:
            self._start_builtin()
        elif self.challenger is None:
            self.findings.append(Finding(
                "challenges-unchecked", "info",
                f"the transcript declares the schedule {decl.name!r}, which is not built in: challenges were not "
                f"re-derived (give --challenges MODULE:FUNCTION to check them)"))

    def before_statement(self) -> None:
        """A batch or instance is next: the default schedule applies if none was declared."""
        if self.decl is None and self.default is not None:
            self.declare(self.default)

    def observe(self, record: Event) -> None:
        """Absorb a batch, instance, round or (plug-in history only) challenge record."""
        if self.schedule is not None:
            self.schedule.observe(record)
        self._log(record)

    def start_instance(self, has_batch: bool) -> None:
        """Mark where the next instance's statement starts in the plug-in history."""
        if self.history is not None:
            self.statement_start = len(self.history) - (1 if has_batch else 0)

    def rederive(self, start: InstanceStart, round_: int) -> Element | None:
        """The challenge of the round just observed, or None when nothing re-derives it."""
        if self.schedule is not None:
            return self.schedule.challenge()
        if self.challenger is None or self.history is None or self.field is None:
            return None
        value = call_challenger(self.challenger, History(self.history), self.field,
                                Where(instance=start.name, round=round_))
        if start.index < self.probe_instances:
            last = len(self.history) - 1
            positions = list(range(self.statement_start, last + 1)) if round_ == 1 else [last]
            for finding in probe_binding(self.challenger, self.history, positions, self.field, start.index,
                                         start.name, round_):
                if not any(f.kind == finding.kind and f.instance == finding.instance for f in self.findings):
                    self.findings.append(finding)
        return value

    # ----- internals ------------------------------------------------------------------
    def _start_builtin(self) -> None:
        if (self.schedule is None and self.challenger is None and self.field is not None
                and self.decl is not None and self.decl.name in BUILTIN_SCHEDULES):
            self.schedule = Sha256Schedule()
            self.schedule.observe(FieldDecl(self.field))
            self.schedule.observe(self.decl)

    def _log(self, record: Event) -> None:
        if self.history is not None and self.field is not None:
            payload = history_payload(record, self.field)
            if payload is not None:
                self.history.append(payload)
