"""The first divergence in the glue between sumchecks: values, squeezes, openings, links.

Pure, used by :mod:`stepper.compare.divergence`. The glue of a proof is what
stands between its instances: named public ``value`` events, ``squeeze``
events (verifier randomness drawn outside the rounds), ``opening`` events (a
table's claimed value at an instance's point) and an instance's ``claim_expr``
/ ``final_expr`` / ``eq_point``. Glue is compared in stream order, element by
element, by position; what differs first is classified:

* a different opening after identical rounds (``different-opening``): the two
  runs evaluated a table differently at the same point, or opened another table;
* a different squeeze after identical glue (``squeeze-drift``): the two
  Fiat-Shamir transcripts absorbed different bytes before it;
* a different public value (``different-value``): the statements differ;
* a different ``claim_expr`` / ``final_expr`` / ``eq_point`` text, or a claim that
  differs while the glue it is linked to agrees (``link``): one side builds or
  checks the link differently;
* glue one side sends and the other does not (``truncated`` / ``statement``).

A constant factor between two openings is reported as such (as for round values).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

from stepper.compare.alignment import Classification, Divergence
from stepper.diagnose.radix import constant_ratio, factor_name

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.transcript.model import InstanceRecord

__all__ = ["GLUE_KEYS", "glue_divergence", "link_keys_divergence", "claim_link", "glue_kind", "glue_items", "glue_text"]

Found = tuple[Divergence, Classification, list[str]]
GLUE_KEYS = ("eq_point", "claim_expr", "final_expr")
_KIND = {"NamedValue": "value", "Squeeze": "squeeze", "Opening": "opening"}


def glue_kind(event: Any) -> str:
    """``value``, ``squeeze`` or ``opening``."""
    return _KIND.get(type(event).__name__, type(event).__name__.lower())


def glue_items(field: Field, event: Any) -> list[Any]:
    """The elements a glue event carries, lifted into ``field``."""
    if glue_kind(event) == "opening":
        return [field.lift(event.value)]
    return [field.lift(v) for v in event.items()]


def glue_text(field: Field, items: Sequence[Any]) -> str:
    """One element as text, several as a bracketed list."""
    shown = [field.fmt(v) for v in items]
    return shown[0] if len(shown) == 1 else "[" + ", ".join(shown) + "]"


def glue_divergence(field: Field, glue_a: Sequence[Any], glue_b: Sequence[Any], *, where: str,
                    instance: tuple[int | None, int | None, str | None] = (None, None, None),
                    round_: int | None = None) -> Found | None:
    """The first difference between two glue sequences (``where`` says whose glue: before
    the first instance, or after instance 'x'); None when they agree."""
    ia, ib, name = instance
    for j in range(max(len(glue_a), len(glue_b))):
        ga = glue_a[j] if j < len(glue_a) else None
        gb = glue_b[j] if j < len(glue_b) else None
        if ga is None or gb is None:
            present = ga if ga is not None else gb
            short = "a" if ga is None else "b"
            div = Divergence(glue_kind(present), ia, ib, name, round_, j, present.name,  # type: ignore[union-attr]
                             None if ga is None else glue_text(field, glue_items(field, ga)),
                             None if gb is None else glue_text(field, glue_items(field, gb)))
            return div, Classification(
                "truncated", f"{short.upper()} stops before the {glue_kind(present)} {present.name} {where}; "  # type: ignore[union-attr]
                "everything both sides hold agrees.", side=short), []
        ka, kb = glue_kind(ga), glue_kind(gb)
        if (ka, ga.name) != (kb, gb.name):
            div = Divergence(ka, ia, ib, name, round_, j, f"{ka} {ga.name} / {kb} {gb.name}",
                             f"{ka} {ga.name}", f"{kb} {gb.name}")
            return div, Classification(
                "statement", f"A sends the {ka} {ga.name} {where} where B sends the {kb} {gb.name}: the two runs "
                "send different glue from here on."), []
        va, vb = glue_items(field, ga), glue_items(field, gb)
        if va == vb and getattr(ga, "table", None) == getattr(gb, "table", None):
            continue
        div = Divergence(ka, ia, ib, name, round_, j, ga.name, glue_text(field, va), glue_text(field, vb))
        if ka == "opening":
            return div, _opening(field, ga, gb, va, vb, where), []
        if ka == "squeeze":
            return div, Classification(
                "squeeze-drift", f"The squeeze {ga.name} {where} differs although everything before it agrees: "
                "the two Fiat-Shamir transcripts absorbed different bytes before drawing it (an opening or "
                "value absorbed on one side only, or encoded differently)."), []
        return div, Classification(
            "different-value", f"The public value {ga.name} {where} differs: the two runs prove statements "
            "about different public inputs or points."), []
    return None


def _opening(field: Field, ga: Any, gb: Any, va: list[Any], vb: list[Any], where: str) -> Classification:
    if ga.table != gb.table:
        return Classification(
            "different-opening", f"The opening {ga.name} {where} opens table {ga.table} in A and {gb.table} in "
            "B: the two runs open different tables under one name.")
    ratio, _ = constant_ratio(field, list(zip(va, vb)))
    named = factor_name(field, ratio) if ratio is not None else None
    if named is not None:
        return Classification(
            "constant-factor", f"The opening {ga.name} {where} in B is A's times {named}: one side keeps the "
            "opened value in another representation.", factor=field.fmt(ratio), factor_name=named)  # type: ignore[arg-type]
    return Classification(
        "different-opening", f"Every round and challenge agrees but the opening {ga.name} (table {ga.table}) "
        f"{where} differs: the two runs evaluated the table at the same point differently (another point, "
        "the coordinates in another order, another table's value) or their tables differ.")


def link_keys_divergence(field: Field, ia: InstanceRecord, ib: InstanceRecord,
                         instance: tuple[int | None, int | None, str | None]) -> Found | None:
    """An instance's ``eq_point`` / ``claim_expr`` / ``final_expr`` differing between A and B."""
    for key in GLUE_KEYS:
        a, b = getattr(ia.start, key, None), getattr(ib.start, key, None)
        if isinstance(a, tuple):
            a = glue_text(field, [field.lift(v) for v in a])
        if isinstance(b, tuple):
            b = glue_text(field, [field.lift(v) for v in b])
        if a != b:
            div = Divergence("statement", *instance, 0, None, key, None if a is None else str(a),
                             None if b is None else str(b))
            return div, Classification(
                "link", f"The instance's {key} differs (A {a!r}, B {b!r}): the two runs tie this instance to "
                "the rest of the proof by different expressions."), []
    return None


def claim_link(ia: InstanceRecord) -> Classification | None:
    """For claims that differ while everything before agrees: when the instance has a
    ``claim_expr`` (the same on both sides), the link is where they part."""
    expr = getattr(ia.start, "claim_expr", None)
    if expr is None:
        return None
    return Classification(
        "link", f"The claims differ while the glue before them agrees and both link the claim by claim_expr "
        f"{expr!r}: one side did not build its claim from that expression (a stale coefficient, another "
        "opening, a slip in the combination).")
