"""stepper check without a witness asks the glue probes about a failed glue check (the file is read once
more only then). Which probe must answer follows from the fault each reference prover makes."""

from __future__ import annotations

import json
import re

import pytest

from stepper.cli.main import main


def _check(tmp_path, capsys, *flags, json_out=True):
    out = tmp_path / f"p{len(list(tmp_path.iterdir()))}.sumtr"
    assert main(["prove", "-o", str(out), "--num-vars", "4", *flags]) == 0
    capsys.readouterr()
    code = main(["check", str(out), *(["--json"] if json_out else [])])
    return code, capsys.readouterr().out


@pytest.mark.parametrize("flags, probe", [
    (["--kind", "gkr-product", "--fault", "stale-coefficient", "--fault-instance", "1"], "stale-coefficient"),
    (["--kind", "zerocheck-eq", "--fault", "double-eq@3"], "eq-factor"),
    (["--kind", "zerocheck", "--fault", "final-without-eq"], "final-without-eq"),
])
def test_a_failed_glue_check_is_explained_without_the_witness(flags, probe, tmp_path, capsys):
    code, out = _check(tmp_path, capsys, *flags)
    assert code == 1
    assert [f["probe"] for f in json.loads(out)["glue_findings"]] == [probe]


def test_the_text_names_the_probe_and_says_it_is_evidence(tmp_path, capsys):
    code, out = _check(tmp_path, capsys, "--kind", "gkr-product", "--fault", "stale-coefficient",
                       "--fault-instance", "2", json_out=False)
    assert code == 1
    assert "glue probes (what known glue bug reproduces the failure exactly; evidence, not proof):" in out
    assert "  stale-coefficient: the claim equals claim_expr with squeeze product.c2 in place of product.c3" in out


def test_honest_and_non_glue_failures_carry_no_glue_findings(tmp_path, capsys):
    code, out = _check(tmp_path, capsys, "--kind", "gkr-product")
    assert code == 0 and "glue_findings" not in json.loads(out)
    code, out = _check(tmp_path, capsys, "--kind", "zerocheck", "--fault", "montgomery@2")
    assert code == 1 and "glue_findings" not in json.loads(out)


def test_wide_glue_values_are_shortened_visibly_within_80_columns(tmp_path, capsys):
    # BN254 elements have 76-77 digits: each glue line shows head…tail[length], never a silent cut
    code, out = _check(tmp_path, capsys, "--kind", "gkr-product", "--field", "bn254", "--fault",
                       "stale-coefficient", "--fault-instance", "1", json_out=False)
    assert code == 1
    glue = [line for line in out.splitlines() if line.lstrip().startswith(("evaluation", "link", "opening", "= "))]
    assert glue and all(len(line) <= 80 for line in glue)
    values = [line for line in glue if line.lstrip().startswith(("opening", "= "))]
    assert all(re.search(r"\d…\d+\[7\d\]", line) for line in values)
    assert "  (… marks a shortened value, [n] its full length; --json has every value whole)" in out
    link = json.loads(_check(tmp_path, capsys, "--kind", "gkr-product", "--field", "bn254", "--fault",
                             "stale-coefficient", "--fault-instance", "1")[1])["instances"][1]["link"]
    assert len(str(link["expected"])) >= 70 and "…" not in str(link["expected"])


_LOADED = ("import sys\nfrom stepper.cli.main import main\ntry:\n    main(['check', {path!r}])\nexcept SystemExit:\n"
           "    pass\nprint(*(name in sys.modules for name in ('numpy', 'stepper.field.expr', "
           "'stepper.field.expr_syntax')))")


@pytest.mark.parametrize("sweep", ["on", None])
def test_checking_a_file_without_glue_expressions_loads_no_expression_module(sweep):
    # the expression syntax and evaluator (15 frozen dataclasses, and numpy with the evaluator) are
    # imported only when a transcript has an expression to parse; a file left to the event-by-event
    # replay (under the sweep's size) then needs no numpy at all
    import os
    import subprocess
    import sys
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "transcripts" / "samples" / "boarding-jsonl.sumtr"  # no glue events
    env = {k: v for k, v in os.environ.items() if k != "STEPPER_SWEEP"}
    if sweep is not None:
        env["STEPPER_SWEEP"] = sweep
    proc = subprocess.run([sys.executable, "-c", _LOADED.format(path=str(path))], capture_output=True, text=True,
                          env=env, timeout=120)
    numpy_loaded, expr_loaded, syntax_loaded = proc.stdout.split()[-3:]
    assert (expr_loaded, syntax_loaded) == ("False", "False"), proc.stderr
    assert numpy_loaded == ("True" if sweep == "on" else "False")


