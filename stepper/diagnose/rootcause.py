"""Root cause with the witness: where the prover first went wrong, and why.

A verifier sees only where a lie becomes visible: a wrong round polynomial that
still sums to the claim is caught a round later (or at the final check), and
in the compressed round forms a wrong claim is caught only at the end. Given
the prover's tables and combine expression, :func:`diagnose` recomputes every
round as an honest prover would, *with the challenges recorded in the
transcript* (so a wrong round k does not make the honest rounds after it
disagree), and names the first of:

* ``claim`` (round 0): the claimed sum is not the sum of the combine;
* ``honest-poly`` (round k): the round polynomial sent differs from the honest
  one; ``point`` is the first evaluation point t = 0, 1, ... where they differ
  (both compared in full evaluation form, the sent one decoded from the
  instance's form with the verifier's running claim);
* ``degree`` (round k): the polynomial is the honest one but sent with more
  evaluations than the instance's degree allows;
* ``final``: every round is honest but the final value is not the combine of
  the tables' multilinear extensions at the challenge point;
* ``opening`` (the instance's last round, with the opening's ``name``): an
  opening that follows the instance differs from its table's multilinear
  extension at the instance's challenge point. Tables are looked up in the
  instance's own witness first, then in any other witness instance (a table
  shared between instances is converted once, by the witness fit); each is
  evaluated with one vectorised fold.

Eq-factored rounds are compared as the verifier's g_k (the sent q_k times the
eq factor), the polynomial the witness's combine describes.

Then :mod:`stepper.diagnose.probes` tests known bug classes against that evidence,
and :mod:`stepper.diagnose.glue_evidence` asks the glue probes about the verifier's
first failure when it is a glue check (link, evaluation, an eq-factored sum).
Agreement with the witness is evidence about this one run, never a soundness
proof. Pure: no I/O; progress is reported through an optional callback.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, Iterator, Mapping, Protocol

from stepper.errors import InputError
from stepper.diagnose.honest import HonestRound, honest_rounds
from stepper.field.poly import RoundPoly, lagrange_at, mle_eval, point_from_challenges
from stepper.transcript.model import Opening
from stepper.diagnose.glue_evidence import glue_findings
from stepper.diagnose.probes import ProbeContext, ProbeFinding, first_difference, run_probes
from stepper.diagnose.witness import FittedInstance, fit_witness

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceRecord, Transcript
    from stepper.verify.verdict import Failure, Report
    from stepper.diagnose.witness import Witness

__all__ = ["RootCause", "Diagnosis", "diagnose", "Progress", "COMPRESSED_FORMS", "Engine", "InMemory"]

Progress = Callable[[int, int], None]  # (work done, total work), in table entries processed
COMPRESSED_FORMS = ("evals-no-1", "coeffs-no-linear")
SOUNDNESS_CAVEAT = (
    "Agreement with the witness is evidence about this one run: it does not show that the protocol, "
    "its Fiat-Shamir transform or the verifier is sound."
)


class Engine(Protocol):
    """What computes the honest rounds and the openings' values (in memory, or Dask)."""

    def honest_rounds(self, field: Field, tables: Mapping[str, Any], expr: Any, challenges: Any, order: str,
                      num_points: int, *, on_round: Callable[[int], None] | None = None) -> Iterator[Any]: ...

    def mle_eval(self, field: Field, table: Any, point: Any) -> Element: ...


class InMemory:
    """The default engine: numpy on whole tables (:mod:`stepper.diagnose.honest`)."""

    honest_rounds = staticmethod(honest_rounds)
    mle_eval = staticmethod(mle_eval)


@dataclass(frozen=True, slots=True)
class RootCause:
    """The first thing the prover sent that an honest prover with this witness would not.
    ``honest`` / ``sent`` are full evaluations g(0..) of the round (or the claim or
    final value alone); ``expected`` / ``found`` are at ``point`` (counts for ``degree``)."""

    instance: int
    instance_name: str
    round: int
    check: str
    point: int | None
    expected: Element
    found: Element
    honest: tuple[Element, ...]
    sent: tuple[Element, ...]
    form: str
    name: str | None = None  # the opening's name, for check ``opening``


