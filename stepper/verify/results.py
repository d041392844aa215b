"""The replay's results of single events: a round (:class:`RoundResult`), a batched claim
(:class:`BatchResult`), a ``link`` or ``evaluation`` check (:class:`GlueResult`) and a squeeze
(:class:`SqueezeResult`). The final value's result and the proof's report are in
:mod:`stepper.verify.verdict`.

A check that passes and keeps no round detail (human ``stepper check``) makes none of these,
and a frozen dataclass costs about half a millisecond of CPU to create at import (its methods
are generated and compiled): the code that makes one imports this module when it does.
Every record is frozen and holds canonical field elements.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal, Union

if TYPE_CHECKING:
    from stepper.field.field import Element

__all__ = ["Status", "Value", "RoundResult", "BatchResult", "GlueResult", "SqueezeResult"]

Status = Literal["pass", "fail", "pending"]
Value = Union[int, tuple[int, ...], None]  # an element, or a count (checks whose values are counts)


@dataclass(frozen=True, slots=True)
class RoundResult:
    """One replayed round. ``claim_in`` is c_(k-1) as carried by the replay;
    ``evals`` are g(0..e) decoded from ``values`` (as sent); ``recovered`` names the
    value a compressed form left out (``g(1)`` or ``c1``). ``expected``/``found``
    describe the failed ``check`` (for ``degree``: evaluation counts).
    ``after_failure`` marks rounds evaluated relative to a claim carried past an
    earlier failure of the same instance."""

    instance: int
    instance_name: str
    round: int
    form: str
    claim_in: Element
    values: tuple[Element, ...]
    evals: tuple[Element, ...]
    recovered: str | None
    recovered_value: Element | None
    g0: Element
    g1: Element
    sum01: Element
    degree_seen: int
    degree_bound: int
    challenge: Element | None
    rederived: Element | None
    claim_out: Element | None
    status: Status
    check: str | None = None
    expected: Value = None
    found: Value = None
    explanation: str = ""
    after_failure: bool = False


@dataclass(frozen=True, slots=True)
class BatchResult:
    """The batch check of one instance: claim == sum_i coefficient^i * terms[i]."""

    instance: int
    instance_name: str
    coefficient: Element
    terms: tuple[Element, ...]
    sources: tuple[str, ...]
    combined: Element
    claim: Element
    status: Status
    check: str | None = None
    explanation: str = ""


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
