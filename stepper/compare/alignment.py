"""Lining up two transcripts: which instance and round of A goes with which of B.

Pure. Instances align by name (the k-th instance of a name in A with the k-th of
that name in B) when the sides share any name, else by position; rounds align by
number. Each round pair carries both sides' decoded evaluations g(0..e) and
whether the values and challenges agree, ready for :mod:`stepper.compare.divergence`
to find and classify the first difference.
"""

from __future__ import annotations

from dataclasses import dataclass

from stepper.errors import InputError
from stepper.field.field import Element, Field
from stepper.field.poly import RoundPoly, lagrange_at
from stepper.transcript.model import InstanceRecord, Round, Transcript

__all__ = [
    "Pairing",
    "RoundPair",
    "InstancePair",
    "Divergence",
    "Classification",
    "pair_instances",
    "pair_rounds",
    "instance_at",
    "same_poly",
    "decoded_rounds",
    "value_label",
]

@dataclass(frozen=True, slots=True)
class Pairing:
    """Instance ``a`` of A aligned with instance ``b`` of B (either may be None)."""

    a: int | None
    b: int | None
    name: str
    by: str  # "name" or "position"


@dataclass(frozen=True, slots=True)
class RoundPair:
    """Round ``number`` on both sides, with each side's decoded evaluations g(0..e)."""

    number: int
    a: Round | None
    b: Round | None
    a_evals: tuple[Element, ...] | None
    b_evals: tuple[Element, ...] | None
    same_values: bool | None  # None when a side lacks the round
    same_challenge: bool | None  # None when a side lacks the challenge


@dataclass(frozen=True, slots=True)
class InstancePair:
    pairing: Pairing
    a: InstanceRecord | None
    b: InstanceRecord | None
    rounds: tuple[RoundPair, ...]


@dataclass(frozen=True, slots=True)
class Divergence:
    """The first element that differs. ``round`` is 1-based (0: the instance's
    statement, batch or claim); ``index`` is the position among the values sent
    (or batch terms); ``detail`` names it (``g(2)``, ``num_vars``, ``coefficient``)."""

    element: str  # field | instance | statement | batch | claim | value | challenge | final | round
    instance_a: int | None = None
    instance_b: int | None = None
    instance_name: str | None = None
    round: int | None = None
    index: int | None = None
    detail: str | None = None
    a: str | None = None
    b: str | None = None

    def place(self) -> str:
        """Human location: ``instance 'x' (A #0, B #1), round 3, g(1)``."""
        parts: list[str] = []
        if self.instance_name is not None:
            a = "-" if self.instance_a is None else f"#{self.instance_a}"
            b = "-" if self.instance_b is None else f"#{self.instance_b}"
            parts.append(f"instance '{self.instance_name}' (A {a}, B {b})")
        if self.round:
            parts.append(f"round {self.round}")
        parts.append(self.detail or self.element)
        return ", ".join(parts)


@dataclass(frozen=True, slots=True)
class Classification:
    """What kind of divergence this is. ``factor`` (decimal text) and
    ``factor_name`` for constant-factor; ``shift`` (+1: B has an extra step,
    -1: B lacks one) for round-shift; ``side`` ("a"/"b") the side at fault when
    it can be told (the one that breaks a check or stops early)."""

    kind: str
    explanation: str
    factor: str | None = None
    factor_name: str | None = None
    shift: int | None = None
    side: str | None = None


def pair_instances(a: Transcript, b: Transcript) -> list[Pairing]:
    """Alignment of instances: by name when any name is shared, else by position.
    In A's order; B's unmatched instances follow in B's order."""
    names_a = [i.name for i in a.instances]
    names_b = [i.name for i in b.instances]
    if not set(names_a) & set(names_b):
        count = max(len(names_a), len(names_b))
        return [
            Pairing(
                k if k < len(names_a) else None,
                k if k < len(names_b) else None,
                names_a[k] if k < len(names_a) else names_b[k],
                "position",
            )
            for k in range(count)
        ]
    free: dict[str, list[int]] = {}
    for k, name in enumerate(names_b):
        free.setdefault(name, []).append(k)
    out: list[Pairing] = []
    for k, name in enumerate(names_a):
        slots = free.get(name)
        out.append(Pairing(k, slots.pop(0) if slots else None, name, "name"))
    used = {p.b for p in out}
    out.extend(Pairing(None, k, name, "name") for k, name in enumerate(names_b) if k not in used)
    return out


