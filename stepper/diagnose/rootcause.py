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
  shared between instances is checked once, by the witness fit); each is
  evaluated by the engine's folds.

The rounds and the openings come from an engine: by default
:class:`stepper.diagnose.folding.ChunkedFold`, which reads each table once in pieces
and never holds a stored table whole; :class:`InMemory` reads the tables whole first;
the Dask engine runs blocks as tasks. All give the same values. The result types and
their words are in :mod:`stepper.diagnose.diagnosis` (re-exported here).

Eq-factored rounds are compared as the verifier's g_k (the sent q_k times the
eq factor), the polynomial the witness's combine describes.

Then :mod:`stepper.diagnose.probes` tests known bug classes against that evidence,
and :mod:`stepper.diagnose.glue_evidence` asks the glue probes about the verifier's
first failure when it is a glue check (link, evaluation, an eq-factored sum).
Agreement with the witness is evidence about this one run, never a soundness
proof. Pure: no I/O; progress is reported through an optional callback.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator, Mapping, Protocol

from stepper.errors import InputError
from stepper.diagnose.diagnosis import COMPRESSED_FORMS, SOUNDNESS_CAVEAT, Diagnosis, RootCause, UncheckedOpening
from stepper.diagnose.folding import ChunkedFold
from stepper.diagnose.honest import HonestRound, honest_rounds
from stepper.diagnose.stored_table import table_rows, whole_table
from stepper.field.kernels.base import work_of
from stepper.field.poly import RoundPoly, lagrange_at, mle_eval, point_from_challenges
from stepper.transcript.model import Opening
from stepper.diagnose.glue_evidence import glue_findings
from stepper.diagnose.probes import ProbeContext, ProbeFinding, first_difference, run_probes
from stepper.diagnose.witness_fit import FittedInstance, fit_witness

if TYPE_CHECKING:
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceRecord, Transcript
    from stepper.verify.verdict import Report
    from stepper.diagnose.witness import Witness

__all__ = ["RootCause", "Diagnosis", "diagnose", "Progress", "COMPRESSED_FORMS", "SOUNDNESS_CAVEAT", "Engine",
           "InMemory", "PROBE_MAX_ENTRIES"]

Progress = Callable[[int, int], None]  # (work done, total work), in table entries processed
PROBE_MAX_ENTRIES = 1 << 24  # the probes read an instance's tables whole: not past this many entries per table


class Engine(Protocol):
    """What computes the honest rounds and the openings' values (chunked, whole tables, or Dask).
    Tables are field vectors or :class:`stepper.diagnose.stored_table.StoredTable`; ``on_work``
    may report progress inside a long pass, in the units of ``on_round``."""

    def honest_rounds(self, field: Field, tables: Mapping[str, Any], expr: Any, challenges: Any, order: str,
                      num_points: int, *, on_round: Callable[[int], None] | None = None,
                      on_work: Callable[[int], None] | None = None) -> Iterator[Any]: ...

    def mle_eval(self, field: Field, table: Any, point: Any, *,
                 on_work: Callable[[int], None] | None = None) -> Element: ...


class InMemory:
    """Numpy on whole tables (:mod:`stepper.diagnose.honest`): every table is read into memory
    first. The default engine is :class:`stepper.diagnose.folding.ChunkedFold`."""

    @staticmethod
    def honest_rounds(field: Field, tables: Mapping[str, Any], expr: Any, challenges: Any, order: str,
                      num_points: int, *, on_round: Callable[[int], None] | None = None,
                      on_work: Callable[[int], None] | None = None) -> Iterator[Any]:
        whole = {name: whole_table(tables[name]) for name in expr.names()}
        return honest_rounds(field, whole, expr, challenges, order, num_points, on_round=on_round)

    @staticmethod
    def mle_eval(field: Field, table: Any, point: Any, *, on_work: Callable[[int], None] | None = None) -> Element:
        return mle_eval(field, whole_table(table), point)


# ----- the diagnosis -----------------------------------------------------------------------
def diagnose(transcript: Transcript, witness: Witness, report: Report | None = None, *,
             progress: Progress | None = None, engine: Engine | None = None) -> Diagnosis:
    """Compare every instance that has a witness with an honest prover; stop at the
    first root cause and run the probes on it. Raises :class:`WitnessError` when the
    witness does not fit the transcript. ``engine`` (e.g. the Dask engine) computes the
    honest rounds and the openings in place of the default :class:`ChunkedFold` (tables read in
    pieces); the probes that run once a root cause is found read the tables they need whole."""
    engine = engine if engine is not None else ChunkedFold()
    if report is None:
        from stepper.verify.replay import replay_transcript

        report = replay_transcript(transcript)
    fitted = fit_witness(witness, transcript)
    entries = sum(len(fit.tables) << transcript.instances[i].start.num_vars for i, fit in fitted.items())
    with work_of(entries):  # numpy alone below the size where loading numba pays for itself
        return _diagnose(transcript, fitted, report, progress, engine)


