"""The glue between sumchecks (transcripts/FORMAT.md, "The glue"): link, evaluation, squeeze and
eq-factored rounds, driven through `stepper import` and `stepper check --json` in process from
JSON-lines streams written here.

The independent side is a brute-force oracle in plain Python integers (below): multilinear
extensions by their defining sum over the boolean cube, round polynomials by summing the
summed polynomial over the free variables (common practice, no source), eq(w, x) =
prod (w_i x_i + (1 - w_i)(1 - x_i)) (common practice, no source). Eq-factored rounds follow
Gruen, "Some Improvements for the PIOP for ZeroCheck", IACR ePrint 2024/108 (from memory):
the prover sends q_k with g_k(X) = prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X).
"""

from __future__ import annotations

import itertools
import json
import random
import re
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared schema helper
from json_contracts import conforming  # noqa: E402

from stepper.cli.main import main
from stepper.field.field import get_field
from stepper.verify.glue import EqFactor

P = 2**31 - 2**27 + 1  # BabyBear, common practice, no source


# ----- the brute-force oracle (plain integers, nothing from stepper) -----------------------------------------------
def eq(w: list[int], x: list[int]) -> int:
    out = 1
    for wi, xi in zip(w, x, strict=True):
        out = out * (wi * xi + (1 - wi) * (1 - xi)) % P
    return out


def cube(n: int) -> list[list[int]]:
    """Boolean points with x_1 the least significant index bit (the table convention)."""
    return [[(i >> j) & 1 for j in range(n)] for i in range(1 << n)]


def mle(table: list[int], x: list[int]) -> int:
    return sum(t * eq(b, x) for t, b in zip(table, cube(len(x)))) % P


def lagrange(evals: list[int], x: int) -> int:
    total = 0
    for i, yi in enumerate(evals):
        num = den = 1
        for j in range(len(evals)):
            if j != i:
                num, den = num * (x - j) % P, den * (i - j) % P
        total += yi * num * pow(den, P - 2, P)
    return total % P


class ZeroCheck:
    """eq(tau, x) * (a(x) b(x) - c(x)) with c = a * b entry by entry: it sums to 0 over the cube."""

    def __init__(self, mu: int, seed: int) -> None:
        rng = random.Random(seed)
        self.mu = mu
        self.a = [rng.randrange(P) for _ in range(1 << mu)]
        self.b = [rng.randrange(P) for _ in range(1 << mu)]
        self.c = [x * y % P for x, y in zip(self.a, self.b)]
        self.tau = [rng.randrange(P) for _ in range(mu)]
        self.r = [rng.randrange(P) for _ in range(mu)]

    def inner(self, x: list[int]) -> int:
        return (mle(self.a, x) * mle(self.b, x) - mle(self.c, x)) % P

    def g_round(self, k: int, X: int) -> int:
        """g_k(X): sum over the boolean x_(k+1..mu) of eq(tau, x) * inner(x), x = (r_1..r_(k-1), X, b)."""
        return sum(eq(self.tau, [*self.r[:k - 1], X, *b]) * self.inner([*self.r[:k - 1], X, *b])
                   for b in cube(self.mu - k)) % P

    def q_round(self, k: int, X: int) -> int:
        """q_k(X): the same sum with the eq factors of x_1..x_k left out (Gruen, from memory)."""
        return sum(eq(self.tau[k:], b) * self.inner([*self.r[:k - 1], X, *b]) for b in cube(self.mu - k)) % P

    def openings(self) -> dict[str, int]:
        return {"a": mle(self.a, self.r), "b": mle(self.b, self.r), "c": mle(self.c, self.r)}

    def eq_table(self) -> list[int]:
        return [eq(self.tau, x) for x in cube(self.mu)]


