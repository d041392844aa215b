"""The plug-in challenge route and its binding probe (pure: no imports of user code here).

A plug-in is a Python callable ``derive(history) -> challenge``. ``history`` is a
read-only sequence of plain event maps, oldest first, exactly as the event
stream would carry them but with elements as Python ints (a list of ints,
constant first, in an extension field): the ``field`` map (with ``modulus``
always present), then every later event of the proof so far in stream order:
``schedule``, ``batch``, ``instance`` (with ``claim_expr``, ``final_expr`` and
``eq_point`` when it has them), ``round``, ``challenge``, ``final``, ``value``,
``squeeze``, ``opening`` (with ``table``) and unknown events (their payload). It is called once per round, right
after that round's ``round`` map, and returns the challenge as an int, a
decimal/0x string, or a list of base values.

The binding probe perturbs one earlier message at a time (the claim, each
statement field, each batch value, each value of the round just sent; for an
instance whose claim is linked by ``claim_expr``, the values and openings that
expression names instead of the claim, which the ``link`` check fixes) and calls
the plug-in again: a message that does not change the *next* challenge is not
bound by the Fiat-Shamir transform, and the prover may choose it after seeing
the challenge. An unbound claim is the weak Fiat-Shamir class of bug.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable, Iterator, Mapping, Sequence

from stepper.errors import InputError, Where
from stepper.field.elements import clip_text
from stepper.field.poly import FORMS, ORDERS
from stepper.field.poly import ROUND_FORMS
from stepper.transcript.records import (
    BatchDecl, ChallengeMsg, FieldDecl, FinalValue, InstanceStart, RoundMsg, ScheduleDecl, UnknownEvent,
)
from stepper.transcript.glue_records import NamedValue, Opening, Squeeze

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event
    from stepper.verify.findings import Finding

__all__ = ["Challenger", "History", "history_payload", "call_challenger", "parse_answer", "probe_binding",
           "glue_positions"]

Challenger = Callable[[Sequence[Mapping[str, Any]]], Any]


class History(Sequence[Mapping[str, Any]]):
    """A read-only view of the first ``length`` maps of a growing list."""

    __slots__ = ("_items", "_length")

    def __init__(self, items: list[dict[str, Any]], length: int | None = None) -> None:
        self._items = items
        self._length = len(items) if length is None else length

    def __len__(self) -> int:
        return self._length

    def __getitem__(self, index: Any) -> Any:
        if isinstance(index, slice):
            return [self._items[i] for i in range(*index.indices(self._length))]
        if index < 0:
            index += self._length
        if not 0 <= index < self._length:
            raise IndexError("history index out of range")
        return self._items[index]

    def __iter__(self) -> Iterator[Mapping[str, Any]]:
        return (self._items[i] for i in range(self._length))


def _plain(e: Element) -> Any:
    return list(e) if isinstance(e, tuple) else e


def history_payload(record: Event, field: Field) -> dict[str, Any] | None:
    """The map a plug-in sees for a record, or None for records it does not see."""
    if isinstance(record, RoundMsg):
        return {"type": "round", "evals": [_plain(v) for v in record.values]}
    if isinstance(record, ChallengeMsg):
        return {"type": "challenge", "value": _plain(record.value)}
    if isinstance(record, InstanceStart):
        out = {"type": "instance", "name": record.name, "num_vars": record.num_vars, "degree": record.degree,
               "claim": _plain(record.claim), "order": record.order, "form": record.form}
        if record.claim_expr is not None:
            out["claim_expr"] = record.claim_expr
        if record.final_expr is not None:
            out["final_expr"] = record.final_expr
        if record.eq_point is not None:
            out["eq_point"] = (record.eq_point if isinstance(record.eq_point, str)
                               else [_plain(v) for v in record.eq_point])
        return out
    if isinstance(record, (NamedValue, Squeeze)):
        kind = "value" if isinstance(record, NamedValue) else "squeeze"
        return {"type": kind, "name": record.name,
                "value": [_plain(v) for v in record.value] if record.listed else _plain(record.value)}
    if isinstance(record, Opening):
        return {"type": "opening", "name": record.name, "table": record.table, "value": _plain(record.value)}
    if isinstance(record, FinalValue):
        return {"type": "final", "value": _plain(record.value)}
    if isinstance(record, UnknownEvent):
        return {**record.payload, "type": record.kind}
    if isinstance(record, BatchDecl):
        return {"type": "batch", "coefficient": _plain(record.coefficient),
                "terms": [_plain(t) for t in record.terms], "sources": list(record.sources)}
    if isinstance(record, FieldDecl):
        return {"type": "field", **record.field.spec(), "modulus": str(record.field.p)}
    if isinstance(record, ScheduleDecl):
        return {"type": "schedule", "name": record.name, "label": record.label, "params": dict(record.params)}
    return None


class PluginFailure(InputError):
    """The challenge plug-in raised, ran past its time limit, or answered with something unusable
    (exit 2). The binding probe lets it through instead of reading it as "bound"."""


def plugin_name(challenger: Challenger) -> str:
    """How messages name a plug-in: the MODULE:FUNCTION the user typed, when known."""
    label = getattr(challenger, "label", None)
    if isinstance(label, str):
        return label
    return f"{getattr(challenger, '__module__', '?')}:{getattr(challenger, '__qualname__', type(challenger).__name__)}"


def call_challenger(challenger: Challenger, history: Sequence[Mapping[str, Any]], field: Field,
                    where: Where) -> Element:
    """The plug-in's challenge, parsed as an element of ``field``; its errors become
    :class:`PluginFailure` naming the plug-in, the instance and the round."""
    name = plugin_name(challenger)
    try:
        raw = challenger(history)
    except PluginFailure as err:
        raise PluginFailure(err.message, where) from None
    except Exception as err:  # user code: any failure is the plug-in's, reported as input
        raise PluginFailure(f"expected the challenge plug-in {name} to return a challenge, but it raised "
                            f"{type(err).__name__}: {clip_text(str(err))}", where) from None
    return parse_answer(raw, field, name, where)


def parse_answer(raw: Any, field: Field, name: str, where: Where) -> Element:
    """A plug-in's answer as an element of ``field``: canonical, or a :class:`PluginFailure`
    naming the plug-in ``name`` and saying what was wrong."""
    reduced = _reduced(raw, field.p)
    if reduced is not None:  # a value outside 0..p-1: refused, with what it would reduce to
        raise PluginFailure(f"challenge plug-in {name} returned {clip_text(str(raw))}, which is not reduced mod "
                            f"p = {field.p} (it reduces to {reduced}); a challenge must be canonical, "
                            "0 <= value < p: reduce it in the plug-in", where)
    try:
        return field.parse(raw, where)
    except InputError as err:
        raise PluginFailure(f"challenge plug-in {name} returned an unusable value: {err.message}", where) from None
    except (RecursionError, ValueError, TypeError, OverflowError, MemoryError) as err:
        raise PluginFailure(f"challenge plug-in {name} returned an unusable value "
                            f"({type(err).__name__}: {clip_text(str(err))})", where) from None


def _reduced(raw: Any, p: int) -> Any:
    """``raw`` reduced mod ``p`` when it is an integer (or a list of integers) outside 0..p-1, else None."""
    def out_of_range(v: Any) -> bool:
        return type(v) is int and not 0 <= v < p and v.bit_length() <= 4 * p.bit_length()

    if out_of_range(raw):
        return raw % p
    if isinstance(raw, (list, tuple)) and raw and all(type(v) is int for v in raw) and any(map(out_of_range, raw)):
        return [v % p for v in raw]
    return None


def _bump(value: Any, p: int) -> Any:
    """A different element of the same shape (constant coefficient + 1)."""
    if isinstance(value, list):
        return [(value[0] + 1) % p, *value[1:]]
    return (value + 1) % p


def _variants(payload: dict[str, Any], p: int) -> Iterator[tuple[str, dict[str, Any]]]:
    """(what, perturbed copy) for every message field a challenge should depend on."""
    kind = payload["type"]
    if kind == "instance":
        if "claim_expr" not in payload:  # a linked claim is fixed by the `link` check; its glue is probed instead
            yield "claim", {**payload, "claim": _bump(payload["claim"], p)}
        yield "name", {**payload, "name": payload["name"] + "~"}
        yield "num_vars", {**payload, "num_vars": payload["num_vars"] + 1}
        yield "degree", {**payload, "degree": payload["degree"] + 1}
        yield "order", {**payload, "order": ORDERS[1 - ORDERS.index(payload["order"])]}
        forms = ROUND_FORMS if payload["form"] in ROUND_FORMS else FORMS
        yield "form", {**payload, "form": forms[(forms.index(payload["form"]) + 1) % len(forms)]}
    elif kind == "batch":
        yield "batch coefficient", {**payload, "coefficient": _bump(payload["coefficient"], p)}
        for i, term in enumerate(payload["terms"]):
            terms = list(payload["terms"])
            terms[i] = _bump(term, p)
            yield f"batch term {i}", {**payload, "terms": terms}
    elif kind in ("value", "opening"):
        value = payload["value"]
        if isinstance(value, list) and value and isinstance(value[0], list):  # a list of extension elements
            yield f"{kind} {payload['name']}", {**payload, "value": [_bump(value[0], p), *value[1:]]}
        elif value != []:  # one element, or a prime-field list: its first entry changes either way
            yield f"{kind} {payload['name']}", {**payload, "value": _bump(value, p)}
    elif kind == "round":
        for i, value in enumerate(payload["evals"]):
            evals = list(payload["evals"])
            evals[i] = _bump(value, p)
            yield f"value {i}", {**payload, "evals": evals}


def glue_positions(history: Sequence[Mapping[str, Any]], claim_expr: str, before: int) -> list[int]:
    """History positions (below ``before``) of the values and openings ``claim_expr`` names."""
    from stepper.field.expr import parse

    names = set(parse(claim_expr, "claim_expr").references().values)
    return [i for i in range(before) if history[i].get("type") in ("value", "opening")
            and history[i].get("name") in names]


def _challenge_or_none(challenger: Challenger, history: list[dict[str, Any]]) -> Any:
    try:
        return challenger(History(history))
    except PluginFailure:  # ran past its time limit or could not be run: not a verdict about binding
        raise
    except Exception:  # a plug-in that refuses a perturbed history has noticed it: bound
        return None


def probe_binding(
    challenger: Challenger,
    history: list[dict[str, Any]],
    positions: Sequence[int],
    field: Field,
    instance: int,
    instance_name: str,
    round_: int,
) -> list[Finding]:
    """Perturb each message at ``positions`` of ``history`` (which ends with the round
    just sent) and report those that leave the plug-in's next challenge unchanged."""
    baseline = _challenge_or_none(challenger, history)
    if baseline is None:
        return []
    findings: list[Finding] = []
    for pos in positions:
        payload = history[pos]
        unbound = []
        for what, variant in _variants(payload, field.p):
            trial = list(history)
            trial[pos] = variant
            again = _challenge_or_none(challenger, trial)
            if again is not None and again == baseline:
                unbound.append(what)
        if unbound:
            findings.append(_finding(payload["type"], unbound, instance, instance_name, round_))
    return findings


