"""Readout lines for the glue between instances (pure: no I/O, no Textual).

* :func:`link_lines`: the round-0 row of a linked instance: claim_expr, what it
  gives, the claim sent, the replay's verdict and sentence, and the values,
  squeezes and openings the expression names.
* :func:`closing_lines`: the last round of an instance: the openings it received,
  the ``evaluation`` (final_expr, what it gives, the reduced claim, verdict), the
  other values final_expr names, then the values and squeezes sent after it.
* :func:`head_lines`: the values and squeezes sent before the first instance.
* :func:`statement_glue`: one line each for the eq point, link and evaluation.

Every verdict is a symbol and a word as well as a tone; a squeeze shows what was
sent and what the schedule re-derives. Values are whole (the table shortens them).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Iterable

from stepper.app.glue_model import glue_kind, names_in
from stepper.app.lines import Line
from stepper.app.round_rows import evaluation_status, link_status, mark_of
from stepper.transcript.model import Opening, Squeeze

if TYPE_CHECKING:
    from stepper.app.proof_model import ProofModel
    from stepper.field.field import Field
    from stepper.transcript.model import Glue

__all__ = ["link_lines", "closing_lines", "head_lines", "statement_glue", "eq_lines", "failed_here"]


def _shown(field: Field, record: Glue) -> str:
    if isinstance(record, Opening):
        return field.fmt(record.value)
    items = [field.fmt(v) for v in record.items()]
    return f"[{', '.join(items)}]" if record.listed else items[0]


def _derived(field: Field, derived: Any) -> str:
    return f"[{', '.join(field.fmt(v) for v in derived)}]" if isinstance(derived, tuple) else field.fmt(derived)


def _record_lines(model: ProofModel, field: Field, records: Iterable[Glue]) -> list[Line]:
    """One line per record (kind, name, value as sent); a squeeze adds what the schedule re-derives."""
    checks = {id(c.record): c for c in model.glue.squeeze_checks()}
    lines = []
    for record in records:
        kind = glue_kind(record)
        table = f"  (table {record.table})" if isinstance(record, Opening) and record.table != record.name else ""
        lines.append(Line(kind, f"{record.name} = {_shown(field, record)}{table}", "plain"))
        if isinstance(record, Squeeze):
            check = checks.get(id(record))
            if check is None or check.derived is None:
                lines.append(Line("re-derived", "? not re-derived: the transcript declares no built-in schedule",
                                  "unchecked"))
            else:
                mark = mark_of(check.status)
                word = "same" if check.status == "pass" else "differs"
                lines.append(Line("re-derived", f"{_derived(field, check.derived)}  {mark.symbol} {word}", mark.tone))
    return lines


def _verdict(what: str, result: Any, status: str) -> list[Line]:
    mark = mark_of(status)
    lines = [Line(what, f"{mark.symbol} {mark.word} ({what})", mark.tone)]
    if result is not None and result.explanation:
        lines.append(Line("why", str(result.explanation), "bad" if status == "fail" else "muted"))
    return lines


def failed_here(model: ProofModel, index: int, number: int) -> list[Line]:
    """One line per glue check that failed at this round, for the top of its readout (the
    whole story follows further down): expected against found."""
    field = model.field
    assert field is not None
    lines = []
    for check in model.failure_checks.get((index, number), []):
        if check == "evaluation" and index in model.glue.evaluation:
            result = model.glue.evaluation[index]
            lines.append(Line("evaluation", f"✕ fail: final_expr gives {field.fmt(result.expected)}, the reduced "
                                            f"claim is {field.fmt(result.found)} (below)", "bad"))
        elif check == "squeeze":
            for squeeze in model.glue.squeeze_checks():
                if squeeze.position == (index, number) and squeeze.status == "fail":
                    lines.append(Line("squeeze", f"✕ fail: {squeeze.record.name} = {_shown(field, squeeze.record)} "
                                                 f"sent, {_derived(field, squeeze.derived)} re-derived (below)", "bad"))
    return lines


def link_lines(model: ProofModel, index: int) -> list[Line]:
    """The round-0 row: the claim against claim_expr, and what the expression is built from."""
    field = model.field
    assert field is not None
    view = model.instances[index]
    start = view.start
    result = model.glue.link.get(index)
    status = link_status(model, index)
    mark = mark_of(status)
    lines = [Line("round", f"0 of {start.num_vars}   {mark.symbol} {mark.word}: the claim against its glue", mark.tone),
             *failed_here(model, index, 0)]
    if start.claim_expr is not None:
        tone = "bad" if status == "fail" else "plain"
        lines.append(Line("claim_expr", start.claim_expr))
        if result is not None:
            lines.append(Line("gives", field.fmt(result.expected), tone))
        lines.append(Line("claim sent", field.fmt(start.claim), tone))
        lines.extend(_verdict("link", result, status))
        named = model.glue.named(names_in(start.claim_expr))
        if named:
            lines.append(Line("built from", f"{len(named)} named value{'s' if len(named) != 1 else ''}", "muted"))
            lines.extend(_record_lines(model, field, named))
    if index == 0 and model.glue.head:
        lines.extend(head_lines(model))
    if start.num_vars == 0:  # no rounds: the claim is the reduced claim, checked here
        lines.extend(closing_lines(model, index))
    return lines


def head_lines(model: ProofModel) -> list[Line]:
    """The values and squeezes sent before the first instance."""
    field = model.field
    if field is None or not model.glue.head:
        return []
    return [Line("before #0", f"{len(model.glue.head)} sent before the first instance", "muted"),
            *_record_lines(model, field, model.glue.head)]


def closing_lines(model: ProofModel, index: int) -> list[Line]:
    """The instance's last round: openings received, the evaluation, then the glue after it."""
    field = model.field
    assert field is not None
    view = model.instances[index]
    start = view.start
    after = model.glue.following(index)
    openings = [g for g in after if isinstance(g, Opening) and g.instance == index]
    lines: list[Line] = []
    if openings:
        lines.append(Line("openings", f"{len(openings)} received at this instance's point", "muted"))
        lines.extend(_record_lines(model, field, openings))
    status = evaluation_status(model, index)
    if start.final_expr is not None and status is not None:
        result = model.glue.evaluation.get(index)
        if result is None and status == "pending":
            missing = [n for n in names_in(start.final_expr) if n not in model.glue.by_name]
            waits = f"waits for {', '.join(missing)}" if missing else "waits for the last round"
            lines.append(Line("evaluation", f"{mark_of(status).symbol} {status}: {waits}", "wait"))
        else:
            lines.extend(_verdict("evaluation", result, status))
        lines.append(Line("final_expr", start.final_expr))
        if result is not None:
            tone = "bad" if status == "fail" else "plain"
            lines.append(Line("gives", field.fmt(result.expected), tone))
            lines.append(Line("reduced claim", field.fmt(result.found), tone))
        own = {id(g) for g in openings}
        others = [g for g in model.glue.named(names_in(start.final_expr)) if id(g) not in own]
        if others:
            lines.append(Line("also uses", ", ".join(g.name for g in others), "muted"))
            lines.extend(_record_lines(model, field, others))
    rest = [g for g in after if not (isinstance(g, Opening) and g.instance == index)]
    if rest:
        lines.append(Line("sent after", f"{len(rest)} value{'s' if len(rest) != 1 else ''} for what follows",
                          "muted"))
        lines.extend(_record_lines(model, field, rest))
    return lines


