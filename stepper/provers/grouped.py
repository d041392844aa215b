"""Permutation check, grouped form: two sumchecks and a bucketed second layer.

Split the mu bits of sigma^-1 into L groups G_1..G_L of about c = mu/L bits and
let P_j(y) = prod over i in G_j of e_i(y) (see :mod:`stepper.provers.permcheck`).

* Layer 1 proves g~(alpha) = sum_y f(y) * P_1(y) ... P_L(y), degree L + 1,
  ending at a point rho; the prover then states v_j = P~_j(rho). Its glue: alpha
  as the value ``alpha`` before it, the openings of f and of each P_j at rho after
  it, and ``final_expr`` f * p1 * ... * pL over them.
* The verifier squeezes beta (the ``squeeze`` ``beta``, after the openings) and a
  ``batch`` event with it combines them: the layer-2 claim is
  sum_j beta^j v_j = sum_y eq(rho, y) * sum_j beta^j prod_{i in G_j} e~_i(y),
  degree c + 1, and its ``claim_expr`` p1 + beta * p2 + ... links it to the openings.
* After layer 2's rounds the prover opens the bit tables s_1..s_mu of sigma^-1 at
  its point r (s~_i(r) from the folded e~_i(r): one product each) and ``final_expr``
  is eq(rho) * sum_j beta^j prod_{i in G_j} (1 - alpha_i + (2 alpha_i - 1) s_i), with
  rho written point(NAME) of layer 1 when its name is an identifier, else restated
  as the value ``rho`` (then that it is layer 1's point is this prover's doing, not
  a check).
* Layer 2, round k: g_k(X) = A_k * eq(rho_k, X) * sum_j beta^j S_j(X) with
  S_j(X) = sum_z E_k(z) * prod_{i in G_j} e~_i(r_1..r_(k-1), X, z),
  A_k = prod_{i<k} eq(rho_i, r_i) and E_k(z) = eq(rho_(k+1..mu), z). Bucketed
  rounds group the z by the group's 2^k * c table bits
  (:mod:`stepper.provers.bucketing`), add the E_k weights inside a bucket and
  multiply once per bucket; from the switch-over round on (given, or chosen
  when buckets stop paying) the prover materialises the bound tables and
  continues directly. Both ways send identical round polynomials.

Per round and group a ``buckets`` event records the count, entries per
bucket, the bound 2^(2^k * c) as ``bound_log2`` and the remaining 2^(mu-k).
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Iterator, Mapping, Sequence

import numpy as np

from stepper.errors import UsageError
from stepper.field.poly import eq_eval, eq_table, mle_eval
from stepper.provers.bucketing import (
    MAX_MASK_BITS,
    GroupBuckets,
    code_buckets,
    code_masks,
    codes_of_inverse,
    segment_sum,
    split_groups,
    subset_sums,
)
from stepper.provers.counting import blocks
from stepper.provers.engine import InstanceRun, ProductSummand, ProofRun, WitnessInstance, final_point, run_tables
from stepper.provers.openings import send_openings
from stepper.provers.permcheck import PermStatement, permutation_point, select_table

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.provers.channel import ProofChannel
    from stepper.provers.counting import MulCounter

__all__ = ["MAX_SWITCH_ROUND", "SIZES_LIMIT", "bucket_products", "direct_products", "prove_permutation_grouped", "prove_group_products", "group_tables"]

MAX_SWITCH_ROUND = 5  # rounds 1..4 can be bucketed (see the look-up rule in prove_group_products)
SIZES_LIMIT = 4096  # buckets events list entries-per-bucket up to this many buckets
_FOLD_FAULTS = ("flip-order", "stale-challenge", "product-of-sums")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")  # an instance name an expression can cite as point(NAME)


def bucket_products(width: int, widest: int) -> int:
    """Products per bucket of a group of ``width`` bits in a bucketed round: the two
    end values of each bit's restricted polynomial, then width per evaluation point."""
    return 2 * width + (widest + 2) * width


def direct_products(width: int, widest: int) -> int:
    """Products per remaining entry of a group in a direct round (folding not included)."""
    return (widest + 2) * width


