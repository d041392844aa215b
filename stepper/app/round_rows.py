"""How statuses and rounds read on screen: status marks, the rows of the round table
and the line of the status strip (pure: no I/O, no Textual).

Every status is a word and a symbol of its own shape as well as a colour class, so
nothing rests on colour alone. The glue reads the same way: a linked instance's
table starts with a ``0 link`` row (the claim_expr's value as the claim coming in,
the claim as the claim going on) and its strip line with the link's symbol and
``⊢``; the last round of an instance with a final_expr carries ``⊣`` and the
evaluation's symbol, in the table and at the end of the strip line. The verdicts
are the replay's (:mod:`stepper.app.glue_model`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

from stepper.field.display import elide

if TYPE_CHECKING:
    from stepper.app.glue_model import GlueTrail
    from stepper.field.field import Element, Field

__all__ = ["StatusMark", "STATUS_MARKS", "verdict_status", "mark_of", "shorten", "RoundRow", "instance_rows",
           "strip_line", "link_status", "evaluation_status", "LINK_MARK", "EVALUATION_MARK"]

LINK_MARK = "⊢"  # after the link's symbol: the claim is built from the glue before it
EVALUATION_MARK = "⊣"  # before the evaluation's symbol: the reduced claim meets final_expr


class ProofModel(Protocol):
    """What the rows read of :class:`stepper.app.proof_model.ProofModel` (which imports this module)."""

    instances: list[Any]
    glue: GlueTrail
    failure_checks: dict[tuple[int, int], list[str]]
    loading: bool
    field: Field | None

    def first_round(self, instance: int) -> int: ...


@dataclass(frozen=True, slots=True)
class StatusMark:
    """How a status reads on screen: a word, a symbol of its own shape, a style class."""

    word: str
    symbol: str
    tone: str


# Shapes differ as well as colours, so a status never rests on colour alone.
STATUS_MARKS: dict[str, StatusMark] = {
    "pass": StatusMark("pass", "■", "good"),
    "fail": StatusMark("fail", "✕", "bad"),
    "pending": StatusMark("pending", "◌", "wait"),
    "unchecked": StatusMark("unchecked", "?", "unchecked"),
}


def verdict_status(verdict: str) -> str:
    """The round status a proof verdict reads as (accept: pass, reject: fail, else incomplete)."""
    return {"accept": "pass", "reject": "fail", "unusable": "fail"}.get(verdict, "pending")


def mark_of(status: str | None) -> StatusMark:
    return STATUS_MARKS.get(status or "unchecked", STATUS_MARKS["unchecked"])


def shorten(text: str, width: int) -> str:
    """``text`` visibly shortened to about ``width`` (:func:`stepper.field.display.elide`)."""
    return elide(text, width)


@dataclass(frozen=True, slots=True)
class RoundRow:
    """One line of an instance's round table, every cell already text."""

    round: int
    claim_in: str
    sum01: str
    degree: str
    challenge: str
    claim_out: str
    status: str
    symbol: str
    tone: str
    glue: str = ""  # on the last round of an instance with a final_expr: ``⊣`` and the evaluation's symbol
    glue_tone: str = ""
    label: str = ""  # ``link`` (or ``batch``, ``glue``) on the round-0 row

    def cells(self) -> tuple[str, ...]:
        """Round, status (word and symbol), then the values: the status never scrolls away."""
        status = f"{self.symbol} {self.status}" + (f" {self.glue}" if self.glue else "")
        return (f"{self.round} {self.label}".rstrip(), status, self.claim_in, self.sum01, self.degree,
                self.challenge, self.claim_out)


def link_status(model: ProofModel, instance: int) -> str:
    """The link's status: the replay's verdict once it has one; ``fail`` for a round-0 row
    that holds another glue failure (a squeeze before the first instance)."""
    result = model.glue.link.get(instance)
    if result is not None:
        return str(result.status)
    if (instance, 0) in model.failure_checks:
        return "fail"
    return "unchecked" if model.loading else "pending"


def evaluation_status(model: ProofModel, instance: int) -> str | None:
    """The evaluation's status (None without a final_expr): ``pending`` while it waits for
    its rounds or the values it names, ``unchecked`` while the file is still being read."""
    if model.instances[instance].start.final_expr is None:
        return None
    result = model.glue.evaluation.get(instance)
    if result is not None:
        return str(result.status)
    return "unchecked" if model.loading else "pending"


def instance_rows(model: ProofModel, instance: int, width: int) -> list[RoundRow]:
    """The round table of one instance: its round-0 row, then one row per round sent."""
    view = model.instances[instance]
    field = model.field
    assert field is not None
    out: list[RoundRow] = []
    if model.first_round(instance) == 0:
        out.append(_link_row(model, field, instance, width))
    evaluation = evaluation_status(model, instance)
    for number, msg in enumerate(view.rounds, start=1):
        result = view.results[number - 1]
        challenge = view.challenges[number - 1]
        glue: tuple[str, str] = ("", "")
        if evaluation is not None and number == view.start.num_vars:
            glue = (EVALUATION_MARK + mark_of(evaluation).symbol, mark_of(evaluation).tone)
        if result is None:
            mark = mark_of(None)
            out.append(RoundRow(number, "", "", f"{len(msg.values) - 1}/{view.start.degree}",
                                _cell(field, challenge, width), "", mark.word, mark.symbol, mark.tone, *glue))
            continue
        mark = mark_of(result.status)
        out.append(RoundRow(
            number,
            _cell(field, result.claim_in, width),
            _cell(field, result.sum01, width),
            f"{result.degree_seen}/{result.degree_bound}",
            _cell(field, result.challenge if result.challenge is not None else challenge, width),
            _cell(field, result.claim_out, width),
            mark.word,
            mark.symbol,
            mark.tone,
            *glue,
        ))
    return out


def _link_row(model: ProofModel, field: Field, instance: int, width: int) -> RoundRow:
    view = model.instances[instance]
    start = view.start
    result: Any = model.glue.link.get(instance)
    mark = mark_of(link_status(model, instance))
    expected = result.expected if result is not None else None
    if start.claim_expr is not None:
        label = "link"
    elif "batch" in model.failure_checks.get((instance, 0), ()):
        label, expected = "batch", view.batch_result.combined  # the claim the batch promises
    else:
        label = "glue"
    return RoundRow(0, _cell(field, expected, width), "", "", "", _cell(field, start.claim, width), mark.word,
                    mark.symbol, mark.tone, label=label)


def strip_line(model: ProofModel, instance: int) -> str:
    """One symbol per round of the instance (``·`` for rounds not yet sent), then ``┆``
    and the final check's symbol once a final value was checked; a round-0 row's symbol
    and ``⊢`` in front, ``⊣`` and the evaluation's symbol at the end."""
    view = model.instances[instance]
    symbols = [mark_of(view.status(k)).symbol for k in range(1, len(view.rounds) + 1)]
    missing = view.start.num_vars - len(view.rounds)
    final = "" if view.final_result is None else "┆" + mark_of(view.final_result.status).symbol
    head = mark_of(link_status(model, instance)).symbol + LINK_MARK if model.first_round(instance) == 0 else ""
    evaluation = evaluation_status(model, instance)
    tail = "" if evaluation is None else EVALUATION_MARK + mark_of(evaluation).symbol
    return head + "".join(symbols) + "·" * max(0, missing) + final + tail


def _cell(field: Field, value: Element | None, width: int) -> str:
    return "" if value is None else shorten(field.fmt(value), width)
