"""Challenges re-derived outside stepper's own schedule: the stateful in-process plug-in
(absorb/derive) and `--challenges-exec CMD` (a child process speaking JSON lines), including
plug-ins that are slow, crash, hang or answer garbage."""

from __future__ import annotations

import json
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


@pytest.mark.slow
def test_a_command_that_hangs_is_stopped_at_the_time_limit(setup, monkeypatch):
    before = setup["run"].read_bytes()
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "0.25")  # it hangs at its first answer: any limit stops it
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(setup["run"]),
                           "--challenges-exec", _exec(setup["hang"])], capture_output=True, text=True, timeout=30)
    assert proc.returncode == 2
    assert "to answer within 0.25 s, found no answer (it was stopped" in proc.stderr
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


# ----- squeezes: derived like challenges, asked for before the squeeze's own event ------------
# The same chained SHA-256 as CHAIN; a squeeze is the hash of the state and its name (an element),
# or of the state, its name and the index i (each element of a list squeeze).
GLUE_CHAIN = CHAIN + '''
def squeeze(state, name, length):
    def draw(extra):
        return int.from_bytes(hashlib.sha256(state + name.encode() + extra).digest(), "little") % P
    return draw(b"") if length is None else [draw(bytes([i])) for i in range(length)]

class GlueChain(Chain):
    def derive(self, request):
        if request["type"] == "squeeze":
            return squeeze(self.state, request["name"], request["length"])
        return super().derive(request)
'''

GLUE_EXEC = '''
import json, sys, time
sys.path.insert(0, {folder!r})
from glue_chain import GlueChain
mode = {mode!r}
chain = GlueChain()
log = open({log!r}, "a")
for line in sys.stdin:
    log.write(line)
    log.flush()
    message = json.loads(line)
    if "absorb" in message:
        chain.absorb(message["absorb"])
        continue
    request = message["derive"]
    value = chain.derive(request)
    if request["type"] == "squeeze":
        if mode == "crash":
            sys.exit(9)
        if mode == "hang":
            time.sleep(60)
        if mode == "slow":
            time.sleep(0.2)
        if mode == "garbage":
            print("banana", flush=True)
            continue
        if mode == "wrong" and request["name"] == "mix":
            value = (value + 1) % 2013265921
        if mode == "short" and request["length"] is not None:
            value = value[:-1]
    print(json.dumps({{"value": value}}), flush=True)
'''

GLUE_MODES = ("honest", "wrong", "slow", "crash", "hang", "garbage", "short")


def _glue_payloads() -> list[dict]:
    """A public value, an instance, an opening, a single and a listed squeeze, then an instance
    whose claim is linked to them: challenges and squeezes drawn from GLUE_CHAIN over the maps a
    plug-in is handed (transcripts/EVENTS.md), in stream order."""
    ar = Plain(BABYBEAR)
    chain = _chain_module()
    namespace: dict = {}
    exec(GLUE_CHAIN, namespace)
    state = [b""]
    events: list[dict] = []

    def emit(event: dict, seen: dict | None = None) -> None:
        events.append(event)
        state[0] = chain["fold"](state[0], seen if seen is not None else event)

    def challenge(k, evals):
        emit({"type": "round", "evals": evals})
        r = int.from_bytes(state[0], "little") % BABYBEAR
        emit({"type": "challenge", "value": r})
        return r

    spec = {"type": "field", "name": "babybear"}
    emit(spec, {**spec, "modulus": str(BABYBEAR)})
    tau = 11
    emit({"type": "value", "name": "tau", "value": tau})
    tables = [[3, 1, 4, 1, 5, 9, 2, 6], [2, 7, 1, 8, 2, 8, 1, 8]]
    claim = sum(a * b for a, b in zip(*tables)) % BABYBEAR
    head = {"type": "instance", "name": "deck-slots", "num_vars": 3, "degree": 2, "claim": claim}
    emit(head, {**head, "order": "low-first", "form": "evals"})
    rounds, rs, final = product_rounds(ar, tables, challenge)
    emit({"type": "final", "value": final})
    opening = {"type": "opening", "name": "deck", "value": 77}
    emit(opening, {**opening, "table": "deck"})
    mix = namespace["squeeze"](state[0], "mix", None)
    emit({"type": "squeeze", "name": "mix", "value": mix})
    pair = namespace["squeeze"](state[0], "pair", 2)
    emit({"type": "squeeze", "name": "pair", "value": pair})
    linked = (mix * tau + pair[0] + pair[1] * 77) % BABYBEAR
    head = {"type": "instance", "name": "link", "num_vars": 1, "degree": 1, "claim": linked,
            "claim_expr": "mix * tau + pair[0] + pair[1] * deck"}
    emit(head, {**head, "order": "low-first", "form": "evals"})
    g0 = 5
    r = challenge(1, [g0, (linked - g0) % BABYBEAR])
    emit({"type": "final", "value": (g0 + r * (linked - 2 * g0)) % BABYBEAR})
    return events