def zero_check_events(zc: ZeroCheck, *, form: str = "evals", bad_round: int = 0, bad_opening: int = 0,
                      link_offset: int = 0, with_opening_c: bool = True) -> list[dict]:
    """A two-instance proof: the zero-check with openings, then an instance whose claim is linked to
    them (claim_expr a + beta * b, beta a squeeze) over a one-variable table summing to that claim."""
    events: list[dict] = [{"type": "field", "name": "babybear"},
                          {"type": "value", "name": "tau", "value": zc.tau}]
    inst: dict = {"type": "instance", "name": "fares.zero", "num_vars": zc.mu, "degree": 3, "claim": 0,
                  "final_expr": "eq(tau) * (a*b - c)"}
    if form == "eq-factored":
        inst.update(form="eq-factored", eq_point="tau")
    events.append(inst)
    for k in range(1, zc.mu + 1):
        if form == "eq-factored":
            values = [zc.q_round(k, X) for X in range(3)]
        else:
            values = [zc.g_round(k, X) for X in range(4)]
        if k == bad_round:
            values[0] = (values[0] + 1) % P
        events.append({"type": "round", "evals": values})
        events.append({"type": "challenge", "value": zc.r[k - 1]})
    opened = zc.openings()
    opened["c"] = (opened["c"] + bad_opening) % P
    for name, value in opened.items():
        if name != "c" or with_opening_c:
            events.append({"type": "opening", "name": name, "value": value})
    beta = 1234567
    linked = (opened["a"] + beta * opened["b"]) % P
    claim = (linked + link_offset) % P
    events += [{"type": "squeeze", "name": "beta", "value": beta},
               {"type": "instance", "name": "fares.next", "num_vars": 1, "degree": 1, "claim": claim,
                "claim_expr": "a + beta*b"},
               {"type": "round", "evals": [5, (claim - 5) % P]}, {"type": "challenge", "value": 9}]
    return events


def run(tmp_path: Path, capsys, events: list[dict], *extra: str) -> tuple[int, dict | None, str]:
    """`stepper import` then `stepper check --json` (in process): exit code, JSON report, stderr."""
    src, out = tmp_path / "glue.jsonl", tmp_path / "glue.sumtr"
    src.write_text("".join(json.dumps(e) + "\n" for e in events))
    out.unlink(missing_ok=True)  # import never replaces a file without --force
    code = main(["import", str(src), "-o", str(out)])
    err = capsys.readouterr().err
    if code != 0:
        return code, None, err
    code = main(["check", str(out), "--json", *extra])
    captured = capsys.readouterr()
    return code, (conforming(captured.out, "check") if captured.out.strip() else None), captured.err


def where(report: dict) -> tuple[int, int, str]:
    f = report["first_failure"]
    return f["instance"], f["round"], f["check"]


# ----- the done-when cases -----------------------------------------------------------------------------------------
@pytest.mark.parametrize("mu", [1, 2, 3, 4])
def test_an_honest_zero_check_with_openings_and_a_linked_claim_is_accepted(tmp_path, capsys, mu):
    zc = ZeroCheck(mu, seed=mu)
    assert sum(zc.g_round(1, X) for X in (0, 1)) % P == 0  # the oracle's own sanity: a zero-check sums to 0
    code, report, err = run(tmp_path, capsys, zero_check_events(zc))
    assert (code, report["verdict"], report["first_failure"]) == (0, "accept", None), err
    first = report["instances"][0]
    assert [o["name"] for o in first["openings"]] == ["a", "b", "c"]
    assert first["evaluation"]["status"] == "pass" and first["evaluation"]["round"] == mu
    assert first["evaluation"]["expr"] == "eq(tau) * (a*b - c)"
    # expected = final_expr from the oracle's openings; found = the reduced claim g_mu(r_mu) of the oracle
    o = zc.openings()
    assert first["evaluation"]["expected"] == str(eq(zc.tau, zc.r) * (o["a"] * o["b"] - o["c"]) % P)
    assert first["evaluation"]["found"] == str(zc.g_round(mu, zc.r[-1]))
    assert report["instances"][1]["link"]["status"] == "pass" and report["instances"][1]["link"]["round"] == 0


def test_a_wrong_opening_rejects_at_the_last_round_with_evaluation_and_the_witness_names_it(tmp_path, capsys):
    zc = ZeroCheck(3, seed=11)
    code, report, _ = run(tmp_path, capsys, zero_check_events(zc, bad_opening=1))
    assert code == 1 and report["verdict"] == "reject"
    assert where(report) == (0, 3, "evaluation")
    o = zc.openings()
    assert report["first_failure"]["expected"] == str(eq(zc.tau, zc.r) * (o["a"] * o["b"] - o["c"] - 1) % P)
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "fares.zero", "combine": "e * (a*b - c)",
                                                  "tables": {"a": zc.a, "b": zc.b, "c": zc.c, "e": zc.eq_table()}}]}))
    code, report, _ = run(tmp_path, capsys, zero_check_events(zc, bad_opening=1), "--witness", str(witness))
    cause = report["root_cause"]
    assert code == 1
    assert (cause["instance"], cause["round"], cause["check"], cause["name"]) == (0, 3, "opening", "c")
    assert cause["expected"] == str(mle(zc.c, zc.r)) and cause["found"] == str((mle(zc.c, zc.r) + 1) % P)


