"""The `--challenges` plug-in route under guard: a plug-in that raises, hangs, exits, returns the
wrong type or a huge value gets exit 2 with one line naming the plug-in, the instance and the
round, and the transcript is left byte for byte as it was. No code named inside a transcript or a
witness is ever run. Honest rounds: J. Thaler, "Proofs, Arguments, and Zero-Knowledge", section 4.1
(from memory), through tests/plain_sumcheck.py; SIGALRM time limits are POSIX (common practice,
no source).
"""

from __future__ import annotations

import sys
import textwrap
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared plain-integer prover

from plain_sumcheck import BABYBEAR, Plain, thaler_payloads  # noqa: E402
from stepper.cli.main import main  # noqa: E402
from stepper.errors import EXIT_INPUT  # noqa: E402
from stepper.transcript.store import TranscriptWriter  # noqa: E402
from stepper.verify.binding import PluginFailure  # noqa: E402
from stepper.verify.challenges import GuardedPlugin  # noqa: E402

PLUGIN = textwrap.dedent("""
    import time
    def raises(history):
        raise RuntimeError("schedule table missing")
    def hangs(history):
        while True:
            try:
                time.sleep(10)
            except Exception:  # a plug-in that swallows exceptions still cannot swallow the time limit
                pass
    def exits(history):
        raise SystemExit(9)
    def wrong_type(history):
        return object()
    def huge(history):
        return 10 ** 6000
    def not_reduced(history):
        return 2013265921 + 5
    def negative(history):
        return -1
    def deep(history):
        value = 1
        for _ in range(100000):
            value = [value]
        return value
""")


@pytest.fixture
def files(tmp_path: Path) -> tuple[Path, Path]:
    transcript = tmp_path / "quill.sumtr"
    with TranscriptWriter(transcript, metadata={"label": "isle-of-quill-0740"}) as writer:
        for payload in thaler_payloads(Plain(BABYBEAR), (5, 7, 11)):
            writer.write_payload(payload)
    plugin = tmp_path / "plug.py"
    plugin.write_text(PLUGIN)
    return transcript, plugin


@pytest.mark.parametrize("function, says", [
    ("raises", "raised RuntimeError: schedule table missing"),
    ("hangs", "to answer within 0.5 s, found it still running (a limit; raise it with STEPPER_CHALLENGES_SECONDS"),
    ("exits", "raised SystemExit: 9"),
    ("wrong_type", "returned an unusable value: expected an element"),
    ("huge", "returned an unusable value: expected a canonical element 0 <= v < p = 2013265921, found an integer "
             "of 19932 bits"),
    ("deep", "returned an unusable value"),
    # BabyBear p = 15 * 2^27 + 1 = 2013265921 (common practice, no source): p + 5 reduces to 5, -1 to p - 1
    ("not_reduced", "returned 2013265926, which is not reduced mod p = 2013265921 (it reduces to 5)"),
    ("negative", "returned -1, which is not reduced mod p = 2013265921 (it reduces to 2013265920)"),
])
@pytest.mark.parametrize("json_flag", [[], ["--json"]])
def test_a_misbehaving_plugin_is_exit_2_naming_it_and_the_round_and_the_transcript_is_untouched(
        files, capsys, monkeypatch, function, says, json_flag):
    transcript, plugin = files
    before = transcript.read_bytes()
    # a short limit for the plug-in that hangs; a generous one for the others, so a loaded machine
    # cannot turn their slow-but-finite work (the deep list) into a time-out
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "0.5" if function == "hangs" else "30")
    spec = f"{plugin}:{function}"
    started = time.monotonic()
    assert main(["check", str(transcript), "--challenges", spec, *json_flag]) == EXIT_INPUT
    assert time.monotonic() - started < 20
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "internal error" not in err
    assert spec in err and "instance 'boarding-permutation', round 1" in err and says in err
    assert transcript.read_bytes() == before


def test_the_guard_gives_an_outer_timer_back_what_is_left_of_it():
    import signal

    fired = []
    previous = signal.signal(signal.SIGALRM, lambda *_: fired.append(True))
    try:
        signal.setitimer(signal.ITIMER_REAL, 0.3)
        assert GuardedPlugin(lambda history: 5, seconds=5)([]) == 5
        remaining, _ = signal.getitimer(signal.ITIMER_REAL)
        assert 0 < remaining <= 0.3
        time.sleep(0.5)
        assert fired == [True]
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def test_a_bad_time_limit_setting_is_refused(monkeypatch):
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "soon")
    with pytest.raises(Exception, match="STEPPER_CHALLENGES_SECONDS to be a number of seconds"):
        GuardedPlugin(lambda history: 1)
    assert issubclass(PluginFailure, Exception)


def test_no_code_named_in_a_transcript_or_witness_is_run(tmp_path, capsys):
    # a module that leaves a mark when imported; the transcript and the witness both name it
    marker = str(tmp_path / "ran")
    (tmp_path / "mark_me.py").write_text(f"open({marker!r}, 'w').close()\ndef derive(h):\n    return 1\n")
    sys.path.insert(0, str(tmp_path))
    try:
        payloads = thaler_payloads(Plain(BABYBEAR), (5, 7, 11))
        payloads.insert(1, {"type": "schedule", "name": "mark_me:derive", "label": f"{tmp_path}/mark_me.py:derive"})
        transcript = tmp_path / "named.sumtr"
        with TranscriptWriter(transcript, metadata={"challenges": "mark_me:derive", "plugin": "mark_me.py"}) as w:
            for payload in payloads:
                w.write_payload(payload)
        witness = tmp_path / "w.json"
        witness.write_text('{"instances": [{"name": "boarding-permutation", "combine": "__import__(\'mark_me\')", '
                           '"tables": {"mark_me": "mark_me.py"}}]}')
        assert main(["check", str(transcript)]) == 0
        assert main(["check", str(transcript), "--witness", str(witness)]) == EXIT_INPUT
        assert main(["info", str(transcript)]) == 0
        assert main(["writeup", str(transcript), "-o", str(tmp_path / "r.md")]) == 0
        capsys.readouterr()
        assert not (tmp_path / "ran").exists()
    finally:
        sys.path.remove(str(tmp_path))
