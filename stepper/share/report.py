"""A shareable report of one transcript: its document model and its Markdown form.

Pure: :func:`build` turns a :class:`~stepper.transcript.model.Transcript`, its replay
:class:`~stepper.verify.verdict.Report` and, optionally, a witness diagnosis into a
:class:`ReportDoc` of ready-formatted text; :func:`to_markdown` renders it and
:mod:`stepper.share.report_html` renders the same document as one self-contained
HTML page. Invariants: the document holds only what the transcript and the
replay already hold (public values) plus, when a witness was given, the
diagnosis, and it says so in its privacy section; every report carries the
caution that a passing replay is evidence about one run, not a soundness
proof; long field elements are shortened in tables, never in the failure.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol, Sequence

from stepper.verify.verdict import PASSING_REPLAY_WARNING

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.transcript.model import BucketStats, InstanceRecord, Transcript
    from stepper.verify.verdict import InstanceSummary, Report

__all__ = [
    "Diagnosed",
    "RoundRow",
    "BucketRow",
    "InstanceSection",
    "ReportDoc",
    "build",
    "to_markdown",
    "bucket_rows",
    "reveals",
    "short",
    "glue_lines",
    "link_lines",
]

SHORT = 22  # characters of an element shown in a table cell


class Diagnosed(Protocol):
    """What the report needs from :func:`stepper.diagnose.rootcause.diagnose`'s result."""

    def root_cause_json(self) -> dict[str, Any] | None: ...
    def findings_json(self) -> list[dict[str, Any]]: ...
    def explain(self) -> list[str]: ...


@dataclass(frozen=True, slots=True)
class RoundRow:
    number: int
    status: str
    values: str
    sum01: str
    claim_in: str
    challenge: str
    explanation: str  # the replay's sentence (always kept for a failing round)


@dataclass(frozen=True, slots=True)
class BucketRow:
    """Bucket occupancy of one round, summed over its groups (chunks). ``bound`` is the
    like-for-like ceiling of that sum: the sum over the same groups of each group's
    largest possible count 2^bound_log2 (None unless every group declared one)."""

    round: int
    buckets: int
    largest: int | None
    entries: int | None
    bound: int | None
    groups: int = 1
    bound_log2: float | None = None  # log2 of the bound; the only form kept past 2^EXACT_BOUND_LOG2

    def bound_words(self) -> str:
        """What the drawn bound is, e.g. ``2^4 + 2^4 = 32 (sum of the 2 groups' bounds)``."""
        if self.bound is None and self.bound_log2 is None:
            return "no bound declared"
        bound = self.bound_text()
        return f"{bound} (sum of the {self.groups} groups' bounds)" if self.groups > 1 else \
            f"{bound} (the group's bound)"


    def bound_text(self) -> str:
        """The bound in decimal, ``~2^x`` once too long to read, ``-`` when none was declared."""
        if self.bound is not None:
            return count_text(self.bound)
        return "-" if self.bound_log2 is None else f"~2^{self.bound_log2:.1f}"

    def above_bound(self) -> bool:
        """True when the buckets in use exceed the bound (a bound kept only as its log2 is
        past 2^1024, more than any count a file can hold)."""
        return self.bound is not None and self.buckets > self.bound


# Past this a bucket bound is kept as its log2 only: the reader admits bound_log2 up to
# 2^40, and 2^(2^40) as a Python int would take 128 GiB (a fuzzed file did this).
EXACT_BOUND_LOG2 = 1024


def bound_sum(logs: Sequence[int]) -> tuple[int | None, float]:
    """The sum of 2^b over ``logs``: exact when every b <= EXACT_BOUND_LOG2, and its log2."""
    top = max(logs)
    if top <= EXACT_BOUND_LOG2:
        exact = sum(1 << b for b in logs)
        return exact, math.log2(exact)
    return None, top + math.log2(sum(2.0 ** (b - top) for b in logs if top - b < 1000))


def count_text(n: int) -> str:
    """A count in decimal, or as a power of two once it passes 18 digits (a bound of
    2^(2^k c) grows past what anyone reads, and past what Python will print)."""
    if n < 10**18:
        return str(n)
    return f"~2^{math.log2(n):.1f}"


@dataclass(frozen=True, slots=True)
class InstanceSection:
    index: int
    name: str
    statement: str
    status: str
    rows: tuple[RoundRow, ...]
    closing: tuple[str, ...]  # batch and final checks, one sentence each
    buckets: tuple[BucketRow, ...]
    notes: tuple[str, ...]
    glue: tuple[str, ...] = ()  # links, evaluations, then the openings, values and squeezes after the instance