def test_check_with_the_witness_exits_1_on_a_lie_every_transcript_check_missed(tmp_path, capsys):
    zc = ZeroCheck(2, seed=5)
    events = zero_check_events(zc, bad_opening=1)
    events[2]["final_expr"] = "0*c + eq(tau) * (a*b) - eq(tau) * (a*b) + final_value_free"
    events.insert(1, {"type": "value", "name": "final_value_free", "value": zc.g_round(2, zc.r[-1])})
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "fares.zero", "combine": "e * (a*b - c)",
                                                  "tables": {"a": zc.a, "b": zc.b, "c": zc.c, "e": zc.eq_table()}}]}))
    code, report, _ = run(tmp_path, capsys, events, "--witness", str(witness))
    assert report["verdict"] == "accept" and report["root_cause"]["check"] == "opening"
    assert code == 1


def test_a_wrong_linked_claim_rejects_at_round_0_with_link(tmp_path, capsys):
    zc = ZeroCheck(2, seed=3)
    code, report, _ = run(tmp_path, capsys, zero_check_events(zc, link_offset=7))
    assert code == 1 and where(report) == (1, 0, "link")
    o = zc.openings()
    assert report["first_failure"]["expected"] == str((o["a"] + 1234567 * o["b"]) % P)
    assert report["instances"][1]["link"]["expr"] == "a + beta*b"


@pytest.mark.parametrize("mu", [2, 3, 4])
def test_an_honest_eq_factored_instance_is_accepted_and_its_rounds_are_the_brute_force_g(tmp_path, capsys, mu):
    zc = ZeroCheck(mu, seed=20 + mu)
    code, report, err = run(tmp_path, capsys, zero_check_events(zc, form="eq-factored"))
    assert code == 0 and report["verdict"] == "accept", err
    # EqFactor rebuilds g_k from q_k exactly as the oracle sums g_k over the cube
    factor = EqFactor(get_field(P), tuple(zc.tau), "low-first")
    for k in range(1, mu + 1):
        rebuilt = factor.expand(tuple(zc.q_round(k, X) for X in range(3)), k)
        assert list(rebuilt) == [zc.g_round(k, X) for X in range(4)]
        factor.advance(k, zc.r[k - 1])


@pytest.mark.parametrize("bad", [1, 2, 3])
def test_an_eq_factored_instance_with_one_corrupted_round_rejects_at_that_round_with_sum(tmp_path, capsys, bad):
    zc = ZeroCheck(3, seed=40)
    code, report, _ = run(tmp_path, capsys, zero_check_events(zc, form="eq-factored", bad_round=bad))
    assert code == 1 and where(report) == (0, bad, "sum")


def test_a_high_first_eq_factored_round_binds_the_last_coordinate_first():
    # round 1 of a high-first instance binds x_mu, so its eq factor uses w_mu (common practice, no source)
    field = get_field(P)
    w = (3, 5, 7)
    factor = EqFactor(field, w, "high-first")
    g = factor.expand((2, 4), 1)
    assert g[0] == (1 - 7) * 2 % P and g[1] == 7 * 4 % P
    factor.advance(1, 10)
    assert factor.prefix == (7 * 10 + (1 - 7) * (1 - 10)) % P


def test_an_evaluation_waiting_for_an_opening_never_sent_is_incomplete(tmp_path, capsys):
    zc = ZeroCheck(2, seed=8)
    events = zero_check_events(zc, with_opening_c=False)
    events = events[:events.index(next(e for e in events if e.get("name") == "beta"))]  # stop before the next
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 3 and report["verdict"] == "incomplete"
    assert report["instances"][0]["status"] == "incomplete" and report["instances"][0]["evaluation"] is None


def test_an_expression_naming_an_unknown_value_is_unusable_input_with_one_line(tmp_path, capsys):
    zc = ZeroCheck(1, seed=2)
    events = zero_check_events(zc)
    events[-3]["claim_expr"] = "a + gamma*b"
    code, report, err = run(tmp_path, capsys, events)
    assert code == 2 and report is None
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and "fares.next" in lines[0] and "claim_expr" in lines[0] and "gamma" in lines[0]
    assert "Traceback" not in err


