"""Seeking a value in a proof: which round mentions the number a person typed.

Pure (no I/O, no Textual). A round mentions a value when it appears among what
was sent (round values, challenge, final value), what the replay computed
(claim in, decoded evaluations, g(0)+g(1), g(r), a recovered value, the
re-derived challenge), or the instance's claimed sum (round 1); the glue counts
too: a link's value at its round 0, and the openings, values and squeezes sent
after an instance at its last round.
A typed number matches an element equal to it (decimal or ``0x`` hex; for an
extension element, any coefficient equal to it); typed digits also match
inside an element's decimal text; other text matches instance names.
"""

from __future__ import annotations

from bisect import bisect_right
from typing import TYPE_CHECKING

from stepper.field.field import Element, Field
from stepper.transcript.model import Opening

if TYPE_CHECKING:
    from stepper.app.proof_model import Position, ProofModel

__all__ = ["find_value"]


def find_value(model: ProofModel, query: str, after: Position) -> Position | None:
    """The next round after ``after`` (wrapping round the proof) that mentions ``query``."""
    text = query.strip().lower()
    if not text or model.field is None:
        return None
    wanted = _as_number(text)
    order = [(i, k) for i, v in enumerate(model.instances)
             for k in range(model.first_round(i), max(1, len(v.rounds)) + 1)]
    if not order:
        return None
    start = bisect_right(order, after)
    for pos in order[start:] + order[:start]:
        if _mentions(model, model.field, pos, text, wanted):
            return pos
    return None


def _mentions(model: ProofModel, field: Field, pos: Position, text: str, wanted: int | None) -> bool:
    view = model.instances[pos[0]]
    if pos[1] == 1 and text in view.name.lower():
        return True
    values: list[Element | None] = []
    if pos[1] <= len(view.rounds):
        values.extend(view.rounds[pos[1] - 1].values)
        values.append(view.challenges[pos[1] - 1])
        result = view.results[pos[1] - 1]
        if result is not None:
            values.extend([result.claim_in, result.claim_out, result.recovered_value, result.sum01,
                           result.rederived])
            values.extend(result.evals)
    if pos[1] == 1:
        values.append(view.start.claim)
    if pos[1] == len(view.rounds):
        values.append(view.final_value)
        for record in model.glue.following(pos[0]):
            values.extend(record.items() if not isinstance(record, Opening) else (record.value,))
    if pos[1] == 0:
        link = model.glue.link.get(pos[0])
        values.extend([view.start.claim, link.expected if link is not None else None])
    for value in values:
        if value is None:
            continue
        if wanted is not None and (value == wanted if isinstance(value, int) else wanted in value):
            return True
        if text.isdigit() and text in field.fmt(value):
            return True
    return False


def _as_number(text: str) -> int | None:
    try:
        return int(text, 16) if text.startswith("0x") else int(text, 10)
    except ValueError:
        return None
