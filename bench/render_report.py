"""Render a stepper HTML report once in headless Chromium (the Debian `chromium` package).

Usage: python3 bench/render_report.py [TRANSCRIPT] [--out DIR]

Without TRANSCRIPT, writes a small Brackwater Ferries run (sailing
isle-of-quill-0740: a boarding-permutation instance whose round 2 is off by
one, with bucket statistics, and a deck-slots-zero instance) and reports on it.
Then asks Chromium, with the network switched off, to (1) serialise the DOM
after layout and (2) take a screenshot, and checks that the page parsed into
the expected sections and inline SVG charts. Prints the timings and where the
files are. Exits 0 with a "skipped" line when /usr/bin/chromium is absent: CI
does not depend on it.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--proxy-server=127.0.0.1:9", "--proxy-bypass-list=<-loopback>"]


def demo_transcript(path: Path) -> Path:
    """A two-instance run with challenges from the built-in schedule; round 2 of the first is off by one."""
    from stepper.transcript.events import Sequencer
    from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
    from stepper.transcript.store import TranscriptWriter

    p = 2**31 - 2**27 + 1  # BabyBear, common practice
    seq, schedule = Sequencer(), Sha256Schedule()
    with TranscriptWriter(path, metadata={"label": "isle-of-quill-0740 nightly"}) as writer:

        def emit(payload: dict) -> None:
            record = seq.feed(payload)
            schedule.observe(record)
            writer.write(record)

        emit({"type": "field", "name": "babybear"})
        emit({"type": "schedule", "name": SCHEDULE_NAME, "label": "brackwater-ferries"})
        mu = 5
        ledger = [(7 * i * i + 3 * i + 11) % p for i in range(1 << mu)]
        gate = [(5 * i + 2) % p for i in range(1 << mu)]
        slots = [(31 * i + 4) % p for i in range(1 << mu)]
        for name, tables in (("boarding-permutation", [ledger, gate]), ("deck-slots-zero", [slots, gate, ledger])):
            degree = len(tables)
            claim = sum(_prod(p, tables, i) for i in range(1 << mu)) % p
            emit({"type": "instance", "name": name, "num_vars": mu, "degree": degree, "claim": claim})
            for k in range(1, mu + 1):
                evals = [sum(_prod(p, [[(t[i] + x * (t[i + 1] - t[i])) % p for i in range(0, len(t), 2)]
                                       for t in tables], j) for j in range(len(tables[0]) // 2)) % p
                         for x in range(degree + 1)]
                if name == "boarding-permutation" and k == 2:
                    evals[2] = (evals[2] + 1) % p
                emit({"type": "round", "evals": evals})
                r = schedule.challenge()
                emit({"type": "challenge", "value": r})
                tables = [[(t[i] + r * (t[i + 1] - t[i])) % p for i in range(0, len(t), 2)] for t in tables]
                if name == "boarding-permutation":
                    sizes = [(3 * k + b) % 5 + 1 for b in range(1 << (mu - k))]
                    emit({"type": "buckets", "round": k, "chunk": 0, "count": len(sizes), "sizes": sizes,
                          "bound_log2": mu - k + 2, "remaining": 1 << (mu - k)})
            emit({"type": "final", "value": _prod(p, tables, 0)})
    return path


def _prod(p: int, tables: list[list[int]], i: int) -> int:
    out = 1
    for t in tables:
        out = out * t[i] % p
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("transcript", nargs="?", help="a transcript to report on (default: a generated demo)")
    parser.add_argument("--out", default=None, help="directory for the HTML, DOM dump and screenshot")
    args = parser.parse_args()
    if not Path(CHROMIUM).exists():
        print(f"skipped: {CHROMIUM} is absent (apt-get install chromium to run this check)")
        return 0
    from stepper.share.report import build
    from stepper.share.report_html import to_html
    from stepper.transcript.store import load
    from stepper.verify.replay import replay_transcript

    out = Path(args.out or tempfile.mkdtemp(prefix="stepper-render-"))
    out.mkdir(parents=True, exist_ok=True)
    source = Path(args.transcript) if args.transcript else demo_transcript(out / "isle-of-quill-0740.sumtr")
    transcript = load(source)
    report = replay_transcript(transcript)
    html_path = out / "report.html"
    html_path.write_text(to_html(build(transcript, report, source=str(source))), encoding="utf-8")
    url = html_path.resolve().as_uri()
    profile = tempfile.mkdtemp(prefix="stepper-chromium-")
    flags = [*FLAGS, f"--user-data-dir={profile}"]
    try:
        start = time.perf_counter()
        dom = subprocess.run([CHROMIUM, *flags, "--dump-dom", url], capture_output=True, text=True, timeout=120)
        dom_seconds = time.perf_counter() - start
        start = time.perf_counter()
        shot = out / "report.png"
        subprocess.run([CHROMIUM, *flags, f"--screenshot={shot}", "--window-size=1280,2400", url],
                       capture_output=True, text=True, timeout=120)
        shot_seconds = time.perf_counter() - start
    finally:
        shutil.rmtree(profile, ignore_errors=True)
    (out / "report.dom.html").write_text(dom.stdout, encoding="utf-8")
    problems = []
    if dom.returncode != 0 or "<body" not in dom.stdout:
        problems.append(f"chromium exited {dom.returncode} without a DOM")
    expected_svgs = sum(1 for inst in transcript.instances if inst.buckets)
    if dom.stdout.count("<svg") != expected_svgs:
        problems.append(f"expected {expected_svgs} inline SVG charts, found {dom.stdout.count('<svg')}")
    for section in ("summary", "first-failure", "privacy"):
        if f'id="{section}"' not in dom.stdout:
            problems.append(f"section {section} missing after layout")
    if report.first_failure is not None and report.first_failure.explanation.split(":")[0] not in dom.stdout:
        problems.append("the failing round's explanation is missing")
    if not shot.exists() or shot.stat().st_size == 0:
        problems.append("no screenshot written")
    print(f"html {html_path} ({html_path.stat().st_size} bytes); dom dump {dom_seconds:.2f} s; "
          f"screenshot {shot} in {shot_seconds:.2f} s")
    for problem in problems:
        print(f"problem: {problem}")
    print("ok: rendered by headless Chromium" if not problems else "FAILED")
    return 0 if not problems else 1


if __name__ == "__main__":
    sys.exit(main())
