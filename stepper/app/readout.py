"""Readouts: the proof summary and the detail of one round as labelled lines.

Pure (no I/O, no Textual). Each function turns a :class:`ProofModel` (and,
when a witness was given, a root-cause diagnosis) into :class:`Line` records
that the screens style by ``tone`` and the text export prints as they are.
Values appear in full here (the round table shortens them); every verdict,
expected/found pair and explanation sentence is quoted from the replay.
"""

from __future__ import annotations

from typing import Any

from stepper.app import glue_readout
from stepper.app.lines import Line
from stepper.app.proof_model import Position, ProofModel, mark_of
from stepper.field.field import Field
from stepper.transcript.condition import file_condition, proof_condition, rounds_counted

__all__ = ["Line", "CAUTION", "SHORT_CAUTION", "summary_lines", "statement_lines", "round_lines", "diagnosis_lines"]

CAUTION = (
    "A passing replay is evidence about this one run, not a soundness proof: "
    "a wrong protocol or a weak challenge derivation can pass every check here."
)

# Always on screen, under the position bar.
SHORT_CAUTION = "A passing replay is evidence about this one run, not a soundness proof."


def summary_lines(model: ProofModel) -> list[Line]:
    """What the proof is and how the replay judged it, the verdict first."""
    field = model.field
    report = model.report()
    verdict = model.verdict()
    lines = [Line("verdict", verdict, {"accept": "good", "reject": "bad", "unusable": "bad"}.get(verdict, "wait"))]
    if model.digest_problem is not None:
        lines.append(Line("not judged", str(model.digest_problem), "bad"))
    first = _first_failure(report)
    if first is not None and model.digest_problem is None:
        lines.append(Line("first failure", first, "bad"))
    swept = model.swept if model.loading else None
    if model.loading:
        lines.append(Line("loading", loading_words(model), "wait"))
    if swept is not None:  # the whole-file pass only completes on a sealed file whose digest matches
        file_line = file_condition("transcript", "complete", "verified")
        proof = swept.proof
    else:
        file_line = "being read" if model.loading else file_condition(model.kind, model.completeness, model.digest)
        proof = proof_condition((i, v.name, _counted(v), v.start.num_vars) for i, v in enumerate(model.instances))
        proof = ("so far: " if model.loading else "") + proof
    lines.append(Line("file", file_line, "bad" if model.digest == "mismatch" else
                      ("good" if file_line == "sealed, digest ok" else "wait")))
    lines.append(Line("proof", proof, "good" if proof.startswith("every") else "wait"))
    if model.source:
        lines.append(Line("file name", model.source))
    if field is not None:
        base = field.base
        lines.append(Line("field", f"{base.describe()} (p = {base.p})"))
        lines.append(Line("challenge field", field.describe() if field.is_extension else "the same prime field"))
    else:
        lines.append(Line("field", "not declared yet", "wait"))
    if model.schedule is not None:
        label = f", label {model.schedule.label!r}" if model.schedule.label else ""
        lines.append(Line("schedule", f"Fiat-Shamir {model.schedule.name}{label}"))
    how = getattr(report, "challenges", None)
    if model.loading and model.schedule is not None:
        lines.append(Line("challenges", f"declared to come from {model.schedule.name}; not re-derived yet", "wait"))
    elif how:
        lines.append(Line("challenges", str(how), "plain" if how.startswith("re-derived") else "wait"))
    elif model.schedule is None:
        lines.append(Line("challenges", "taken as recorded (no Fiat-Shamir schedule declared)", "wait"))
    lines.append(Line("instances", f"{len(model.instances)} with {model.round_count} rounds"))
    soundness = _soundness(report)
    if soundness:
        lines.append(Line("soundness bound", soundness))
    for finding in getattr(report, "findings", ()):
        where = "" if finding.instance is None else f" (instance #{finding.instance}, round {finding.round})"
        lines.append(Line(f"finding {finding.severity}", f"{finding.kind}: {finding.message}{where}",
                          "bad" if finding.severity == "high" else "wait"))
    for key, value in model.metadata().items():
        lines.append(Line(f"meta {key}", _plain(value), "muted"))
    for note in model.proof_notes:
        lines.append(Line("note", note.text, "note"))
    for unknown in model.unknown:
        lines.append(Line("unknown event", f"{unknown.kind} (kept, not checked)", "muted"))
    lines.append(Line("", getattr(report, "warning", None) or CAUTION, "muted"))
    return lines


