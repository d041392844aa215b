"""Find and classify the first divergence between two aligned transcripts.

Pure, used by :func:`stepper.compare.diff.compare`. The scan walks A's order and stops
at the first differing element; the classifier then tests, most specific
first, the explanations a person debugging two runs would try by hand:
a constant factor between the values (a Montgomery radix or any constant), a
step shifted by one round, challenges reversed, same polynomials with
different challenges (Fiat-Shamir drift) or a different polynomial after
identical challenges (prover arithmetic). Each test needs evidence from the
data (a constant factor must hold on at least two values or be a named
radix; a shift must line up at least one further round) so that a random
difference is never dressed up as a pattern. Glue (values, squeezes, openings,
links) is compared by :mod:`stepper.compare.glue_divergence`.
"""

from __future__ import annotations

from collections import Counter
from typing import Sequence

from stepper.compare.alignment import (
    Classification,
    Divergence,
    InstancePair,
    RoundPair,
    decoded_rounds,
    same_poly,
    value_label,
)
from stepper.compare.glue_divergence import claim_link, glue_divergence, link_keys_divergence
from stepper.field.field import Element, Field
from stepper.field.poly import lagrange_at
from stepper.diagnose.radix import constant_ratio, factor_name
from stepper.transcript.model import InstanceRecord, Transcript

__all__ = ["find_divergence"]

Found = tuple[Divergence | None, Classification, list[str]]


def find_divergence(a: Transcript, b: Transcript, pairs: Sequence[InstancePair]) -> Found:
    remarks: list[str] = []
    if a.field != b.field:
        div = Divergence("field", detail="field", a=a.field.describe(), b=b.field.describe())
        text = f"A is over {a.field.describe()} and B over {b.field.describe()}, so no element can be compared"
        if a.field.p == b.field.p:
            text += "; the prime agrees, only the extension differs"
        return div, Classification("different-fields", text + "."), remarks
    field = a.field
    if a.schedule != b.schedule:
        remarks.append(f"The schedule declarations differ: A {_schedule(a)}, B {_schedule(b)}.")
    before = glue_divergence(field, a.glue, b.glue, where="before the first instance")
    if before is not None:
        return before[0], before[1], remarks + before[2]
    order = _instance_order(field, a, b, pairs)
    if order is not None:
        inner = _scan(field, pairs)
        if inner[0] is None:
            remarks.append("Matched by name, every instance agrees round for round.")
        else:
            remarks.append(f"Matched by name, the first content divergence is at {inner[0].place()} ({inner[1].kind}).")
        return order[0], order[1], remarks + inner[2]
    div, cls, more = _scan(field, pairs)  # type: ignore[assignment]
    remarks.extend(more)
    if div is None and (a.completeness, b.completeness) != ("complete", "complete"):
        remarks.append(f"Completeness: A {a.completeness}, B {b.completeness}; the parts both sides hold agree.")
    return div, cls, remarks


def _schedule(t: Transcript) -> str:
    s = t.schedule
    return "none" if s is None else f"{s.name!r} label {s.label!r}" + (f" params {dict(s.params)}" if s.params else "")


def _instance_order(field: Field, a: Transcript, b: Transcript, pairs: Sequence[InstancePair]) -> Found | None:
    matched = [p.pairing for p in pairs if p.pairing.a is not None and p.pairing.b is not None]
    names_a = [i.name for i in a.instances]
    names_b = [i.name for i in b.instances]
    b_order = [p.b for p in matched]
    if matched and matched[0].by == "name" and b_order != sorted(b_order):  # type: ignore[type-var]
        k = next(k for k in range(min(len(names_a), len(names_b))) if names_a[k] != names_b[k])
        div = Divergence("instance", k, k, names_a[k], None, None, "instance order", names_a[k], names_b[k])
        text = (f"B holds the same instances in a different order (A: {', '.join(names_a)}; B: {', '.join(names_b)}); "
                "a prover and verifier that batch or chain claims in different orders disagree from here on.")
        return div, Classification("instance-order", text), []
    claims_a = [field.lift(i.start.claim) for i in a.instances]
    claims_b = [field.lift(i.start.claim) for i in b.instances]
    if claims_a == claims_b or Counter(claims_a) != Counter(claims_b):
        return None
    k = next(k for k in range(len(claims_a)) if claims_a[k] != claims_b[k])
    where = claims_b.index(claims_a[k])
    div = Divergence("claim", k, k, names_a[k], 0, None, "claim",
                     field.fmt(claims_a[k]), field.fmt(claims_b[k]))
    text = (f"B holds the same claimed sums in a different order (A's claim of instance #{k} is B's claim "
            f"of instance #{where}): the claims were ordered differently.")
    return div, Classification("instance-order", text), []


