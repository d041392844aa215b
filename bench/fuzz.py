"""Fuzz every stepper command that reads an input, in process, and fail on anything undocumented.

    python3 bench/fuzz.py --minutes 30           # a long run
    python3 bench/fuzz.py --inputs 500 --seed 7  # the short fixed-seed run the test suite makes
    python3 bench/fuzz.py --inputs 125 --seed 7 --skip 125  # inputs 126 to 250 of that run alone

Inputs (bench/fuzz_inputs.py): transcripts (bytes flipped, cut, slices repeated or removed, one event
changed with the digest recomputed), JSON-lines event streams, witness files (JSON and msgpack;
values, nesting, combine expressions), and the answers of a `--challenges` plug-in (raising,
hanging, wrong types, huge values). Each input goes to a few of the commands that read it: check
(with and without --json and --witness), info, export, compare, writeup, import, note, buckets, and the
app's loader (headless). A run fails on an exception escaping `stepper.cli.main.main`, an
"internal error" exit (70), a command running past the time limit, an exit code outside the
documented set (0, 1, 2, 3; 130 only when the plug-in itself raises KeyboardInterrupt) or a traceback
on stderr. The process runs under a memory cap (RLIMIT_AS), so an input that would exhaust memory
shows up as an internal error rather than taking the machine down.

Every failing input is saved in the corpus (default tests/fuzz/corpus/, one folder per input, named
by a hash of its bytes) and tests/fuzz/test_fuzz.py replays the whole corpus on every run.
Prints one JSON summary on stdout (inputs per command, failures by kind); exit 1 if anything failed.
SIGTERM stops the run after the current input and still prints the summary.
"""

from __future__ import annotations

import argparse
import contextlib
import hashlib
import io
import json
import os
import random
import shutil
import signal
import sys
import tempfile
import time
from pathlib import Path
from typing import Any, Callable

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

import fuzz_inputs as inputs  # noqa: E402

DOCUMENTED = {0, 1, 2, 3}
DEFAULT_CORPUS = ROOT / "tests" / "fuzz" / "corpus"


class Hang(BaseException):
    """Raised by the alarm when one command runs past the time limit (a BaseException, so
    stepper's own handlers cannot mistake it for a bug of theirs)."""


def _alarm(signum: int, frame: Any) -> None:
    raise Hang()


# ----- the commands an input goes to -------------------------------------------------------------
# role names in argv templates: {T} the input transcript/stream, {S} the seed transcript, {W} a witness,
# {P} the plug-in, {O} a fresh output path
TRANSCRIPT_TARGETS: dict[str, list[str]] = {
    "check": ["check", "{T}"],
    "check --json": ["check", "--json", "{T}"],
    "check --witness": ["check", "{T}", "--witness", "{W}"],
    "check --json --witness": ["check", "--json", "{T}", "--witness", "{W}"],
    "info": ["info", "{T}"],
    "info --json": ["info", "--json", "{T}"],
    "export": ["export", "{T}"],
    "export -o": ["export", "{T}", "-o", "{O}.jsonl"],
    "compare": ["compare", "{S}", "{T}"],
    "compare --json": ["compare", "--json", "{T}", "{S}"],
    "writeup": ["writeup", "{T}", "-o", "{O}.md"],
    "writeup --witness html": ["writeup", "{T}", "--witness", "{W}", "-o", "{O}.html"],
    "import": ["import", "{T}", "-o", "{O}.sumtr"],
    "note": ["note", "{T}", "--round", "1", "--instance", "0", "a note from the fuzz harness"],
    "buckets": ["buckets", "{T}"],
    "app loader": [],
}
WITNESS_TARGETS: dict[str, list[str]] = {
    "check --witness": ["check", "{S}", "--witness", "{W}"],
    "check --json --witness": ["check", "--json", "{S}", "--witness", "{W}"],
    "writeup --witness": ["writeup", "{S}", "--witness", "{W}", "-o", "{O}.md"],
}
PLUGIN_TARGETS: dict[str, list[str]] = {
    "check --challenges": ["check", "{S}", "--challenges", "{P}:derive"],
    "check --json --challenges": ["check", "--json", "{S}", "--challenges", "{P}:derive"],
}
ALL_TARGETS = {**TRANSCRIPT_TARGETS, **{f"{k} (witness input)": v for k, v in WITNESS_TARGETS.items()},
               **{f"{k} (plug-in answer)": v for k, v in PLUGIN_TARGETS.items()}}


