"""The replay's results of single events, a round (:class:`RoundResult`) and a batched claim
(:class:`BatchResult`), and the first failed check of a proof (:class:`Failure`). The results
of ``link`` and ``evaluation`` checks and of squeezes are in :mod:`stepper.verify.glue_results`,
the final value's result and the proof's report in :mod:`stepper.verify.verdict`.

A check that passes and keeps no round detail (human ``stepper check``) makes none of these,
and a frozen dataclass costs about half a millisecond of CPU to create at import (its methods
are generated and compiled): the code that makes one imports this module when it does.
Every record is frozen and holds canonical field elements.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal, Union

if TYPE_CHECKING:
    from stepper.field.field import Element

__all__ = ["Status", "Value", "RoundResult", "BatchResult", "Failure"]

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
class Failure:
    """The first failed check of the proof (``round`` 0 for claim-level checks such as ``batch``)."""

    instance: int
    instance_name: str
    round: int
    check: str
    expected: Value
    found: Value
    explanation: str