def group_tables(counter: MulCounter, codes: Sequence[np.ndarray], alpha: Sequence[Element],
                 groups: Sequence[Sequence[int]]) -> list[np.ndarray]:
    """P_j over the hypercube by look-up in the group's codes
    (:func:`~stepper.provers.bucketing.group_codes`): 2^c products per group, none per entry."""
    field = counter.field
    out = []
    for key, group in zip(codes, groups):
        values = []
        for code in range(1 << len(group)):
            acc: Element | None = None
            for pos, i in enumerate(group):
                factor = alpha[i] if code >> pos & 1 else field.sub(field.one, alpha[i])
                acc = factor if acc is None else counter.mul(acc, factor)
            values.append(acc)
        out.append(_gather(field.vec(values), key))
    return out


def prove_permutation_grouped(channel: ProofChannel, counter: MulCounter, statement: PermStatement, groups: int, *,
                              switch_round: int | None = None, name: str = "permutation",
                              form: str = "evals", witness: bool = True) -> ProofRun:
    """Both layers of the grouped permutation check with ``groups`` = L groups; the
    second layer's witness tables (mu + 1 of them) are built only when ``witness``."""
    field = counter.field
    mu = statement.num_vars
    if not 1 <= groups <= mu:
        raise UsageError(f"expected a group count between 1 and mu = {mu}, found {groups}")
    fault = channel.fault
    if fault is not None and fault.instance == 1 and fault.name in _FOLD_FAULTS:
        raise UsageError(f"fault {fault.name} acts on folded tables; aim it at the first instance of a grouped proof")
    if fault is not None and fault.instance == 0 and fault.name == "final-without-eq":
        raise UsageError("fault final-without-eq needs an eq term; the first instance of a grouped proof has none: "
                         "aim it at the second (--fault-instance 1)")
    if switch_round is not None and not 1 <= switch_round <= MAX_SWITCH_ROUND:
        raise UsageError(f"expected a switch-over round between 1 and {MAX_SWITCH_ROUND} (bucket look-up tables grow "
                         f"as 2^(2^k)), found {switch_round}")
    parts = split_groups(mu, groups)
    counter.phase(f"{name}/setup")
    alpha = permutation_point(channel, statement, "permutation-point")
    claim = counter.mle(field.vec(statement.g), alpha)
    codes = codes_of_inverse(statement.inverse(), parts)
    products = group_tables(counter, codes, alpha, parts)
    tables = {"f": field.vec(statement.f), **{f"p{j + 1}": t for j, t in enumerate(products)}}
    summand = ProductSummand(tuple(tables))
    channel.value("alpha", list(alpha))  # layer 1's glue: the point, then f and the P_j opened at rho
    run1, folded = run_tables(channel, counter, name, tables, summand, claim, form=form,  # type: ignore[arg-type]
                              glue={"final_expr": " * ".join(tables)})
    rho = list(run1.challenges)
    honest_fold = fault is None or fault.instance != 0 or fault.name not in _FOLD_FAULTS
    terms = [field.vlist(folded[f"p{j + 1}"])[0] if honest_fold else mle_eval(field, products[j], rho)
             for j in range(groups)]
    send_openings(channel, tables, {"f": field.vlist(folded["f"])[0],
                                    **{f"p{j + 1}": v for j, v in enumerate(terms)}}, rho)
    rho_ref = f"point({name})" if _NAME.fullmatch(name) else "rho"
    if rho_ref == "rho":  # no way to name layer 1's point in an expression: restate it (not checked)
        channel.value("rho", rho)
    beta: Element = channel.squeeze("beta")  # type: ignore[assignment]  # drawn after the openings it batches
    channel.batch(beta, terms, [f"p{j + 1} at the first instance's point" for j in range(groups)])
    counter.phase(f"{name}/groups/setup")
    powers = [field.one]
    for _ in range(1, groups):
        powers.append(counter.mul(powers[-1], beta))
    claim2 = field.zero
    for pw, v in zip(powers, terms):
        claim2 = field.add(claim2, counter.mul(pw, v))
    del folded  # one entry per table left; the layer-2 rounds need the memory more
    without_eq = fault is not None and fault.instance == 1 and fault.name == "final-without-eq"
    glue = {"claim_expr": " + ".join(_power_term(j, f"p{j + 1}") for j in range(groups)),
            "final_expr": _layer2_final_expr(parts, None if without_eq else rho_ref)}
    run2 = prove_group_products(channel, counter, f"{name}/groups", codes, alpha, parts, rho, powers, claim2,
                                switch_round=switch_round, form=form, glue=glue)
    kept = (WitnessInstance(name, tables, summand.combine()),
            _layer2_witness(field, run2.name, codes, alpha, parts, rho, powers)) if witness else ()
    return ProofRun((run1, run2), kept, counter.per_phase())