@dataclass(frozen=True, slots=True)
class Diagnosis:
    """The outcome of :func:`diagnose`: the root cause (None when the witness agrees
    with everything checked), the probe findings, where the verifier noticed, and
    which instances had no witness."""

    field: Field
    root_cause: RootCause | None
    findings: tuple[ProbeFinding, ...]
    first_failure: Failure | None
    checked: tuple[str, ...]
    unchecked: tuple[str, ...]
    rounds_checked: int
    by_position: tuple[tuple[str, str], ...] = ()  # (witness name, transcript name) matched by position

    def root_cause_json(self) -> dict[str, Any] | None:
        """The transcripts/EVENTS.md ``root_cause`` object, plus where the verifier noticed."""
        cause = self.root_cause
        if cause is None:
            return None
        fmt = self._fmt
        noticed = self.first_failure
        out: dict[str, Any] = {
            "instance": cause.instance,
            "instance_name": cause.instance_name,
            "round": cause.round,
            "check": cause.check,
            "point": cause.point,
            "expected": fmt(cause.expected, cause.check),
            "found": fmt(cause.found, cause.check),
            "honest": [self.field.fmt(self.field.lift(v)) for v in cause.honest],
            "sent": [self.field.fmt(self.field.lift(v)) for v in cause.sent],
            "form": cause.form,
            **({"name": cause.name} if cause.name is not None else {}),
            "noticed": None if noticed is None else {
                "instance": noticed.instance, "instance_name": noticed.instance_name,
                "round": noticed.round, "check": noticed.check},
            "probes": [f.probe for f in self.findings],
            "explanation": self.explain()[0],
        }
        return out

    def findings_json(self) -> list[dict[str, Any]]:
        return [f.to_json() for f in self.findings]

    def explain(self) -> list[str]:
        """Human sentences: where the prover erred, where the verifier noticed, why the
        gap, what the probes found, and the soundness caveat."""
        cause = self.root_cause
        lines: list[str] = []
        if cause is None:
            lines.append(
                f"The witness agrees with everything sent in {len(self.checked)} instance(s) "
                f"({self.rounds_checked} round(s)): claims, round polynomials and final values are the honest ones.")
            if self.first_failure is not None:
                ff = self.first_failure
                lines.append(
                    f"The verifier's rejection (instance {ff.instance} '{ff.instance_name}', round {ff.round}, "
                    f"check {ff.check}) is therefore not a wrong prover message for these tables: look at the "
                    "challenges, the batching, the declared degree or form, or the verifier's own expectations.")
        else:
            lines.append(self._cause_sentence(cause))
            lines.extend(self._gap_sentences(cause))
            if self.findings:
                lines.extend(f"Probe {f.probe}: {f.message}." for f in self.findings)
            else:
                lines.append("No known bug class (probes: variable order, reversed point, challenge shift, "
                             "Montgomery form, product of sums, point count, negation, reduction) reproduces "
                             "the sent values exactly.")
        for wname, tname in self.by_position:
            lines.append(f"Witness instance '{wname}' names no transcript instance; it was matched by position "
                         f"to '{tname}': make sure that is the instance you meant.")
        if self.unchecked:
            names = ", ".join(f"'{n}'" for n in self.unchecked[:5])
            more = f" and {len(self.unchecked) - 5} more" if len(self.unchecked) > 5 else ""
            lines.append(f"No witness for instance(s) {names}{more}: not checked.")
        if cause is None:
            lines.append(SOUNDNESS_CAVEAT)
        return lines

    # ----- sentences ------------------------------------------------------------------------
    def _fmt(self, value: Element, check: str) -> str:
        if check == "degree":
            return str(value)
        return self.field.fmt(self.field.lift(value))

    def _cause_sentence(self, cause: RootCause) -> str:
        where = f"instance {cause.instance} '{cause.instance_name}'"
        exp, found = self._fmt(cause.expected, cause.check), self._fmt(cause.found, cause.check)
        if cause.check == "claim":
            return f"The prover first went wrong in {where} at the claimed sum (round 0): the tables sum to {exp}, " \
                   f"the claim is {found}."
        if cause.check == "opening":
            return f"The prover first went wrong in {where} at the opening {cause.name!r} after round " \
                   f"{cause.round}: it sent {found}, but its table's multilinear extension at the instance's " \
                   f"challenge point is {exp}."
        if cause.check == "final":
            return f"The prover first went wrong in {where} at the final value: every round is honest, but the " \
                   f"final value is {found} where the tables give {exp} at the challenge point."
        if cause.check == "degree":
            return f"The prover first went wrong in {where}, round {cause.round}: the honest polynomial, but sent " \
                   f"with {found} values where the degree allows {exp}."
        head = f"The prover first went wrong in {where}, round {cause.round}: its round polynomial differs from " \
               f"the honest one at point {cause.point}"
        if cause.point is not None and cause.point >= len(cause.sent):
            return f"{head} (honest g({cause.point}) = {exp}; the sent polynomial, given by {len(cause.sent)} " \
                   f"evaluation(s), extends to {found} there)."
        return f"{head} (honest g({cause.point}) = {exp}, sent {found})."

    def _gap_sentences(self, cause: RootCause) -> list[str]:
        ff = self.first_failure
        if ff is None:
            return ["The verifier accepted or did not reach a check that could notice: the lie went unseen "
                    "by the replay."]
        where = f"instance {ff.instance}, round {ff.round} (check {ff.check})"
        if (ff.instance, ff.round) == (cause.instance, cause.round) or (
                cause.check == "claim" and ff.instance == cause.instance and ff.round == 1 and ff.check == "sum"):
            return [f"The verifier noticed at once: {where}."]
        if ff.instance < cause.instance or (ff.instance == cause.instance and ff.round < cause.round):
            return [f"The verifier failed earlier, at {where}, for a reason the witness does not show "
                    "(an earlier message agrees with the honest prover)."]
        if ff.instance != cause.instance:
            return [f"The verifier noticed only in a later instance: {where}."]
        gap = ff.round - cause.round
        if cause.check == "claim" and cause.form in COMPRESSED_FORMS:
            why = (f"in the compressed form {cause.form} the left-out value is recovered from the claim, so every "
                   "sum check holds by construction and only the final check can expose a wrong claim")
        elif cause.check == "claim":
            why = "the first round was made to sum to the wrong claim, which moved the error into later rounds"
        elif cause.check == "final":
            why = "the final value is only checked at the end"
        elif cause.check == "opening":
            why = "an opening is only used where an expression names it"
        elif ff.check == "final" and cause.form in COMPRESSED_FORMS:
            why = (f"in the compressed form {cause.form} each round's left-out value is recovered from the claim "
                   "carried into it, so every sum check holds by construction and only the final check could "
                   "expose the wrong round")
        elif ff.check == "final":
            why = (f"every round from {cause.round} on summed to the claim carried into it (the prover stayed "
                   "consistent with its own tables as it had folded them), so only the final check against the "
                   "tables' value at the challenge point could expose it")
        else:
            why = (f"the wrong round {cause.round} polynomial still satisfied g(0) + g(1) = claim, so only its "
                   f"value at the challenge, carried into the next round's claim, could expose it")
        return [f"The verifier noticed only at {where}, {gap} round(s) later: {why}."]


