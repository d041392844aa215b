"""One entry point for every reference prover: a :class:`ProveSpec` in, a proof out.

The CLI (``stepper prove``, ``stepper demo``), transcripts/regenerate.py and the
samples all build their proofs here, so the same spec always gives the same
records. Statements come from a seed: random tables for ``generic``,
``zerocheck``, ``perm-direct`` and ``perm-grouped``; the Brackwater Ferries
sailing (:mod:`stepper.provers.scenario`) for ``ferries``, whose proof holds the
boarding permutation check and the deck-slot zero-check. Pure apart from the
sink the records go to.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from stepper.errors import UsageError
from stepper.provers.channel import ProofChannel
from stepper.provers.counting import MulCounter
from stepper.provers.engine import ProofRun
from stepper.provers.faults import GLUE_FAULT_KINDS, Fault
from stepper.provers.generic import prove_sum, prove_zero
from stepper.provers.grouped import prove_permutation_grouped
from stepper.provers.permcheck import PermStatement, prove_permutation_direct
from stepper.verify.fiatshamir import BUILTIN_SCHEDULES, SCHEDULE_NAME

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.provers.channel import EventSink

__all__ = ["KINDS", "ProveSpec", "prove", "parse_field", "random_permutation_statement"]

KINDS = ("generic", "zerocheck", "zerocheck-eq", "perm-direct", "perm-grouped", "gkr-product", "ferries",
         "ferries-fingerprint")
DEFAULT_COMBINE = {"generic": "a * b + c", "zerocheck": "a * b - c", "zerocheck-eq": "a * b - c"}


@dataclass(frozen=True, slots=True)
class ProveSpec:
    """What to prove and how. ``groups`` 0 means the direct permutation check
    (for ``ferries``); ``switch_round`` None means "while buckets pay off"."""

    kind: str
    num_vars: int = 8
    seed: int = 1
    groups: int = 2
    switch_round: int | None = None
    fault: Fault | None = None
    order: str = "low-first"
    form: str = "evals"
    combine: str | None = None
    tamper: str | None = None
    label: str = ""
    schedule: str = SCHEDULE_NAME  # the built-in Fiat-Shamir schedule the proof declares

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise UsageError(f"expected a prover kind among {', '.join(KINDS)}, found {self.kind!r}")
        if not 1 <= self.num_vars <= 24:
            raise UsageError(f"expected --num-vars between 1 and 24, found {self.num_vars}")
        if self.schedule not in BUILTIN_SCHEDULES:
            raise UsageError(f"expected a schedule among {', '.join(BUILTIN_SCHEDULES)}, found {self.schedule!r}")
        if not 0 <= self.seed < 1 << 63:
            raise UsageError(f"expected a non-negative --seed below 2^63, found {self.seed}")
        fault = self.fault
        if fault is not None and fault.name in GLUE_FAULT_KINDS and self.kind not in GLUE_FAULT_KINDS[fault.name]:
            kinds = ", ".join(GLUE_FAULT_KINDS[fault.name]) or "no kind yet"
            raise UsageError(f"expected fault {fault.name} with a prover kind that makes it ({kinds}), "
                             f"found --kind {self.kind}")
        if fault is not None:
            count = self.instance_count
            if fault.instance >= count:
                raise UsageError(f"expected a fault instance below {count} (a {self.kind} proof has {count} "
                                 f"instance{'s' if count > 1 else ''}), found {fault.instance}")
            if fault.round > self.num_vars:
                raise UsageError(f"expected the fault round at most {self.num_vars} (the number of rounds), "
                                 f"found {fault.round}")

    @property
    def instance_count(self) -> int:
        """Instances in the proof this spec makes."""
        if self.kind == "perm-grouped":
            return 2
        if self.kind == "ferries":
            return 3 if self.groups else 2
        if self.kind in ("gkr-product", "ferries-fingerprint"):
            return max(self.num_vars - 1, 1)
        return 1


def parse_field(text: str) -> Field:
    """``babybear``, ``babybear^4``, ``goldilocks^2`` or a prime modulus (decimal or 0x)."""
    from stepper.errors import FieldError
    from stepper.field.spec import field_from_spec

    name, caret, degree = text.strip().partition("^")
    spec: dict[str, object] = {"modulus": name} if name[:1].isdigit() else {"name": name}
    if caret:
        if not degree.isdigit():
            raise UsageError(f"expected --field NAME or NAME^K with K an integer, found {text!r}")
        spec["extension_degree"] = int(degree)
    try:
        return field_from_spec(spec)
    except FieldError as err:
        raise UsageError(f"--field {text}: {err.message}") from None


def random_permutation_statement(field: Field, num_vars: int, seed: int) -> PermStatement:
    """f random, sigma random, g = f o sigma."""
    rng = np.random.default_rng(seed)
    n = 1 << num_vars
    f = field.base.vrandom(n, rng)
    sigma = rng.permutation(n)
    return PermStatement(f, f[sigma], sigma)


def prove(spec: ProveSpec, field: Field, sink: EventSink, *, witness: bool = True) -> ProofRun:
    """Run the reference prover ``spec`` names over ``field``, records to ``sink``
    (``witness`` False spares the grouped prover its second-layer witness tables)."""
    channel = ProofChannel(field, sink, label=spec.label or f"stepper reference prover: {spec.kind}", fault=spec.fault,
                           schedule=spec.schedule)
    counter = MulCounter(field)
    mu = spec.num_vars
    if spec.kind in ("generic", "zerocheck", "zerocheck-eq"):
        from stepper.field.expr import parse

        combine = spec.combine or DEFAULT_COMBINE[spec.kind]
        names = parse(combine).names()
        rng = np.random.default_rng(spec.seed)
        tables = {n: field.vrandom(1 << mu, rng) for n in names}
        if spec.kind == "generic":
            return prove_sum(channel, counter, "sum", tables, combine, order=spec.order, form=spec.form)
        if combine == DEFAULT_COMBINE["zerocheck"]:
            tables["c"] = field.vmul(tables["a"], tables["b"])  # a * b - c vanishes everywhere
        if spec.kind == "zerocheck":
            return prove_zero(channel, counter, "zero", tables, [combine], order=spec.order, form=spec.form)
        from stepper.provers.eqfactored import prove_zero_factored

        if spec.form != "evals":
            raise UsageError(f"expected no --form with --kind zerocheck-eq (its rounds are eq-factored), "
                             f"found --form {spec.form}")
        return prove_zero_factored(channel, counter, "zero", tables, [combine], order=spec.order)
    if spec.kind in ("gkr-product", "ferries-fingerprint"):
        if spec.order != "low-first":
            raise UsageError("expected --order low-first for the GKR product circuit (its layers bind x_1 first)")
        if spec.kind == "ferries-fingerprint":
            from stepper.provers.ferries import prove_fingerprint

            return prove_fingerprint(channel, counter, seed=spec.seed, num_vars=mu, tamper=spec.tamper,
                                     form=spec.form)
        from stepper.provers.gkr import prove_grand_product

        table = field.base.vrandom(1 << mu, np.random.default_rng(spec.seed))
        return prove_grand_product(channel, counter, table, form=spec.form)
    if spec.kind == "ferries":
        from stepper.provers.ferries import prove_sailing

        return prove_sailing(channel, counter, seed=spec.seed, num_vars=spec.num_vars, groups=spec.groups,
                             switch_round=spec.switch_round, tamper=spec.tamper, form=spec.form)
    statement = random_permutation_statement(field, mu, spec.seed)
    if spec.order != "low-first":
        raise UsageError("expected --order low-first for the permutation checks (they bind x_1 first)")
    if spec.kind == "perm-direct":
        return prove_permutation_direct(channel, counter, statement, form=spec.form)
    return prove_permutation_grouped(channel, counter, statement, spec.groups, switch_round=spec.switch_round,
                                     form=spec.form, witness=witness)