def prove_group_products(channel: ProofChannel, counter: MulCounter, name: str, codes: Sequence[np.ndarray],
                         alpha: Sequence[Element], parts: Sequence[Sequence[int]], rho: Sequence[Element],
                         powers: Sequence[Element], claim: Element, *, switch_round: int | None = None,
                         form: str = "evals", glue: Mapping[str, str] | None = None) -> InstanceRun:
    """Layer 2: sum_y eq(rho, y) * sum_j powers[j] * prod_{i in G_j} e~_i(y) = claim, the
    bits of sigma^-1 given as each group's codes. Rounds before ``switch_round`` are
    bucketed (None: while buckets pay off). After the final value the prover opens the bit
    tables s_1..s_mu at the challenge point (``glue``: the instance's claim_expr and final_expr)."""
    field = counter.field
    mu = len(rho)
    widest = max(len(g) for g in parts)
    degree = widest + 1
    channel.start_instance(name, mu, degree, claim, form=form, **(glue or {}))
    counter.phase(f"{name}/setup")
    one = field.one
    low = [field.sub(one, a) for a in alpha]  # e_i where the bit is 0
    slope = [field.sub(field.add(a, a), one) for a in alpha]  # e_i(1) - e_i(0)
    weights = counter.eq_table(rho[1:])  # E_1
    bound_eq = field.vec([one])  # eq(r_1..r_(k-1), b') over b'
    prefix = one
    challenges: list[Element] = []
    round_mults: list[int] = []
    tables: list[np.ndarray] | None = None
    for k in range(1, mu + 1):
        counter.phase(f"{name}/round {k}")
        before = counter.total
        half = 1 << (mu - k)
        sums: list[list[Element]] | None = None
        width = 1 << (k - 1)
        # bucket round k only while round k + 1 could still materialise the tables by look-up
        if tables is None and 2 * width <= MAX_MASK_BITS and (switch_round is None or k < switch_round):
            subset = subset_sums(field, bound_eq)
            occupancy = [code_buckets(cj, len(g), k) for g, cj in zip(parts, codes)]
            bucket_cost = sum(o.count * bucket_products(len(g), widest) for o, g in zip(occupancy, parts))
            direct_cost = sum(half * (direct_products(len(g), widest) + len(g)) for g in parts)
            paying = switch_round is not None or bucket_cost < direct_cost
            for j, (o, g) in enumerate(zip(occupancy, parts)):
                if o.count <= SIZES_LIMIT:
                    channel.buckets(k, j, o.count, sorted(o.sizes.tolist(), reverse=True), (1 << k) * len(g), half,
                                    used=paying)
                else:
                    channel.buckets(k, j, o.count, None, (1 << k) * len(g), half, used=paying,
                                    sizes_summary=_size_summary(o.sizes))
            if paying:
                sums = [_bucket_sums(counter, o, g, subset, weights, low, slope, degree, width)
                        for o, g in zip(occupancy, parts)]
        if sums is None:
            if tables is None:
                tables = _materialise(counter, codes, parts, bound_eq, low, slope, k)
            sums = _direct_sums(counter, tables, parts, weights, degree)
        rk = rho[k - 1]
        eq_x, eq_step = field.sub(one, rk), field.sub(field.add(rk, rk), one)  # eq(rho_k, X) at X = 0, 1, ...
        evals = []
        for x in range(degree + 1):
            total = field.zero
            for pw, s in zip(powers, sums):
                total = field.add(total, counter.mul(pw, s[x]))
            evals.append(counter.mul(prefix, counter.mul(eq_x, total)))
            eq_x = field.add(eq_x, eq_step)
        r = channel.send_round(evals)
        challenges.append(r)
        twice = counter.mul(rk, r)
        prefix = counter.mul(prefix, field.add(field.sub(field.sub(one, rk), r), field.add(twice, twice)))
        if tables is not None:  # the materialised tables are ours: fold them in place
            tables = [counter.fold(t, r, "low-first", in_place=True) for t in tables]
        elif k < mu:
            high = counter.vscale(bound_eq, r)
            bound_eq = np.concatenate([field.vsub(bound_eq, high), high])
        if k < mu:
            weights = _pair_sums(field, weights)
        round_mults.append(counter.total - before)
    counter.phase(f"{name}/final")
    point = final_point(challenges, "low-first", channel)
    if tables is not None and list(point) == challenges:  # the folded tables hold e~_i(r): no oracle needed
        bound = [field.vlist(t)[0] for t in tables]
    else:  # ask the oracle for the bits of sigma^-1 (the verifier's work, not counted)
        bits = _bit_planes(codes, parts)
        bound = [field.add(low[i], field.mul(slope[i], mle_eval(field, select_table(field, bits[i], field.zero, one),
                                                                   point))) for i in range(mu)]
    final = _final_value(field, bound, parts, rho, powers, point)
    channel.final(final)
    counter.phase(f"{name}/openings")
    if tables is not None:  # s~_i(r) from the folded e~_i(r) = (1 - alpha_i) + (2 alpha_i - 1) s~_i(r): one product
        ends = [_bit_opening(counter, field.vlist(t)[0], low[i], slope[i], codes, parts, i, challenges)
                for i, t in enumerate(tables)]
    else:  # every round bucketed: eq(r, .) from the bound eq table, then s~_i(r) adds it where bit i is set
        high = counter.vscale(bound_eq, challenges[-1])
        full_eq = np.concatenate([field.vsub(bound_eq, high), high])
        ends = [field.vsum(full_eq[b.astype(bool)]) for b in _bit_planes(codes, parts)]
    send_openings(channel, _BitTables(field, codes, parts), {f"s{i + 1}": v for i, v in enumerate(ends)},
                  challenges, earlier_points=[tuple(rho)])
    return InstanceRun(name, claim, tuple(challenges), final, tuple(round_mults))


