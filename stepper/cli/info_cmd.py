"""`stepper info FILE [--json]`: what a transcript holds, without replaying it.

Streams the file once (best effort, so a corrupt file is still described)
and prints the format, writer and metadata, the field, the Fiat-Shamir
schedule, each instance with its rounds present / expected and whether its
final value is there, whether the file is complete and its digest verified,
the notes, and what the file reveals. Exit 0 when the file could be read, 2
when it is corrupt (digest mismatch) or unreadable.
"""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from stepper.cli.info_summary import Summary

HELP = "describe a transcript: field, instances and rounds present, completeness, digest, metadata, notes"
DESCRIPTION = (
    "Describe FILE without replaying it: format and writer, metadata, field, schedule, every instance with "
    "its rounds present/expected, completeness, digest status, notes. Exit 2 if the digest does not match."
)

SHOWN = 20
REVEALS = ("public values only: claims, round polynomials, challenges, final values and annotations; "
           "a transcript never contains the witness (but free-form notes, metadata and unknown events hold "
           "whatever the prover put there)")
CAVEAT = "a passing `stepper check` on this file is evidence about this one run, not a soundness proof"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="transcript (or JSON-lines event file)")
    parser.add_argument("--json", action="store_true", help="print one JSON object")
    parser.add_argument("--rows", type=int, default=SHOWN, metavar="N",
                        help=f"instances listed (default {SHOWN}; the totals always cover all)")


def run(args: argparse.Namespace) -> int:
    from stepper.cli.info_summary import Summary, take
    from stepper.errors import UsageError
    from stepper.transcript.store import open_events

    if args.rows < 0:
        raise UsageError(f"expected --rows a non-negative integer, found {args.rows}")
    summary = Summary()
    with open_events(args.file, best_effort=True) as stream:
        for record in stream:
            take(summary, record)
    info = _as_json(args.file, stream, summary)
    if args.json:
        import json

        print(json.dumps(info, indent=2, default=str))
    else:
        print("\n".join(_as_text(info, summary, args.rows)))
    if stream.digest_problem is not None:  # the same line and exit code as check and view
        raise stream.digest_problem
    return 0


def _as_json(path: str, stream: Any, summary: Summary) -> dict[str, Any]:
    fld = summary.field
    out = _info(path, stream, summary, fld)
    if summary.glue:  # only where there is glue: other files keep their JSON byte for byte
        out["glue"] = dict(summary.glue)
    return out


def _info(path: str, stream: Any, summary: Summary, fld: Any) -> dict[str, Any]:
    from stepper.transcript.condition import file_condition, proof_condition, rounds_counted

    return {
        "file": path,
        "kind": stream.kind,
        "format_version": stream.header.format_version,
        "tool_version": stream.header.tool_version,
        "metadata": dict(stream.header.metadata),
        "completeness": stream.completeness,
        "digest": stream.digest,
        "truncated_at": stream.truncated_at,
        "appended_notes": stream.appended,
        "file_condition": file_condition(stream.kind, stream.completeness, stream.digest),
        "proof_condition": proof_condition((i, s.name, rounds_counted(s.rounds, s.challenges), s.num_vars)
                                           for i, s in enumerate(summary.instances)),
        "field": None if fld is None else {"name": fld.describe(), "p": str(fld.p), "degree": fld.degree,
                                           "element_bytes": fld.elem_bytes},
        "schedule": None if summary.schedule is None else {"name": summary.schedule.name,
                                                           "label": summary.schedule.label},
        "instances": [
            {"index": i, "name": s.name, "num_vars": s.num_vars, "degree": s.degree, "order": s.order,
             "form": s.form, "batched": s.batched, "rounds_present": s.rounds, "rounds_expected": s.num_vars,
             "rounds_counted": rounds_counted(s.rounds, s.challenges),
             "challenges": s.challenges, "final": s.final, "bucket_reports": s.buckets}
            for i, s in enumerate(summary.instances)
        ],
        "notes": [{"text": n.text, "instance": n.instance, "round": n.round} for n in summary.notes],
        "note_count": summary.note_count,
        "unknown_events": summary.unknown,
        "reveals": REVEALS,
        "caveat": CAVEAT,
    }


def _as_text(info: dict[str, Any], summary: Summary, rows: int) -> list[str]:
    from stepper.transcript.condition import ROUND_RULE

    lines: list[str] = []
    if info["kind"] == "transcript":
        lines.append(f"{info['file']}: stepper transcript, format {info['format_version']}, "
                     f"written by stepper {info['tool_version'] or '?'}")
    else:
        lines.append(f"{info['file']}: JSON-lines event file (not sealed: no digest)")
    for key, value in info["metadata"].items():
        text = " ".join(value) if key == "command" and isinstance(value, list) else str(value)
        lines.append(f"  {key}: {text[:200]}")
    fld = info["field"]
    lines.append("field: none (the file stops before its field event)" if fld is None else
                 f"field: {fld['name']} ({fld['element_bytes']} bytes per element)")
    if info["schedule"]:
        label = f" (label {info['schedule']['label']!r})" if info["schedule"]["label"] else ""
        lines.append(f"challenges: declared to come from the {info['schedule']['name']} schedule{label}; "
                     "not re-derived here (`stepper check` re-derives them and says whether they match)")
    lines.append(f"file: {_file_line(info)}")
    lines.append(f"proof: {info['proof_condition']} ({ROUND_RULE})")
    instances = info["instances"]
    full = sum(1 for s in instances if s["rounds_counted"] == s["rounds_expected"])
    lines.append(f"instances: {len(instances)} ({full} with all their rounds)")
    for s in instances[:rows]:
        extras = [f"order {s['order']}"] if s["order"] != "low-first" else []
        if s["form"] != "evals":
            extras.append(f"form {s['form']}")
        if s["batched"]:
            extras.append("batched claim")
        if s["bucket_reports"]:
            extras.append(f"{s['bucket_reports']} bucket reports")
        final = "final value" if s["final"] else "no final value"
        waiting = s["rounds_present"] - s["rounds_counted"]
        if waiting > 0:
            extras.append(f"round {s['rounds_counted'] + 1} sent, no challenge yet")
        lines.append(f"  #{s['index']:<3} {s['name']}: rounds {s['rounds_counted']} of {s['rounds_expected']}, "
                     f"degree {s['degree']}, {final}" + (f", {', '.join(extras)}" if extras else ""))
    if len(instances) > rows:
        lines.append(f"  ... and {len(instances) - rows} more (--rows N to list more)")
    if info.get("glue"):
        lines.append("glue between instances: " + ", ".join(f"{k} x{n}" for k, n in info["glue"].items()))
    if info["unknown_events"]:
        kinds = ", ".join(f"{k} x{n}" for k, n in info["unknown_events"].items())
        lines.append(f"unknown events kept: {kinds}")
    lines.append(f"notes: {info['note_count']}" + (f" ({info['appended_notes']} appended after recording)"
                                                   if info["appended_notes"] else ""))
    for note in summary.notes:
        place = "proof" if note.instance is None else f"instance #{note.instance}"
        if note.round is not None:
            place += f", round {note.round}"
        lines.append(f"  [{place}] {note.text[:200]}")
    lines.append(f"reveals: {REVEALS}")
    lines.append(f"note: {CAVEAT}")
    return lines


def _file_line(info: dict[str, Any]) -> str:
    from stepper.transcript.condition import file_condition

    return file_condition(info["kind"], info["completeness"], info["digest"], info["truncated_at"])