@pytest.fixture
def glued(tmp_path: Path) -> dict[str, Path]:
    (tmp_path / "glue_chain.py").write_text(GLUE_CHAIN)
    run = tmp_path / "glued.jsonl"
    run.write_text(jsonl(_glue_payloads()))
    paths = {"run": run, "chain": tmp_path / "glue_chain.py"}
    for mode in GLUE_MODES:
        paths[mode] = tmp_path / f"glue_{mode}.py"
        paths[f"{mode}.log"] = tmp_path / f"glue_{mode}.log"
        paths[mode].write_text(GLUE_EXEC.format(folder=str(tmp_path), mode=mode, log=str(paths[f"{mode}.log"])))
    return paths


def test_an_honest_glued_proof_is_accepted_by_the_exec_and_the_stateful_plug_in(glued, capsys):
    code, out, _ = check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued["honest"]), "--json")
    report = conforming(out, "check")
    assert code == 0 and report["verdict"] == "accept"
    assert [i["link"]["status"] for i in report["instances"][1:]] == ["pass"]
    code, out, _ = check(capsys, str(glued["run"]), "--challenges", f"{glued['chain']}:GlueChain", "--json")
    assert code == 0 and conforming(out, "check")["verdict"] == "accept"


def test_the_command_is_asked_for_each_squeeze_before_its_event_and_absorbs_glue_in_stream_order(glued, capsys):
    assert check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued["honest"]))[0] == 0
    lines = [json.loads(line) for line in glued["honest.log"].read_text().splitlines()]
    seen = [("absorb", m["absorb"]["type"]) if "absorb" in m else ("derive", m["derive"]["type"]) for m in lines]
    assert seen == [("absorb", "field"), ("absorb", "value"), ("absorb", "instance"),
                    *[("absorb", "round"), ("derive", "challenge"), ("absorb", "challenge")] * 3,
                    ("absorb", "final"), ("absorb", "opening"),
                    ("derive", "squeeze"), ("absorb", "squeeze"), ("derive", "squeeze"), ("absorb", "squeeze"),
                    ("absorb", "instance"), ("absorb", "round"), ("derive", "challenge"), ("absorb", "challenge"),
                    ("absorb", "final")]
    squeezes = [m["derive"] for m in lines if "derive" in m and m["derive"]["type"] == "squeeze"]
    assert squeezes == [{"type": "squeeze", "name": "mix", "length": None},
                        {"type": "squeeze", "name": "pair", "length": 2}]


def test_a_command_answering_a_wrong_squeeze_rejects_at_squeeze_naming_it(glued, capsys):
    code, out, _ = check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued["wrong"]), "--json")
    failure = conforming(out, "check")["first_failure"]
    assert code == 1 and failure["check"] == "squeeze"
    assert "the squeeze 'mix'" in failure["explanation"] and str(glued["wrong"]) in failure["explanation"]
    code, out, _ = check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued["wrong"]))
    assert code == 1 and "squeeze 'mix'" in out


def test_a_slow_command_is_waited_for_on_a_squeeze(glued, capsys):
    assert check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued["slow"]))[0] == 0


@pytest.mark.parametrize("mode, words", [
    ("crash", "exited with code 9"),
    ("garbage", "found 'banana'"),
    ("short", "to return the squeeze 'pair' as a list of 2 elements"),
])
def test_a_command_failing_on_a_squeeze_is_exit_2_naming_it_and_the_squeeze(glued, capsys, mode, words):
    before = glued["run"].read_bytes()
    code, _, err = check(capsys, str(glued["run"]), "--challenges-exec", _exec(glued[mode]))
    assert code == 2 and words in err and str(glued[mode]) in err
    assert "squeeze 'mix'" in err or "squeeze 'pair'" in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert glued["run"].read_bytes() == before