def _scan(field: Field, pairs: Sequence[InstancePair]) -> Found:
    """The first differing element across aligned pairs, classified."""
    remarks: list[str] = []
    only_b = sorted((p for p in pairs if p.a is None), key=lambda p: p.pairing.b or 0)
    for pair in pairs:
        ia, ib, p = pair.a, pair.b, pair.pairing
        earlier = [q for q in only_b if p.b is not None and (q.pairing.b or 0) < p.b]
        if earlier:  # B has an instance A lacks before this one: that comes first in the stream
            remarks.append(f"B's '{earlier[0].pairing.name}' stands before '{p.name}', so a later challenge "
                           "drift may stem from it.")
            pair, ia, ib, p = earlier[0], None, earlier[0].b, earlier[0].pairing
        if ia is None or ib is None:
            present = "A" if ia is not None else "B"
            div = Divergence("instance", p.a, p.b, p.name, None, None, "instance", *(
                (p.name, None) if ia is not None else (None, p.name)))
            return div, Classification(
                "extra-instance", f"{present} has instance '{p.name}' and the other side does not.",
                side="a" if ia is not None else "b"), remarks
        found = _scan_instance(field, pair)
        if found is not None:
            return found[0], found[1], remarks + found[2]
        if ia.buckets != ib.buckets:
            remarks.append(f"Instance '{p.name}': the bucket statistics differ although the proof agrees.")
    return None, Classification("identical", "Every instance, round, challenge and final value agrees."), remarks


def _div(pair: InstancePair, element: str, round_: int | None, index: int | None, detail: str | None,
         a: str | None, b: str | None) -> Divergence:
    p = pair.pairing
    return Divergence(element, p.a, p.b, p.name, round_, index, detail, a, b)


def _scan_instance(field: Field, pair: InstancePair) -> Found | None:
    ia, ib = pair.a, pair.b
    assert ia is not None and ib is not None
    sa, sb = ia.start, ib.start
    for key in ("num_vars", "degree", "order", "form"):
        va, vb = getattr(sa, key), getattr(sb, key)
        if va != vb:
            return _statement(field, pair, key, va, vb)
    where = (pair.pairing.a, pair.pairing.b, pair.pairing.name)
    linked = link_keys_divergence(field, ia, ib, where)
    if linked is not None:
        return linked
    if sa.batch is not None and sb.batch is not None:
        found = _batch(field, pair)
        if found is not None:
            return found
    if field.lift(sa.claim) != field.lift(sb.claim):
        div = _div(pair, "claim", 0, None, "claim", field.fmt(sa.claim), field.fmt(sb.claim))
        factor = _factor_from(field, pair, start=0)
        if factor is not None:
            return div, factor, []
        return div, claim_link(ia) or Classification(
            "different-claim",
            "The claimed sums differ while everything before agrees: the two runs summed different "
            "tables (witness or inputs) or computed the claim differently."), []
    for rp in pair.rounds:
        if rp.a is None or rp.b is None:
            return _truncated(field, pair, rp)
        if not rp.same_values:
            return _round_values(field, pair, rp)
        if rp.same_challenge is False:
            return _challenge(field, pair, rp)
        if (rp.a.challenge is None) != (rp.b.challenge is None):
            return _truncated(field, pair, rp)
    if ia.final is not None and ib.final is not None and field.lift(ia.final) != field.lift(ib.final):
        div = _div(pair, "final", sa.num_vars, None, "final", field.fmt(ia.final), field.fmt(ib.final))
        factor = _factor_from(field, pair, start=2 * len(pair.rounds) + 1)
        return div, factor or Classification(
            "final-value",
            "Every round and challenge agrees but the final (oracle) value differs: the sumcheck is the same, "
            "the evaluation of the summed polynomial at the challenge point is not."), []
    if (ia.final is None) != (ib.final is None):
        side = "b" if ib.final is None else "a"
        div = _div(pair, "final", sa.num_vars, None, "final",
                   None if ia.final is None else field.fmt(ia.final), None if ib.final is None else field.fmt(ib.final))
        return div, Classification(
            "truncated", f"{side.upper()} has no final value; every round both sides hold agrees.", side=side), []
    return glue_divergence(field, ia.glue, ib.glue, where=f"after instance '{pair.pairing.name}'", instance=where,
                           round_=sa.num_vars)