@dataclass(frozen=True, slots=True)
class ReportDoc:
    title: str
    summary: tuple[tuple[str, str], ...]
    verdict: str
    caution: str
    failure: tuple[tuple[str, str], ...]  # empty when every check passed
    root_cause: tuple[str, ...]  # sentences; empty without a witness
    root_cause_fields: tuple[tuple[str, str], ...]
    findings: tuple[str, ...]  # replay findings and witness probe findings
    instances: tuple[InstanceSection, ...]
    notes: tuple[str, ...]  # proof-level notes
    privacy: tuple[str, ...]
    with_witness: bool
    glue: tuple[str, ...] = ()  # values and squeezes sent before the first instance


def short(text: str, limit: int = SHORT) -> str:
    """Middle-shortened text: ``1234567...7654321``."""
    if len(text) <= limit:
        return text
    half = (limit - 3) // 2
    return f"{text[:half]}...{text[-half:]}"


def build(transcript: Transcript, report: Report, diagnosis: Diagnosed | None = None, source: str = "") -> ReportDoc:
    """The report of one transcript, its replay and (optionally) a witness diagnosis."""
    field = transcript.field
    meta = dict(transcript.header.metadata)
    title = f"stepper write-up: {meta.get('label') or source or 'transcript'}"
    summary: list[tuple[str, str]] = [
        ("verdict", _VERDICT_TEXT.get(report.verdict, report.verdict)),
        ("file", source or "(not given)"),
        ("field", field.describe()),
        ("instances", str(len(transcript.instances))),
        ("recording", f"{transcript.completeness}; digest {transcript.digest}"),
        ("challenges", report.challenges),
        ("soundness bound", report.soundness.describe()),
    ]
    if transcript.schedule is not None:
        summary.append(("schedule", f"{transcript.schedule.name} label '{transcript.schedule.label}'"))
    summary.extend((f"metadata {k}", _plain(v)) for k, v in sorted(meta.items()))
    failure: list[tuple[str, str]] = []
    first = report.first_failure
    if first is not None:
        failure = [
            ("instance", f"#{first.instance} '{first.instance_name}'"),
            ("round", str(first.round)),
            ("check", first.check),
            ("expected", report.fmt(first.expected) or "-"),
            ("found", report.fmt(first.found) or "-"),
            ("explanation", first.explanation),
        ]
    findings = [f"[{f.severity}] {f.message}" + _at(f.instance, f.round, transcript) for f in report.findings]
    root: list[str] = []
    root_fields: list[tuple[str, str]] = []
    if diagnosis is not None:
        root = list(diagnosis.explain())
        cause = diagnosis.root_cause_json()
        if cause is None:
            root.insert(0, "The witness reproduces every round the prover sent: no root cause to report.")
        else:
            root_fields = [(str(k), _plain(v)) for k, v in cause.items() if k != "explanation" and v is not None]
        for probe in diagnosis.findings_json():
            name = probe.get("probe") or probe.get("kind") or "probe"
            findings.append(f"[probe {name}] {probe.get('message') or _plain(probe)}"
                            + _at(probe.get("instance"), probe.get("round"), transcript))
    summaries = {s.index: s for s in report.instances}
    sections = tuple(_section(field, inst, summaries.get(inst.start.index)) for inst in transcript.instances)
    notes = tuple(_note_text(n.text, None, n.round) for n in transcript.notes)
    return ReportDoc(
        title, tuple(summary), report.verdict, PASSING_REPLAY_WARNING, tuple(failure), tuple(root),
        tuple(root_fields), tuple(findings), sections, notes, reveals(transcript, diagnosis is not None),
        diagnosis is not None, glue_lines(field, transcript.glue),
    )


_VERDICT_TEXT = {
    "accept": "accepted: every check of every instance passed",
    "reject": "rejected: a verifier check failed",
    "incomplete": "incomplete: the transcript stops early; every round present passed",
}


def _plain(value: object) -> str:
    """Metadata or JSON values as one line of text."""
    if isinstance(value, dict):
        return ", ".join(f"{k} {_plain(v)}" for k, v in value.items() if v is not None)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_plain(v) for v in value) + "]"
    return str(value)


def _at(instance: int | None, round_: int | None, transcript: Transcript) -> str:
    if instance is None:
        return ""
    name = transcript.instances[instance].name if 0 <= instance < len(transcript.instances) else str(instance)
    return f" (instance '{name}'" + (f", round {round_})" if round_ is not None else ")")