def test_a_command_hanging_on_a_squeeze_is_stopped_at_the_time_limit(glued, monkeypatch):
    monkeypatch.setenv("STEPPER_CHALLENGES_SECONDS", "1")
    proc = subprocess.run([sys.executable, "-m", "stepper", "check", str(glued["run"]),
                           "--challenges-exec", _exec(glued["hang"])], capture_output=True, text=True, timeout=30)
    assert proc.returncode == 2
    assert "to answer within 1 s, found no answer (it was stopped" in proc.stderr
    assert "(deriving the squeeze 'mix')" in proc.stderr


def test_a_stateful_plug_in_raising_on_a_squeeze_is_exit_2_naming_the_squeeze(glued, capsys, tmp_path):
    broken = tmp_path / "broken_squeeze.py"
    broken.write_text(CHAIN)  # Chain.derive asserts a challenge request: it knows nothing of squeezes
    code, _, err = check(capsys, str(glued["run"]), "--challenges", f"{broken}:Chain")
    assert code == 2 and "to return the squeeze 'mix', but it raised AssertionError" in err


def test_a_function_plug_in_leaves_squeezes_unchecked_and_says_so(glued, capsys):
    code, out, _ = check(capsys, str(glued["run"]), "--challenges", f"{glued['chain']}:derive", "--json")
    report = conforming(out, "check")
    assert code == 0 and report["verdict"] == "accept"
    assert [f["kind"] for f in report["findings"] if f["kind"] == "squeezes-unchecked"] == ["squeezes-unchecked"]
    code, _, _ = check(capsys, str(glued["run"]), "--challenges", f"{glued['chain']}:derive", "--strict")
    assert code == 1


SCRIPTED = '''
import json, sys
answers = iter({answers!r})
log = open({log!r}, "a")
for line in sys.stdin:
    log.write(line)
    log.flush()
    if "derive" in json.loads(line):
        print(json.dumps({{"value": next(answers)}}), flush=True)
'''


def test_the_glue_session_in_events_md_is_what_stepper_sends(tmp_path, capsys):
    # the documented session (transcripts/EVENTS.md), up to its "...": the same lines, in the same order
    doc = (Path(__file__).resolve().parents[2] / "transcripts" / "EVENTS.md").read_text()
    session = doc[doc.index("The same command over a proof with glue"):].split("```")[1]
    documented = [json.loads(line[2:]) for line in session.splitlines() if line.startswith("> ")]
    answers = [json.loads(line[2:])["value"] for line in session.splitlines() if line.startswith("< ")]
    events = [{"type": "field", "name": "babybear"}, {"type": "value", "name": "tau", "value": 11},
              {"type": "instance", "name": "deck-slots", "num_vars": 1, "degree": 1, "claim": 7},
              {"type": "round", "evals": [3, 4]}, {"type": "challenge", "value": 5}, {"type": "final", "value": 8},
              {"type": "opening", "name": "deck", "value": 8}, {"type": "squeeze", "name": "mix", "value": 3},
              {"type": "squeeze", "name": "pair", "value": [2, 9]},
              {"type": "instance", "name": "link", "num_vars": 1, "degree": 1, "claim": 107,
               "claim_expr": "mix * tau + pair[0] + pair[1] * deck"},
              {"type": "round", "evals": [100, 7]}, {"type": "challenge", "value": 1}, {"type": "final", "value": 7}]
    run = tmp_path / "session.jsonl"
    run.write_text(jsonl(events))
    command, log = tmp_path / "scripted.py", tmp_path / "scripted.log"
    command.write_text(SCRIPTED.format(answers=[*answers, "1"], log=str(log)))
    code, out, _ = check(capsys, str(run), "--challenges-exec", _exec(command), "--json")
    assert code == 0 and conforming(out, "check")["verdict"] == "accept"
    sent = [json.loads(line) for line in log.read_text().splitlines()]
    assert sent[: len(documented)] == documented