def lay_out(folder: Path, files: dict[str, bytes], kind: str) -> dict[str, str]:
    """Write a case's files into ``folder``; role -> path for the argv templates."""
    names = {"T": "input.jsonl" if kind == "jsonl" else "input.sumtr", "S": "seed.sumtr", "W": "witness.json",
             "P": "plug.py", "A": "answer.json"}
    paths = {}
    for role, data in files.items():
        path = folder / names[role]
        path.write_bytes(data)
        paths[role] = str(path)
    paths["O"] = str(folder / "out")
    return paths


def run_target(target: str, paths: dict[str, str], timeout: float) -> tuple[str | None, int | None, str]:
    """Run one command on one laid-out case. Returns (problem or None, exit code, stderr)."""
    from stepper.cli.main import main

    template = ALL_TARGETS[target]
    argv = [part.format(**paths) for part in template]
    out, err = io.StringIO(), io.StringIO()
    code: int | None = None
    signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, timeout)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            if target == "app loader":
                code = _app_loader(paths["T"])
            else:
                code = main(argv)
    except Hang:
        return f"hang: still running after {timeout:g} s", None, err.getvalue()
    except BaseException as escaped:  # noqa: BLE001 - this is what the harness looks for
        return f"escaped exception {type(escaped).__name__}: {str(escaped)[:200]}", None, err.getvalue()
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
    stderr = err.getvalue()
    allowed = DOCUMENTED | ({130} if "(plug-in answer)" in target and _interrupting(paths) else set())
    if code == 70 or "internal error" in stderr:
        return f"internal error (exit {code}): {stderr.strip()[-300:]}", code, stderr
    if code not in allowed:
        return f"undocumented exit code {code}: {stderr.strip()[-300:]}", code, stderr
    if "Traceback (most recent call last)" in stderr:
        return "a traceback on stderr", code, stderr
    if code == 2 and not stderr.strip():
        return "exit 2 without a line on stderr", code, stderr
    return None, code, stderr


def _interrupting(paths: dict[str, str]) -> bool:
    try:
        return json.loads(Path(paths["A"]).read_text())["kind"] == "interrupt"
    except (KeyError, OSError, ValueError, RecursionError):
        return False


def _app_loader(path: str) -> int:
    """What `stepper view` does before drawing: read the file into the app's model, headless."""
    from stepper.app.source import TranscriptSource
    from stepper.errors import StepperError

    try:
        model = TranscriptSource(path).open(strict=False)
        model.report()
    except StepperError as err:
        print(f"stepper view: {err}", file=sys.stderr)
        return err.exit_code
    return 0


# ----- making cases -------------------------------------------------------------------------------
def make_case(rng: random.Random, seeds: list[inputs.Seed]) -> tuple[inputs.Case, list[str]]:
    seed = rng.choice(seeds)
    base = {"S": seed.transcript, "W": seed.witness}
    roll = rng.random()
    if roll < 0.3:
        data, how = inputs.mutate_events(rng, seed)
        case = inputs.Case("transcript", {**base, "T": data}, f"{seed.name}: {how}")
    elif roll < 0.5:
        data, how = inputs.mutate_bytes(rng, seed.transcript)
        case = inputs.Case("transcript", {**base, "T": data}, f"{seed.name}: {how}")
    elif roll < 0.7:
        data, how = inputs.mutate_jsonl(rng, seed)
        case = inputs.Case("jsonl", {**base, "T": data}, f"{seed.name} as JSON lines: {how}")
    elif roll < 0.9:
        data, how = inputs.mutate_witness(rng, seed)
        case = inputs.Case("witness", {**base, "W": data}, f"{seed.name}: {how}")
        return case, [f"{t} (witness input)" for t in rng.sample(sorted(WITNESS_TARGETS), 2)]
    else:
        data, how = inputs.plugin_answer(rng, seed.p)
        case = inputs.Case("plugin", {**base, "P": inputs.PLUGIN.encode(), "A": data}, f"{seed.name}: {how}")
        return case, [f"{rng.choice(sorted(PLUGIN_TARGETS))} (plug-in answer)"]
    return case, rng.sample(sorted(TRANSCRIPT_TARGETS), 3)


