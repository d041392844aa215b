"""What each command costs before it does its work: fresh-process CPU against a bare interpreter,
one that only imports msgpack and one that only imports numpy, side by side.

Every row is a new process (``python3 -m stepper ...`` on the small shipped transcripts, so the
figure is almost all start-up: the interpreter, the imports, building the parser, and the few
milliseconds of the work itself), measured as the child's user + system CPU seconds from
``wait4``. The rows run in interleaved rounds, ``--repeat`` of them (default 9), and each row
reports its best and its median: the machine is shared, and the best of several is the figure
least disturbed by other work. Bytecode caching is on in the children, as in a normal install
(a sandbox that sets ``PYTHONDONTWRITEBYTECODE`` would make every start compile stepper again).

Each command is compared with ``python3 -c "import msgpack"`` (the floor of any process that reads
a transcript: what bench/check.py's bare decode pays before its first byte) and
``python3 -c "import numpy"`` (what a check that takes the vectorised whole-file pass pays before it
reads a byte). ``--against TREE`` runs the same commands from another checkout of stepper (its
``PYTHONPATH``), interleaved with this one, and prints this/other per row: an A/B of a change.

``--no-site`` starts every child with ``python3 -S`` and the parent's package folders on
``PYTHONPATH``: no ``.pth`` file runs, so what the interpreter holds is what the command imported. An
editable install's ``.pth`` finder imports ``pathlib`` (and other start-up hooks may import
``tempfile``, ``random``, ``typing`` ...) before stepper starts, which hides stepper's own imports of
them; ``-S`` measures what a plain install's start-up costs.

    python3 bench/startup.py                        # best of 9, about 20 s
    python3 bench/startup.py --against ../main      # this tree vs another checkout, interleaved
    python3 bench/startup.py --against ../main --no-site
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "transcripts"
PLAIN = SAMPLES / "samples" / "boarding-jsonl.sumtr"  # no glue: the Sequencer and replay alone
GLUED = SAMPLES / "ferries" / "ferries-honest.sumtr"  # openings, links and evaluation expressions
OTHER = SAMPLES / "ferries" / "bug-negate-claim.sumtr"


@dataclass(frozen=True)
class Command:
    label: str
    argv: tuple[str, ...]  # after the interpreter; "{out}" is replaced by a new output path per run
    codes: tuple[int, ...]  # the exit codes it may end with
    stepper: bool = True  # runs stepper (and so has an A/B side); False: a baseline


FLOORS = (
    Command("python3 -c pass", ("-c", "pass"), (0,), stepper=False),
    Command('python3 -c "import msgpack"', ("-c", "import msgpack"), (0,), stepper=False),
    Command('python3 -c "import numpy"', ("-c", "import numpy"), (0,), stepper=False),
)


def commands(events: Path) -> tuple[Command, ...]:
    """The stepper commands measured; ``events`` is a JSON-lines file made from :data:`PLAIN`."""
    return (
        Command("stepper --help", ("-m", "stepper", "--help"), (0,)),
        Command("stepper check (small, no glue)", ("-m", "stepper", "check", str(PLAIN)), (0,)),
        Command("stepper check (small, glue)", ("-m", "stepper", "check", str(GLUED)), (0,)),
        Command("stepper check --json (small, glue)", ("-m", "stepper", "check", "--json", str(GLUED)), (0,)),
        Command("stepper info", ("-m", "stepper", "info", str(GLUED)), (0,)),
        Command("stepper import", ("-m", "stepper", "import", str(events), "-o", "{out}"), (0,)),
        Command("stepper compare", ("-m", "stepper", "compare", str(GLUED), str(OTHER)), (1,)),
        Command("stepper writeup", ("-m", "stepper", "writeup", str(GLUED), "-o", "{out}.md"), (0,)),
    )


def child_env(tree: Path | None, no_site: bool = False) -> dict[str, str]:
    """A child's environment: the `stepper` entry's OPENBLAS setting, bytecode caching on, and
    ``PYTHONPATH`` naming ``tree`` (the checkout whose stepper runs); with ``no_site`` (children
    started with ``-S``) also this interpreter's package folders, where msgpack and numpy are."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    folders = [str(tree)] if tree is not None else []
    if no_site:
        folders += [entry for entry in sys.path if entry.endswith(("site-packages", "dist-packages"))]
    if folders:
        env["PYTHONPATH"] = os.pathsep.join(folders)
    return env


