"""Human output of `stepper check`: a compact per-instance table, the first failure
in a sentence, findings, the soundness summary and the plain warning.

Pure text in, lines out; colour (ANSI) only when the caller says the terminal takes it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable, Sequence

from stepper.field.display import elide

if TYPE_CHECKING:
    from stepper.transcript.model import Note
    from stepper.verify.verdict import InstanceSummary, Report

__all__ = ["render"]

_PAINT = {"green": "32", "red": "31", "yellow": "33", "bold": "1", "dim": "2"}
_VERDICT = {"accept": ("ACCEPTED", "green"), "reject": ("REJECTED", "red"), "incomplete": ("INCOMPLETE", "yellow")}
_COMPRESSED = ("evals-no-1", "coeffs-no-linear")


def _paint(text: str, colour: str, on: bool) -> str:
    return f"\x1b[{_PAINT[colour]}m{text}\x1b[0m" if on else text


def _result(s: InstanceSummary) -> str:
    if s.failure is not None:
        where = "the claim" if s.failure.round == 0 else f"round {s.failure.round}"
        return f"FAILED {s.failure.check} at {where}"
    if s.status == "incomplete" and s.rounds_passed == s.num_vars:
        return "rounds passed; evaluation waits for a value never sent"
    if s.status == "incomplete":
        return f"stops after {s.rounds_passed} of {s.num_vars} rounds"
    if s.evaluation is not None:
        return "passed; final_expr checked"
    if s.final is None:
        return "passed; no final value, last claim unchecked"
    return "passed; final value checked"


def _row(s: InstanceSummary, colour: bool) -> str:
    rounds = f"{s.rounds_passed}/{s.num_vars}"
    text = f"  {s.index:>4}  {s.name[:28]:<28} {s.num_vars:>4} {s.degree:>4}  {s.form:<16} {rounds:>7}  "
    result = _result(s)
    tint = "red" if s.status == "fail" else ("yellow" if s.status == "incomplete" else "green")
    return text + _paint(result, tint, colour)


def _clip(text: str, width: int) -> str:
    """A visibly shortened value (head…tail[length]), never a cut that reads as whole."""
    return elide(text, width)


def _glue_lines(s: InstanceSummary, fmt: Callable[[object], str | None], colour: bool) -> list[str]:
    """The instance's link, openings and evaluation, one line each, within 80 columns."""
    lines = []
    for g in (s.link, s.evaluation):
        if g is None:
            continue
        word = "ok  " if g.status == "pass" else _paint("FAIL", "red", colour)
        what = "claim" if g.check == "link" else "reduced claim"
        lines.append(f"        {g.check:<10} {word} {_clip(g.expr, 56)}")
        lines.append(f"          = {_clip(fmt(g.expected) or '', 26)}; {what} {_clip(fmt(g.found) or '', 26)}")
    for o in s.openings[:6]:
        table = "" if o.table == o.name else f" (table {_clip(o.table, 16)})"
        lines.append(f"        opening    {_clip(o.name, 20)}{table} = {_clip(fmt(o.value) or '', 30)}")
    if len(s.openings) > 6:
        lines.append(f"        ... {len(s.openings) - 6} more opening(s)")
    return lines


def counted(s: InstanceSummary) -> int:
    """Rounds of ``s`` that count (:data:`stepper.transcript.condition.ROUND_RULE`): with no
    failure, the rounds that passed, each with its challenge; after a failure, the rounds seen."""
    return s.rounds_seen if s.failure is not None else s.rounds_passed


def render(report: Report, path: str, notes: Sequence[Note], note_count: int, colour: bool,
           rows: int, detail: bool = False, file_line: str | None = None) -> list[str]:
    from stepper.transcript.condition import proof_condition

    field = f"field {report.field.describe()}" if report.field is not None else "no field declared"
    proof = proof_condition((s.index, s.name, counted(s), s.num_vars) for s in report.instances)
    unseen = report.instance_count - len(report.instances)  # --rows kept fewer (failures are always kept)
    if unseen > 0 and not proof.startswith("stops early"):
        short = report.counts.get("incomplete", 0) - sum(s.status == "incomplete" for s in report.instances)
        proof = (f"stops early: {short} of the {unseen} instance(s) not kept by --rows are incomplete "
                 "(--rows N shows them)" if short > 0 else "every instance has all its rounds")
    lines = [
        _paint(f"stepper check {path}", "bold", colour),
        f"  {field}; challenges {report.challenges}",
        f"  file: {file_line or report.completeness}; proof: {proof}",
        "",
        f"  {'#':>4}  {'instance':<28} {'vars':>4} {'deg':>4}  {'form':<16} {'rounds':>7}  result",
    ]
    shown = [s for s in report.instances if s.index < rows or s.status == "fail"]
    for summary in shown:
        lines.append(_row(summary, colour))
        if summary.has_glue:
            lines += _glue_lines(summary, report.fmt, colour)  # type: ignore[arg-type]
        if detail:
            lines += [f"          {r.explanation}" + (" [after an earlier failure]" if r.after_failure else "")
                      for r in summary.rounds]
            if summary.final is not None:
                lines.append(f"          final: {summary.final.explanation}")
    if any("…" in line for line in lines):
        lines.append("  (… marks a shortened value, [n] its full length; --json has every value whole)")
    hidden = report.instance_count - len(shown)
    if hidden > 0:
        counts = ", ".join(f"{n} {k}" for k, n in report.counts.items() if n)
        lines.append(f"  ... {hidden} more instance(s) not shown (all instances: {counts}; --rows N shows more)")
    if any(s.form in _COMPRESSED for s in shown):
        lines.append("  compressed forms: g(1) or c1 is recovered from the claim, so the local sum check holds "
                     "by construction; a wrong claim can only surface in a later round or the final check")
    word, tint = _VERDICT[report.verdict]
    high = sum(f.severity == "high" for f in report.findings)
    if high:
        word += f" (but {high} high-severity finding(s) below)"
    lines.append("")
    failure = report.first_failure
    if failure is not None:
        where = "its claim" if failure.round == 0 else f"round {failure.round}"
        lines.append(_paint(word, tint, colour) + f" at instance #{failure.instance} '{failure.instance_name}', "
                     f"{where}, check {failure.check}:")
        lines.append(f"  {failure.explanation}")
    elif report.verdict == "incomplete":
        lines.append(_paint(word, tint, colour) + ": the transcript stops early; every round present passed")
    elif report.instance_count == 0:
        lines.append(_paint(word, tint, colour) + ": the transcript holds no instance, so nothing was checked")
    else:
        lines.append(_paint(word, tint, colour) + ": every check of every instance passed")
    for finding in report.findings:
        lines.append(_paint(f"finding ({finding.severity}): ", "red" if finding.severity == "high" else "yellow",
                            colour) + finding.message)
    if notes:
        lines.append("")
        for note in notes:
            place = "proof" if note.instance is None else f"instance #{note.instance}"
            if note.round is not None:
                place += f", round {note.round}"
            lines.append(f"  note ({place}): {note.text}")
        if note_count > len(notes):
            lines.append(f"  ... {note_count - len(notes)} more note(s)")
    lines += ["", f"  {report.soundness.describe()}"]
    caution = report.soundness.caution()
    if caution:
        lines.append(_paint(f"  {caution}", "yellow", colour))
    lines.append(_paint(f"  {report.warning}", "dim", colour))
    return lines