def _bit_opening(counter: MulCounter, bound: Element, low: Element, slope: Element, codes: Sequence[np.ndarray],
                 parts: Sequence[Sequence[int]], bit: int, point: Sequence[Element]) -> Element:
    field = counter.field
    if field.is_zero(slope):  # alpha_i = 1/2: e_i is constant, so fold the bit table itself
        return counter.mle(_BitTables(field, codes, parts)[f"s{bit + 1}"], point)
    return counter.mul(field.sub(bound, low), field.inv(slope))


class _BitTables(Mapping[str, np.ndarray]):
    """The bit tables s_1..s_mu as field vectors, by name, each made only when asked for
    (an opening fault re-evaluates one; an honest run needs none of them)."""

    def __init__(self, field: Field, codes: Sequence[np.ndarray], parts: Sequence[Sequence[int]]) -> None:
        self._field, self._codes, self._parts = field, codes, parts
        self._names = [f"s{i + 1}" for group in parts for i in group]

    def __getitem__(self, name: str) -> np.ndarray:
        bit = int(name[1:]) - 1
        for code, group in zip(self._codes, self._parts):
            if bit in group:
                plane = (code >> code.dtype.type(group.index(bit))) & 1
                return self._field.vec(plane.astype(np.int64))
        raise KeyError(name)

    def __iter__(self) -> Iterator[str]:
        return iter(sorted(self._names, key=lambda n: int(n[1:])))

    def __len__(self) -> int:
        return len(self._names)


def _power_term(j: int, term: str) -> str:
    """beta^j * term, written plainly for j = 0 and 1."""
    return term if j == 0 else f"beta * {term}" if j == 1 else f"beta^{j} * {term}"