def test_a_squeeze_the_schedule_does_not_derive_fails_check_squeeze_naming_it(tmp_path, capsys):
    from stepper.provers.channel import JsonLinesSink, ProofChannel

    field = get_field(P)
    path = tmp_path / "raw.jsonl"
    with path.open("w") as stream:
        channel = ProofChannel(field, JsonLinesSink(stream), label="isle-of-quill-0740")
        channel.value("tau", [1, 2])
        channel.squeeze("alpha")
        channel.start_instance("deck", 1, 1, 6)
        channel.send_round([2, 4])
    events = [json.loads(line) for line in path.read_text().splitlines()]
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 0, report
    for e in events:
        if e["type"] == "squeeze":
            e["value"] = (e["value"] + 1) % P
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 1 and report["first_failure"]["check"] == "squeeze"
    assert "'alpha'" in report["first_failure"]["explanation"]


def _squeeze_results(events: list[dict], **replay_options: object) -> list:
    """The squeeze results the replay's ``feed`` returns for a stream of events, in order."""
    from stepper.transcript.events import Sequencer
    from stepper.verify.replay import Replay
    from stepper.verify.glue_results import SqueezeResult

    seq, replay = Sequencer(), Replay(**replay_options)  # type: ignore[arg-type]
    out = []
    for event in events:
        out += [r for r in replay.feed(seq.feed(event)) if isinstance(r, SqueezeResult)]
    return out


def test_the_replay_returns_every_squeeze_as_sent_and_as_re_derived_with_its_status():
    import io

    from stepper.provers.channel import JsonLinesSink, ProofChannel

    stream = io.StringIO()
    channel = ProofChannel(get_field(P), JsonLinesSink(stream), label="isle-of-quill-0740")
    channel.value("tau", [1, 2])
    alpha = channel.squeeze("alpha")
    channel.start_instance("deck", 1, 1, 6)
    channel.send_round([2, 4])
    channel.squeeze("gamma")
    events = [json.loads(line) for line in stream.getvalue().splitlines()]
    (first, second) = _squeeze_results(events, keep_rounds=True)
    assert (first.name, first.instance, first.round, first.status) == ("alpha", None, 0, "pass")
    assert first.expected == first.found == alpha
    assert (second.name, second.instance, second.round, second.status) == ("gamma", 0, 1, "pass")
    assert _squeeze_results(events, emit_passing=False) == []  # a summary replay returns only failures
    bumped = [dict(e, value=(e["value"] + 1) % P) if e.get("name") == "alpha" else e for e in events]
    (wrong,) = _squeeze_results(bumped, emit_passing=False)
    assert (wrong.status, wrong.expected, wrong.found) == ("fail", alpha, (alpha + 1) % P)
    unscheduled = [e for e in events if e["type"] != "schedule"]
    assert [(r.status, r.expected) for r in _squeeze_results(unscheduled, keep_rounds=True)] == [
        ("unchecked", None), ("unchecked", None)]


def test_point_and_final_of_an_earlier_instance_feed_a_later_claim(tmp_path, capsys):
    zc = ZeroCheck(2, seed=9)
    events = zero_check_events(zc)
    reduced = zc.g_round(2, zc.r[-1])
    claim = (reduced + eq(zc.r, zc.tau)) % P  # final(fares.zero) + eq(point(fares.zero), tau)
    events += [{"type": "instance", "name": "fares.third", "num_vars": 1, "degree": 1, "claim": claim,
                "claim_expr": "final(fares.zero) + eq(point(fares.zero), tau)"},
               {"type": "round", "evals": [1, (claim - 1) % P]}, {"type": "challenge", "value": 3}]
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 0 and report["instances"][2]["link"]["status"] == "pass"


def test_text_output_shows_the_glue_on_lines_of_at_most_80_columns(tmp_path, capsys):
    zc = ZeroCheck(2, seed=13)
    src, out = tmp_path / "glue.jsonl", tmp_path / "glue.sumtr"
    src.write_text("".join(json.dumps(e) + "\n" for e in zero_check_events(zc, bad_opening=1)))
    assert main(["import", str(src), "-o", str(out)]) == 0
    capsys.readouterr()
    assert main(["check", str(out)]) == 1
    text = capsys.readouterr().out
    glue = [line for line in text.splitlines() if line.lstrip().startswith(("evaluation", "link", "opening", "= "))]
    assert any("evaluation" in line and "FAIL" in line for line in glue)
    assert any(line.lstrip().startswith("link") and "ok" in line for line in glue)
    assert all(len(line) <= 80 for line in glue)
    assert re.search(r"REJECTED at instance #?0 'fares.zero', round 2, check evaluation", text)
    out.unlink()
    src.write_text("".join(json.dumps(e) + "\n" for e in zero_check_events(zc)))
    assert main(["import", str(src), "-o", str(out)]) == 0
    capsys.readouterr()
    assert main(["check", str(out)]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if "fares.zero" in line)
    assert row.endswith("passed; final_expr checked")  # the evaluation checked the last claim


