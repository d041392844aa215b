"""Record an honest sumcheck from inside a Python prover with stepper's Recorder.

Scenario (invented demo data): Brackwater Ferries, sailing isle-of-quill-0740.
The gate scanner's boarding log must be a permutation of the booking ledger.
With a random alpha, that holds (with high probability over alpha) exactly when

    sum_x  M(x) / (alpha - ledger(x))  -  1 / (alpha - boarding(x))  =  0

where M(x) counts how often ledger(x) appears in the boarding log (all ones for
a permutation). This script proves that sum with a degree-2 sumcheck over
Goldilocks, binding the low index bit first, draws every challenge from
stepper's built-in Fiat-Shamir schedule, and records each message as it is sent:

    python samples/record_inprocess.py quill.sumtr [--force]
    stepper info quill.sumtr
    stepper check quill.sumtr

A passing check is evidence about this one run, not a soundness proof.
"""

from __future__ import annotations

import sys

import numpy as np

from stepper.verify.fiatshamir import SCHEDULE_NAME, Sha256Schedule
from stepper.field.field import get_field
from stepper.errors import StepperError
from stepper.transcript.recorder import Recorder

NUM_VARS = 4  # 16 tickets: small enough to read the transcript by eye
GOLDILOCKS = get_field(2**64 - 2**32 + 1)


def fold(table: np.ndarray, r: int) -> np.ndarray:
    """Bind the lowest variable to r: t(r, x') = t0 + r * (t1 - t0)."""
    f = GOLDILOCKS
    low, high = table[0::2], table[1::2]
    return f.vadd(low, f.vscale(f.vsub(high, low), r))


def round_poly(mult: np.ndarray, ledger_inv: np.ndarray, boarding_inv: np.ndarray) -> list[int]:
    """g(t) = sum_x' M(t,x') L(t,x') - B(t,x') at t = 0, 1, 2 (degree 2)."""
    f = GOLDILOCKS
    evals = []
    for t in (0, 1, 2):
        m, li, bi = (f.vadd(a[0::2], f.vscale(f.vsub(a[1::2], a[0::2]), t)) for a in (mult, ledger_inv, boarding_inv))
        evals.append(f.vsum(f.vsub(f.vmul(m, li), bi)))
    return evals


def prove(path: str, replace: bool = False) -> None:
    f = GOLDILOCKS
    rng = np.random.default_rng(740)
    ledger = rng.integers(10_000, 99_999, size=1 << NUM_VARS, dtype=np.uint64)  # ticket numbers sold
    boarding = rng.permutation(ledger)  # scan order at the gate
    schedule = Sha256Schedule()
    meta = {"label": "isle-of-quill-0740 boarding check", "sailing": "isle-of-quill-0740"}
    with Recorder(path, metadata=meta, replace=replace) as rec:  # an existing file only with --force
        schedule.observe(rec.field(f))
        schedule.observe(rec.schedule(SCHEDULE_NAME, label="brackwater-ferries"))
        alpha = int(rng.integers(1, 2**62))  # a real prover derives alpha from commitments
        mult = f.vec(np.ones(1 << NUM_VARS, dtype=np.uint64))
        ledger_inv = f.vinv(f.vsub(f.vec(np.full(1 << NUM_VARS, alpha, dtype=np.uint64)), f.vec(ledger)))
        boarding_inv = f.vinv(f.vsub(f.vec(np.full(1 << NUM_VARS, alpha, dtype=np.uint64)), f.vec(boarding)))
        claim = f.vsum(f.vsub(f.vmul(mult, ledger_inv), boarding_inv))  # 0 for a permutation
        schedule.observe(rec.instance("boarding-permutation", NUM_VARS, 2, claim))
        for _ in range(NUM_VARS):
            schedule.observe(rec.round(round_poly(mult, ledger_inv, boarding_inv)))
            r = schedule.challenge()
            rec.challenge(r)
            mult, ledger_inv, boarding_inv = (fold(t, r) for t in (mult, ledger_inv, boarding_inv))
        rec.final(f.sub(f.mul(int(mult[0]), int(ledger_inv[0])), int(boarding_inv[0])))
        rec.note("all 16 tickets scanned once; gate 2")
    print(f"{path}: recorded {NUM_VARS} rounds of 'boarding-permutation' (claimed sum {claim})")


if __name__ == "__main__":
    if sys.argv[1:2] in (["-h"], ["--help"]):  # not an output path
        print(__doc__)
        sys.exit(0)
    words = [w for w in sys.argv[1:] if w != "--force"]
    try:
        prove(words[0] if words else "isle-of-quill-0740.sumtr", replace="--force" in sys.argv[1:])
    except StepperError as err:  # an existing output without --force: one line, exit 2
        print(f"record_inprocess: {err}".replace("replace=True", "--force"), file=sys.stderr)  # this script's flag
        sys.exit(2)