# ----- the diagnosis -----------------------------------------------------------------------
def diagnose(transcript: Transcript, witness: Witness, report: Report | None = None, *,
             progress: Progress | None = None, engine: Engine | None = None) -> Diagnosis:
    """Compare every instance that has a witness with an honest prover; stop at the
    first root cause and run the probes on it. Raises :class:`WitnessError` when the
    witness does not fit the transcript. ``engine`` (e.g. the Dask engine) computes the
    honest rounds and the openings in place of the in-memory functions; the probes that
    run once a root cause is found stay in memory."""
    engine = engine if engine is not None else InMemory()
    if report is None:
        from stepper.verify.replay import replay_transcript

        report = replay_transcript(transcript)
    fitted = fit_witness(witness, transcript)
    field = transcript.field
    total = sum(2 << transcript.instances[i].start.num_vars for i in fitted)
    done = 0
    checked: list[str] = []
    rounds_checked = 0
    cause: RootCause | None = None
    findings: tuple[ProbeFinding, ...] = ()
    shared: dict[str, Any] = {}  # table name -> field vector, over every fitted instance (own tables win below)
    for fit in fitted.values():
        for tname, table in fit.tables.items():
            shared.setdefault(tname, table)
    named = _named_values(transcript)
    for index, inst in enumerate(transcript.instances):
        fit = fitted.get(index)  # type: ignore[assignment]
        if fit is None:
            cause = _check_openings(field, inst, {}, shared, transcript, engine)
            if cause is not None:
                findings = _opening_probes(field, inst, cause, {}, shared, transcript)
                break
            continue
        checked.append(inst.name)

        def advance(k: int, n: int = 1 << inst.start.num_vars) -> None:
            if progress is not None:
                progress(done + 2 * n - (n >> (k - 1)), total)

        cause, ctx, rounds = _check_instance(field, inst, fit, advance, named, engine)
        rounds_checked += rounds
        done += 2 << inst.start.num_vars
        if progress is not None:
            progress(done, total)
        if cause is not None:
            findings = run_probes(ctx) if ctx is not None else ()
            break
        cause = _check_openings(field, inst, fit.tables, shared, transcript, engine)
        if cause is not None:
            findings = _opening_probes(field, inst, cause, fit.tables, shared, transcript)
            break
    # link, evaluation and eq-factored sums need no witness (the opening probes ran above)
    findings = (*findings, *glue_findings(transcript, report.first_failure))
    unchecked = tuple(i.name for j, i in enumerate(transcript.instances) if j not in fitted)
    by_position = tuple((fit.witness_name, fit.name) for fit in fitted.values()
                        if fit.witness_name and fit.witness_name != fit.name)
    return Diagnosis(field, cause, findings, report.first_failure, tuple(checked), unchecked, rounds_checked,
                     by_position)