def instance_at(t: Transcript, index: int | None) -> InstanceRecord | None:
    return None if index is None else t.instances[index]


def decoded_rounds(field: Field, inst: InstanceRecord) -> list[tuple[Element, ...] | None]:
    """g(0..e) of each round, decoding compressed forms with the running claim."""
    out: list[tuple[Element, ...] | None] = []
    claim: Element | None = inst.start.claim
    for r in inst.rounds:
        if claim is None:
            out.append(None)
            continue
        try:
            poly = RoundPoly.from_form(field, inst.start.form, r.values, claim)
        except InputError:
            out.append(None)
            claim = None
            continue
        out.append(tuple(field.lift(e) for e in poly.evals))
        claim = None if r.challenge is None else poly.at(field, r.challenge)
    return out


def same_poly(field: Field, ea: tuple[Element, ...], eb: tuple[Element, ...]) -> bool:
    """Whether two evaluation lists g(0..e), g(0..e') describe the same polynomial."""
    if len(ea) == len(eb):
        return ea == eb
    short, long_ = (ea, eb) if len(ea) < len(eb) else (eb, ea)
    if not short or tuple(long_[: len(short)]) != tuple(short):
        return False
    return all(
        field.lift(lagrange_at(field, short, field.embed(x))) == long_[x] for x in range(len(short), len(long_))
    )


def pair_rounds(field: Field, pairing: Pairing, ia: InstanceRecord | None, ib: InstanceRecord | None,
                 comparable: bool) -> InstancePair:
    """Rounds side by side; over different fields they are listed but neither decoded nor compared."""
    if ia is None or ib is None:
        return InstancePair(pairing, ia, ib, ())
    if not comparable:
        rounds = [RoundPair(k + 1, ia.rounds[k] if k < len(ia.rounds) else None,
                            ib.rounds[k] if k < len(ib.rounds) else None, None, None, None, None)
                  for k in range(max(len(ia.rounds), len(ib.rounds)))]
        return InstancePair(pairing, ia, ib, tuple(rounds))
    ea, eb = decoded_rounds(field, ia), decoded_rounds(field, ib)
    rounds: list[RoundPair] = []  # type: ignore[no-redef]
    for k in range(max(len(ia.rounds), len(ib.rounds))):
        ra = ia.rounds[k] if k < len(ia.rounds) else None
        rb = ib.rounds[k] if k < len(ib.rounds) else None
        xa = ea[k] if ra is not None else None
        xb = eb[k] if rb is not None else None
        same_values: bool | None = None
        same_challenge: bool | None = None
        if ra is not None and rb is not None:
            if ia.start.form == ib.start.form:
                same_values = _lifted(field, ra.values) == _lifted(field, rb.values)
            else:
                same_values = xa is not None and xb is not None and same_poly(field, xa, xb)
            if ra.challenge is not None and rb.challenge is not None:
                same_challenge = field.lift(ra.challenge) == field.lift(rb.challenge)
        rounds.append(RoundPair(k + 1, ra, rb, xa, xb, same_values, same_challenge))
    return InstancePair(pairing, ia, ib, tuple(rounds))


def _lifted(field: Field, values: tuple[Element, ...]) -> tuple[Element, ...]:
    return tuple(field.lift(v) for v in values)


def value_label(form: str, j: int) -> str:
    """The name of the j-th value sent in ``form``: ``g(j)`` or ``c_j``."""
    if form == "evals":
        return f"g({j})"
    if form == "evals-no-1":
        return "g(0)" if j == 0 else f"g({j + 1})"
    if form == "coeffs":
        return f"c{j}"
    return "c0" if j == 0 else f"c{j + 1}"
