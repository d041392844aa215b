"""Where the replay's challenges are re-derived from: the built-in schedule, a plug-in, or nowhere.

:class:`ChallengeSource` sees every record the replay sees, in order. With a
built-in schedule declared (and no plug-in) it absorbs them into that schedule's object
(:func:`stepper.verify.schedules.schedule_for`: ``stepper-sha256/1`` or ``/2``); with a plug-in it keeps the plain
history the plug-in is called with (:mod:`stepper.verify.binding`) and runs the
binding probe on the first ``probe_instances`` instances. Memory is constant
for the built-in schedule; the plug-in history grows with the proof.
"""

from __future__ import annotations

import os
import time
from typing import TYPE_CHECKING, Any, Callable

from stepper.verify.binding import (Challenger, History, PluginFailure, call_challenger, glue_positions,
                                    history_payload, plugin_name, probe_binding)
from stepper.errors import InputError, Where
from stepper.field.elements import clip_text
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, Sha256Schedule
from stepper.verify.schedules import schedule_for
from stepper.transcript.records import FieldDecl, ScheduleDecl
from stepper.verify.stateful import GuardedStateful, is_stateful

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.verify.findings import Finding
    from stepper.transcript.model import Event, InstanceStart, Squeeze

__all__ = ["ChallengeSource", "GuardedPlugin", "guard_stateful", "PLUGIN_SECONDS_ENV", "DEFAULT_PLUGIN_SECONDS"]

PLUGIN_SECONDS_ENV = "STEPPER_CHALLENGES_SECONDS"
DEFAULT_PLUGIN_SECONDS = 10.0


class _Expired(BaseException):
    """The plug-in's time is up (a BaseException, so that a plug-in's ``except Exception`` cannot swallow it)."""


class GuardedPlugin:
    """A challenge plug-in run under guard: each call has a time limit (``STEPPER_CHALLENGES_SECONDS``,
    default 10 s; enforced with SIGALRM, so only on the main thread of a POSIX process), and anything
    it raises other than Ctrl-C (``SystemExit`` included) becomes one :class:`PluginFailure` naming it.
    Its answer is parsed by the caller; nothing in a transcript or witness ever chooses what runs here."""

    def __init__(self, func: Callable[[Any], Any], label: str | None = None, seconds: float | None = None) -> None:
        self.func = func
        self.label = label or plugin_name(func)
        self.seconds = seconds if seconds is not None else _seconds_from_environment()

    def __call__(self, history: Any) -> Any:
        import signal  # only a plug-in's calls need these two
        import threading

        timed = (self.seconds > 0 and hasattr(signal, "setitimer")
                 and threading.current_thread() is threading.main_thread())
        if not timed:
            return self._run(history)
        started = time.monotonic()
        previous_handler = signal.signal(signal.SIGALRM, _expire)
        outer, _ = signal.setitimer(signal.ITIMER_REAL, self.seconds)
        try:
            return self._run(history)
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, previous_handler)
            if outer:  # someone else's timer was running: give it back what is left of it
                signal.setitimer(signal.ITIMER_REAL, max(outer - (time.monotonic() - started), 0.001))

    def _run(self, history: Any) -> Any:
        try:
            return self.func(history)
        except _Expired:
            raise PluginFailure(f"expected the challenge plug-in {self.label} to answer within {self.seconds:g} s, "
                                f"found it still running (a limit; raise it with {PLUGIN_SECONDS_ENV}=N)") from None
        except (KeyboardInterrupt, PluginFailure):
            raise
        except Exception:
            raise  # call_challenger names it, with the instance and round
        except BaseException as err:  # SystemExit, GeneratorExit ...: the plug-in's, never a reason to stop stepper
            raise PluginFailure(f"expected the challenge plug-in {self.label} to return a challenge, but it raised "
                                f"{type(err).__name__}: {clip_text(str(err))}") from None


