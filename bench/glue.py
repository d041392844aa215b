"""What the glue costs `stepper check`: a proof with openings and expressions vs the same proof without.

Writes two transcripts of ``--instances`` (default 10^4) instances x ``--rounds`` (8)
rounds over Goldilocks, degree 3, challenges from the built-in schedule
stepper-sha256/1, with the same round sizes:

* plain: instances with random claims and consistent rounds, each ending in its
  final value, nothing between them;
* glue: the same, and before the first instance a point ``tau`` (a ``value`` of
  ``--rounds`` elements); every instance declares ``final_expr`` ``eq(tau) * (a*b - c)``
  and is followed by three openings and a squeezed coefficient, and every instance
  after the first declares ``claim_expr`` ``a + beta*b`` over the previous instance's
  openings (the claim is built that way). Every glue check passes.

Then, interleaved in ``--repeat`` rounds (best of each), CPU seconds (the first two in this process):

* check: ``stepper check FILE`` (text output to /dev/null) on each file: both take the
  whole-file sweep (said beside the figures; a file that it gives up on is replayed
  event by event), so this ratio is what a user sees (target <= 1.5x);
* replay: ``open_events`` + ``Replay.feed_all`` on each file: the same replay path
  for both, so this ratio is the cost of the glue checks themselves;
* fresh: ``python3 -m stepper check FILE`` in a fresh process per file, the child's CPU
  seconds from ``wait4`` (the helpers of bench/check.py): what a user's command costs,
  interpreter start-up and imports included (the same on both sides), with the same target.

    python3 bench/glue.py                          # about a minute
    python3 bench/glue.py --instances 2000 --repeat 1
"""

from __future__ import annotations

import argparse
import contextlib
import io
import random
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from stepper.field.field import NAMED_PRIMES, get_field  # noqa: E402
from stepper.field.lagrange import evaluate_round  # noqa: E402
from stepper.field.poly import eq_eval  # noqa: E402
from stepper.transcript.model import (  # noqa: E402
    ChallengeMsg, FieldDecl, FinalValue, InstanceStart, NamedValue, Opening, RoundMsg, ScheduleDecl, Squeeze,
)
from stepper.transcript.store import TranscriptWriter, open_events  # noqa: E402
from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule  # noqa: E402

from check import _child  # noqa: E402  (bench/ is the script's folder, first on sys.path; bench/check.py's helpers)

DEGREE = 3


def write_unique(path: Path, instances: int, rounds: int, glue: bool) -> None:
    """Random consistent rounds, challenges and squeezes by the schedule; with ``glue`` the openings
    a_i, b_i, c_i make final_expr hold and the next claim is a_i + beta_i * b_i (names are unique in a
    proof, so each instance's carry its index)."""
    field = get_field(NAMED_PRIMES["goldilocks"])
    p = field.p
    rng = random.Random(7)
    schedule = Sha256Schedule()
    with TranscriptWriter(path, metadata={"label": "brackwater-ferries/bench-glue"}) as out:
        def emit(record: object) -> None:
            schedule.observe(record)  # type: ignore[arg-type]
            out.write(record)  # type: ignore[arg-type]

        emit(FieldDecl(field))
        emit(ScheduleDecl(SCHEDULE_NAME, "bench"))
        tau = tuple(rng.randrange(p) for _ in range(rounds))
        if glue:
            emit(NamedValue("tau", tau, True, None))
        claim = rng.randrange(p)
        for i in range(instances):
            keys = {}
            if glue:
                keys["final_expr"] = f"eq(tau) * (a{i}*b{i} - c{i})"
                if i:
                    keys["claim_expr"] = f"a{i - 1} + beta{i - 1}*b{i - 1}"
            emit(InstanceStart(i, f"sailing.{i}", rounds, DEGREE, claim, **keys))  # type: ignore[arg-type]
            challenges = []
            for k in range(1, rounds + 1):
                g0 = rng.randrange(p)
                evals = (g0, (claim - g0) % p, *(rng.randrange(p) for _ in range(DEGREE - 1)))
                emit(RoundMsg(i, k, evals))
                r = schedule.challenge()
                out.write(ChallengeMsg(i, k, r))
                challenges.append(r)
                claim = evaluate_round(field, evals, r)
            out.write(FinalValue(i, claim))
            if not glue:
                claim = rng.randrange(p)
                continue
            a, b = rng.randrange(p), rng.randrange(p)
            c = (a * b - claim * pow(eq_eval(field, tau, challenges), -1, p)) % p  # type: ignore[arg-type]
            for name, value in ((f"a{i}", a), (f"b{i}", b), (f"c{i}", c)):
                emit(Opening(name, value, name, i))
            beta = schedule.squeeze(f"beta{i}")
            out.write(Squeeze(f"beta{i}", beta, False, i))
            claim = (a + beta * b) % p  # type: ignore[operator]