def loading_words(model: ProofModel) -> str:
    """The progress of the first read: whether every round is checked yet, and how far the
    round-by-round read for stepping has come."""
    total = model.rounds_total
    if total is None:
        return f"checking: {model.round_count} rounds read so far"
    share = 100 * model.round_count // max(1, total)
    return f"every round checked; reading rounds for stepping: {model.round_count} of {total} ({share}%)"


def statement_lines(model: ProofModel, index: int) -> list[Line]:
    """What one instance states and how it ends: its claimed sum and shape, how many
    rounds arrived, the final value and the final check (the instance's glue to the
    rest of the proof), its batch and any event stepper keeps without checking."""
    field = model.field
    if field is None or not 0 <= index < len(model.instances):
        return [Line("", "no instance yet", "wait")]
    view = model.instances[index]
    start = view.start
    fmt = field.fmt
    sent = _counted(view)
    waiting = len(view.rounds) - sent
    lines = [
        Line("instance", f"#{index} {start.name!r}", "head"),
        Line("claimed sum", fmt(start.claim)),
        Line("shape", f"{start.num_vars} variables, degree {start.degree}, {start.order}, form {start.form}"),
        Line("rounds", f"{sent} of {start.num_vars}" + ("" if sent == start.num_vars else ", stops early")
             + (f"; round {sent + 1} sent, no challenge yet" if waiting > 0 else ""),
             "plain" if sent == start.num_vars else "wait"),
    ]
    lines.extend(glue_readout.statement_glue(model, index))
    if start.batch is not None:
        lines.append(Line("batched", f"coefficient {fmt(start.batch.coefficient)} over {len(start.batch.terms)} "
                                     "terms"))
    if view.batch_result is not None:
        lines.extend(_verdict_lines("batch", view.batch_result, field))
    lines.append(Line("final value", "not sent yet" if view.final_value is None else fmt(view.final_value),
                      "wait" if view.final_value is None else "plain"))
    if view.final_result is not None:
        lines.extend(_verdict_lines("final", view.final_result, field))
    for unknown in view.unknown:
        lines.append(Line("kept event", f"{unknown.kind} (kept, not checked)", "muted"))
    return lines


def round_lines(model: ProofModel, pos: Position) -> list[Line]:
    """Everything about one round: values as sent, decoded evaluations, recovered value,
    challenge recorded vs re-derived, the replay's verdict and its explanation."""
    field = model.field
    if field is None or not model.instances:
        return [Line("", "no instance yet", "wait")]
    index, number = pos
    view = model.instances[index]
    start = view.start
    fmt = field.fmt
    lines = [
        Line("instance", f"#{index} {start.name!r}: {start.num_vars} variables, degree {start.degree}, "
                         f"{start.order}, form {start.form}", "head"),
    ]
    if number == 0:
        lines.extend(glue_readout.link_lines(model, index))
        if view.batch_result is not None and start.claim_expr is None:  # a failed batch has this row
            lines.append(Line("claimed sum", fmt(start.claim)))
            lines.extend(_verdict_lines("batch", view.batch_result, field))
        lines.extend(Line("note", note.text, "note") for note in model.notes_at(pos))
        return lines
    if number == 1 or not view.rounds:
        lines.extend(glue_readout.eq_lines(model, index))
        if index == 0 and model.first_round(0) == 1:
            lines.extend(glue_readout.head_lines(model))
        lines.append(Line("claimed sum", fmt(start.claim)))
        if start.batch is not None:
            batch = start.batch
            lines.append(Line("batched", f"coefficient {fmt(batch.coefficient)} over {len(batch.terms)} terms"))
        if view.batch_result is not None:
            lines.extend(_verdict_lines("batch", view.batch_result, field))
        for unknown in view.unknown:
            lines.append(Line("unknown event", f"{unknown.kind} (kept, not checked)", "muted"))
    if not view.rounds:
        if start.num_vars == 0:
            lines.append(Line("rounds", "none: no variables, the claim is the reduced claim"))
            if model.first_round(index) == 1:
                lines.extend(glue_readout.closing_lines(model, index))
        else:
            lines.append(Line("rounds", "none sent yet", "wait"))
        return lines
    msg = view.rounds[number - 1]
    result = view.results[number - 1]
    mark = mark_of(view.status(number))
    lines.append(Line("round", f"{number} of {start.num_vars}   {mark.symbol} {mark.word}", mark.tone))
    lines.extend(glue_readout.failed_here(model, index, number))
    if start.form != "evals" or result is None:
        # In the plain form the values sent are g(0), g(1), ... and are listed once below.
        for i, value in enumerate(msg.values):
            lines.append(Line(f"sent[{i}]", fmt(value), "muted"))
    if result is None:
        challenge = view.challenges[number - 1]
        lines.append(Line("challenge", fmt(challenge) if challenge is not None else "not sent yet", "wait"))
        return lines
    lines.append(Line("claim in", fmt(result.claim_in)))
    for i, value in enumerate(result.evals):
        lines.append(Line(f"g({i})", fmt(value)))
    if result.recovered is not None:
        lines.append(Line(f"recovered {result.recovered}", fmt(result.recovered_value), "note"))
    lines.append(Line("g(0)+g(1)", fmt(result.sum01)))
    lines.append(Line("degree", f"{result.degree_seen} seen, bound {result.degree_bound}"))
    if result.challenge is not None:
        lines.append(Line("challenge", fmt(result.challenge)))
    if result.rederived is not None:
        same = result.challenge is not None and result.rederived == result.challenge
        lines.append(Line("re-derived", fmt(result.rederived) + ("  (same)" if same else "  (differs)"),
                          "good" if same else "bad"))
    if result.claim_out is not None:
        lines.append(Line("g(r)", fmt(result.claim_out)))
    lines.extend(_verdict_lines("round", result, field))
    if getattr(result, "after_failure", False):
        lines.append(Line("carried", "checked against the claim carried past an earlier failure of this instance",
                          "wait"))
    if number == len(view.rounds):
        if view.final_value is not None:
            lines.append(Line("final value", fmt(view.final_value)))
        if view.final_result is not None:
            lines.extend(_verdict_lines("final", view.final_result, field))
        lines.extend(glue_readout.closing_lines(model, index))
    for bucket in view.buckets:
        if bucket.round == number:
            bound = f" of 2^{bucket.bound_log2}" if bucket.bound_log2 is not None else ""
            lines.append(Line(f"buckets chunk {bucket.chunk}", f"{bucket.count}{bound} buckets", "muted"))
    for note in model.notes_at(pos):
        lines.append(Line("note", note.text, "note"))
    return lines


