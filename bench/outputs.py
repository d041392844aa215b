"""Snapshot every read-only command's output on the shipped transcripts, to compare two trees.

Runs ``check`` (text, ``--json``, with the witness when one lies beside the file),
``info``, ``export``, ``buckets --json``, the Markdown report and ``diff`` of each
file against the honest ferries proof, in process, and writes one file per
command and input into OUT. Two snapshots taken before and after a refactor must
be byte-identical (``diff -r OLD NEW``)::

    python3 bench/outputs.py /tmp/before
    ... move things ...
    python3 bench/outputs.py /tmp/after && diff -r /tmp/before /tmp/after
"""

from __future__ import annotations

import contextlib
import io
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _run(argv: list[str]) -> str:
    from stepper.cli.main import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as stop:
            code = stop.code
    return f"exit {code}\n--- stdout\n{out.getvalue()}--- stderr\n{err.getvalue()}"


def snapshot(dest: Path) -> int:
    """Write one output file per (command, input) into ``dest``; returns how many."""
    dest.mkdir(parents=True, exist_ok=False)
    files = sorted(p for p in (ROOT / "transcripts").rglob("*") if p.suffix in {".sumtr"})
    honest = ROOT / "transcripts" / "ferries" / "ferries-honest.sumtr"
    count = 0
    with tempfile.TemporaryDirectory() as scratch:
        for path in files:
            tag = f"{path.parent.name}__{path.stem}"
            commands: dict[str, list[str]] = {
                "check": ["check", str(path)],
                "check-json": ["check", str(path), "--json"],
                "info": ["info", str(path)],
                "export": ["export", str(path)],
                "buckets": ["buckets", str(path), "--json"],
                "diff": ["compare", str(honest), str(path)],
                "report": ["writeup", str(path), "-o", str(Path(scratch) / f"{tag}.md")],
            }
            witness = path.with_suffix(".witness.json")
            if witness.exists():
                commands["check-witness"] = ["check", str(path), "--json", "--witness", str(witness)]
            for label, argv in commands.items():
                text = _run(argv).replace(scratch, "<scratch>")
                if label == "report":
                    report = Path(scratch) / f"{tag}.md"
                    text += report.read_text() if report.exists() else "(no report)"
                (dest / f"{tag}.{label}.txt").write_text(text)
                count += 1
    return count


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: python3 bench/outputs.py OUT_DIR (a new folder)")
    print(f"{snapshot(Path(sys.argv[1]))} outputs written to {sys.argv[1]}")