def cpu() -> float:
    """CPU seconds of this process (user and system), to the nanosecond the clock gives (os.times()
    counts 10 ms ticks, too coarse beside a check of 0.15 s)."""
    return time.process_time()


def time_check(path: Path) -> tuple[float, int]:
    from stepper.cli.main import main

    start = cpu()
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(["check", str(path)])
    return cpu() - start, code


def takes_sweep(path: Path) -> bool:
    """Whether ``stepper check`` takes the whole-file sweep on this file (else it replays event by event)."""
    from stepper.verify.replay import Replay
    from stepper.verify.sweep import SMALL_FILE_BYTES, sweep

    return sweep(path, Replay(keep_instances=20, emit_passing=False), min_bytes=SMALL_FILE_BYTES) is not None


def time_replay(path: Path) -> float:
    from stepper.verify.replay import Replay

    start = cpu()
    replay = Replay(keep_instances=20, emit_passing=False)
    with open_events(path) as stream:
        replay.feed_all(stream)
        completeness = stream.completeness
    report = replay.report(completeness)
    assert report.verdict == "accept", report.first_failure
    return cpu() - start


def time_fresh(path: Path) -> float:
    """CPU seconds (user + system) of ``python3 -m stepper check FILE`` in a fresh process."""
    _, seconds, _, code = _child([sys.executable, "-m", "stepper", "check", str(path)])
    assert code == 0, f"check {path.name} in a fresh process exited {code}"
    return seconds


def write_pair(folder: Path, instances: int, rounds: int) -> tuple[Path, Path]:
    """The plain and the glued transcript of the same rounds, written into ``folder``."""
    plain, glued = folder / "plain.sumtr", folder / "glue.sumtr"
    write_unique(plain, instances, rounds, glue=False)
    write_unique(glued, instances, rounds, glue=True)
    return plain, glued


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--instances", type=int, default=10_000)
    parser.add_argument("--rounds", type=int, default=8)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        plain, glued = write_pair(Path(tmp), args.instances, args.rounds)
        print(f"{args.instances} instances x {args.rounds} rounds, Goldilocks, degree {DEGREE}; "
              f"plain {plain.stat().st_size / 1e6:.1f} MB, glue {glued.stat().st_size / 1e6:.1f} MB "
              f"(3 openings, 1 squeeze, final_expr and claim_expr per instance)")
        for path in (plain, glued):  # warm-up, untimed: the first in-process check pays one-off imports
            time_check(path)
            time_replay(path)
        best: dict[str, float] = {}
        for _ in range(args.repeat):
            for label, path in (("plain", plain), ("glue", glued)):
                seconds, code = time_check(path)
                assert code == 0, f"check {label} exited {code}"
                best[f"check {label}"] = min(best.get(f"check {label}", seconds), seconds)
                seconds = time_replay(path)
                best[f"replay {label}"] = min(best.get(f"replay {label}", seconds), seconds)
                seconds = time_fresh(path)
                best[f"fresh {label}"] = min(best.get(f"fresh {label}", seconds), seconds)
        for key in ("check plain", "check glue", "replay plain", "replay glue", "fresh plain", "fresh glue"):
            print(f"  {key:<13} {best[key]:7.3f} s CPU (best of {args.repeat})")
        paths = {label: "the whole-file sweep" if takes_sweep(path) else "the event-by-event replay"
                 for label, path in (("plain", plain), ("glue", glued))}
        print(f"check  glue/plain: {best['check glue'] / best['check plain']:.2f}x  (target <= 1.5x; the plain file "
              f"takes {paths['plain']}, the glue file {paths['glue']})")
        print(f"replay glue/plain: {best['replay glue'] / best['replay plain']:.2f}x  (the same replay path: the "
              f"cost of the glue checks themselves)")
        print(f"fresh  glue/plain: {best['fresh glue'] / best['fresh plain']:.2f}x  (target <= 1.5x; "
              f"`python3 -m stepper check FILE` in fresh processes, the child's CPU, start-up included)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