_NEWLY_LOADED = ("import sys\nbefore = set(sys.modules)\nfrom stepper.cli.main import main\n"
                 "code = main(['check', {path!r}])\nwatched = {watched!r}\n"
                 "print(code, sorted(name for name in set(sys.modules) - before\n"
                 "                   if name in watched or name.startswith(tuple(w + '.' for w in watched))))")
# what a check that passes never needs: the folded transcript (model), the JSON-lines reader, the
# diagnosis and everything past verify, the terminal libraries, galois and numba, and the standard
# modules only some outputs use (json for --json, fractions for the exact bound in --json, signal for
# a plug-in's time limit, subprocess for --challenges-exec)
_NEVER_ON_A_PASSING_CHECK = (
    "stepper.transcript.model", "stepper.transcript.jsonl", "stepper.transcript.recorder", "stepper.cli.check_many",
    "stepper.cli.exec_plugin", "stepper.diagnose", "stepper.provers", "stepper.compare", "stepper.share",
    "stepper.app", "galois", "numba", "textual", "rich", "json", "fractions", "signal", "subprocess",
)


@pytest.mark.parametrize("sweep", ["on", None])
@pytest.mark.parametrize("sample, also", [
    # no glue: no round, batch, glue or squeeze result, no failure, no finding
    ("samples/boarding-jsonl.sumtr", ("stepper.verify.results", "stepper.verify.glue_results",
                                      "stepper.verify.findings")),
    # a batch and glue expressions: its batch, link and evaluation results are kept; still no finding
    ("ferries/ferries-honest.sumtr", ("stepper.verify.findings",)),
])
def test_a_passing_check_loads_neither_the_fold_nor_the_diagnosis_nor_any_heavy_library(sweep, sample, also):
    # the start-up of every check pays for each module it imports (bench/startup.py): these are
    # imported by the code that needs them, when it needs them; an edit that imports one of them at
    # the top of a module on the check path shows here
    import os
    import subprocess
    import sys
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "transcripts" / sample
    env = {k: v for k, v in os.environ.items() if k != "STEPPER_SWEEP"}
    if sweep is not None:
        env["STEPPER_SWEEP"] = sweep
    # a small file, glue or not, is checked without numpy, and without importing the sweep only to hear it decline
    event_by_event = ("numpy", "stepper.verify.sweep", "stepper.verify.packed_runs") if sweep is None else ()
    code = _NEWLY_LOADED.format(path=str(path), watched=_NEVER_ON_A_PASSING_CHECK + also + event_by_event)
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert proc.stdout.strip().splitlines()[-1] == "0 []", proc.stdout + proc.stderr  # accepted, nothing loaded


def test_a_passing_check_in_an_interpreter_without_site_loads_no_standard_module_only_other_paths_use():
    # `site` may import pathlib, tempfile, random or threading before stepper starts (an editable
    # install's finder imports pathlib), which would hide stepper's own imports of them: started with
    # -S, the interpreter has only what stepper imports. pathlib serves a --challenges file, tempfile
    # (and random, which it imports) a file being written, threading a plug-in's time limit
    import os
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    watched = ("pathlib", "tempfile", "random", "threading")
    code = ("import sys\nfrom stepper.cli.main import main\n"
            "code = main(['check', sys.argv[1]])\n"
            f"print(code, [name for name in {watched!r} if name in sys.modules])")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(root), *(p for p in sys.path if p)])}
    for sample in ("samples/boarding-jsonl.sumtr", "ferries/ferries-honest.sumtr"):  # without glue, with glue
        proc = subprocess.run([sys.executable, "-S", "-c", code, str(root / "transcripts" / sample)],
                              capture_output=True, text=True, env=env, timeout=120)
        assert proc.stdout.strip().splitlines()[-1] == "0 []", proc.stdout + proc.stderr