def diagnosis_lines(diagnosis: Any, pos: Position | None = None) -> list[Line]:
    """Root cause and probe findings from a witness diagnosis (``stepper.diagnose.rootcause``)."""
    if diagnosis is None:
        return []
    lines: list[Line] = []
    cause = diagnosis.root_cause_json()
    if cause is None:
        lines.append(Line("root cause", "the witness agrees with every round sent", "good"))
    else:
        where = f"instance #{cause.get('instance')}, round {cause.get('round')}, check {cause.get('check')}"
        here = pos is not None and (cause.get("instance"), cause.get("round")) == pos
        lines.append(Line("root cause", where + ("  (this round)" if here else ""), "bad"))
    for sentence in diagnosis.explain():
        lines.append(Line("", sentence, "note"))
    for finding in diagnosis.findings_json():
        text = finding.get("message") or finding.get("text") or _plain(finding)
        lines.append(Line(f"probe {finding.get('probe', finding.get('kind', ''))}".strip(), str(text), "muted"))
    return lines


def _counted(view: Any) -> int:
    """Rounds of an instance that count: those whose challenge is recorded."""
    return rounds_counted(len(view.rounds), sum(1 for c in view.challenges if c is not None))


def _verdict_lines(what: str, result: Any, field: Field | None) -> list[Line]:
    mark = mark_of(result.status)
    show = str if result.check in ("degree", "shape") or field is None else field.fmt
    lines = [Line(f"{what} check", f"{mark.symbol} {mark.word}" + (f" ({result.check})" if result.check else ""),
                  mark.tone)]
    if result.status == "fail":
        if getattr(result, "expected", None) is not None:
            lines.append(Line("expected", show(result.expected), "bad"))
        if getattr(result, "found", None) is not None:
            lines.append(Line("found", show(result.found), "bad"))
    if getattr(result, "explanation", None):
        lines.append(Line("why", str(result.explanation), "bad" if result.status == "fail" else "muted"))
    return lines


def _first_failure(report: Any) -> str | None:
    first = getattr(report, "first_failure", None)
    if first is None:
        return None
    fmt = report.fmt
    round_ = "its claim" if first.round == 0 else f"round {first.round}"  # as `stepper check` says it
    return (f"instance #{first.instance} {first.instance_name!r}, {round_}, check {first.check}: "
            f"expected {fmt(first.expected)}, found {fmt(first.found)}")


def _soundness(report: Any) -> str:
    if report is None:
        return ""
    soundness = getattr(report, "soundness", None)
    return soundness.describe() if soundness is not None else ""


def _plain(value: Any) -> str:
    if isinstance(value, dict):
        return ", ".join(f"{k}={_plain(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_plain(v) for v in value) + "]"
    return str(value)