def _diagnose(transcript: Transcript, fitted: Mapping[int, FittedInstance], report: Report,
              progress: Progress | None, engine: Engine) -> Diagnosis:
    field = transcript.field
    total = sum(2 << transcript.instances[i].start.num_vars for i in fitted)
    done = 0
    checked: list[str] = []
    rounds_checked = 0
    cause: RootCause | None = None
    findings: tuple[ProbeFinding, ...] = ()
    skipped = ""
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
                skipped = _too_big_for_probes(shared.values())
                findings = () if skipped else _opening_probes(field, inst, cause, {}, shared, transcript)
                break
            continue
        checked.append(inst.name)

        def advance(k: int, n: int = 1 << inst.start.num_vars) -> None:
            if progress is not None:
                progress(done + 2 * n - (n >> (k - 1)), total)

        def working(units: int) -> None:
            if progress is not None:
                progress(done + units, total)

        cause, ctx, rounds = _check_instance(field, inst, fit, (advance, working), named, engine)
        rounds_checked += rounds
        done += 2 << inst.start.num_vars
        if progress is not None:
            progress(done, total)
        if cause is not None:
            skipped = _too_big_for_probes(fit.tables.values())
            if ctx is not None and not skipped:
                findings = run_probes(replace(ctx, tables={n: whole_table(t) for n, t in ctx.tables.items()}))
            break
        cause = _check_openings(field, inst, fit.tables, shared, transcript, engine)
        if cause is not None:
            skipped = _too_big_for_probes(shared.values())
            findings = () if skipped else _opening_probes(field, inst, cause, fit.tables, shared, transcript)
            break
    # link, evaluation and eq-factored sums need no witness (the opening probes ran above)
    findings = (*findings, *glue_findings(transcript, report.first_failure))
    unchecked = tuple(i.name for j, i in enumerate(transcript.instances) if j not in fitted)
    by_position = tuple((fit.witness_name, fit.name) for fit in fitted.values()
                        if fit.witness_name and fit.witness_name != fit.name)
    last = index if cause is not None else len(transcript.instances) - 1  # the loop stopped at the cause
    return Diagnosis(field, cause, findings, report.first_failure, tuple(checked), unchecked, rounds_checked,
                     by_position, skipped, _openings_without_table(transcript, fitted, shared, last))


def _openings_without_table(transcript: Transcript, fitted: Mapping[int, FittedInstance], shared: Mapping[str, Any],
                            last: int) -> tuple[UncheckedOpening, ...]:
    """The openings of instances 0..``last`` (those compared) whose table the witness lacks:
    not compared, which the report says rather than let agreement read as covering them."""
    out: list[UncheckedOpening] = []
    for index, inst in enumerate(transcript.instances[: last + 1]):
        fit = fitted.get(index)
        own = fit.tables if fit is not None else {}
        out.extend(UncheckedOpening(index, inst.start.name, o.name, o.table) for o in inst.openings
                   if _table_for(o, own, shared, inst) is None)
    return tuple(out)


def _too_big_for_probes(tables: Iterable[Any]) -> str:
    """Why the probes may not read these tables whole (a table past :data:`PROBE_MAX_ENTRIES`), or ""."""
    biggest = max((len(t) for t in tables), default=0)
    if biggest <= PROBE_MAX_ENTRIES:
        return ""
    return (f"they read the instance's tables whole, and a table here has {biggest} entries (more than "
            f"{PROBE_MAX_ENTRIES}, the probes' limit)")


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
    found = probe_opening_point(field, opening.name, opening.value, whole_table(table), point, others,
                                instance=cause.instance)
    if found is None:
        values = {name: mle_eval(field, whole_table(t), point) for name, t in {**shared, **own}.items()
                  if len(t) == 1 << inst.start.num_vars}
        found = probe_opening_table(field, opening.name, opening.table, opening.value, values,
                                    instance=cause.instance)
    return () if found is None else (found,)


def _check_instance(field: Field, inst: InstanceRecord, fit: FittedInstance,
                    progress: tuple[Callable[[int], None], Callable[[int], None]], named: dict[str, Any],
                    engine: Engine) -> tuple[RootCause | None, ProbeContext | None, int]:
    """The first root cause in one instance's rounds, claim or final value; ``progress`` is
    (after round k, inside a pass) for the engine. The probes' context reads the tables whole."""
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
                                     on_round=progress[0], on_work=progress[1]):
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


def _first(field: Field, table: Any) -> Element:
    arr = table_rows(table, 0, 1)
    if arr.ndim == 1:
        return field.lift(int(arr[0]))
    return tuple(int(c) for c in arr[0])