def test_check_asks_the_sweep_from_the_size_the_sweep_itself_declines_below(tmp_path, monkeypatch):
    from stepper.cli.check_file import SWEEP_FROM_BYTES, _sweep_may_take
    from stepper.verify.sweep import SMALL_FILE_BYTES

    assert SWEEP_FROM_BYTES == SMALL_FILE_BYTES
    small, large = tmp_path / "small.sumtr", tmp_path / "large.sumtr"
    small.write_bytes(bytes(SMALL_FILE_BYTES - 1))
    large.write_bytes(bytes(SMALL_FILE_BYTES))
    monkeypatch.delenv("STEPPER_SWEEP", raising=False)
    assert (_sweep_may_take(str(small)), _sweep_may_take(str(large))) == (False, True)
    assert _sweep_may_take(str(tmp_path / "missing.sumtr"))  # the sweep declines and the reader names it
    for setting in ("on", "off"):  # either way the sweep reads the setting itself
        monkeypatch.setenv("STEPPER_SWEEP", setting)
        assert _sweep_may_take(str(small))


@pytest.mark.parametrize("enabled", [True, False])
def test_the_sweep_runs_with_the_cyclic_collector_paused_and_leaves_it_as_it_was(enabled, tmp_path, capsys,
                                                                                 monkeypatch):
    import gc

    import stepper.verify.sweep as sweep_module

    seen = []
    real = sweep_module.sweep

    def watched(*args, **kwargs):
        seen.append(gc.isenabled())
        return real(*args, **kwargs)

    monkeypatch.setattr(sweep_module, "sweep", watched)
    monkeypatch.setenv("STEPPER_SWEEP", "on")  # a small file: check asks the sweep only when told to
    was = gc.isenabled()
    try:
        (gc.enable if enabled else gc.disable)()
        code, _ = _check(tmp_path, capsys, "--kind", "gkr-product", json_out=False)  # text: the sweep is asked
        after = gc.isenabled()
    finally:
        (gc.enable if was else gc.disable)()
    assert code == 0
    assert seen == [False] and after is enabled


@pytest.mark.parametrize("stop", [KeyboardInterrupt, MemoryError])
def test_the_collector_is_running_again_when_the_sweep_stops_with_an_interrupt_or_an_error(stop, tmp_path, capsys,
                                                                                          monkeypatch):
    # Ctrl-C or an error raised inside the sweep (gc paused there) leaves the collector as it was: on
    import gc

    import stepper.verify.sweep as sweep_module

    def interrupted(*args, **kwargs):
        assert not gc.isenabled()
        raise stop

    monkeypatch.setattr(sweep_module, "sweep", interrupted)
    monkeypatch.setenv("STEPPER_SWEEP", "on")
    was = gc.isenabled()
    gc.enable()
    try:
        try:
            _check(tmp_path, capsys, "--kind", "gkr-product", json_out=False)
        except BaseException as err:  # noqa: BLE001 - whatever main lets through: only the collector matters here
            assert isinstance(err, (stop, SystemExit))
        after = gc.isenabled()
    finally:
        (gc.enable if was else gc.disable)()
    assert after


@pytest.mark.parametrize("sweep", ["on", None])
def test_a_transcript_arriving_through_a_named_pipe_is_read_once_and_checked_whole(sweep, tmp_path):
    # a pipe gives its bytes to the first reader only: the whole-file pass (which STEPPER_SWEEP=on asks
    # for any size) must leave it to the event-by-event reader, or that reader waits for bytes already gone
    import os
    import subprocess
    import sys
    import threading
    from pathlib import Path

    source = Path(__file__).resolve().parents[2] / "transcripts" / "ferries" / "ferries-honest.sumtr"
    pipe = tmp_path / "arriving.sumtr"
    os.mkfifo(pipe)

    def feed() -> None:
        with open(pipe, "wb") as out:  # blocks until check opens the pipe to read
            out.write(source.read_bytes())

    threading.Thread(target=feed, daemon=True).start()
    env = {k: v for k, v in os.environ.items() if k != "STEPPER_SWEEP"}
    if sweep is not None:
        env["STEPPER_SWEEP"] = sweep
    try:
        proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(pipe)], capture_output=True, text=True,
                              env=env, timeout=60)
    except subprocess.TimeoutExpired:
        pytest.fail("check waited for bytes the pipe had already given away")
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "ACCEPTED" in proc.stdout
