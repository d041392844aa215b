"""The results of the glue between instances: a ``link`` or ``evaluation`` check
(:class:`GlueResult`) and a squeeze (:class:`SqueezeResult`).

A file without glue makes neither, and a passing check of one with glue makes only these of
the replay's per-event results (its instances' ``link`` and ``evaluation``, and the squeezes
it reports), so they live apart from :mod:`stepper.verify.results`: each frozen dataclass costs
about half a millisecond of CPU to create at import. The code that makes one imports this
module when it does. Every record is frozen and holds canonical field elements.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from stepper.field.field import Element

__all__ = ["GlueResult", "SqueezeResult"]


@dataclass(frozen=True, slots=True)
class GlueResult:
    """A ``link`` or ``evaluation`` check: ``expected`` is the expression's value,
    ``found`` the claim (link) or the reduced claim after the last round (evaluation);
    ``expr`` the expression's text."""

    instance: int
    instance_name: str
    round: int
    check: str
    expr: str
    expected: Element
    found: Element
    status: str
    explanation: str = ""


@dataclass(frozen=True, slots=True)
class SqueezeResult:
    """A ``squeeze`` as sent (``found``: an element, or a tuple for a list) and as the challenge
    source re-derives it (``expected``, the same shape; None when nothing re-derives it, status
    ``unchecked``). ``instance`` is the instance it follows (None before the first) and ``round``
    the rounds that instance had when it arrived."""

    instance: int | None
    name: str
    round: int
    found: Any
    expected: Any
    status: str  # pass, fail or unchecked
