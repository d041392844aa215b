"""A stand-alone prover that only writes JSON lines: record it with `stepper record`.

Scenario (invented demo data): Brackwater Ferries, sailing isle-of-quill-0740,
8 tickets. The gate scanner's boarding log g must be the booking ledger f in
scan order: g(x) = f(sigma(x)). The prover shows sum_y f(y) * eq(a, sigma^-1(y))
= g~(a) for a point a (the direct permutation check, degree mu + 1 = 4), with
plain Python integers over BabyBear and nothing from stepper: it appends one
JSON object per event to the file named by $STEPPER_EVENTS, as a prover in
any language would.

    stepper record -o boarding.sumtr -- python samples/boarding_jsonl_prover.py
    stepper record -o boarding-bug.sumtr -- python samples/boarding_jsonl_prover.py --bug
    stepper check boarding-bug.sumtr

With --bug the prover shifts value between g(0) and g(1) of round 2: the sum
still checks in round 2 and the lie surfaces in round 3. Its challenges come
from its own hash chain (no stepper schedule), so `check` verifies sums,
degrees and the final value but cannot re-derive them.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
from typing import Any

P = 2**31 - 2**27 + 1  # BabyBear
MU = 3
TICKETS = [f"IOQ0740-{n:06d}-{'PCPBPCPP'[n % 8]}" for n in range(1040, 1048)]
SCAN_OF = [5, 2, 7, 0, 3, 6, 1, 4]  # boarding[x] = TICKETS[SCAN_OF[x]]


def value(code: str) -> int:
    return int.from_bytes(hashlib.sha256(code.encode()).digest(), "little") % P


def draw(state: Any, tag: bytes) -> int:
    state.update(tag)
    return int.from_bytes(state.digest()[:16], "little") % P


def main(events_path: str, bug: bool) -> None:
    f = [value(t) for t in TICKETS]
    g = [f[s] for s in SCAN_OF]
    inverse = [0] * 8
    for x, s in enumerate(SCAN_OF):
        inverse[s] = x
    state = hashlib.sha256(b"brackwater/boarding/" + json.dumps(g).encode())
    a = [draw(state, b"point") for _ in range(MU)]
    # tables: f and e_i(y) = a_i if bit i of sigma^-1(y) else 1 - a_i
    tables = [f] + [[a[i] if inverse[y] >> i & 1 else (1 - a[i]) % P for y in range(8)] for i in range(MU)]
    claim = 0
    for x in range(8):  # g~(a) by the Lagrange sum
        w = 1
        for i in range(MU):
            w = w * (a[i] if x >> i & 1 else 1 - a[i]) % P
        claim = (claim + g[x] * w) % P
    with open(events_path, "a", encoding="utf-8") as out:
        def emit(event: dict) -> None:
            out.write(json.dumps(event) + "\n")
            out.flush()

        emit({"type": "field", "name": "babybear"})
        emit({"type": "instance", "name": "boarding-permutation", "num_vars": MU, "degree": MU + 1, "claim": claim})
        for k in range(1, MU + 1):
            evals = []
            for t in range(MU + 2):
                total = 0
                for j in range(0, len(tables[0]), 2):
                    prod = 1
                    for tab in tables:
                        prod = prod * (tab[j] + t * (tab[j + 1] - tab[j])) % P
                    total += prod
                evals.append(total % P)
            if bug and k == 2:
                evals[0], evals[1] = (evals[0] + 1) % P, (evals[1] - 1) % P
            emit({"type": "round", "evals": evals})
            state.update(json.dumps(evals).encode())
            r = draw(state, b"challenge")
            emit({"type": "challenge", "value": r})
            tables = [[(tab[j] + r * (tab[j + 1] - tab[j])) % P for j in range(0, len(tab), 2)] for tab in tables]
        final = 1
        for tab in tables:
            final = final * tab[0] % P
        emit({"type": "final", "value": final})


if __name__ == "__main__":
    path = os.environ.get("STEPPER_EVENTS")
    if not path:
        sys.exit("set STEPPER_EVENTS (run me under `stepper record -o OUT -- python samples/boarding_jsonl_prover.py`)")
    main(path, "--bug" in sys.argv[1:])