def _layer2_final_expr(parts: Sequence[Sequence[int]], rho_ref: str | None) -> str:
    """eq(rho) * sum_j beta^j prod_{i in G_j} e_i over the openings s_i, with
    e_i = 1 - alpha_i + (2 alpha_i - 1) s_i (``rho_ref`` None: the eq term left out)."""
    groups = [" * ".join(f"(1 - alpha[{i}] + (2 * alpha[{i}] - 1) * s{i + 1})" for i in group) for group in parts]
    inner = " + ".join(_power_term(j, g) for j, g in enumerate(groups))
    return inner if rho_ref is None else f"eq({rho_ref}) * ({inner})"


def _bucket_sums(counter: MulCounter, occ: GroupBuckets, group: Sequence[int], subset: np.ndarray,
                 weights: np.ndarray, low: Sequence[Element], slope: Sequence[Element], degree: int,
                 width: int) -> list[Element]:
    """S_j(0..degree) from the buckets: eq weights added per bucket, products per bucket."""
    field = counter.field
    bucket_weight = segment_sum(field, weights, occ.inverse(), occ.count)
    mask = np.uint64((1 << width) - 1)
    starts, steps = [], []
    rows = occ.rows()
    for pos, i in enumerate(group):
        row = rows[:, pos]
        a0 = field.vadd(counter.vscale(subset[(row & mask).astype(np.int64)], slope[i]), _fill(field, low[i], occ.count))
        a1 = field.vadd(counter.vscale(subset[(row >> np.uint64(width)).astype(np.int64)], slope[i]),
                        _fill(field, low[i], occ.count))
        starts.append(a0)
        steps.append(field.vsub(a1, a0))
    return _point_sums(counter, starts, steps, bucket_weight, degree)


def _direct_sums(counter: MulCounter, tables: Sequence[np.ndarray], parts: Sequence[Sequence[int]],
                 weights: np.ndarray, degree: int) -> list[list[Element]]:
    """S_j(0..degree) for every group, entry by entry from the bound tables of the bits
    (``tables[i]`` for bit i), in blocks of entry pairs whose sums add up."""
    field = counter.field
    total: list[list[Element]] | None = None
    for part in blocks(len(weights)):
        sums = []
        for group in parts:
            starts = [tables[i][0::2][part] for i in group]
            steps = [field.vsub(tables[i][1::2][part], s) for i, s in zip(group, starts)]
            sums.append(_point_sums(counter, starts, steps, weights[part], degree))
        total = sums if total is None else [[field.add(a, b) for a, b in zip(t, s)] for t, s in zip(total, sums)]
    assert total is not None  # at least one pair remains in every round
    return total


def _pair_sums(field: Field, weights: np.ndarray) -> np.ndarray:
    """E_(k+1)(z) = E_k(2z) + E_k(2z + 1), written over the first half of ``weights`` (ours):
    block b reads entries at or after the ones it writes, and is computed before it is written."""
    half = len(weights) // 2
    out = weights[:half]
    for part in blocks(half):
        out[part] = field.vadd(weights[0::2][part], weights[1::2][part])
    return out


def _point_sums(counter: MulCounter, starts: list[np.ndarray], steps: list[np.ndarray], weights: np.ndarray,
                degree: int) -> list[Element]:
    field = counter.field
    cur = list(starts)
    out = []
    for x in range(degree + 1):
        if x:
            cur = [field.vadd(c, s) for c, s in zip(cur, steps)]
        out.append(field.vsum(counter.vmul(counter.product(cur), weights)))
    return out