def cpu_of(argv: list[str], env: dict[str, str], cwd: Path) -> tuple[float, int]:
    """CPU seconds (user + system) and exit code of one fresh process, run in ``cwd`` (a folder
    with no stepper in it: `python -m` puts the working folder first on the module path, before
    ``PYTHONPATH``)."""
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env, cwd=cwd)
    _, status, usage = os.wait4(proc.pid, 0)
    return usage.ru_utime + usage.ru_stime, os.waitstatus_to_exitcode(status)


def measure(rows: list[tuple[str, Command, Path | None]], repeat: int, scratch: Path,
            no_site: bool = False) -> dict[str, list[float]]:
    """Each row's CPU seconds over ``repeat`` interleaved rounds, after one unmeasured warm-up round
    (which also writes the bytecode caches); with ``no_site`` every child runs ``python3 -S``."""
    times: dict[str, list[float]] = {key: [] for key, _, _ in rows}
    runs = 0
    for round_no in range(repeat + 1):
        for key, command, tree in rows:
            runs += 1
            argv = [sys.executable, *(["-S"] if no_site else []),
                    *(part.replace("{out}", str(scratch / f"out-{runs}")) for part in command.argv)]
            cpu, code = cpu_of(argv, child_env(tree, no_site), scratch)
            if code not in command.codes:
                raise SystemExit(f"startup: `{' '.join(argv[1:])}` ({key}) exited {code}, expected "
                                 f"{' or '.join(map(str, command.codes))}")
            if round_no:
                times[key].append(cpu)
    return times


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeat", type=int, default=9, help="interleaved rounds (default 9)")
    parser.add_argument("--against", type=Path, metavar="TREE",
                        help="another checkout of stepper: run its commands beside these and print this/other")
    parser.add_argument("--no-site", action="store_true",
                        help="start every child with python3 -S (no .pth file runs; the package folders on "
                             "PYTHONPATH): a plain install's start-up")
    args = parser.parse_args()
    if args.against is not None and not (args.against / "stepper" / "__init__.py").is_file():
        parser.error(f"expected --against to name a checkout of stepper, found no stepper/ in {args.against}")
    with tempfile.TemporaryDirectory(prefix="stepper-startup-") as folder:
        scratch = Path(folder)
        events = scratch / "events.jsonl"
        subprocess.run([sys.executable, "-m", "stepper", "export", str(PLAIN), "-o", str(events)],
                       env=child_env(ROOT), check=True, stdout=subprocess.DEVNULL, cwd=scratch)
        rows: list[tuple[str, Command, Path | None]] = [(c.label, c, None) for c in FLOORS]
        for command in commands(events):
            rows.append((command.label, command, ROOT))
            if args.against is not None:
                rows.append((f"other: {command.label}", command, args.against))
        times = measure(rows, args.repeat, scratch, args.no_site)
    best = {key: min(values) for key, values in times.items()}
    msgpack_floor, numpy_floor = best[FLOORS[1].label], best[FLOORS[2].label]
    print(f"fresh-process CPU seconds, best and median of {args.repeat} interleaved rounds"
          + ("; children run python3 -S" if args.no_site else "")
          + (f"; other = {args.against}" if args.against is not None else ""))
    head = f"{'command':38} {'best':>7} {'median':>7} {'/msgpack':>9} {'/numpy':>7}"
    if args.against is not None:
        head += f" {'other best':>10} {'median':>7} {'this/other':>10}"
    print(head)
    for command in (*FLOORS, *commands(events)):
        values = times[command.label]
        line = (f"{command.label:38} {best[command.label]:7.3f} {statistics.median(values):7.3f} "
                f"{best[command.label] / msgpack_floor:8.2f}x {best[command.label] / numpy_floor:6.2f}x")
        if args.against is not None and command.stepper:
            other = times[f"other: {command.label}"]
            line += f" {min(other):10.3f} {statistics.median(other):7.3f} {best[command.label] / min(other):9.2f}x"
        print(line)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
