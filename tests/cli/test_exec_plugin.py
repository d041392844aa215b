"""Challenges re-derived outside stepper's own schedule: the stateful in-process plug-in
(absorb/derive) and `--challenges-exec CMD` (a child process speaking JSON lines), including
plug-ins that are slow, crash, hang or answer garbage."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from json_contracts import conforming
from plain_sumcheck import BABYBEAR, Plain, instance_payloads, jsonl, product_rounds
from stepper.cli.main import main

# One chained SHA-256 (FIPS 180-4) over every event the verifier absorbs, in stream order: the
# kind of running transcript hash a prover in another language keeps (common practice, no source).
CHAIN = '''
import hashlib
P = 2**31 - 2**27 + 1

def fold(state, event):
    return hashlib.sha256(state + repr(sorted(event.items())).encode()).digest()

def derive(history):
    state = b""
    for event in history:
        state = fold(state, event)
    return int.from_bytes(state, "little") % P

class Chain:
    def __init__(self):
        self.state = b""
    def absorb(self, event):
        self.state = fold(self.state, event)
    def derive(self, request):
        assert request["type"] == "challenge" and request["round"] >= 1
        return int.from_bytes(self.state, "little") % P
'''

EXEC = '''
import json, sys, time
sys.path.insert(0, {folder!r})
from chain import Chain
mode = {mode!r}
chain = Chain()
for line in sys.stdin:
    message = json.loads(line)
    if "absorb" in message:
        chain.absorb(message["absorb"])
        continue
    if mode == "crash":
        sys.exit(9)
    if mode == "hang":
        time.sleep(60)
    if mode == "slow":
        time.sleep(0.2)
    if mode == "garbage":
        print("banana", flush=True)
        continue
    if mode == "refuse":
        print(json.dumps({{"error": "no key loaded"}}), flush=True)
        continue
    print(json.dumps({{"value": str(chain.derive(message["derive"]))}}), flush=True)
'''


def _chain_module() -> dict:
    namespace: dict = {}
    exec(CHAIN, namespace)
    return namespace


def _payloads() -> list[dict]:
    ar = Plain(BABYBEAR)
    tables = [[3, 1, 4, 1, 5, 9, 2, 6], [2, 7, 1, 8, 2, 8, 1, 8]]
    claim = sum(a * b for a, b in zip(*tables)) % BABYBEAR
    history = [{"type": "field", "name": "babybear", "modulus": str(BABYBEAR)},
               {"type": "instance", "name": "deck-slots", "num_vars": 3, "degree": 2, "claim": claim,
                "order": "low-first", "form": "evals"}]
    derive = _chain_module()["derive"]

    def challenge(k, evals):
        history.append({"type": "round", "evals": evals})
        r = derive(history)
        history.append({"type": "challenge", "value": r})
        return r

    rounds, rs, final = product_rounds(ar, tables, challenge)
    return [ar.spec(), *instance_payloads(ar, "deck-slots", 3, 2, claim, rounds, rs, final)]


@pytest.fixture
def setup(tmp_path: Path) -> dict[str, Path]:
    (tmp_path / "chain.py").write_text(CHAIN)
    run = tmp_path / "run.jsonl"
    run.write_text(jsonl(_payloads()))
    paths = {"run": run, "chain": tmp_path / "chain.py"}
    for mode in ("honest", "slow", "crash", "hang", "garbage", "refuse"):
        paths[mode] = tmp_path / f"plugin_{mode}.py"
        paths[mode].write_text(EXEC.format(folder=str(tmp_path), mode=mode))
    return paths


def check(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["check", *argv])
    got = capsys.readouterr()
    return code, got.out, got.err


def _exec(path: Path) -> str:
    return f"{sys.executable} {path}"


def test_the_three_plug_in_forms_accept_the_same_proof(setup, capsys):
    code, out, _ = check(capsys, str(setup["run"]), "--challenges", f"{setup['chain']}:derive", "--json")
    assert code == 0 and conforming(out, "check")["verdict"] == "accept"
    code, out, _ = check(capsys, str(setup["run"]), "--challenges", f"{setup['chain']}:Chain", "--json")
    assert code == 0 and "re-derived by the plug-in" in conforming(out, "check")["challenges"]
    code, out, _ = check(capsys, str(setup["run"]), "--challenges-exec", _exec(setup["honest"]), "--json")
    assert code == 0 and conforming(out, "check")["verdict"] == "accept"


def test_a_different_hash_rejects_the_challenges(setup, capsys, tmp_path):
    other = tmp_path / "other.py"
    other.write_text(CHAIN.replace("hashlib.sha256(", "hashlib.sha3_256("))
    code, out, _ = check(capsys, str(setup["run"]), "--challenges", f"{other}:Chain", "--json")
    failure = conforming(out, "check")["first_failure"]
    assert code == 1 and failure["check"] == "challenge" and failure["round"] == 1


def test_a_slow_command_is_waited_for(setup, capsys):
    code, _, _ = check(capsys, str(setup["run"]), "--challenges-exec", _exec(setup["slow"]))
    assert code == 0


@pytest.mark.parametrize("mode, words", [
    ("crash", "exited with code 9"),
    ("garbage", "found 'banana'"),
    ("refuse", "reported an error: no key loaded"),
])
def test_a_command_that_fails_is_exit_2_naming_it_and_the_file_is_untouched(setup, capsys, mode, words):
    before = setup["run"].read_bytes()
    code, out, err = check(capsys, str(setup["run"]), "--challenges-exec", _exec(setup[mode]))
    assert code == 2 and words in err and str(setup[mode]) in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert setup["run"].read_bytes() == before


def test_a_command_that_hangs_is_stopped_at_the_time_limit(setup, monkeypatch):
    before = setup["run"].read_bytes()
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "1")
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(setup["run"]),
                           "--challenges-exec", _exec(setup["hang"])], capture_output=True, text=True, timeout=30)
    assert proc.returncode == 2
    assert "to answer within 1 s, found no answer (it was stopped" in proc.stderr
    assert "round 1" in proc.stderr
    assert setup["run"].read_bytes() == before


def test_a_command_that_cannot_start_or_both_plug_in_flags_are_usage_errors(setup, capsys):
    code, _, err = check(capsys, str(setup["run"]), "--challenges-exec", "no-such-program-anywhere")
    assert code == 2 and "could not be started" in err
    code, _, err = check(capsys, str(setup["run"]), "--challenges-exec", _exec(setup["honest"]),
                         "--challenges", f"{setup['chain']}:derive")
    assert code == 2 and "found both" in err


def test_a_stateful_plug_in_that_raises_or_hangs_is_exit_2(setup, capsys, tmp_path, monkeypatch):
    broken = tmp_path / "broken.py"
    broken.write_text(CHAIN + "\nclass Broken(Chain):\n    def absorb(self, event):\n"
                      "        if event['type'] == 'round':\n            raise KeyError('evals')\n"
                      "        super().absorb(event)\n")
    code, _, err = check(capsys, str(setup["run"]), "--challenges", f"{broken}:Broken")
    assert code == 2 and "to absorb a round event, but it raised KeyError" in err
    stuck = tmp_path / "stuck.py"
    stuck.write_text(CHAIN + "\nimport time\nclass Stuck(Chain):\n    def derive(self, request):\n"
                     "        time.sleep(30)\n")
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "0.5")
    code, _, err = check(capsys, str(setup["run"]), "--challenges", f"{stuck}:Stuck")
    assert code == 2 and "within 0.5 s" in err