def _sent_polys(field: Field, inst: InstanceRecord, named: dict[str, Any]) -> list[tuple[Element, ...]]:
    """Every round decoded to full evaluations with the verifier's running claim (an
    eq-factored round as the verifier's g_k)."""
    from stepper.verify.glue import EqFactor

    out: list[tuple[Element, ...]] = []
    claim: Element | None = inst.start.claim
    eqf = None
    point = inst.start.eq_point
    if point is not None:
        w = named.get(point) if isinstance(point, str) else point
        eqf = EqFactor(field, tuple(w), inst.start.order) if isinstance(w, (tuple, list)) else None
    for rnd in inst.rounds:
        if claim is None:
            break
        try:
            poly = RoundPoly.from_form(field, inst.start.form, rnd.values, claim)
        except InputError:
            poly = RoundPoly(tuple(field.lift(v) for v in rnd.values))
        if eqf is not None and poly.evals:
            poly = RoundPoly(eqf.expand(poly.evals, rnd.number))
            if rnd.challenge is not None:
                eqf.advance(rnd.number, rnd.challenge)
        out.append(poly.evals)
        claim = poly.at(field, rnd.challenge) if rnd.challenge is not None and poly.evals else None
    return out


def _named_values(transcript: Transcript) -> dict[str, Any]:
    """Every value and squeeze of the proof by name (lists as tuples), for eq points."""
    out: dict[str, Any] = {}
    for g in (*transcript.glue, *(g for inst in transcript.instances for g in inst.glue)):
        if not isinstance(g, Opening):
            out[g.name] = g.value
    return out


def _point(inst: InstanceRecord) -> tuple[Element, ...] | None:
    challenges = [r.challenge for r in inst.rounds if r.challenge is not None]
    if len(challenges) != inst.start.num_vars:
        return None
    return point_from_challenges(challenges, inst.start.order)


def _table_for(opening: Opening, own: Mapping[str, Any], shared: Mapping[str, Any], inst: InstanceRecord) -> Any:
    table = own.get(opening.table)
    if table is None:
        table = shared.get(opening.table)
    if table is None or len(table) != 1 << inst.start.num_vars:
        return None  # no table of that name and size: the opening cannot be checked with this witness
    return table


def _check_openings(field: Field, inst: InstanceRecord, own: Mapping[str, Any], shared: Mapping[str, Any],
                    transcript: Transcript, engine: Engine) -> RootCause | None:
    """The first opening of ``inst`` that differs from its table's extension at the instance's point."""
    point = _point(inst)
    if point is None:
        return None
    start = inst.start
    for opening in inst.openings:
        table = _table_for(opening, own, shared, inst)
        if table is None:
            continue
        honest = engine.mle_eval(field, table, point)
        if field.lift(honest) != field.lift(opening.value):
            return RootCause(start.index, start.name, start.num_vars, "opening", None, honest, opening.value,
                             (honest,), (opening.value,), start.form, opening.name)
    return None


