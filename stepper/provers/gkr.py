"""GKR for a product circuit: the grand product of a table, layer by layer.

The circuit is a binary tree of multiplications over a table v of 2^n entries.
Layer n is v; layer k (2^k entries) is V_k(x) = V_(k+1)(x, 0) * V_(k+1)(x, 1):
the pair differs in the last variable, so with lo_(k+1) and hi_(k+1) the low and
high halves of layer k+1,

    V_k(x) = lo_(k+1)(x) * hi_(k+1)(x)  and  V~_(k+1)(x, c) = lo~_(k+1)(x) + c * (hi~_(k+1)(x) - lo~_(k+1)(x)).

The prover states layer 1 (the circuit's two outputs; their product is the
grand product) as the ``value`` ``outputs``. Then for k = 1 .. n-1:

* the verifier draws the coefficient c_k (a ``squeeze``); the layer's point is
  r_k = (s_(k-1), c_k) (r_1 = (c_1)), where s_(k-1) is the challenge point of
  layer k-1, and the prover restates it as the ``value`` ``r<k>``;
* the claim V~_k(r_k) is linked to what came before by ``claim_expr``: the two
  outputs for k = 1, else the openings of lo_k and hi_k at s_(k-1) joined by c_k;
* one sumcheck of degree 3 proves V~_k(r_k) = sum_x eq(r_k, x) lo_(k+1)(x) hi_(k+1)(x),
  ending at s_k; the prover opens lo_(k+1) and hi_(k+1) at s_k and ``final_expr``
  says the reduced claim is eq(r_k, s_k) * lo~_(k+1)(s_k) * hi~_(k+1)(s_k).

The last layer's openings are of the two halves of v itself (checked against
the witness). The expression language has no concatenation, so the point r_k is
sent as a value: the link check ties the claim to c_k and the openings, but
that r_k really is (s_(k-1), c_k) is a fact of this prover, not something a
replay checks.

Faults of item "glue" act here: ``stale-coefficient`` (the claim of the faulted
layer built with the previous layer's c), the opening faults of
:mod:`stepper.provers.openings`, and ``final-without-eq`` (the layer's
``final_expr`` written without its eq term). Pure apart from the channel.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from stepper.errors import UsageError
from stepper.provers.engine import InstanceRun, ProductSummand, ProofRun, WitnessInstance, run_tables
from stepper.provers.openings import send_openings

if TYPE_CHECKING:
    from stepper.field.field import Element
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["product_layers", "prove_grand_product", "MIN_GKR_VARS"]

MIN_GKR_VARS = 3  # two layer sumchecks at least: the layers' link is the point of this prover


def product_layers(counter: MulCounter, table: np.ndarray) -> list[np.ndarray]:
    """[V_0, V_1, ..., V_n]: V_n = ``table``, V_k = V_(k+1)[:2^k] * V_(k+1)[2^k:]."""
    n = len(table).bit_length() - 1
    layers = [table]
    for k in range(n - 1, -1, -1):
        upper = layers[0]
        half = 1 << k
        layers.insert(0, counter.vmul(upper[:half], upper[half:]))
    return layers


def prove_grand_product(channel: ProofChannel, counter: MulCounter, table: np.ndarray, *,
                        name: str = "product", form: str = "evals") -> ProofRun:
    """Prove the product of ``table`` (2^n entries, n >= 3) through n-1 linked layer sumchecks."""
    field = counter.field
    n = len(table).bit_length() - 1
    if len(table) != 1 << n or n < MIN_GKR_VARS:
        raise UsageError(f"expected a table of 2^n entries with n >= {MIN_GKR_VARS} for a GKR product "
                         f"circuit, found {len(table)} entries")
    fault = channel.fault
    if fault is not None and fault.name == "stale-coefficient" and fault.instance == 0:
        raise UsageError("fault stale-coefficient needs an earlier coefficient; aim it at layer 2 or later "
                         "(--fault-instance 1 or more)")
    counter.phase(f"{name}/setup")
    table = field.vec(table) if field.is_extension and table.ndim == 1 else table
    layers = product_layers(counter, table)
    outputs = field.vlist(layers[1])
    product = field.vlist(layers[0])[0]
    channel.note(f"grand product of {len(table)} entries: {field.fmt(product)} = outputs[0] * outputs[1]")
    channel.value(f"{name}.outputs", outputs)
    runs: list[InstanceRun] = []
    witness: list[WitnessInstance] = []
    coefficients: list[Element] = []
    opened: dict[str, Element] = {}
    earlier: list[tuple[Element, ...]] = []
    prev_point: tuple[Element, ...] = ()
    for k in range(1, n):
        counter.phase(f"{name}/layer{k}/link")
        index = len(runs)
        c = channel.squeeze(f"{name}.c{k}")
        coefficients.append(c)  # type: ignore[arg-type]
        point = (*prev_point, c)
        channel.value(f"{name}.r{k}", list(point))  # type: ignore[arg-type]
        stale = fault is not None and fault.name == "stale-coefficient" and fault.instance == index
        used = coefficients[-2] if stale else c
        if k == 1:
            lo_v, hi_v = outputs
            claim_expr = f"(1 - {name}.c1) * {name}.outputs[0] + {name}.c1 * {name}.outputs[1]"
        else:
            lo_v, hi_v = opened[f"v{k}.lo"], opened[f"v{k}.hi"]
            claim_expr = f"{name}.v{k}.lo + {name}.c{k} * ({name}.v{k}.hi - {name}.v{k}.lo)"
        claim = field.add(lo_v, counter.mul(used, field.sub(hi_v, lo_v)))  # type: ignore[arg-type]
        upper = layers[k + 1]
        half = 1 << k
        lo_name, hi_name = f"v{k + 1}.lo", f"v{k + 1}.hi"
        tables = {"eq": counter.eq_table(point), lo_name: upper[:half], hi_name: upper[half:]}  # type: ignore[arg-type]
        inner = f"{name}.{lo_name} * {name}.{hi_name}"
        without_eq = fault is not None and fault.name == "final-without-eq" and fault.instance == index
        final_expr = inner if without_eq else f"eq({name}.r{k}) * {inner}"
        summand = ProductSummand(("eq", lo_name, hi_name))
        run, folded = run_tables(channel, counter, f"{name}.layer{k}", tables, summand, claim, form=form,  # type: ignore[arg-type]
                                 glue={"claim_expr": claim_expr, "final_expr": final_expr})
        counter.phase(f"{name}/layer{k}/openings")
        halves = {lo_name: tables[lo_name], hi_name: tables[hi_name]}
        ends = {t: field.vlist(folded[t])[0] for t in halves}
        opened = send_openings(channel, halves, ends, run.challenges, prefix=f"{name}.",
                               earlier_points=earlier)
        earlier.append(tuple(run.challenges))
        prev_point = tuple(run.challenges)
        runs.append(run)
        witness.append(WitnessInstance(f"{name}.layer{k}", tables, summand.combine()))
    return ProofRun(tuple(runs), tuple(witness), counter.per_phase())