def _note_text(text: str, instance: str | None, round_: int | None) -> str:
    where = "proof" if instance is None else f"instance '{instance}'"
    if round_ is not None:
        where += f", round {round_}"
    return f"{where}: {text}"


def _section(field: Field, inst: InstanceRecord, summary: InstanceSummary | None) -> InstanceSection:
    fmt = field.fmt
    s = inst.start
    statement = (f"num_vars {s.num_vars}, degree {s.degree}, {s.order}, form {s.form}, "
                 f"claim {short(fmt(s.claim), 40)}")
    results = {r.round: r for r in summary.rounds} if summary is not None else {}
    rows = []
    for rnd in inst.rounds:
        res = results.get(rnd.number)
        values = ", ".join(short(fmt(v)) for v in rnd.values)
        challenge = "-" if rnd.challenge is None else short(fmt(rnd.challenge))
        if res is None:
            rows.append(RoundRow(rnd.number, "not replayed", values, "-", "-", challenge, ""))
            continue
        rows.append(RoundRow(rnd.number, res.status, values, short(fmt(res.sum01)), short(fmt(res.claim_in)),
                             challenge, res.explanation))
    closing: list[str] = []
    if summary is not None and summary.batch is not None:
        closing.append(f"batch {summary.batch.status}: {summary.batch.explanation}")
    if summary is not None and summary.final is not None:
        closing.append(f"final {summary.final.status}: {summary.final.explanation}")
    elif inst.final is None:
        closing.append("no final value was sent, so the last reduced claim is not checked against an oracle")
    status = summary.status if summary is not None else "not replayed"
    notes = tuple(_note_text(n.text, inst.name, n.round) for n in inst.notes)
    glue = (*link_lines(field, inst, summary), *glue_lines(field, inst.glue))
    return InstanceSection(s.index, inst.name, statement, status, tuple(rows), tuple(closing),
                           bucket_rows(inst.buckets), notes, glue)


def glue_lines(field: Field, glue: Sequence[Any]) -> tuple[str, ...]:
    """One line per value, squeeze or opening, in stream order (lists shortened per element)."""
    lines = []
    for event in glue:
        kind = type(event).__name__
        if kind == "Opening":
            table = "" if event.table == event.name else f" (table {event.table})"
            lines.append(f"opening {event.name}{table} = {short(field.fmt(event.value), 40)}")
            continue
        items = [short(field.fmt(v)) for v in event.items()]
        shown = f"[{', '.join(items)}]" if event.listed else items[0]
        lines.append(f"{'squeeze' if kind == 'Squeeze' else 'value'} {event.name} = {shown}")
    return tuple(lines)


def link_lines(field: Field, inst: InstanceRecord, summary: InstanceSummary | None = None) -> tuple[str, ...]:
    """The instance's glue keys and the replay's results for them: its eq point, the
    ``link`` check (claim vs claim_expr) and the ``evaluation`` check (reduced claim vs
    final_expr), each with expected and found; the expression text alone when not replayed."""
    s = inst.start
    lines = []
    if s.eq_point is not None:
        point = s.eq_point if isinstance(s.eq_point, str) else "[" + ", ".join(
            short(field.fmt(v)) for v in s.eq_point) + "]"
        lines.append(f"eq_point {point}: rounds sent eq-factored")
    for key, what, result in (("claim_expr", "claim", getattr(summary, "link", None)),
                              ("final_expr", "reduced claim", getattr(summary, "evaluation", None))):
        expr = getattr(s, key)
        if expr is None:
            continue
        if result is None:
            lines.append(f"{key} {expr}")
            continue
        check = "link" if key == "claim_expr" else "evaluation"
        line = (f"{check} {result.status}: {key} {expr} = {short(field.fmt(result.expected), 40)}; "
                f"{what} {short(field.fmt(result.found), 40)}")
        lines.append(line + (f" ({result.explanation})" if result.status == "fail" and result.explanation else ""))
    return tuple(lines)


def bucket_rows(stats: Sequence[BucketStats]) -> tuple[BucketRow, ...]:
    """Per round: buckets in use, the largest bucket and entries (when sizes were sent), the bound."""
    by_round: dict[int, list[BucketStats]] = {}
    for b in stats:
        by_round.setdefault(b.round, []).append(b)
    rows = []
    for number in sorted(by_round):
        group = by_round[number]
        sizes = [s for b in group if b.sizes is not None for s in b.sizes]
        # compare like with like: the count summed over the groups against the bounds summed over them
        logs = [b.bound_log2 for b in group if b.bound_log2 is not None]
        bound, bound_log2 = bound_sum(logs) if len(logs) == len(group) else (None, None)
        rows.append(BucketRow(number, sum(b.count for b in group), max(sizes) if sizes else None,
                              sum(sizes) if sizes else None, bound, len(group), bound_log2))
    return tuple(rows)