def _opening_probes(field: Field, inst: InstanceRecord, cause: RootCause, own: Mapping[str, Any],
                    shared: Mapping[str, Any], transcript: Transcript) -> tuple[ProbeFinding, ...]:
    """The glue probes for a wrong opening: read at the wrong point, or another table's value."""
    from stepper.diagnose.glue_probes import probe_opening_point, probe_opening_table

    opening = next(o for o in inst.openings if o.name == cause.name)
    point = _point(inst)
    table = _table_for(opening, own, shared, inst)
    if point is None or table is None:
        return ()
    others = {i.name: p for i in transcript.instances if i is not inst and (p := _point(i)) is not None}
    found = probe_opening_point(field, opening.name, opening.value, table, point, others, instance=cause.instance)
    if found is None:
        values = {name: mle_eval(field, t, point) for name, t in {**shared, **own}.items()
                  if len(t) == 1 << inst.start.num_vars}
        found = probe_opening_table(field, opening.name, opening.table, opening.value, values,
                                    instance=cause.instance)
    return () if found is None else (found,)


def _check_instance(field: Field, inst: InstanceRecord, fit: FittedInstance, advance: Callable[[int], None],
                    named: dict[str, Any], engine: Engine) -> tuple[RootCause | None, ProbeContext | None, int]:
    start = inst.start
    form = start.form
    sent = _sent_polys(field, inst, named)
    challenges = tuple(r.challenge for r in inst.rounds if r.challenge is not None)
    expr = fit.combine

    def context(check: str, round_: int, values: tuple[Element, ...], honest: tuple[Element, ...]) -> ProbeContext:
        return ProbeContext(field, start, fit.tables, expr, challenges, check, round_, values, honest,
                            tuple(tuple(r.values) for r in inst.rounds))

    def cause_of(check: str, round_: int, point: int | None, expected: Element, found: Element,
                 honest: tuple[Element, ...], sent_evals: tuple[Element, ...]) -> RootCause:
        return RootCause(start.index, start.name, round_, check, point, expected, found, honest, sent_evals, form)

    rounds = 0
    if start.num_vars == 0:
        env = {n: _first(field, t) for n, t in fit.tables.items()}
        value = expr.evaluate_scalar(field, env)
        c = _claim_or_final(field, inst, value, value, cause_of)
        if c is None:
            return None, None, 0
        return c, context(c.check, c.round, c.sent, c.honest), 0
    for item in engine.honest_rounds(field, fit.tables, expr, challenges, start.order, start.degree + 1,
                                     on_round=advance):
        if isinstance(item, HonestRound):
            if item.round == 1:
                honest_claim = field.add(item.evals[0], item.evals[1])
                if field.lift(start.claim) != honest_claim:
                    c = cause_of("claim", 0, None, honest_claim, start.claim, (honest_claim,), (start.claim,))
                    return c, context("claim", 0, (start.claim,), (honest_claim,)), 0
            k = item.round
            if k > len(sent):
                return None, None, rounds
            rounds += 1
            got = sent[k - 1]
            values = tuple(inst.rounds[k - 1].values)
            point = first_difference(field, got, item.evals)
            if point is not None:
                expected = _value_at(field, item.evals, point)
                found = _value_at(field, got, point)
                c = cause_of("honest-poly", k, point, expected, found, item.evals, got)
                return c, context("honest-poly", k, values, item.evals), rounds
            if len(got) > start.degree + 1:
                c = cause_of("degree", k, None, start.degree + 1, len(got), item.evals, got)
                return c, context("degree", k, values, item.evals), rounds
        else:
            value = expr.evaluate_scalar(field, item)
            c = _claim_or_final(field, inst, None, value, cause_of)
            return c, (context("final", start.num_vars, (inst.final,), (value,)) if c else None), rounds  # type: ignore[arg-type]
    return None, None, rounds


def _claim_or_final(field: Field, inst: InstanceRecord, claim: Element | None, final: Element,
                    cause_of: Callable[..., RootCause]) -> RootCause | None:
    """The claim (when ``claim`` is given) or else the final value against the honest ones."""
    start = inst.start
    if claim is not None and field.lift(start.claim) != field.lift(claim):
        return cause_of("claim", 0, None, claim, start.claim, (claim,), (start.claim,))
    if inst.final is not None and field.lift(inst.final) != field.lift(final):
        return cause_of("final", start.num_vars, None, final, inst.final, (final,), (inst.final,))
    return None


def _value_at(field: Field, evals: tuple[Element, ...], t: int) -> Element:
    return field.lift(evals[t]) if t < len(evals) else lagrange_at(field, evals, field.embed(t))


def _first(field: Field, arr: Any) -> Element:
    if arr.ndim == 1:
        return field.lift(int(arr[0]))
    return tuple(int(c) for c in arr[0])