def _materialise(counter: MulCounter, codes: Sequence[np.ndarray], parts: Sequence[Sequence[int]],
                 bound_eq: np.ndarray, low: Sequence[Element], slope: Sequence[Element], round_: int) -> list[np.ndarray]:
    """e~_i(r_1..r_(k-1), t, z) for every bit i, indexed t + 2z, by look-up where that is cheaper."""
    field = counter.field
    subset = subset_sums(field, bound_eq)
    masks_of: dict[int, np.ndarray] = {}
    for code, group in zip(codes, parts):
        masks_of.update(zip(group, code_masks(code, len(group), round_)))
    out = []
    for i in range(len(masks_of)):
        masks = masks_of.pop(i)
        if len(subset) <= len(masks):
            values = field.vadd(counter.vscale(subset, slope[i]), _fill(field, low[i], len(subset)))
            out.append(_gather(values, masks))
        else:
            picked = _gather(subset, masks)
            out.append(field.vadd(counter.vscale(picked, slope[i]), _fill(field, low[i], len(masks))))
    return out


def _gather(table: np.ndarray, index: np.ndarray) -> np.ndarray:
    """table[index] for a narrow unsigned ``index``, converted to indices a block at a time."""
    out = np.empty((len(index), *table.shape[1:]), dtype=table.dtype)
    for part in blocks(len(index)):
        out[part] = table[index[part].astype(np.intp)]
    return out


def _bit_planes(codes: Sequence[np.ndarray], parts: Sequence[Sequence[int]]) -> list[np.ndarray]:
    """The bit tables s_i (uint8, 0 or 1) back out of the groups' codes, by bit index i."""
    planes: dict[int, np.ndarray] = {}
    for code, group in zip(codes, parts):
        for pos, i in enumerate(group):
            planes[i] = ((code >> code.dtype.type(pos)) & 1).astype(np.uint8)
    return [planes[i] for i in range(len(planes))]


def _size_summary(sizes: np.ndarray) -> dict[str, object]:
    """Entries per bucket in brief, for rounds with more than SIZES_LIMIT buckets."""
    ordered = np.sort(sizes)
    bins = np.bincount(np.floor(np.log2(ordered)).astype(np.int64))
    return {"smallest": int(ordered[0]), "median": int(ordered[len(ordered) // 2]), "largest": int(ordered[-1]),
            "singletons": int(np.count_nonzero(ordered == 1)), "histogram_log2": [int(b) for b in bins]}


def _fill(field: Field, value: Element, n: int) -> np.ndarray:
    return np.repeat(field.vec([value]), n, axis=0)


def _final_value(field: Field, bound: Sequence[Element], parts: Sequence[Sequence[int]], rho: Sequence[Element],
                 powers: Sequence[Element], point: Sequence[Element]) -> Element:
    """eq(rho, point) * sum_j powers[j] prod_{i in G_j} e~_i(point), given e~_i(point) in ``bound``:
    the value a verifier with oracle access to the bits of sigma^-1 computes (not counted)."""
    total = field.zero
    for pw, group in zip(powers, parts):
        acc = pw
        for i in group:
            acc = field.mul(acc, bound[i])
        total = field.add(total, acc)
    return field.mul(eq_eval(field, rho, point), total)


def _layer2_witness(field: Field, name: str, codes: Sequence[np.ndarray], alpha: Sequence[Element],
                    parts: Sequence[Sequence[int]], rho: Sequence[Element], powers: Sequence[Element]) -> WitnessInstance:
    """Tables eq, e1..e_mu (and eq_b_j = beta^j * eq over an extension) with their `combine`."""
    one = field.one
    eq = eq_table(field, rho)
    tables: dict[str, np.ndarray] = {"eq": eq}
    for i, b in enumerate(_bit_planes(codes, parts)):
        tables[f"e{i + 1}"] = select_table(field, b, field.sub(one, alpha[i]), alpha[i])
        tables[f"s{i + 1}"] = field.vec(b.astype(np.int64))  # opened after the instance; not in the combine
    inner, outer = [], []
    for j, (pw, group) in enumerate(zip(powers, parts)):
        product = " * ".join(f"e{i + 1}" for i in group)
        if j == 0:
            inner.append(product)
        elif field.is_extension:  # beta^j is no integer: scale eq instead
            tables[f"eq_b{j}"] = field.vscale(eq, pw)
            outer.append(f"eq_b{j} * {product}")
        else:
            inner.append(f"{pw} * {product}")
    return WitnessInstance(name, tables, " + ".join([f"eq * ({' + '.join(inner)})", *outer]))