def reveals(transcript: Transcript, with_witness: bool = False) -> tuple[str, ...]:
    """What a transcript (and a report made from it) makes public, in plain sentences."""
    lines = [
        "A transcript holds public values only: the field, each instance's statement (name, num_vars, degree, "
        "order, form) and claimed sum, the round polynomials, the challenges, the final values, the named "
        "values, squeezes and openings (a table's claimed value at one point), bucket counts and sizes, notes "
        "and the recording metadata. It never holds the witness tables.",
        "Everything in this report is derived from those public values and the verifier replay.",
    ]
    if transcript.header.metadata:
        keys = ", ".join(sorted(transcript.header.metadata))
        lines.append(f"The recording metadata ({keys}) is copied into the summary; check it before sharing.")
    if with_witness:
        lines.append(
            "This report was made with a witness: the root-cause section shows values computed from it (honest "
            "round evaluations at one round). Share it only where the witness may be seen."
        )
    return tuple(lines)


def to_markdown(doc: ReportDoc) -> str:
    """The report as GitHub-flavoured Markdown (tables, text bar charts)."""
    out = [f"# {_md(doc.title)}", "", f"> **Caution.** {_md(doc.caution)}", "", "## Summary", ""]
    out += ["| | |", "|---|---|"] + [f"| {_md(k)} | {_md(v)} |" for k, v in doc.summary]
    if doc.glue:
        out += ["", "## Values and squeezes before the first instance", ""] + [f"- {_md(g)}" for g in doc.glue]
    out += ["", "## First failure", ""]
    if doc.failure:
        out += [f"- **{_md(k)}**: {_md(v)}" for k, v in doc.failure]
    else:
        out.append("None: every check present passed." if doc.verdict != "reject" else "-")
    if doc.with_witness:
        out += ["", "## Root cause (with the witness)", ""]
        out += [f"- **{_md(k)}**: {_md(v)}" for k, v in doc.root_cause_fields]
        out += [f"- {_md(s)}" for s in doc.root_cause]
    out += ["", "## Findings", ""]
    out += [f"- {_md(f)}" for f in doc.findings] or ["None."]
    for sec in doc.instances:
        out += ["", f"## Instance {sec.index}: {_md(sec.name)} ({_md(sec.status)})", "", _md(sec.statement), ""]
        out += ["| round | status | values sent | g(0)+g(1) | claim in | challenge |",
                "|---:|---|---|---|---|---|"]
        for r in sec.rows:
            out.append(f"| {r.number} | {r.status} | {_md(r.values)} | {r.sum01} | {r.claim_in} | {r.challenge} |")
        for r in sec.rows:
            if r.status == "fail":
                out.append(f"\n**Round {r.number} fails:** {_md(r.explanation)}")
        out += [""] + [f"- {_md(c)}" for c in sec.closing]
        if sec.glue:
            out += ["", "### Glue", ""] + [f"- {_md(g)}" for g in sec.glue]
        if sec.buckets:
            out += ["", "### Bucket occupancy", "", "```"] + _text_chart(sec.buckets) + ["```"]
        if sec.notes:
            out += ["", "### Notes", ""] + [f"- {_md(n)}" for n in sec.notes]
    if doc.notes:
        out += ["", "## Notes on the proof", ""] + [f"- {_md(n)}" for n in doc.notes]
    out += ["", "## What this file reveals", ""] + [f"- {_md(p)}" for p in doc.privacy]
    return "\n".join(out) + "\n"


def _text_chart(rows: Sequence[BucketRow], width: int = 40) -> list[str]:
    top = max((r.buckets for r in rows), default=0) or 1
    lines = ["buckets in use and the bound are both summed over the round's groups",
             "round  groups  buckets  largest    bound"]
    for r in rows:
        bar = "#" * max(1 if r.buckets else 0, round(width * r.buckets / top))
        largest = "-" if r.largest is None else str(r.largest)
        over = "  above the bound" if r.above_bound() else ""
        lines.append(f"{r.round:>5}  {r.groups:>6}  {r.buckets:>7}  {largest:>7}  {r.bound_text():>7}  {bar}{over}")
    return lines


def _md(text: str) -> str:
    """Text safe inside Markdown tables and lists (pipes and markup escaped, one line)."""
    text = text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")
    for ch in "*`[]<>":
        text = text.replace(ch, "\\" + ch)
    return text
