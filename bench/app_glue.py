"""What showing the glue costs the app's model, next to the replay it wraps, side by side.

Writes the two transcripts of ``bench/glue.py`` (``--instances`` instances x ``--rounds``
rounds over Goldilocks, degree 3, built-in schedule; the glued one has a point ``tau``,
three openings, a squeeze, ``final_expr`` and ``claim_expr`` per instance), then, interleaved
in ``--repeat`` rounds (best of each), in this process, CPU seconds:

* replay: ``open_events`` + ``Replay(keep_rounds=True).feed`` of every record and the report
  (what the app's model hands its records to);
* app: ``TranscriptSource.open`` (the model fed every record, the replay inside it, whose
  squeeze results it keeps) and ``report()``, which takes the link and evaluation results,
  then the panels of one instance: its rows, the readout of its round 0 and last round, and
  50 strip lines.

Prints app/replay for each file (what the model adds, glue view included) and glue/plain
for each path.

    python3 bench/app_glue.py                      # about a minute
    python3 bench/app_glue.py --instances 500 --repeat 1
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from glue import cpu, write_pair  # noqa: E402

from stepper.transcript.store import open_events  # noqa: E402


def time_replay(path: Path) -> float:
    from stepper.verify.replay import Replay

    start = cpu()
    replay = Replay(keep_rounds=True)
    with open_events(path) as stream:
        for record in stream:
            replay.feed(record)
        completeness = stream.completeness
    assert replay.report(completeness).verdict == "accept"
    return cpu() - start


def time_app(path: Path) -> float:
    from stepper.app.readout import round_lines
    from stepper.app.source import TranscriptSource

    start = cpu()
    model = TranscriptSource(path).open()
    assert model.verdict() == "accept" and not model.failures
    middle = len(model.instances) // 2
    model.rows(middle)
    for number in (model.first_round(middle), model.rounds_in(middle)):
        round_lines(model, (middle, number))
    for index in range(min(50, len(model.instances))):
        model.strip_line(index)
    return cpu() - start


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--instances", type=int, default=2000)
    parser.add_argument("--rounds", type=int, default=8)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        plain, glued = write_pair(Path(tmp), args.instances, args.rounds)
        print(f"{args.instances} instances x {args.rounds} rounds, Goldilocks, degree 3; glue: 3 openings, "
              f"1 squeeze, final_expr and claim_expr per instance")
        best: dict[str, float] = {}
        for _ in range(args.repeat):
            for label, path in (("plain", plain), ("glue", glued)):
                for what, timer in (("replay", time_replay), ("app", time_app)):
                    seconds = timer(path)
                    key = f"{what} {label}"
                    best[key] = min(best.get(key, seconds), seconds)
        for key in ("replay plain", "app plain", "replay glue", "app glue"):
            print(f"  {key:<13} {best[key]:7.3f} s CPU (best of {args.repeat})")
        for label in ("plain", "glue"):
            print(f"app/replay {label:<5}: {best[f'app {label}'] / best[f'replay {label}']:.2f}x")
        for what in ("replay", "app"):
            print(f"{what:<6} glue/plain: {best[f'{what} glue'] / best[f'{what} plain']:.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
