"""`stepper record`, `import`, `export` and `info`: any-language recording, crash safety,
round trips, and one-line errors with exit code 2 for bad input."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from stepper.cli.main import main
from json_contracts import conforming, conforming_lines
from stepper.errors import TranscriptError
from stepper.transcript.store import load, open_events
from stepper.transcript.model import RoundMsg

GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source

# A prover in "another language": it only appends JSON lines to $STEPPER_EVENTS.
# Demo data (invented): Brackwater Ferries, sailing isle-of-quill-0740.
PROVER = r'''
import json, os, sys, time
rounds, mode = int(sys.argv[1]), sys.argv[2]
with open(os.environ["STEPPER_EVENTS"], "a") as out:
    def emit(event):
        out.write(json.dumps(event) + "\n")
        out.flush()
    emit({"type": "field", "name": "babybear"})
    emit({"type": "instance", "name": "boarding-permutation", "num_vars": 8, "degree": 1, "claim": 7})
    for k in range(rounds):
        emit({"type": "round", "evals": [3, 4]})
        emit({"type": "challenge", "value": k + 1})
    if mode == "hang":
        out.write('{"type": "round", "ev')  # a line cut short by the kill
        out.flush()
        Path = __import__("pathlib").Path
        Path(sys.argv[3]).write_text(str(os.getpid()))
        time.sleep(60)
    if mode == "garbage":
        out.write("gate 3: scanner jammed\n")
        out.flush()
    sys.exit(int(sys.argv[3]) if mode == "exit" else 0)
'''


def stepper(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    """The command in a process of its own, for what only the process boundary shows."""
    return subprocess.run([sys.executable, "-m", "stepper", *args], capture_output=True, text=True, cwd=cwd,
                          timeout=120)


def in_process(capsys, *args: str) -> tuple[int, str, str]:
    """The command through main() in this process (a process start costs about a second):
    exit code, standard output, standard error."""
    capsys.readouterr()
    code = main(list(args))
    got = capsys.readouterr()
    return code, got.out, got.err


def rounds_in(path: Path) -> int:
    """Rounds readable so far in a transcript that is still being written."""
    try:
        with open_events(path) as stream:
            return sum(isinstance(record, RoundMsg) for record in stream)
    except TranscriptError:  # not even the field event yet
        return 0


@pytest.fixture
def prover(tmp_path: Path) -> Path:
    path = tmp_path / "prover.py"
    path.write_text(PROVER)
    return path


def test_record_seals_a_transcript_when_the_prover_exits_zero(tmp_path, prover):
    out = tmp_path / "quill.sumtr"
    proc = stepper("record", "-o", str(out), "--label", "isle-of-quill-0740", "--",
                   sys.executable, str(prover), "8", "ok")
    assert proc.returncode == 0, proc.stderr
    assert "18 events, complete" in proc.stderr
    t = load(out)
    assert (t.completeness, t.digest) == ("complete", "verified")
    assert [r.challenge for r in t.instances[0].rounds] == list(range(1, 9))
    assert t.header.metadata["label"] == "isle-of-quill-0740"
    assert t.header.metadata["command"][-2:] == ["8", "ok"]


def test_record_returns_the_prover_status_and_keeps_an_incomplete_transcript(tmp_path, prover):
    out = tmp_path / "quill.sumtr"
    proc = stepper("record", "-o", str(out), "--", sys.executable, str(prover), "3", "exit", "5")
    assert proc.returncode == 5
    assert "exited with status 5" in proc.stderr
    t = load(out)
    assert (t.completeness, t.digest) == ("incomplete", "missing")
    assert len(t.instances[0].rounds) == 3


def test_record_counts_one_event_in_the_singular(tmp_path):
    out = tmp_path / "one.sumtr"
    one_event = 'import os; open(os.environ["STEPPER_EVENTS"], "a").write(\'{"type": "field", "name": "babybear"}\\n\')'
    proc = stepper("record", "-o", str(out), "--", sys.executable, "-c", one_event)
    assert proc.returncode == 0
    assert f"{out}: 1 event, complete;" in proc.stderr, proc.stderr


def test_record_of_a_program_that_writes_no_event_says_where_events_go(tmp_path):
    out = tmp_path / "silent.sumtr"
    proc = stepper("record", "-o", str(out), "--", sys.executable, "-c", "pass")
    assert proc.returncode == 0
    assert proc.stderr.count("\n") == 1
    assert "0 events" in proc.stderr and "wrote no event" in proc.stderr and "STEPPER_EVENTS" in proc.stderr


def test_prover_killed_with_sigkill_mid_proof_keeps_every_round_before_the_kill(tmp_path, prover):
    out = tmp_path / "killed.sumtr"
    pid_file = tmp_path / "pid"
    record = subprocess.Popen([sys.executable, "-m", "stepper", "record", "-o", str(out), "--",
                               sys.executable, str(prover), "5", "hang", str(pid_file)],
                              stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while not pid_file.exists() or not pid_file.read_text():
        assert time.monotonic() < deadline, "the prover never started"
        time.sleep(0.05)
    while rounds_in(out) < 5:
        assert time.monotonic() < deadline, "rounds did not reach the transcript while the prover ran"
        time.sleep(0.05)  # the transcript fills while the prover is still running
    os.kill(int(pid_file.read_text()), signal.SIGKILL)
    _, err = record.communicate(timeout=60)
    assert record.returncode == 128 + signal.SIGKILL
    assert "killed by SIGKILL" in err and "partial last line (line 13) was dropped" in err
    t = load(out)
    assert (t.completeness, t.digest) == ("incomplete", "missing")
    assert [r.challenge for r in t.instances[0].rounds] == [1, 2, 3, 4, 5]


def test_record_stops_on_a_line_that_is_not_json_naming_it(tmp_path, prover, capsys):
    out = tmp_path / "garbage.sumtr"
    code, _, err = in_process(capsys, "record", "-o", str(out), "--", sys.executable, str(prover), "2", "garbage")
    assert code == 2
    line = err.strip()
    assert "\n" not in line and "line 7" in line and "invalid JSON" in line and "keeps the 6 events" in line
    assert len(load(out).instances[0].rounds) == 2


def test_record_without_a_command_or_with_a_missing_program_is_exit_2(tmp_path, capsys):
    code, _, err = in_process(capsys, "record", "-o", str(tmp_path / "x.sumtr"))
    assert code == 2 and "expected a command to run" in err
    code, _, err = in_process(capsys, "record", "-o", str(tmp_path / "x.sumtr"), "--", "no-such-prover-binary")
    assert code == 2 and "cannot be started" in err
    assert err.count("\n") == 1
    assert not (tmp_path / "x.sumtr").exists()


def test_a_program_that_cannot_start_leaves_an_existing_transcript_alone(tmp_path, capsys):
    kept = tmp_path / "yesterday.sumtr"
    kept.write_bytes(b"yesterday's recorded rounds")
    assert main(["record", "-o", str(kept), "--force", "--", str(tmp_path / "no-such-prover")]) == 2
    assert "cannot be started" in capsys.readouterr().err
    assert kept.read_bytes() == b"yesterday's recorded rounds"


def test_an_existing_output_or_events_file_is_refused_without_force_and_the_prover_never_runs(tmp_path, capsys):
    marker = tmp_path / "ran"
    kept = tmp_path / "yesterday.sumtr"
    kept.write_bytes(b"yesterday's recorded rounds")
    prover = [sys.executable, "-c", f"import pathlib; pathlib.Path({str(marker)!r}).touch()"]
    assert main(["record", "-o", str(kept), "--", *prover]) == 2
    events = tmp_path / "mine.jsonl"
    events.write_text("my own notes\n")
    assert main(["record", "-o", str(tmp_path / "new.sumtr"), "--events", str(events), "--", *prover]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 2 and "yesterday.sumtr already exists" in err and "mine.jsonl already exists" in err
    assert "--force" in err and not marker.exists()
    assert kept.read_bytes() == b"yesterday's recorded rounds" and events.read_text() == "my own notes\n"


def test_an_output_that_is_a_folder_is_exit_2_and_the_prover_does_not_run_on(tmp_path, capsys):
    marker = tmp_path / "ran-to-the-end"
    code = main(["record", "-o", str(tmp_path), "--", sys.executable, "-c",
                 f"import time, pathlib; time.sleep(1); pathlib.Path({str(marker)!r}).touch()"])
    assert code == 2 and f"found {tmp_path} is a folder" in capsys.readouterr().err
    time.sleep(1.5)
    assert not marker.exists()


def write_events(path: Path, lines: list[dict[str, object]], tail: str = "") -> Path:
    path.write_text("".join(json.dumps(line) + "\n" for line in lines) + tail)
    return path


DECK_EVENTS = [
    {"type": "field", "name": "goldilocks"},
    {"type": "instance", "name": "deck-slots-zero", "num_vars": 2, "degree": 3, "claim": "0"},
    {"type": "round", "evals": [0, 0, str(GOLDILOCKS - 1), "0x05"]},
    {"type": "challenge", "value": 12345678901234567},
    {"type": "note", "text": "slot 7 re-measured", "round": 1},
    {"type": "round", "evals": [0, 0, 1, 2]},
    {"type": "challenge", "value": 2**63},
    {"type": "final", "value": 77},
    {"type": "deck-camera", "frame": 12},
]


def test_import_then_export_gives_back_the_same_events(tmp_path, capsys):
    events = write_events(tmp_path / "deck.jsonl", DECK_EVENTS)
    out = tmp_path / "deck.sumtr"
    assert main(["import", str(events), "-o", str(out), "--label", "deck check"]) == 0
    t = load(out)
    assert (t.completeness, t.digest) == ("complete", "verified")
    assert t.instances[0].rounds[0].values == (0, 0, GOLDILOCKS - 1, 5)
    capsys.readouterr()
    assert main(["export", str(out)]) == 0
    lines = conforming_lines(capsys.readouterr().out)
    assert lines[0]["type"] == "header" and lines[0]["metadata"]["label"] == "deck check"
    assert lines[3] == {"type": "round", "evals": [0, 0, str(GOLDILOCKS - 1), 5]}
    assert lines[-1] == {"type": "deck-camera", "frame": 12}
    again = tmp_path / "again.jsonl"
    again.write_text("".join(json.dumps(line) + "\n" for line in lines))
    second = tmp_path / "again.sumtr"
    assert main(["import", str(again), "-o", str(second)]) == 0
    assert load(second).instances == t.instances
    assert load(second).header.metadata["label"] == "deck check"


def test_import_drops_a_partial_last_line_and_leaves_the_transcript_unsealed(tmp_path, capsys):
    events = write_events(tmp_path / "cut.jsonl", DECK_EVENTS[:4], tail='{"type": "round", "ev')
    out = tmp_path / "cut.sumtr"
    assert main(["import", str(events), "-o", str(out)]) == 0
    assert "incomplete; the cut-off event at line 5 was dropped" in capsys.readouterr().err
    assert load(out).completeness == "incomplete"


def test_import_of_a_non_json_line_in_the_middle_is_exit_2_naming_the_line(tmp_path):
    events = tmp_path / "bad.jsonl"
    events.write_text(json.dumps(DECK_EVENTS[0]) + "\n" + json.dumps(DECK_EVENTS[1]) + "\n"
                      + "round 1: 0 0 1 2\n" + json.dumps(DECK_EVENTS[2]) + "\n")
    proc = stepper("import", str(events), "-o", str(tmp_path / "bad.sumtr"))
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr
    assert "line 3" in proc.stderr and "invalid JSON" in proc.stderr


@pytest.mark.parametrize(
    ("event", "expected"),
    [
        ({"type": "field", "name": "ristretto"}, "expected a field name among"),
        ({"type": "instance", "name": "x", "num_vars": 1, "degree": 1, "claim": str(GOLDILOCKS)},
         "canonical"),
        ({"type": "round", "evals": [1, 2]}, "expected an `instance` event before `round`"),
    ],
)
def test_bad_events_are_one_line_and_exit_2(tmp_path, event, expected, capsys):
    lines = [DECK_EVENTS[0], event] if event["type"] != "field" else [event]
    events = write_events(tmp_path / "e.jsonl", lines)
    code, _, err = in_process(capsys, "import", str(events), "-o", str(tmp_path / "e.sumtr"))
    assert code == 2 and expected in err and err.count("\n") == 1


def test_info_describes_instances_completeness_digest_and_notes(tmp_path, capsys):
    events = write_events(tmp_path / "deck.jsonl", DECK_EVENTS)
    out = tmp_path / "deck.sumtr"
    main(["import", str(events), "-o", str(out), "--label", "isle-of-quill-0740"])
    main(["note", str(out), "--instance", "0", "--round", "2", "camera 4 blurred"])
    capsys.readouterr()
    assert main(["info", str(out)]) == 0
    text = capsys.readouterr().out
    assert "field: goldilocks (8 bytes per element)" in text
    assert "deck-slots-zero: rounds 2 of 2, degree 3, final value" in text
    assert "file: sealed, digest ok" in text and "proof: every instance has all its rounds" in text
    assert "notes: 2 (1 appended after recording)" in text and "camera 4 blurred" in text
    assert "label: isle-of-quill-0740" in text
    assert "never contains the witness" in text and "not a soundness proof" in text
    assert main(["info", str(out), "--json"]) == 0
    info = conforming(capsys.readouterr().out, "info")
    assert info["instances"][0]["rounds_present"] == 2 and info["digest"] == "verified"
    assert info["unknown_events"] == {"deck-camera": 1}


def test_info_on_a_corrupt_file_describes_it_and_exits_2(tmp_path, capsys):
    events = write_events(tmp_path / "deck.jsonl", DECK_EVENTS)
    out = tmp_path / "deck.sumtr"
    main(["import", str(events), "-o", str(out)])
    data = bytearray(out.read_bytes())
    data[data.index(b"deck-slots-zero")] = ord("D")
    out.write_bytes(bytes(data))
    capsys.readouterr()
    assert main(["info", str(out)]) == 2
    captured = capsys.readouterr()
    assert "file: sealed, digest mismatch" in captured.out and "digest mismatch" in captured.err


def test_check_refuses_a_corrupt_transcript_with_exit_2_in_one_line(tmp_path, capsys):
    events = write_events(tmp_path / "deck.jsonl", DECK_EVENTS)
    out = tmp_path / "deck.sumtr"
    assert in_process(capsys, "import", str(events), "-o", str(out))[0] == 0
    data = bytearray(out.read_bytes())
    data[data.index(b"slot 7")] = ord("S")  # a note's text: still valid msgpack, digest now wrong
    out.write_bytes(bytes(data))
    code, _, err = in_process(capsys, "check", str(out))
    assert code == 2
    assert err.count("\n") == 1 and "corrupt" in err and "Traceback" not in err


@pytest.mark.parametrize("content", [b"\x89PNG\r\n\x1a\n\0\0", b"stepper:sumcheck\n\x07\x80", b"stepper:sum"])
def test_info_and_export_of_unusable_files_are_one_line_and_exit_2(tmp_path, content, capsys):
    path = tmp_path / "bad.sumtr"
    path.write_bytes(content)
    for command in ("info", "export"):
        code, _, err = in_process(capsys, command, str(path))
        assert code == 2, err
        assert err.count("\n") == 1 and str(path) in err and "Traceback" not in err


def test_info_of_an_unusable_file_through_python_dash_m_is_one_line_and_exit_2(tmp_path):
    # the process boundary for `info` (`export` crosses it in the test below)
    path = tmp_path / "bad.sumtr"
    path.write_bytes(b"stepper:sumcheck\n\x07\x80")
    proc = stepper("info", str(path))
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.count("\n") == 1 and str(path) in proc.stderr and "Traceback" not in proc.stderr


def test_export_of_an_incomplete_transcript_prints_the_events_present_and_warns(tmp_path, capsys):
    events = write_events(tmp_path / "deck.jsonl", DECK_EVENTS)
    out = tmp_path / "deck.sumtr"
    assert in_process(capsys, "import", str(events), "-o", str(out))[0] == 0
    out.write_bytes(out.read_bytes()[:-70])  # the end event and the last event are cut
    proc = stepper("export", str(out))
    assert proc.returncode == 0 and "incomplete" in proc.stderr
    lines = conforming_lines(proc.stdout)
    assert lines[-1] == {"type": "final", "value": 77}


def test_an_end_event_inside_an_event_stream_is_refused_so_the_transcript_stays_readable(tmp_path, capsys):
    # `end` is the transcript file's own sealing event (transcripts/FORMAT.md); copied
    # from a stream it used to be written mid-file and the result read as corrupt.
    events = write_events(tmp_path / "events.jsonl", [DECK_EVENTS[0], {"type": "end", "events": 1, "sha256": "00"},
                                                     DECK_EVENTS[1]])
    out = tmp_path / "out.sumtr"
    assert main(["import", str(events), "-o", str(out)]) == 2
    assert "found `end`" in capsys.readouterr().err
    with open_events(out) as stream:
        assert len(list(stream)) == 1
    assert stream.completeness == "incomplete"
    recorded = tmp_path / "recorded.sumtr"
    assert main(["record", "-o", str(recorded), "--", sys.executable, "-c",
                 f"import os; open(os.environ['STEPPER_EVENTS'], 'a').write(open({str(events)!r}).read())"]) == 2
    assert "line 2" in capsys.readouterr().err
    assert len(load(recorded).instances) == 0


def test_a_free_form_integer_msgpack_cannot_store_is_exit_2_and_keeps_the_events_before(tmp_path, capsys):
    # msgpack integers stop at 2^64 (msgpack specification, "int format family"); an unknown
    # event carrying a larger one used to end import and record with an internal error
    events = write_events(tmp_path / "events.jsonl", [DECK_EVENTS[0], {"type": "deck-camera", "frame": 2**70}])
    out = tmp_path / "out.sumtr"
    assert main(["import", str(events), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "internal error" not in err and "as a decimal string" in err and "keeps the 1 event before it" in err
    assert len(list(open_events(out))) == 1
    recorded = tmp_path / "recorded.sumtr"
    assert main(["record", "-o", str(recorded), "--", sys.executable, "-c",
                 f"import os; open(os.environ['STEPPER_EVENTS'], 'a').write(open({str(events)!r}).read())"]) == 2
    err = capsys.readouterr().err
    assert "line 2" in err and "keeps the 1 event before it" in err
    assert len(list(open_events(recorded))) == 1


GLUE_PROVER = r'''
import json, os
with open(os.environ["STEPPER_EVENTS"], "a") as out:
    for event in [
        {"type": "field", "name": "babybear"},
        {"type": "value", "name": "tau", "value": [3, 5]},
        {"type": "instance", "name": "fares.zero", "num_vars": 1, "degree": 1, "claim": 7, "final_expr": "a + b"},
        {"type": "round", "evals": [3, 4]},
        {"type": "challenge", "value": 5},
        {"type": "opening", "name": "a", "value": 6},
        {"type": "opening", "name": "b", "table": "fares", "value": 2},
        {"type": "squeeze", "name": "beta", "value": 9},
    ]:
        out.write(json.dumps(event) + "\n")
'''


def test_record_and_export_keep_the_glue_and_the_file_is_version_2(tmp_path, capsys):
    # g(5) = 3 + 5 * (4 - 3) = 8 = a + b: the evaluation passes (arithmetic by hand)
    prover_path = tmp_path / "glue_prover.py"
    prover_path.write_text(GLUE_PROVER)
    out = tmp_path / "glue.sumtr"
    proc = stepper("record", "-o", str(out), "--", sys.executable, str(prover_path))
    assert proc.returncode == 0, proc.stderr
    t = load(out)
    assert t.header.format_version == 2 and t.digest == "verified"
    assert [o.name for o in t.instances[0].openings] == ["a", "b"] and t.instances[0].openings[1].table == "fares"
    assert main(["export", str(out)]) == 0
    lines = conforming_lines(capsys.readouterr().out)
    kinds = [line["type"] for line in lines]
    assert kinds[1:] == ["field", "value", "instance", "round", "challenge", "opening", "opening", "squeeze"]
    assert lines[3]["final_expr"] == "a + b" and lines[7] == {"type": "opening", "name": "b", "value": 2,
                                                                "table": "fares"}
    assert main(["check", str(out)]) == 0
    capsys.readouterr()
    assert main(["info", str(out), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["glue"] == {"value": 1, "opening": 2, "squeeze": 1}


def test_the_recorded_program_gets_the_users_environment_not_steppers_own_settings(tmp_path):
    # `stepper` sets OPENBLAS_NUM_THREADS and STEPPER_LEAN_NUMBA for its own process; a prover it
    # runs must see the user's environment (its BLAS threads, numba as usual), plus STEPPER_EVENTS.
    seen = tmp_path / "seen.json"
    probe = ("import json, os, sys\n"
             "names = ('OPENBLAS_NUM_THREADS', 'STEPPER_LEAN_NUMBA', 'FERRY_DECK', 'STEPPER_EVENTS')\n"
             "open(sys.argv[1], 'w').write(json.dumps({n: os.environ.get(n) for n in names}))\n"
             "open(os.environ['STEPPER_EVENTS'], 'a').write(json.dumps({'type': 'field', 'name': 'babybear'}) + '\\n')\n")
    env = {k: v for k, v in os.environ.items() if k not in ("OPENBLAS_NUM_THREADS", "STEPPER_LEAN_NUMBA")}
    env["FERRY_DECK"] = "upper"
    proc = subprocess.run([sys.executable, "-m", "stepper", "record", "-o", str(tmp_path / "env.sumtr"), "--",
                           sys.executable, "-c", probe, str(seen)], capture_output=True, text=True, env=env,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    got = json.loads(seen.read_text())
    assert (got["OPENBLAS_NUM_THREADS"], got["STEPPER_LEAN_NUMBA"], got["FERRY_DECK"]) == (None, None, "upper")
    assert got["STEPPER_EVENTS"]