def save_failure(corpus: Path, case: inputs.Case, target: str, problem: str) -> Path:
    digest = hashlib.sha256(json.dumps([target, sorted((k, v.hex()) for k, v in case.files.items())]).encode())
    folder = corpus / digest.hexdigest()[:16]
    if folder.exists():
        return folder
    scratch = Path(tempfile.mkdtemp(prefix=".new-", dir=corpus))
    lay_out(scratch, case.files, case.kind)
    (scratch / "case.json").write_text(json.dumps(
        {"target": target, "kind": case.kind, "how": case.how, "found": problem}, indent=1) + "\n")
    os.replace(scratch, folder)
    return folder


def replay_saved(folder: Path, timeout: float = 20.0, plugin_seconds: float = 1.0) -> str | None:
    """Run a corpus case again (in a scratch copy, so outputs never land in the corpus)."""
    case = json.loads((folder / "case.json").read_text())
    roles = {"input.sumtr": "T", "input.jsonl": "T", "seed.sumtr": "S", "witness.json": "W", "plug.py": "P",
             "answer.json": "A"}
    files = {roles[p.name]: p.read_bytes() for p in folder.iterdir() if p.name in roles}
    with tempfile.TemporaryDirectory(prefix="stepper-fuzz-replay-") as scratch:
        paths = lay_out(Path(scratch), files, case["kind"])
        with _plugin_limit(plugin_seconds):
            problem, _, _ = run_target(case["target"], paths, timeout)
    return problem


@contextlib.contextmanager
def _plugin_limit(seconds: float = 1.0) -> Any:
    """A short time limit for the plug-in (the harness's own limit must be longer to tell the two apart)."""
    before = os.environ.get("STEPPER_CHALLENGES_SECONDS")
    os.environ["STEPPER_CHALLENGES_SECONDS"] = repr(seconds)
    try:
        yield
    finally:
        if before is None:
            os.environ.pop("STEPPER_CHALLENGES_SECONDS", None)
        else:
            os.environ["STEPPER_CHALLENGES_SECONDS"] = before


# ----- the run ----------------------------------------------------------------------------------------
def fuzz(seconds: float, seed: int, corpus: Path | None, timeout: float,
         progress: Callable[[dict[str, Any]], None] | None = None, max_inputs: int | None = None,
         skip: int = 0, plugin_seconds: float = 1.0) -> dict[str, Any]:
    """Inputs for ``seconds`` of wall time or, given ``max_inputs``, exactly that many inputs (the same
    ones for the same seed, however busy the machine is). ``skip`` first makes and drops that many
    inputs, so a run of N inputs can be split into parts that together run exactly the same ones."""
    rng = random.Random(seed)
    seeds = inputs.build_seeds()
    stop = {"now": False}
    previous = signal.signal(signal.SIGTERM, lambda *_: stop.update(now=True))
    counts: dict[str, int] = {t: 0 for t in ALL_TARGETS}
    kinds: dict[str, int] = {}
    codes: dict[str, int] = {}
    failures: list[dict[str, str]] = []
    started = time.monotonic()
    last_progress = started
    cases = skipped = dropped = 0
    last_skip = ""
    if corpus is not None:
        corpus.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="stepper-fuzz-") as scratch, _plugin_limit(plugin_seconds):
        while not stop["now"] and (cases < max_inputs if max_inputs is not None
                                   else time.monotonic() - started < seconds):
            try:
                case, targets = make_case(rng, seeds)
            except (RecursionError, ValueError, TypeError, OverflowError) as err:  # the mutator's own limits
                skipped += 1
                last_skip = f"{type(err).__name__}: {str(err)[:100]}"
                continue
            if dropped < skip:  # an earlier part's input: made (the generator moves on), not run
                dropped += 1
                continue
            cases += 1
            kinds[case.kind] = kinds.get(case.kind, 0) + 1
            for target in targets:
                folder = Path(scratch) / f"c{cases}"
                folder.mkdir()
                paths = lay_out(folder, case.files, case.kind)
                problem, code, _ = run_target(target, paths, timeout)
                shutil.rmtree(folder, ignore_errors=True)
                counts[target] += 1
                codes[str(code)] = codes.get(str(code), 0) + 1
                if problem is not None:
                    saved = save_failure(corpus, case, target, problem) if corpus is not None else None
                    failures.append({"target": target, "input": case.how, "problem": problem,
                                     "saved": str(saved) if saved else ""})
                    print(f"FAIL {target}: {case.how}: {problem}", file=sys.stderr)
            if progress is not None and time.monotonic() - last_progress > 30:
                last_progress = time.monotonic()
                progress(_summary(cases, counts, kinds, codes, failures, started, seed))
    signal.signal(signal.SIGTERM, previous)
    summary = _summary(cases, counts, kinds, codes, failures, started, seed)
    summary["first_input"] = skip + 1  # of the seed's sequence (--skip)
    summary["mutations_skipped"] = skipped  # the mutator could not build the input (kept visible, not hidden)
    if last_skip:
        summary["last_skip"] = last_skip
    return summary


