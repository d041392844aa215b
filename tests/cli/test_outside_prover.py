"""The three interop contracts tried from outside: a prover that does not import stepper
(plain Python integers, brute force over the whole cube) is recorded with `stepper record`
and checked with `stepper check --json [--witness]`; every expected value is computed here
from the contracts' words alone, not by stepper.

The proof chains three instances over BabyBear: a zero-check of c = a*b weighted by eq(tau, x)
bound high-first (so its challenge point is its challenges reversed), whose final_expr names
its openings; a linked instance whose claim_expr is built from those openings and a squeeze;
an eq-factored instance whose eq_point names a squeezed list. The witness holds each table with
index bit j as x_(j+1).
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

from stepper.cli.main import main

P = 2**31 - 2**27 + 1  # BabyBear (common practice, no source)

PROVER = textwrap.dedent('''
    import itertools, json, os, random, sys
    P = 2**31 - 2**27 + 1
    lie = sys.argv[1]
    rng = random.Random(7)
    out = open(os.environ["STEPPER_EVENTS"], "a")
    def emit(event):
        out.write(json.dumps(event) + "\\n"); out.flush()
    def eq(u, v):
        r = 1
        for x, y in zip(u, v):
            r = r * (x * y + (1 - x) * (1 - y)) % P
        return r
    def mle(t, point):  # index bit j is x_(j+1)
        mu = len(point)
        return sum(v * eq([(i >> j) & 1 for j in range(mu)], point) for i, v in enumerate(t)) % P
    def lagrange(ys, r):
        acc = 0
        for i in range(len(ys)):
            num, den = 1, 1
            for j in range(len(ys)):
                if j != i:
                    num, den = num * (r - j) % P, den * (i - j) % P
            acc = (acc + ys[i] * num * pow(den, -1, P)) % P
        return acc
    def sumcheck(name, tables, summand, degree, order, keys, eq_w=None):
        """Brute force: round k's values at 0..degree (or q_k at 0..degree-1 when eq_w is set)."""
        mu = len(next(iter(tables.values()))).bit_length() - 1
        var = (lambda k: k - 1) if order == "low-first" else (lambda k: mu - k)
        def total(fixed, weight):
            s = 0
            for bits in itertools.product([0, 1], repeat=mu - len(fixed)):
                free = iter(bits)
                x = [fixed[v] if v in fixed else next(free) for v in range(mu)]
                s += weight(x) * summand({n: mle(t, x) for n, t in tables.items()})
            return s % P
        full = lambda x: eq(eq_w, x) if eq_w else 1
        claim = total({}, full)
        emit({"type": "instance", "name": name, "num_vars": mu, "degree": degree, "claim": str(claim),
              "order": order, **keys})
        fixed = {}
        for k in range(1, mu + 1):
            if eq_w:  # q_k: the sum without the eq factors of the bound and the current variable
                rest = lambda x, k=k: eq([eq_w[var(i)] for i in range(k + 1, mu + 1)], [x[var(i)] for i in range(k + 1, mu + 1)])
                vals = [total({**fixed, var(k): t}, rest) for t in range(degree)]
            else:
                vals = [total({**fixed, var(k): t}, full) for t in range(degree + 1)]
            emit({"type": "round", "evals": [str(v) for v in vals]})
            r = rng.randrange(P)
            fixed[var(k)] = r
            emit({"type": "challenge", "value": hex(r)})
        return [fixed[v] for v in range(mu)]
    tau = [rng.randrange(P) for _ in range(3)]
    a = [rng.randrange(P) for _ in range(8)]; b = [rng.randrange(P) for _ in range(8)]
    c = [x * y % P for x, y in zip(a, b)]
    emit({"type": "field", "name": "babybear"})
    emit({"type": "value", "name": "tau", "value": tau})
    e = [eq(tau, [(i >> j) & 1 for j in range(3)]) for i in range(8)]
    point = sumcheck("zero", {"a": a, "b": b, "c": c, "e": e}, lambda v: v["e"] * (v["a"] * v["b"] - v["c"]), 3,
                     "high-first", {"final_expr": "eq(tau) * (a*b - c)"})
    opened = {n: mle(t, point) for n, t in (("a", a), ("b", b), ("c", c))}
    if lie == "opening":
        opened["c"] = (opened["c"] + 1) % P
    for n, v in opened.items():
        emit({"type": "opening", "name": n, "value": v})
    beta, w = rng.randrange(P), [rng.randrange(P) for _ in range(3)]
    emit({"type": "squeeze", "name": "beta", "value": str(beta)})
    emit({"type": "squeeze", "name": "w", "value": [str(x) for x in w]})
    target = (opened["a"] + beta * opened["b"]) % P
    d = [rng.randrange(P) for _ in range(3)]; d.append((target - sum(d)) % P)
    sumcheck("link", {"d": d}, lambda v: v["d"], 1, "low-first", {"claim_expr": "a + beta*b"})
    g = [rng.randrange(P) for _ in range(8)]; h = [rng.randrange(P) for _ in range(8)]
    sumcheck("factored", {"g": g, "h": h}, lambda v: v["g"] * v["h"], 3, "high-first",
             {"form": "eq-factored", "eq_point": "w"}, eq_w=w)
    e3 = [eq(w, [(i >> j) & 1 for j in range(3)]) for i in range(8)]
    json.dump({"instances": [
        {"name": "zero", "tables": {"a": a, "b": b, "c": c, "e": e}, "combine": "e*(a*b - c)"},
        {"name": "link", "tables": {"d": d}, "combine": "d"},
        {"name": "factored", "tables": {"g": g, "h": h, "e3": e3}, "combine": "e3*g*h"}]},
        open(sys.argv[2], "w"))
