"""The app's view of one proof: event records plus the replay's verdicts, as rows.

Pure: no I/O and no Textual. A :class:`ProofModel` is fed event records one at
a time (when a file opens, and again while a growing file is followed); it
hands each record to the core replay (:class:`stepper.verify.replay.Replay`), keeps
the results it returns, and answers what the screens ask: the rows of one
instance, the status of every round at a glance, the failures in order, a
value search, and the detail of one round. It never decides on its own whether
a check passed: every status word comes from the replay.

Invariants: a position is ``(instance, round)`` with the instance 0-based and
the round 1-based, or round 0 for an instance whose claim is linked to earlier
glue (its ``link`` row, see :mod:`stepper.app.glue_model`);
``InstanceView.rounds[k - 1]`` is round k as sent and ``results[k - 1]`` the
replay's latest result for it (``None`` until there is one); ``failures`` lists
failing positions in proof order without repeats, ``failure_checks`` the checks
that failed at each, in the order they failed.
"""

from __future__ import annotations

from bisect import bisect_left, bisect_right, insort
from dataclasses import dataclass, field as dc_field
from typing import TYPE_CHECKING, Any, Iterable, Mapping

from stepper.app.glue_model import GLUE_KINDS, GlueTrail
from stepper.errors import StepperError
from stepper.app.round_rows import (
    STATUS_MARKS, RoundRow, StatusMark, instance_rows, mark_of, shorten, strip_line, verdict_status,
)
from stepper.field.field import Element, Field
from stepper.transcript.model import (
    BatchDecl,
    BucketStats,
    ChallengeMsg,
    Event,
    FieldDecl,
    FinalValue,
    Header,
    InstanceStart,
    Note,
    RoundMsg,
    ScheduleDecl,
    Transcript,
    UnknownEvent,
    fold_events,
)

if TYPE_CHECKING:
    from stepper.app.whole_file import WholeFile

__all__ = ["Position", "StatusMark", "STATUS_MARKS", "verdict_status", "InstanceView", "ProofModel", "RoundRow",
           "mark_of", "shorten"]

Position = tuple[int, int]


@dataclass(slots=True)
class InstanceView:
    """Everything seen so far for one instance (an accumulator, grown by the model)."""

    start: InstanceStart
    rounds: list[RoundMsg] = dc_field(default_factory=list)
    challenges: list[Element | None] = dc_field(default_factory=list)
    results: list[Any] = dc_field(default_factory=list)
    buckets: list[BucketStats] = dc_field(default_factory=list)
    notes: list[Note] = dc_field(default_factory=list)
    unknown: list[UnknownEvent] = dc_field(default_factory=list)
    final_value: Element | None = None
    final_result: Any = None
    batch_result: Any = None
    glue_failed: bool = False  # a link, evaluation or squeeze of this instance failed
    version: int = 0  # bumps whenever anything shown for this instance changes

    @property
    def name(self) -> str:
        return self.start.name

    def status(self, round_: int) -> str:
        result = self.results[round_ - 1] if 0 < round_ <= len(self.results) else None
        if result is None:
            return "unchecked" if round_ <= len(self.rounds) else "missing"
        return str(result.status)

    def worst(self) -> str:
        """``fail`` if any check of the instance failed, else ``pending`` while rounds are
        missing or unchecked, else ``pass``."""
        if self.glue_failed or self.failed_final() or self.failed_batch() or any(
            r is not None and r.status == "fail" for r in self.results
        ):
            return "fail"
        if len(self.rounds) < self.start.num_vars or any(r is None or r.status != "pass" for r in self.results):
            return "pending"
        return "pass"

    def failed_final(self) -> bool:
        return self.final_result is not None and self.final_result.status == "fail"

    def failed_batch(self) -> bool:
        return self.batch_result is not None and self.batch_result.status == "fail"