def test_brute_force_oracle_matches_itself_on_the_cube():
    # a guard on the oracle: the multilinear extension agrees with the table on boolean points
    zc = ZeroCheck(3, seed=1)
    for i, x in enumerate(cube(3)):
        assert mle(zc.a, x) == zc.a[i]
    assert lagrange([1, 4, 9], 3) == 16  # x^2 through (0,1)...: (x+1)^2 at 3, common practice, no source
    assert list(itertools.islice(cube(2), 4)) == [[0, 0], [1, 0], [0, 1], [1, 1]]


def test_an_instance_without_rounds_evaluates_its_claim_against_final_expr(tmp_path, capsys):
    # with num_vars = 0 nothing is summed: the reduced claim is the claim itself (common practice, no source)
    events = [{"type": "field", "name": "babybear"}, {"type": "value", "name": "k", "value": 6},
              {"type": "instance", "name": "fares.const", "num_vars": 0, "degree": 1, "claim": 12,
               "final_expr": "2*k"}]
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 0 and report["instances"][0]["evaluation"]["status"] == "pass"
    events[2]["claim"] = 13
    code, report, _ = run(tmp_path, capsys, events)
    assert code == 1 and where(report) == (0, 0, "evaluation")


def test_an_opened_table_outside_the_combine_is_checked_too(tmp_path, capsys):
    zc = ZeroCheck(2, seed=31)
    events = zero_check_events(zc)
    wrong = (mle(zc.b, zc.r) + 5) % P
    events.insert(next(i for i, e in enumerate(events) if e.get("name") == "beta"),
                  {"type": "opening", "name": "b.again", "table": "side", "value": wrong})
    witness = tmp_path / "witness.json"
    witness.write_text(json.dumps({"instances": [{"name": "fares.zero", "combine": "e * (a*b - c)",
                                                  "tables": {"a": zc.a, "b": zc.b, "c": zc.c, "e": zc.eq_table(),
                                                             "side": zc.b}}]}))
    code, report, _ = run(tmp_path, capsys, events, "--witness", str(witness))
    assert report["verdict"] == "accept" and code == 1
    cause = report["root_cause"]
    assert (cause["check"], cause["name"], cause["expected"]) == ("opening", "b.again", str(mle(zc.b, zc.r)))


# ----- the glue book: values settled in bulk wait as columns -------------------------------------------------------
def test_the_glue_book_answers_values_settled_as_columns_before_and_after_they_join_its_dictionary():
    from stepper.verify.glue import GlueBook

    book = GlueBook()
    book.add_columns(["a0", "b0"], [5, [1, 2]])
    book.add_columns(["a1", "b1"], [7, 9])
    lookup = book.lookup()
    assert lookup["b0"] == [1, 2] and lookup["a1"] == 7 and "a0" in lookup and "c0" not in lookup
    with pytest.raises(KeyError):
        lookup["c0"]
    for _ in range(GlueBook.SCANS + 1):  # past the scans the waiting columns join the dictionary
        assert lookup.get("nowhere") is None
    assert lookup["a0"] == 5 and len(lookup) == 4
    assert book.values == {"a0": 5, "b0": [1, 2], "a1": 7, "b1": 9}


def test_the_glue_book_finds_names_at_the_end_and_in_the_middle_of_older_and_newer_columns():
    # the ends of all columns are looked at before the rest of any: a name anywhere is found, with its own value
    from stepper.verify.glue import GlueBook

    book = GlueBook()
    older = [f"a{i}" for i in range(300)]
    newer = [f"b{i}" for i in range(300)]
    book.add_columns(older, list(range(300)))
    book.add_columns(newer, list(range(1000, 1300)))
    lookup = book.lookup()
    for name, value in (("a299", 299), ("a250", 250), ("a3", 3), ("b299", 1299), ("b0", 1000), ("a236", 236)):
        assert lookup[name] == value and name in lookup
    assert "a300" not in lookup and "b-1" not in lookup