def _statement(field: Field, pair: InstancePair, key: str, va: object, vb: object) -> Found:
    div = _div(pair, "statement", 0, None, key, str(va), str(vb))
    if key == "form":
        for rp in pair.rounds:
            if rp.a is None or rp.b is None or not rp.same_values:
                if rp.a is not None and rp.b is not None:
                    return div, Classification(
                        "encoding", f"A sends its rounds as '{va}' and B as '{vb}', and the decoded polynomials "
                        f"differ at round {rp.number} too: check the decoder of the form first."), []
                break
            if rp.same_challenge is False:
                return div, Classification(
                    "encoding", f"A sends its rounds as '{va}' and B as '{vb}'; decoded, the polynomials agree "
                    f"up to round {rp.number}, where the challenges part because each side hashes the values "
                    "as sent."), []
        return div, Classification(
            "encoding", f"A sends its rounds as '{va}' and B as '{vb}'; decoded, the polynomials agree."), []
    if key == "order":
        chals_a = [r.challenge for r in pair.a.rounds] if pair.a else []
        chals_b = [r.challenge for r in pair.b.rounds] if pair.b else []
        extra = " and B lists the challenges in reverse" if len(chals_a) > 1 and chals_a == chals_b[::-1] else ""
        return div, Classification(
            "binding-order", f"A binds its variables {va} and B {vb}{extra}: the two sides evaluate the "
            "tables at differently ordered points."), []
    return div, Classification(
        "statement", f"The instance's {key} differs (A {va}, B {vb}): the two runs prove different statements."), []


def _batch(field: Field, pair: InstancePair) -> Found | None:
    ba, bb = pair.a.start.batch, pair.b.start.batch  # type: ignore[union-attr]
    assert ba is not None and bb is not None
    if field.lift(ba.coefficient) != field.lift(bb.coefficient):
        div = _div(pair, "batch", 0, None, "coefficient", field.fmt(ba.coefficient), field.fmt(bb.coefficient))
        return div, Classification(
            "fiat-shamir-drift", "The batching coefficient differs although everything before agrees: the two "
            "sides' Fiat-Shamir transcripts absorbed different bytes before squeezing it."), []
    ta, tb = [field.lift(t) for t in ba.terms], [field.lift(t) for t in bb.terms]
    if ta == tb:
        return None
    if len(ta) != len(tb):
        div = _div(pair, "batch", 0, None, "terms", str(len(ta)), str(len(tb)))
        return div, Classification("statement", f"The batch combines {len(ta)} claims in A and {len(tb)} in B."), []
    j = next(j for j in range(len(ta)) if ta[j] != tb[j])
    div = _div(pair, "batch", 0, j, f"term {j}", field.fmt(ta[j]), field.fmt(tb[j]))
    if Counter(ta) == Counter(tb):
        return div, Classification(
            "claim-order", f"The batch combines the same claims in a different order (A's term {j} is B's term "
            f"{tb.index(ta[j])}), so the combined claim differs: the claims were ordered differently."), []
    return div, Classification("different-claim", f"Batch term {j} differs: the claims being combined differ."), []


def _truncated(field: Field, pair: InstancePair, rp: RoundPair) -> Found:
    if rp.a is None or rp.b is None:
        short, element, shown = ("a" if rp.a is None else "b"), "round", "sent"
    else:
        short = "a" if rp.a.challenge is None else "b"
        longer = rp.b if short == "a" else rp.a
        element, shown = "challenge", field.fmt(longer.challenge)  # type: ignore[arg-type]
    detail = "round polynomial" if element == "round" else "challenge"
    div = _div(pair, element, rp.number, None, detail,
               None if short == "a" else shown, None if short == "b" else shown)
    other = "B" if short == "a" else "A"
    return div, Classification(
        "truncated", f"{short.upper()} stops at round {rp.number} of instance '{pair.pairing.name}' where "
        f"{other} goes on; every element both sides hold agrees.", side=short), []


