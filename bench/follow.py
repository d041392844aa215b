"""Follow mode: one poll after an append to a large transcript, full re-read vs incremental, side by side.

Writes a demo transcript (Brackwater Ferries, invented data; default 4000
instances x 25 rounds = 10^5 rounds) with the writer kept open, as a running
prover would. Two models are read from it: one followed by
``TranscriptSource(follow=True).refresh`` (reads only the appended bytes), one
by the full re-read that ``refresh`` did before (re-open the file, re-parse
every event from byte 0, feed only the unseen ones). Then, several times, the
prover appends one more instance and each model polls once; the CPU time of
each poll (and of the reading alone, without checking the new events) is
printed with the full/incremental ratio. Polls alternate in order, so machine
noise hits both alike.

    python bench/follow.py [--instances N] [--rounds K] [--polls P]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path
from typing import Any, Callable

from app import payloads  # bench/app.py: an honest demo proof whose sums all check

Poll = Callable[[], int]


def full_reread_poll(path: Path, model: Any, fed: list[int]) -> int:
    """The poll as ``TranscriptSource.refresh`` did it before following was incremental."""
    from stepper.transcript.store import open_events

    before, seen = fed[0], 0
    with open_events(path, best_effort=True) as events:
        for record in events:
            seen += 1
            if seen > fed[0]:
                model.feed(record)
                fed[0] = seen
        model.finish(events.completeness, events.digest, False)
    return fed[0] - before


def read_all(path: Path) -> int:
    """Reading alone, the old way: every event from byte 0."""
    from stepper.transcript.store import open_events

    with open_events(path, best_effort=True) as events:
        return sum(1 for _ in events)


def cpu(poll: Poll) -> tuple[float, int]:
    start = time.process_time()
    arrived = poll()
    return time.process_time() - start, arrived


def main(argv: list[str] | None = None) -> int:
    from stepper.app.source import TranscriptSource
    from stepper.transcript.store import TranscriptWriter
    from stepper.transcript.store.follow import FollowedStream

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--instances", type=int, default=4000)
    parser.add_argument("--rounds", type=int, default=25)
    parser.add_argument("--polls", type=int, default=5)
    args = parser.parse_args(argv)
    proof = list(payloads(args.instances + args.polls, args.rounds))
    per_instance = 2 * args.rounds + 2  # instance, rounds, challenges, final
    head = 1 + args.instances * per_instance
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "isle-of-quill-0740.sumtr"
        writer = TranscriptWriter(path, metadata={"sailing": "isle-of-quill-0740"})
        for payload in proof[:head]:
            writer.write_payload(payload)
        t = time.perf_counter()
        followed = TranscriptSource(path, follow=True)
        new_model = followed.open()
        old_source = TranscriptSource(path)
        old_model = old_source.open()
        fed = [old_model.events_seen]
        reader = FollowedStream(path, best_effort=True)
        for _ in reader:
            pass
        print(f"{path.stat().st_size / 1e6:.1f} MB, {args.instances * args.rounds} rounds, "
              f"{head} events; first reads {time.perf_counter() - t:.1f} s")
        rows: dict[str, list[float]] = {"poll full": [], "poll incremental": [], "read full": [],
                                        "read incremental": []}
        for k in range(args.polls):
            start = head + k * per_instance
            for payload in proof[start:start + per_instance]:
                writer.write_payload(payload)
            polls: list[tuple[str, Poll]] = [
                ("poll full", lambda: full_reread_poll(path, old_model, fed)),
                ("poll incremental", lambda: followed.refresh(new_model)),
                ("read full", lambda: read_all(path)),
                ("read incremental", lambda: sum(1 for _ in reader.more())),
            ]
            if k % 2:
                polls.reverse()
            for name, poll in polls:
                seconds, arrived = cpu(poll)
                if name != "read full" and arrived != per_instance:
                    raise SystemExit(f"{name}: expected {per_instance} new events, found {arrived}")
                rows[name].append(seconds)
        writer.finish()
        assert followed.refresh(new_model) == 0 and new_model.digest == "verified"
        assert new_model.verdict() == "accept" and new_model.round_count == old_model.round_count
        reader.close()
        followed.close()
    print(f"one poll after appending one instance ({per_instance} events), CPU ms, median of {args.polls}:")
    for kind in ("poll", "read"):
        full, step = statistics.median(rows[f"{kind} full"]), statistics.median(rows[f"{kind} incremental"])
        label = "read + check new" if kind == "poll" else "read only"
        print(f"  {label:18} full re-read {1000 * full:9.2f}   incremental {1000 * step:7.3f}   "
              f"ratio {full / max(step, 1e-9):9.0f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