def eq_lines(model: ProofModel, index: int) -> list[Line]:
    """How an eq-factored instance's rounds are read (empty for any other form)."""
    field = model.field
    start = model.instances[index].start
    if start.eq_point is None or field is None:
        return []
    point = start.eq_point if isinstance(start.eq_point, str) else (
        "[" + ", ".join(field.fmt(v) for v in start.eq_point) + "]")
    return [Line("eq-factored", f"sent q_k(0..{start.degree - 1}); the verifier's g_k(X) = "
                                "prod_(i<k) eq(w_i, r_i) * eq(w_k, X) * q_k(X)", "note"),
            Line("eq point w", point)]


def statement_glue(model: ProofModel, index: int) -> list[Line]:
    """The instance's glue in one line each: eq point, link, evaluation, openings received."""
    view = model.instances[index]
    start = view.start
    lines = eq_lines(model, index)[1:]
    if start.claim_expr is not None:
        mark = mark_of(link_status(model, index))
        lines.append(Line("link", f"{mark.symbol} {mark.word}: the claim against {start.claim_expr}", mark.tone))
    status = evaluation_status(model, index)
    if start.final_expr is not None and status is not None:
        mark = mark_of(status)
        lines.append(Line("evaluation", f"{mark.symbol} {mark.word}: the reduced claim against {start.final_expr}", mark.tone))
    openings = [g.name for g in model.glue.following(index) if isinstance(g, Opening) and g.instance == index]
    if openings:
        lines.append(Line("openings", ", ".join(openings)))
    return lines