def _round_values(field: Field, pair: InstancePair, rp: RoundPair) -> Found:
    assert rp.a is not None and rp.b is not None and pair.a is not None and pair.b is not None
    form = pair.a.start.form
    va, vb = [field.lift(v) for v in rp.a.values], [field.lift(v) for v in rp.b.values]
    j = next((j for j in range(min(len(va), len(vb))) if va[j] != vb[j]), min(len(va), len(vb)))
    label = value_label(form, j) if j < min(len(va), len(vb)) else f"{value_label(form, j)} (count)"
    div = _div(pair, "value", rp.number, j, label,
               field.fmt(va[j]) if j < len(va) else None, field.fmt(vb[j]) if j < len(vb) else None)
    if rp.a_evals is not None and rp.b_evals is not None and same_poly(field, rp.a_evals, rp.b_evals):
        return div, Classification(
            "encoding", f"Round {rp.number} sends {len(va)} values in A and {len(vb)} in B, but they describe "
            "the same polynomial: only the number of evaluations sent differs."), []
    factor = _factor_from(field, pair, start=2 * rp.number - 1)
    if factor is not None:
        return div, factor, []
    shift = _shift(field, pair, rp.number)
    if shift is not None:
        return div, shift, []
    consistency = _consistency(field, pair, rp)
    if len(va) != len(vb) and (va[: len(vb)] == vb or vb[: len(va)] == va):
        return div, Classification(
            "prover-arithmetic", f"Round {rp.number} sends {len(va)} values in A and {len(vb)} in B, and the "
            "values both send agree: one side drops or adds an evaluation (a degree or loop-bound slip), so the "
            f"polynomials differ.{consistency[0]}", side=consistency[1]), []
    earlier = ("the claims agree" if rp.number == 1 else "the round 1 challenge is identical" if rp.number == 2
               else f"the challenges of rounds 1..{rp.number - 1} are identical")
    return div, Classification(
        "prover-arithmetic", f"{earlier[0].upper()}{earlier[1:]}, yet round {rp.number}'s polynomial differs at "
        f"{label}: the provers computed differently (arithmetic or tables), not the transcript.{consistency[0]}",
        side=consistency[1]), []


def _challenge(field: Field, pair: InstancePair, rp: RoundPair) -> Found:
    assert rp.a is not None and rp.b is not None and pair.a is not None and pair.b is not None
    assert rp.a.challenge is not None and rp.b.challenge is not None
    div = _div(pair, "challenge", rp.number, None, "challenge", field.fmt(rp.a.challenge), field.fmt(rp.b.challenge))
    ca = [field.lift(r.challenge) for r in pair.a.rounds if r.challenge is not None]
    cb = [field.lift(r.challenge) for r in pair.b.rounds if r.challenge is not None]
    if len(ca) == len(cb) >= 2 and ca == cb[::-1]:
        return div, Classification(
            "challenges-reversed", f"B lists the same {len(ca)} challenges as A in reverse order: one side "
            "(often a batch prover against its verifier) reverses the point r_1..r_mu."), []
    factor = _factor_from(field, pair, start=2 * rp.number)
    if factor is not None:
        return div, factor, []
    shift = _shift(field, pair, rp.number)
    if shift is not None:
        return div, shift, []
    return div, Classification(
        "fiat-shamir-drift", f"Round {rp.number}'s polynomial is identical on both sides but the challenges "
        "differ: the two Fiat-Shamir transcripts absorbed different bytes before this squeeze (an extra or "
        "missing message, a different label or encoding of an element)."), []


def _consistency(field: Field, pair: InstancePair, rp: RoundPair) -> tuple[str, str | None]:
    """Which side's round k still satisfies g(0) + g(1) = the claim it received."""
    ok: dict[str, bool] = {}
    for key, inst, evals in (("a", pair.a, rp.a_evals), ("b", pair.b, rp.b_evals)):
        claim = _claim_in(field, inst, rp.number)
        if claim is None or evals is None or not evals:
            return "", None
        s = field.add(evals[0], evals[1]) if len(evals) > 1 else field.add(evals[0], evals[0])
        ok[key] = s == field.lift(claim)
    if ok["a"] == ok["b"]:
        both = "both satisfy" if ok["a"] else "neither satisfies"
        return f" At that round {both} g(0) + g(1) = claim.", None
    bad = "b" if ok["a"] else "a"
    return f" {bad.upper()}'s round breaks g(0) + g(1) = claim; the other side's holds.", bad