def guard_stateful(plugin: Any, label: str, seconds: float | None = None) -> GuardedStateful:
    """A stateful plug-in (absorb/derive) with each call under the plug-in time limit."""
    return GuardedStateful(plugin, label, GuardedPlugin(plugin.absorb, label=label, seconds=seconds),
                           GuardedPlugin(plugin.derive, label=label, seconds=seconds))


def _expire(signum: int, frame: Any) -> None:
    raise _Expired()


def _seconds_from_environment() -> float:
    text = os.environ.get(PLUGIN_SECONDS_ENV)
    if text is None:
        return DEFAULT_PLUGIN_SECONDS
    try:
        value = float(text)
    except ValueError:
        value = -1.0
    if not value >= 0 or value == float("inf"):
        raise InputError(f"expected {PLUGIN_SECONDS_ENV} to be a number of seconds (0: no limit), "
                         f"found {text[:40]!r}")
    return value


class ChallengeSource:
    """Re-derives each round's challenge, or says why it cannot."""

    def __init__(self, challenger: Challenger | None, default: ScheduleDecl | str | None,
                 probe_instances: int) -> None:
        if challenger is not None and is_stateful(challenger) and not isinstance(challenger, GuardedStateful):
            challenger = guard_stateful(challenger, type(challenger).__name__)  # type: ignore[assignment]
        self.stateful: GuardedStateful | None = challenger if isinstance(challenger, GuardedStateful) else None
        if challenger is not None and self.stateful is None and not isinstance(challenger, GuardedPlugin):
            challenger = GuardedPlugin(challenger)
        self.challenger = challenger
        self.default = ScheduleDecl(default) if isinstance(default, str) else default
        self.probe_instances = probe_instances
        self.decl: ScheduleDecl | None = None
        self.field: Field | None = None
        self.schedule: Sha256Schedule | None = None
        # a function plug-in is called with the history; a stateful one absorbs each map as it comes
        self.history: list[dict[str, Any]] | None = [] if challenger is not None and self.stateful is None else None
        self.findings: list[Finding] = []
        self.statement_start = 0  # history position of the current instance's statement

    # ----- words ----------------------------------------------------------------------
    def describe(self) -> str:
        """How challenges are checked, in words."""
        if self.stateful is not None:
            return f"re-derived by the plug-in {self.stateful.label}"
        if self.challenger is not None:
            return "re-derived by the plug-in given with --challenges"
        if self.schedule is not None:
            return f"re-derived by the built-in schedule {self.schedule.name}"
        if self.decl is not None:
            return f"not re-derived: schedule {self.decl.name!r} {_not_built_in(self.decl.name)} (use --challenges)"
        return "not re-derived: the transcript declares no schedule"

    def deriver(self) -> str:
        """Who re-derives, for sentences: "the built-in schedule stepper-sha256/1"."""
        if self.stateful is not None:
            return f"the plug-in {self.stateful.label}"
        if self.challenger is not None:
            return "the --challenges plug-in"
        return f"the built-in schedule {self.schedule.name}" if self.schedule is not None else "no schedule"

    # ----- records --------------------------------------------------------------------
    def set_field(self, field: Field) -> None:
        if self.field is not None and field != self.field:
            raise InputError(f"expected one field, found {self.field.describe()} and {field.describe()}")
        first = self.field is None
        self.field = field
        if first and (self.history is not None or self.stateful is not None):
            self._keep(history_payload(FieldDecl(field), field))  # type: ignore[arg-type]
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
            from stepper.verify.findings import Finding  # a schedule stepper does not know

            self.findings.append(Finding(
                "challenges-unchecked", "info",
                f"the transcript declares the schedule {decl.name!r}, which {_not_built_in(decl.name)}: "
                f"challenges were not re-derived (give --challenges MODULE:FUNCTION to check them)"))

    def before_statement(self) -> None:
        """A batch or instance is next: the default schedule applies if none was declared."""
        if self.decl is None and self.default is not None:
            self.declare(self.default)

    def observe(self, record: Event) -> None:
        """Absorb a batch, instance, round or (plug-in history only) challenge record."""
        if self.schedule is not None:
            self.schedule.observe(record)
        self._log(record)

    def log(self, record: Event) -> None:
        """Add a record the schedule does not absorb (final, unknown) to the plug-in history."""
        self._log(record)

    def squeeze(self, record: Squeeze, where: Where | None = None) -> Element | tuple[Element, ...] | None:
        """The value the built-in schedule or a stateful plug-in derives for a squeeze, before
        the squeeze's own event is absorbed; None when nothing derives it (no schedule, or a
        function plug-in, which derives round challenges only: said once in a finding)."""
        length = len(record.value) if record.listed else None
        if self.schedule is not None:
            return self.schedule.squeeze(record.name, length)
        if self.stateful is not None and self.field is not None:
            return self.stateful.derive_squeeze(record.name, length, self.field, where or Where())
        if self.challenger is not None and not any(f.kind == "squeezes-unchecked" for f in self.findings):
            from stepper.verify.findings import Finding  # a plug-in that derives round challenges only

            self.findings.append(Finding(
                "squeezes-unchecked", "info",
                f"the squeeze '{record.name}' (and any later one) was not re-derived: a function plug-in "
                f"derives round challenges only (give a stateful plug-in or --challenges-exec to check squeezes)"))
        return None

    def start_instance(self, has_batch: bool) -> None:
        """Mark where the next instance's statement starts in the plug-in history."""
        if self.history is not None:
            self.statement_start = len(self.history) - (1 if has_batch else 0)

    def rederive(self, start: InstanceStart, round_: int) -> Element | None:
        """The challenge of the round just observed, or None when nothing re-derives it."""
        if self.schedule is not None:
            return self.schedule.challenge()
        if self.stateful is not None and self.field is not None:
            request = {"type": "challenge", "instance": start.name, "index": start.index, "round": round_}
            return self.stateful.derive(request, self.field, Where(instance=start.name, round=round_))
        if self.challenger is None or self.history is None or self.field is None:
            return None
        value = call_challenger(self.challenger, History(self.history), self.field,
                                Where(instance=start.name, round=round_))
        if start.index < self.probe_instances:
            last = len(self.history) - 1
            positions = list(range(self.statement_start, last + 1)) if round_ == 1 else [last]
            if round_ == 1 and start.claim_expr is not None:  # the glue the claim is built from
                positions = glue_positions(self.history, start.claim_expr, self.statement_start) + positions
            for finding in probe_binding(self.challenger, self.history, positions, self.field, start.index,
                                         start.name, round_):
                if not any(f.kind == finding.kind and f.instance == finding.instance for f in self.findings):
                    self.findings.append(finding)
        return value

    # ----- internals ------------------------------------------------------------------
    def _start_builtin(self) -> None:
        if (self.schedule is None and self.challenger is None and self.field is not None
                and self.decl is not None and self.decl.name in BUILTIN_SCHEDULES):
            self.schedule = schedule_for(self.decl.name)
            self.schedule.observe(FieldDecl(self.field))
            self.schedule.observe(self.decl)

    def _log(self, record: Event) -> None:
        if (self.history is not None or self.stateful is not None) and self.field is not None:
            payload = history_payload(record, self.field)
            if payload is not None:
                self._keep(payload)

    def _keep(self, payload: dict[str, Any]) -> None:
        if self.stateful is not None:
            self.stateful.absorb(payload, Where())
        elif self.history is not None:
            self.history.append(payload)


def _not_built_in(name: str) -> str:
    """Words for a declared schedule that is not built in; for a name in stepper's own namespace
    they say this version does not know it (a file from a newer stepper is checked here without
    its challenges, and says so)."""
    if not name.startswith("stepper-"):
        return "is not built in"
    return f"is not built into this stepper (it knows {', '.join(BUILTIN_SCHEDULES)}; a newer one may)"