class ProofModel:
    """A proof as the app shows it, grown one event record at a time."""

    def __init__(self, replay_factory: Any = None, header: Header | None = None, source: str = "") -> None:
        self.header = header or Header()
        self.source = source
        self.field: Field | None = None
        self.schedule: ScheduleDecl | None = None
        self.instances: list[InstanceView] = []
        self.proof_notes: list[Note] = []
        self.unknown: list[UnknownEvent] = []
        self.failures: list[Position] = []
        self.failure_checks: dict[Position, list[str]] = {}
        self.glue = GlueTrail()
        self.completeness = "incomplete"
        self.digest = "missing"
        self.kind = "transcript"  # or "events" (a JSON-lines stream)
        self.digest_problem: Exception | None = None  # the reader's digest-mismatch error, word for word
        self.events_seen = 0
        self.loading = False  # True while the first read is still feeding events
        self.swept: WholeFile | None = None  # what the whole-file pass (stepper check's) said, while loading
        self.final = False  # no checked event can follow (see finish)
        self.generation = 0  # bumps on every change; screens repaint when it moves
        self._replay_factory = replay_factory
        self._replay: Any = replay_factory() if replay_factory is not None else None
        self._records: list[Event] = []  # every record fed, in order (for a mid-stream report, a fold)
        self._report: Any = None
        self._report_generation = -1
        self._closed = False

    # ----- growing ---------------------------------------------------------------------
    def feed(self, record: Event) -> None:
        """Take one event record (in file order) and the replay's results for it."""
        self.events_seen += 1
        self.generation += 1
        if isinstance(record, RoundMsg):  # rounds and challenges first: nearly every record is one
            view = self.instances[record.instance]
            view.version += 1
            view.rounds.append(record)
            view.challenges.append(None)
            view.results.append(None)
        elif isinstance(record, ChallengeMsg):
            view = self.instances[record.instance]
            view.challenges[record.round - 1] = record.value
            view.version += 1
        elif isinstance(record, FieldDecl):
            self.field = record.field
        elif isinstance(record, ScheduleDecl):
            self.schedule = record
        elif isinstance(record, InstanceStart):
            self.instances.append(InstanceView(record))
            self.glue.opened()
        elif isinstance(record, FinalValue):
            view = self.instances[record.instance]
            view.final_value = record.value
            view.version += 1
        elif isinstance(record, GLUE_KINDS):
            follows = self.glue.add(record, self.rounds_in(record.instance if record.instance is not None else -1))
            if follows is not None:
                self.instances[follows].version += 1
        elif isinstance(record, BucketStats):
            view = self.instances[record.instance]
            view.buckets.append(record)
            view.version += 1
        elif isinstance(record, Note):
            self._add_note(record)
        elif isinstance(record, UnknownEvent):
            if record.instance is not None and record.instance < len(self.instances):
                self.instances[record.instance].unknown.append(record)
            else:
                self.unknown.append(record)
        self._records.append(record)
        if self._replay is not None and isinstance(record, _CHECKED):
            try:
                results = self._replay.feed(record)
            except StepperError:
                self._records.pop()  # refused by the replay (the reader says why): never replayed again
                raise
            for result in results:
                self._take(result)

    def feed_all(self, records: Iterable[Event]) -> None:
        for record in records:
            self.feed(record)

    def finish(self, completeness: str, digest: str, final: bool | None = None) -> None:
        """What the reader learnt once the file was exhausted. ``final`` says no more
        checked events can follow (a transcript's end event was read); it defaults to
        ``completeness == "complete"``. Only then does the live replay close."""
        self.completeness = completeness
        self.digest = digest
        self.final = completeness == "complete" if final is None else final
        self.generation += 1

    def add_note(self, note: Note) -> None:
        """A note made in the app (already saved by the caller)."""
        self._records.append(note)
        self._add_note(note)
        self.generation += 1

    def _add_note(self, note: Note) -> None:
        if note.instance is not None and note.instance < len(self.instances):
            self.instances[note.instance].notes.append(note)
            self.instances[note.instance].version += 1
        else:
            self.proof_notes.append(note)

    def _take(self, result: Any) -> None:
        self.generation += 1
        kind = type(result).__name__
        if kind == "SqueezeResult":  # re-derived and compared by the replay, kept in stream order
            self.glue.took(result)
        index = getattr(result, "instance", None)
        if not isinstance(index, int) or not 0 <= index < len(self.instances):
            return
        view = self.instances[index]
        view.version += 1
        if kind == "RoundResult":
            number = int(result.round)
            while len(view.results) < number:
                view.results.append(None)
            view.results[number - 1] = result
            if result.status == "fail":
                self._note_failure((index, number), str(result.check))
        elif kind == "FinalResult":
            view.final_result = result
            if result.status == "fail":
                self._note_failure((index, max(1, len(view.rounds))), "final")
        elif kind == "BatchResult":
            view.batch_result = result
            if result.status == "fail":
                self._note_failure((index, 0), "batch")  # at the instance's claim, where check puts it

    def _note_failure(self, position: Position, check: str) -> None:
        checks = self.failure_checks.get(position)
        if checks is None:
            self.failure_checks[position] = [check]
            insort(self.failures, position)
        elif check not in checks:
            checks.append(check)

    def _settle_glue(self, report: Any) -> None:
        """The replay's link and evaluation verdicts, and the squeezes re-derived: their
        failures join the list (at the positions `stepper check` reports them)."""
        for (index, number), check in self.glue.failures(report):
            if 0 <= index < len(self.instances):
                view = self.instances[index]
                if not view.glue_failed:
                    view.glue_failed = True
                    view.version += 1
                self._note_failure((index, number), check)

    def take_whole_file(self, swept: WholeFile) -> None:
        """What the whole-file pass found (every round checked), shown while the rounds are
        still read for stepping; values format in this model's field."""
        self.swept = swept.with_field(self.field)
        self.generation += 1

    # ----- questions -------------------------------------------------------------------
    @property
    def all_checked(self) -> bool:
        """Every round of the file has been checked: by the whole-file pass, or the first read is over."""
        return not self.loading or self.swept is not None

    @property
    def rounds_total(self) -> int | None:
        """How many rounds the file holds, once the whole-file pass has said (for the progress line)."""
        return None if self.swept is None else self.swept.rounds

    @property
    def records(self) -> list[Event]:
        """Every record fed so far, in stream order (read only)."""
        return self._records

    @property
    def round_count(self) -> int:
        return sum(len(v.rounds) for v in self.instances)

    def report(self) -> Any:
        """The replay's report of everything fed so far. Once the file is final the live replay closes and reports; before that
        (a growing, truncated or JSON-lines file) a fresh replay of the same
        records reports, so the live one can go on."""
        if self._replay is None:
            return None
        if self.loading:
            return None if self.swept is None else self.swept.report  # every round checked by the whole-file pass
        if self._report is not None and (self._report_generation == self.generation or self._closed):
            return self._report
        if self.final:
            for result in self._replay.finish():
                self._take(result)
            self._closed = True
            self._report = self._replay.report("complete")
        else:
            probe = self._replay_factory()
            for record in self._records:
                if isinstance(record, _CHECKED):
                    probe.feed(record)
            for result in probe.finish():
                self._take(result)
            self._report = probe.report(self.completeness)
        self._settle_glue(self._report)
        self._report_generation = self.generation
        return self._report

    def transcript(self) -> Transcript:
        """The folded transcript of everything fed so far (notes made in the app included)."""
        return fold_events(self._records, self.header, self.completeness, self.digest)  # type: ignore[arg-type]

    def verdict(self) -> str:
        """The replay's verdict, ``checking`` while the first read is under way, or
        ``unusable`` for a file whose digest does not match (no verdict on such bytes,
        as `stepper check` gives none: see :mod:`stepper.transcript.condition`)."""
        if self.loading:
            return str(self.swept.report.verdict) if self.swept is not None else "checking"
        if self.digest == "mismatch":
            return "unusable"
        report = self.report()
        return str(report.verdict) if report is not None else "incomplete"

    def version_of(self, instance: int) -> int:
        """The change counter of one instance (-1 when it does not exist)."""
        return self.instances[instance].version if 0 <= instance < len(self.instances) else -1

    def rounds_in(self, instance: int) -> int:
        return len(self.instances[instance].rounds) if 0 <= instance < len(self.instances) else 0

    def first_round(self, instance: int) -> int:
        """0 when the instance has a round-0 row (its ``link``, or a glue or batch failure
        reported at round 0 as `stepper check` reports it), else 1."""
        if not 0 <= instance < len(self.instances):
            return 1
        linked = self.instances[instance].start.claim_expr is not None
        return 0 if linked or (instance, 0) in self.failure_checks else 1

    def rows(self, instance: int, width: int = 14) -> list[RoundRow]:
        """The round table of one instance (built on demand: only the instance on screen)."""
        return instance_rows(self, instance, width)

    def strip_line(self, instance: int) -> str:
        """The instance's line of the status strip (:func:`stepper.app.round_rows.strip_line`):
        a symbol per round, ``┆`` and the final check, the link and evaluation marks."""
        return strip_line(self, instance)

    # ----- moving ----------------------------------------------------------------------
    def first_failure(self) -> Position | None:
        return self.failures[0] if self.failures else None

    def next_failure(self, after: Position) -> Position | None:
        """The first failure after ``after`` in proof order, wrapping to the first."""
        if not self.failures:
            return None
        at = bisect_right(self.failures, after)
        return self.failures[at] if at < len(self.failures) else self.failures[0]

    def previous_failure(self, before: Position) -> Position | None:
        """The last failure before ``before`` (wrapping to the last one), or None."""
        if not self.failures:
            return None
        at = bisect_left(self.failures, before)
        return self.failures[at - 1] if at > 0 else self.failures[-1]

    def step(self, at: Position, delta: int) -> Position:
        """``delta`` rounds forward or back across instance borders (a round-0 row counts
        as a round), clamped to the proof."""
        instance, round_ = at
        round_ += delta
        while round_ > max(1, self.rounds_in(instance)) and instance + 1 < len(self.instances):
            round_ += self.first_round(instance + 1) - max(1, self.rounds_in(instance)) - 1
            instance += 1
        while round_ < self.first_round(instance) and instance > 0:
            short = self.first_round(instance) - round_
            instance -= 1
            round_ = max(1, self.rounds_in(instance)) - short + 1
        return instance, max(self.first_round(instance), min(round_, max(1, self.rounds_in(instance))))

    def place(self, pos: Position, named: bool = True) -> str:
        """How a position reads for people, as `stepper check` says it: ``instance #0 'name',
        round 3``, or ``its claim`` for round 0 (instance 0-based as in the JSON; rounds 1-based);
        without ``named``, the round part alone."""
        instance, number = pos
        name = self.instances[instance].name if 0 <= instance < len(self.instances) else "?"
        where = "its claim" if number == 0 else f"round {number}"
        return f"instance #{instance} {name!r}, {where}" if named else where

    def failure_words(self, pos: Position, named: bool = True) -> str:
        """A failure named as `stepper check` names it: place, then ``check NAME`` (several
        checks failed at one place are joined by ``, then``)."""
        checks = self.failure_checks.get(pos, [])
        return self.place(pos, named) + (", check " + ", then ".join(checks) if checks else "")

    def first_failure_of(self, instance: int) -> Position | None:
        """The instance's first failed place, in proof order."""
        at = bisect_left(self.failures, (instance, -1))
        return self.failures[at] if at < len(self.failures) and self.failures[at][0] == instance else None

    def notes_at(self, pos: Position) -> list[Note]:
        view = self.instances[pos[0]]
        return [n for n in view.notes if n.round == pos[1]]

    def metadata(self) -> Mapping[str, Any]:
        return self.header.metadata


# Values, squeezes and openings go to the replay too: the schedule absorbs them, and the
# link and evaluation checks read them.
_CHECKED = (FieldDecl, ScheduleDecl, BatchDecl, InstanceStart, RoundMsg, ChallengeMsg, FinalValue, *GLUE_KINDS)