def _claim_in(field: Field, inst: InstanceRecord | None, number: int) -> Element | None:
    if inst is None:
        return None
    claim: Element = inst.start.claim
    evals = decoded_rounds(field, inst)
    for k in range(number - 1):
        r, e = inst.rounds[k], evals[k]
        if r.challenge is None or e is None:
            return None
        claim = lagrange_at(field, e, r.challenge)
    return claim


def _groups(field: Field, inst: InstanceRecord) -> list[list[Element]]:
    """The instance's elements in stream order: claim, then per round its values and its challenge, then final."""
    out: list[list[Element]] = [[inst.start.claim]]
    for r in inst.rounds:
        out.append(list(r.values))
        out.append([] if r.challenge is None else [r.challenge])
    out.append([] if inst.final is None else [inst.final])
    return [[field.lift(e) for e in g] for g in out]


def _factor_from(field: Field, pair: InstancePair, start: int) -> Classification | None:
    """Constant factor from stream group ``start`` on: the ratio must hold on the first
    differing group, and on later groups while they differ, with at least two values or a named constant."""
    assert pair.a is not None and pair.b is not None
    ga, gb = _groups(field, pair.a), _groups(field, pair.b)
    if start >= len(ga) or start >= len(gb) or len(ga[start]) != len(gb[start]):
        return None
    ratio, count = constant_ratio(field, list(zip(ga[start], gb[start])))
    if ratio is None:
        return None
    reach = start
    for g in range(start + 1, min(len(ga), len(gb))):
        if len(ga[g]) != len(gb[g]) or not ga[g]:
            break
        more, n = constant_ratio(field, list(zip(ga[g], gb[g])))
        if more != ratio:
            break
        count, reach = count + n, g
    name = factor_name(field, ratio)
    if count < 2 and name is None:
        return None
    named = f", which is {name}" if name else ""
    span = "one element" if count == 1 else f"{count} values" + (" in a row" if reach > start else "")
    if ratio == field.embed(-1):
        text = (f"B's values are A's negated (checked on {span}): a sign slip, one side subtracts where the "
                "other adds.")
    else:
        text = (f"B's values are A's times the constant {field.fmt(ratio)}{named} (checked on {span}): one side "
                "keeps elements in another representation (a Montgomery-form mix-up) or scales them.")
    return Classification("constant-factor", text, factor=field.fmt(ratio), factor_name=name)


def _shift(field: Field, pair: InstancePair, number: int) -> Classification | None:
    """B's rounds (or challenges) from ``number`` on line up with A's shifted by one."""
    assert pair.a is not None and pair.b is not None
    k = number - 1
    ra, rb = pair.a.rounds, pair.b.rounds
    for shift in (+1, -1):
        lo_a, lo_b = (k, k + 1) if shift == 1 else (k + 1, k)
        span = min(len(ra) - lo_a, len(rb) - lo_b)
        if span < 1:
            continue
        vals = all(_lv(field, ra[lo_a + i].values) == _lv(field, rb[lo_b + i].values) for i in range(span))
        chal_pairs = [(ra[lo_a + i].challenge, rb[lo_b + i].challenge) for i in range(span)]
        chals = all(x is not None and y is not None and field.lift(x) == field.lift(y) for x, y in chal_pairs)
        if not (vals or chals) or (span < 2 and not (vals and chals)):
            continue
        what = "round polynomials" if vals else "challenges"
        if shift == 1:
            text = f"B's {what} from round {number + 1} on equal A's from round {number}: B has an extra step"
        else:
            text = f"B's {what} from round {number} on equal A's from round {number + 1}: B lacks a step"
        return Classification("round-shift", text + " (a transcript message added or dropped).", shift=shift)
    return None


def _lv(field: Field, values: tuple[Element, ...]) -> tuple[Element, ...]:
    return tuple(field.lift(v) for v in values)