def _finding(kind: str, unbound: list[str], instance: int, name: str, round_: int) -> Finding:
    from stepper.verify.findings import Finding  # an unbound message found: a passing check makes none

    listed = ", ".join(unbound)
    if kind == "instance" and "claim" in unbound:
        others = ", ".join(u for u in unbound if u != "claim")
        return Finding(
            "unbound-claim", "high",
            f"the claimed sum is not bound into the challenges: changing the claim of instance '{name}' "
            f"leaves the challenge of round {round_} unchanged (weak Fiat-Shamir: a prover can pick a false "
            f"claim after seeing the challenges)" + (f"; statement fields also unbound: {others}" if others else ""),
            instance, round_)
    if kind == "instance":
        return Finding("unbound-statement", "medium",
                       f"statement fields of instance '{name}' ({listed}) do not change the challenge of "
                       f"round {round_}: two different statements share one challenge sequence", instance, round_)
    if kind in ("value", "opening"):
        return Finding("unbound-glue", "high",
                       f"the claim of instance '{name}' is built from glue ({listed}) that does not change the "
                       f"challenge of round {round_}: the prover can choose it after seeing the challenges",
                       instance, round_)
    if kind == "batch":
        return Finding("unbound-batch", "high",
                       f"the batch declaration before instance '{name}' ({listed}) does not change the "
                       f"challenge of round {round_}: the batched claim can be chosen after the challenges",
                       instance, round_)
    return Finding("unbound-round", "high",
                   f"round {round_} of instance '{name}': the sent {listed} do(es) not change the challenge "
                   f"of that round, so the prover can choose the round polynomial after seeing it",
                   instance, round_)
