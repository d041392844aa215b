"""The write-up a person hands to a teammate: markdown.

Pure: returns text; the screen writes it. The proof-level part is the shared
report (:func:`stepper.share.report.build` / :func:`stepper.share.report.to_markdown`, the
same document `stepper writeup` writes); below it comes the round under the
cursor, in full, so the reader sees exactly what the sender was looking at.
"""

from __future__ import annotations

from typing import Any

from stepper.app.proof_model import Position, ProofModel
from stepper.app.readout import Line, diagnosis_lines, round_lines, summary_lines

__all__ = ["markdown_report"]


def _table(lines: list[Line]) -> list[str]:
    out = ["| | |", "|---|---|"]
    for line in lines:
        value = line.value.replace("|", "\\|")
        out.append(f"| {line.label} | {value} |")
    return out


def _proof_section(model: ProofModel, diagnosis: Any) -> list[str]:
    report = model.report()
    if report is not None and model.field is not None:
        from stepper.share.report import build, to_markdown

        return [to_markdown(build(model.transcript(), report, diagnosis, model.source)).rstrip(), ""]
    return ["## Proof", "", *_table(summary_lines(model)), ""]


def markdown_report(model: ProofModel, position: Position, diagnosis: Any = None) -> str:
    """Markdown: title, proof summary, the round at ``position``, failures and notes."""
    parts = _proof_section(model, diagnosis)
    if model.instances:
        instance, number = position
        parts.extend([f"## Where I was looking: instance #{instance} ({model.instances[instance].name}), "
                      f"round {number}", ""])
        parts.extend(_table(round_lines(model, position)))
        parts.append("")
    diag = diagnosis_lines(diagnosis, position)
    if diag:
        parts.extend(["## Root cause at this round (with the witness)", "", *_table(diag), ""])
    parts.append("_A passing replay is evidence about one run, not a soundness proof of the protocol._")
    return "\n".join(parts) + "\n"