''')


def record(tmp_path: Path, lie: str) -> tuple[Path, Path]:
    script = tmp_path / "prover.py"
    script.write_text(PROVER)
    out, witness = tmp_path / f"{lie}.sumtr", tmp_path / f"{lie}.witness.json"
    proc = subprocess.run([sys.executable, "-m", "stepper", "record", "-o", str(out), "--",
                           sys.executable, str(script), lie, str(witness)],
                          capture_output=True, text=True, cwd=Path(__file__).parents[2])
    assert proc.returncode == 0, proc.stderr
    return out, witness


def check(capsys, *argv: str) -> tuple[int, dict]:
    code = main(["check", *argv, "--json"])
    return code, json.loads(capsys.readouterr().out)


def test_an_honest_chained_proof_from_outside_is_accepted_with_and_without_its_witness(tmp_path, capsys):
    out, witness = record(tmp_path, "none")
    code, report = check(capsys, str(out))
    assert code == 0 and report["verdict"] == "accept" and report["first_failure"] is None
    assert [i["name"] for i in report["instances"]] == ["zero", "link", "factored"]
    assert [len(i["rounds"]) for i in report["instances"]] == [3, 2, 3]
    assert all(r["status"] == "pass" for i in report["instances"] for r in i["rounds"])
    code, report = check(capsys, str(out), "--witness", str(witness))
    assert code == 0 and report["root_cause"] is None


def test_a_wrong_opening_fails_the_evaluation_and_the_witness_names_it(tmp_path, capsys):
    # c's opening is one more than c~ at the point: final_expr eq(tau)*(a*b - c) then differs from
    # the reduced claim by eq(tau, point), the evaluation check at the instance's last round (3)
    out, witness = record(tmp_path, "opening")
    code, report = check(capsys, str(out))
    failure = report["first_failure"]
    assert code == 1 and report["verdict"] == "reject"
    assert (failure["instance"], failure["instance_name"], failure["round"], failure["check"]) == (0, "zero", 3,
                                                                                                   "evaluation")
    assert (int(failure["expected"]) - int(failure["found"])) % P != 0
    code, report = check(capsys, str(out), "--witness", str(witness))
    cause = report["root_cause"]
    assert code == 1 and (cause["instance"], cause["check"], cause["name"]) == (0, "opening", "c")
    assert (int(cause["found"]) - int(cause["expected"])) % P == 1