def _summary(cases: int, counts: dict[str, int], kinds: dict[str, int], codes: dict[str, int],
             failures: list[dict[str, str]], started: float, seed: int) -> dict[str, Any]:
    by_kind = {k: sum(1 for f in failures if f["problem"].startswith(k))
               for k in ("escaped", "internal error", "hang", "undocumented", "a traceback", "exit 2 without")}
    return {"seed": seed, "seconds": round(time.monotonic() - started, 1), "inputs": cases,
            "runs": sum(counts.values()), "inputs_by_kind": kinds, "runs_per_command": counts,
            "exit_codes": codes, "failures": len(failures), "failures_by_kind": by_kind,
            "failed": failures[:50]}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    budget = parser.add_mutually_exclusive_group()
    budget.add_argument("--minutes", type=float, help="how long to run")
    budget.add_argument("--seconds", type=float, help="how long to run (default 60)")
    budget.add_argument("--inputs", type=int, help="run exactly this many inputs, however long they take")
    parser.add_argument("--seed", type=int, default=1, help="random seed (same seed, same inputs)")
    parser.add_argument("--skip", type=int, default=0,
                        help="make and drop the first N inputs (a later part of the same seed's run)")
    parser.add_argument("--plugin-seconds", type=float, default=1.0,
                        help="time limit of one plug-in call (must stay well under --timeout)")
    parser.add_argument("--corpus", default=str(DEFAULT_CORPUS), help="where failing inputs are saved")
    parser.add_argument("--no-save", action="store_true", help="do not save failing inputs")
    parser.add_argument("--timeout", type=float, default=10.0, help="seconds one command may take")
    parser.add_argument("--memory-mb", type=int, default=3072, help="address-space cap of this process (0: none)")
    parser.add_argument("--summary", help="also write the summary here (rewritten every 30 s while running)")
    args = parser.parse_args()
    seconds = args.minutes * 60 if args.minutes is not None else (args.seconds if args.seconds is not None else 60)
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    os.environ["STEPPER_KERNELS"] = "numpy"  # no compiled kernels: inputs are small, and the cap stays honest
    if args.memory_mb:
        import resource

        cap = args.memory_mb << 20
        resource.setrlimit(resource.RLIMIT_AS, (cap, cap))

    def write_summary(summary: dict[str, Any]) -> None:
        if args.summary:
            temp = f"{args.summary}.partial"
            Path(temp).write_text(json.dumps(summary, indent=1) + "\n")
            os.replace(temp, args.summary)

    if args.inputs is not None and args.inputs < 1:
        parser.error(f"--inputs: expected at least 1 input, found {args.inputs}")
    if args.skip < 0:
        parser.error(f"--skip: expected 0 or more inputs, found {args.skip}")
    if not 0 < args.plugin_seconds < args.timeout:
        parser.error(f"--plugin-seconds: expected more than 0 and less than --timeout ({args.timeout}), "
                     f"found {args.plugin_seconds}")
    summary = fuzz(seconds, args.seed, None if args.no_save else Path(args.corpus), args.timeout, write_summary,
                   args.inputs, args.skip, args.plugin_seconds)
    write_summary(summary)
    print(json.dumps(summary, indent=1))
    return 1 if summary["failures"] else 0


if __name__ == "__main__":
    sys.exit(main())
