"""stepper.verify.glue_block: link and evaluation checks of many instances at once, by columns.

The independent side is plain integer arithmetic (tests/plain_sumcheck.py): eq(x, y) =
prod_j (x_j y_j + (1 - x_j)(1 - y_j)) (common practice, no source) and each expression
written out by hand. Moduli: Goldilocks 2^64 - 2^32 + 1 and BabyBear 2^31 - 2^27 + 1 (common
practice, no source), 97, the BN254 scalar field (EIP-197, from memory); the quartic extension
of BabyBear by X^4 - 11 (from memory; stepper's field constructor checks irreducibility).
"""

from __future__ import annotations

import random
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parents[1]))  # the shared plain-integer arithmetic

from plain_sumcheck import BN254, Elem, Plain  # noqa: E402
from stepper.field.field import get_field  # noqa: E402
from stepper.field.spec import field_from_spec  # noqa: E402
from stepper.transcript.model import InstanceStart  # noqa: E402
from stepper.verify.glue_block import GlueChecks, StartColumns, Unsupported  # noqa: E402
from stepper.verify.glue_texts import FixedTexts, TextColumn  # noqa: E402
from stepper.verify.roundblock import block_kernel  # noqa: E402

BABYBEAR = 2**31 - 2**27 + 1  # common practice, no source
GOLDILOCKS = 2**64 - 2**32 + 1  # common practice, no source
ARITHMETIC = {"goldilocks": Plain(GOLDILOCKS), "p97": Plain(97), "bn254": Plain(BN254),
              "babybear^4": Plain(BABYBEAR, 4, 11)}

FINAL = "eq(w) * (a{i}*b{i} - c{i}) + 5*d{i}^3 - w[1]"
CLAIM = "(1 - beta{i}) * a{i} + beta{i}^2 * eq(w, u{i})"


def field_of(name: str):  # type: ignore[no-untyped-def]
    ar = ARITHMETIC[name]
    return get_field(ar.p) if ar.k == 1 else field_from_spec(ar.spec())


def eq_plain(ar: Plain, x: list[Elem], y: list[Elem]) -> Elem:
    acc, one = ar.const(1), ar.const(1)
    for a, b in zip(x, y):
        acc = ar.mul(acc, ar.add(ar.mul(a, b), ar.mul(ar.sub(one, a), ar.sub(one, b))))
    return acc


def element(ar: Plain, rng: random.Random) -> Elem:
    return rng.randrange(ar.p) if ar.k == 1 else tuple(rng.randrange(ar.p) for _ in range(ar.k))


def glued_instances(name: str, count: int, num_vars: int, seed: int):  # type: ignore[no-untyped-def]
    """``count`` instances over one point value w: their starts, values, round-order challenges and honest
    finals, with CLAIM and FINAL holding (computed here in plain integers)."""
    ar, rng = ARITHMETIC[name], random.Random(seed)
    w = [element(ar, rng) for _ in range(num_vars)]
    values: dict[str, object] = {"w": [ar.json(x) if ar.k == 1 else x for x in w]}
    starts, challenges, finals = [], [], []
    for i in range(count):
        a, b, c, d, beta = (element(ar, rng) for _ in range(5))
        u = [element(ar, rng) for _ in range(num_vars)]
        values.update({f"a{i}": a, f"b{i}": b, f"c{i}": c, f"d{i}": d, f"beta{i}": beta, f"u{i}": u})
        order = rng.choice(["low-first", "high-first"])
        rounds = [element(ar, rng) for _ in range(num_vars)]
        point = rounds if order == "low-first" else rounds[::-1]
        final = ar.sub(ar.add(ar.mul(eq_plain(ar, w, point), ar.sub(ar.mul(a, b), c)),
                              ar.mul(ar.const(5), ar.mul(d, ar.mul(d, d)))), w[1])
        claim = ar.add(ar.mul(ar.sub(ar.const(1), beta), a), ar.mul(ar.mul(beta, beta), eq_plain(ar, w, u)))
        starts.append(InstanceStart(i, f"deck.{i}", num_vars, 2, claim, order=order,
                                    claim_expr=CLAIM.format(i=i), final_expr=FINAL.format(i=i)))
        challenges.extend(rounds)
        finals.append(final)
    return starts, values, challenges, finals


def gathered(name: str, starts, challenges, finals) -> GlueChecks:  # type: ignore[no-untyped-def]
    field = field_of(name)
    kernel = block_kernel(field)
    checks = GlueChecks(field, kernel)
    rows = kernel.array(challenges)
    checks.add([(run, start, final, rows, start.index * start.num_vars)
                for run, (start, final) in enumerate(zip(starts, finals))])
    return checks


def sent_in_time(values: dict[str, object], count: int):  # type: ignore[no-untyped-def]
    """Where an honest stream sends the glue of ``count`` instances: w and instance 0's claim values
    before the flush, a{i}, beta{i}, u{i} after run i - 1 (instance i's claim reads them), b{i}, c{i},
    d{i} after run i (only its final_expr reads them). Returns the runs, the kinds of the flush's names
    (a list's length or None) and the kinds of the earlier ones."""
    earlier = {"w": len(values["w"]), "a0": None, "beta0": None, "u0": len(values["u0"])}  # type: ignore[arg-type]
    runs = {f"{n}{i}": i - 1 for i in range(1, count) for n in ("a", "beta", "u")}
    runs.update({f"{n}{i}": i for i in range(count) for n in ("b", "c", "d")})
    kinds = {name: len(values[name]) if isinstance(values[name], list) else None for name in runs}  # type: ignore[arg-type]
    return runs, kinds, earlier


@pytest.mark.parametrize("name", sorted(ARITHMETIC))
def test_link_and_evaluation_of_many_instances_pass_when_every_one_holds(name):
    starts, values, challenges, finals = glued_instances(name, 40, 3, seed=5)
    assert gathered(name, starts, challenges, finals).check(values)


@pytest.mark.parametrize("name", sorted(ARITHMETIC))
@pytest.mark.parametrize("where", ["final", "claim", "opening"])
def test_one_wrong_value_among_many_fails_the_whole_group(name, where):
    ar = ARITHMETIC[name]
    starts, values, challenges, finals = glued_instances(name, 40, 3, seed=6)
    if where == "final":
        finals[17] = ar.add(finals[17], ar.const(1))
    elif where == "claim":
        start = starts[29]
        starts[29] = InstanceStart(start.index, start.name, start.num_vars, start.degree,
                                   ar.add(start.claim, ar.const(1)), order=start.order, claim_expr=start.claim_expr,
                                   final_expr=start.final_expr)
    else:
        values["c3"] = ar.add(values["c3"], ar.const(1))  # type: ignore[arg-type]
    assert not gathered(name, starts, challenges, finals).check(values)


EQ_CLAIM = "eq(w, v) * e{i} + 2*eq(w, u{i}) + 3*eq(u{i}, w) + eq(u{i}, s{i}) - eq(w, w)"
EQ_FINAL = "eq(w) * e{i} + 2*eq(u{i})"


@pytest.mark.parametrize("name", sorted(ARITHMETIC))
@pytest.mark.parametrize("num_vars", [1, 2, 3, 5])
@pytest.mark.parametrize("wrong", [None, "claim", "final"])
def test_eq_of_every_kind_of_point_is_the_product_over_its_coordinates(name, num_vars, wrong):
    # eq's sides: one list for every check (w, v), a list per check (u{i}, s{i}), the instance's own point,
    # in either order, both sides shared; points of odd and even lengths (the product is taken by halves)
    ar, rng = ARITHMETIC[name], random.Random(num_vars)
    point = [element(ar, rng) for _ in range(num_vars)]
    w, v = point, [element(ar, rng) for _ in range(num_vars)]
    values: dict[str, object] = {"w": w, "v": v}
    starts, challenges, finals = [], [], []
    for i in range(24):
        u, s = ([element(ar, rng) for _ in range(num_vars)] for _ in range(2))
        e = element(ar, rng)
        values.update({f"u{i}": u, f"s{i}": s, f"e{i}": e})
        order = rng.choice(["low-first", "high-first"])
        rounds = [element(ar, rng) for _ in range(num_vars)]
        own = rounds if order == "low-first" else rounds[::-1]
        claim = ar.sub(ar.add(ar.add(ar.add(ar.mul(eq_plain(ar, w, v), e), ar.mul(ar.const(2), eq_plain(ar, w, u))),
                                     ar.mul(ar.const(3), eq_plain(ar, u, w))), eq_plain(ar, u, s)), eq_plain(ar, w, w))
        final = ar.add(ar.mul(eq_plain(ar, w, own), e), ar.mul(ar.const(2), eq_plain(ar, u, own)))
        if wrong == "claim" and i == 11:
            claim = ar.add(claim, ar.const(1))
        if wrong == "final" and i == 23:
            final = ar.sub(final, ar.const(1))
        starts.append(InstanceStart(i, f"deck.{i}", num_vars, 2, claim, order=order,
                                    claim_expr=EQ_CLAIM.format(i=i), final_expr=EQ_FINAL.format(i=i)))
        challenges.extend(rounds)
        finals.append(final)
    assert gathered(name, starts, challenges, finals).check(values) == (wrong is None)


def test_names_sent_in_time_and_of_the_right_kind_pass_the_sequencer_rules():
    starts, values, challenges, finals = glued_instances("goldilocks", 4, 2, seed=10)
    checks = gathered("goldilocks", starts, challenges, finals)
    checks.check_names(*sent_in_time(values, 4))
    assert checks.check(values)


@pytest.mark.parametrize("problem", ["late", "missing", "list-as-element", "element-as-list"])
def test_a_name_sent_too_late_never_sent_or_of_the_wrong_kind_is_refused(problem):
    starts, values, challenges, finals = glued_instances("goldilocks", 4, 2, seed=11)
    runs, kinds, earlier = sent_in_time(values, 4)
    if problem == "late":
        runs["beta2"] = 2  # instance 2's claim_expr reads it; sent only after its rounds
    elif problem == "missing":
        del runs["d1"], kinds["d1"]
    elif problem == "list-as-element":
        kinds["a1"] = 2
    else:
        kinds["u2"] = None
    checks = gathered("goldilocks", starts, challenges, finals)
    with pytest.raises(Unsupported):
        checks.check_names(runs, kinds, earlier)



def by_rows(runs: dict[str, int], rng: random.Random | None = None):  # type: ignore[no-untyped-def]
    """The same flush laid out by rows: the names in stream order (by run; shuffled within each run
    when ``rng`` is given), each name's row, and each row's run."""
    import numpy as np

    order = sorted(runs, key=lambda n: (runs[n], rng.random() if rng else 0))
    return {n: i for i, n in enumerate(order)}, order, np.array([runs[n] for n in order], dtype=np.int64)


@pytest.mark.parametrize("regular", [False, True])
@pytest.mark.parametrize("problem", [None, "late", "missing", "list-as-element", "element-as-list", "shuffled",
                                     "swapped"])
def test_names_matched_by_their_place_in_the_flush_follow_the_same_rules(problem, regular):
    # the whole-file pass hands over the flush's names by row: columns are matched by place where the names
    # stand alike after each run, by look-up elsewhere; the verdicts are those of the look-up by name. With
    # ``regular`` every run is followed by as many names (the last run also sends the claim values of an
    # instance after the flush), so the places are one slice of the names
    starts, values, challenges, finals = glued_instances("goldilocks", 10, 2, seed=14)
    del starts[-1], finals[-1], challenges[-2:]
    runs, kinds, earlier = sent_in_time(values, 10 if regular else 9)
    for n in ("b9", "c9", "d9"):  # instance 9 is not in the flush
        runs.pop(n, None), kinds.pop(n, None)
    if problem == "swapped":  # two names of one column trade places: found by look-up, not by place
        runs["c2"], runs["c5"] = runs["c5"], runs["c2"]
    if problem == "late":
        runs["beta5"] = 5
    elif problem == "missing":
        del runs["d3"], kinds["d3"]
    elif problem == "list-as-element":
        kinds["a4"] = 2
    elif problem == "element-as-list":
        kinds["u6"] = None
    rows, names, run_of_row = by_rows(runs, random.Random(3) if problem == "shuffled" else None)
    outcomes = []
    for place in (False, True):
        checks = gathered("goldilocks", starts, challenges, finals)
        try:
            if place:
                checks.check_names(rows, kinds, earlier, run_of_row, names)
            else:
                checks.check_names(runs, kinds, earlier)
        except Unsupported:
            outcomes.append("refused")
            continue
        scalars = [n for n, v in values.items() if not isinstance(v, list)]
        cells = ({n: i for i, n in enumerate(scalars)}, checks.kernel.array([values[n] for n in scalars]))
        if place:  # the rows found by place index the flush's cells
            cells = (rows, checks.kernel.array([values[n] if n in rows and not isinstance(values[n], list) else 0
                                                for n in names]))
        outcomes.append(checks.check(values, cells))
    assert outcomes[0] == outcomes[1] == ("refused" if problem not in (None, "shuffled") else True)
    if regular and problem is None:  # the claim values of instance 9 stand after the last run taken
        assert runs["a9"] == 8 and len(set(run_of_row.tolist())) == 9 and len(names) == 9 * 6

def test_what_only_the_replay_checks_is_refused():
    field = field_of("goldilocks")
    checks = GlueChecks(field, block_kernel(field))
    rows = checks.kernel.array([1])
    for text in ("eq(point(deck.0), w)", "final(deck.0) + 1", "eq(w) * a"):  # eq(a) in a claim: no point yet
        with pytest.raises(Unsupported):
            checks.add([(0, InstanceStart(1, "deck.1", 1, 1, 0, claim_expr=text), 0, rows, 0)])
    starts, values, challenges, finals = glued_instances("goldilocks", 3, 2, seed=9)
    values["a1"] = [1, 2]  # a list where an element is wanted
    with pytest.raises(Unsupported):
        gathered("goldilocks", starts, challenges, finals).check(values)
    starts, values, challenges, finals = glued_instances("goldilocks", 3, 2, seed=9)
    values["u2"] = [1, 2, 3]  # eq(w, u2) over points of different lengths
    with pytest.raises(Unsupported):
        gathered("goldilocks", starts, challenges, finals).check(values)


@pytest.mark.parametrize("name", sorted(ARITHMETIC))
def test_elements_taken_from_the_flush_cells_give_the_same_answers(name):
    # the sweep hands the flush's elements over already decoded (GlueColumns.cells): same verdicts
    ar = ARITHMETIC[name]
    field = field_of(name)
    kernel = block_kernel(field)
    for wrong in (False, True):
        starts, values, challenges, finals = glued_instances(name, 12, 3, seed=12)
        if wrong:
            values["b7"] = ar.add(values["b7"], ar.const(1))  # type: ignore[arg-type]
        scalars = [n for n, v in values.items() if not isinstance(v, list)]
        cells = ({n: i for i, n in enumerate(scalars)}, kernel.array([values[n] for n in scalars]))
        with_cells = gathered(name, starts, challenges, finals).check(values, cells)
        assert with_cells == gathered(name, starts, challenges, finals).check(values) == (not wrong)


@pytest.mark.parametrize("name", ["goldilocks", "babybear^4", "bn254"])
@pytest.mark.parametrize("wrong", [None, "b0", "b9"])
def test_elements_sent_before_the_flush_are_read_beside_the_flush_cells(name, wrong):
    # instance 0's names came in an earlier flush: not among the cells, read from the values, same verdicts
    ar = ARITHMETIC[name]
    field = field_of(name)
    kernel = block_kernel(field)
    starts, values, challenges, finals = glued_instances(name, 20, 3, seed=13)
    if wrong is not None:
        values[wrong] = ar.add(values[wrong], ar.const(1))  # type: ignore[arg-type]
    scalars = [n for n, v in values.items() if not isinstance(v, list) and not n.endswith("0")]
    cells = ({n: i for i, n in enumerate(scalars)}, kernel.array([values[n] for n in scalars]))
    with_cells = gathered(name, starts, challenges, finals).check(values, cells)
    assert with_cells == gathered(name, starts, challenges, finals).check(values) == (wrong is None)


@pytest.mark.parametrize("between", [False, True])
def test_final_and_point_of_the_flush_before_are_read_unless_an_instance_came_between(between):
    # flush 1 holds deck.0 and deck.1, flush 2 deck.2, whose final_expr reads final(deck.1) and the point
    # of deck.0: read from the flush before, unless an instance was read one by one in between (forget),
    # whose point the replay keeps and the columns do not
    import numpy as np

    ar, field = ARITHMETIC["goldilocks"], field_of("goldilocks")
    kernel = block_kernel(field)
    checks = GlueChecks(field, kernel)
    rng = random.Random(15)
    first = StartColumns.of([InstanceStart(i, f"deck.{i}", 2, 2, rng.randrange(ar.p)) for i in range(2)])
    challenges = [rng.randrange(ar.p) for _ in range(4)]
    finals = [rng.randrange(ar.p) for _ in range(2)]
    checks.instances(first, [0, 2], kernel.array(finals), kernel.array(challenges))
    checks.add_columns(np.arange(2), first, finals, kernel.array(challenges), [0, 2])
    assert checks.check({})
    if between:
        checks.forget()
    own = [rng.randrange(ar.p) for _ in range(2)]
    final = ar.mul(finals[1], eq_plain(ar, challenges[:2], own))  # eq(point(deck.0)), deck.0 low-first
    second = StartColumns.of([InstanceStart(2, "deck.2", 2, 2, 7, final_expr="final(deck.1) * eq(point(deck.0))")])
    block = kernel.array(own)
    checks.instances(second, [0], kernel.array([final]), block)
    checks.add_columns(np.arange(1), second, [final], block, [0])
    if between:
        with pytest.raises(Unsupported):
            checks.check({})
    else:
        assert checks.check({})


def test_start_columns_hold_each_field_the_checks_read_as_the_records_hold_it():
    # columns made from records, taken, cut and joined give each record's own fields, in order
    starts = [InstanceStart(i, f"deck.{i}", 1 + i % 3, 2 + i % 2, 100 + i, order="high-first" if i == 3 else "low-first",
                            claim_expr=None if i == 0 else f"a{i - 1}", final_expr=f"eq(tau) * c{i}") for i in range(6)]
    fields = ("name", "num_vars", "degree", "order", "claim", "claim_expr", "final_expr")

    def rows(columns: StartColumns) -> list[tuple[object, ...]]:
        return list(zip(*(getattr(columns, field) for field in fields)))

    def expected(records: list[InstanceStart]) -> list[tuple[object, ...]]:
        return [tuple(getattr(record, field) for field in fields) for record in records]

    whole = StartColumns.of(starts)
    assert len(whole) == 6 and rows(whole) == expected(starts)
    assert rows(whole.take([4, 1])) == expected([starts[4], starts[1]])
    for chosen in ([1, 2, 3, 4, 5], [2, 3], [0], [1, 3, 2], [2, 2, 3], [3, 4, 4]):  # in a row or not, repeats
        assert rows(whole.take(chosen)) == expected([starts[i] for i in chosen]), chosen
    assert rows(whole.since(2)) == expected(starts[2:])
    assert rows(StartColumns.of(starts[:2]) + StartColumns.of(starts[2:])) == expected(starts)
    assert rows(StartColumns.joined([StartColumns.of(starts[:1]), StartColumns.of(starts[1:4]),
                                     StartColumns.of(starts[4:])])) == expected(starts)


def test_positions_in_a_row_are_taken_as_slices_so_texts_kept_as_bytes_stay_bytes():
    # the first block's claim_exprs (every instance but the first has one) are taken with no text read
    import numpy as np

    texts = [f"a{i} + beta{i}*b{i}" for i in range(10, 16)]
    column = TextColumn([FixedTexts(np.frombuffer("".join(texts).encode(), dtype=np.uint8).reshape(6, -1))])
    starts = StartColumns([f"deck.{i}" for i in range(6)], [2] * 6, [3] * 6, ["low-first"] * 6, list(range(6)),
                          column, [None] * 6)
    taken = starts.take([1, 2, 3, 4])
    assert isinstance(taken.claim_expr, TextColumn) and list(taken.claim_expr) == texts[1:5]
    assert list(taken.name) == ["deck.1", "deck.2", "deck.3", "deck.4"] and list(taken.claim) == [1, 2, 3, 4]
    assert list(starts.take([4, 2]).claim_expr) == [texts[4], texts[2]]


def test_texts_joined_from_parts_group_as_the_whole_column_does_and_positions_in_a_row_stay_a_range():
    # the sweep joins a flush's instances from parts (one read alone, then stretches whose texts' templates are
    # known): each template's positions and names are those shapes_of finds over all the texts at once
    from stepper.verify.glue_block import shapes_of

    def starts_of(texts: list[str | None], known: bool) -> StartColumns:
        count = len(texts)
        return StartColumns([f"deck.{i}" for i in range(count)], [2] * count, [2] * count, ["low-first"] * count,
                            list(range(count)), texts, [None] * count,
                            shapes=(shapes_of(texts) if known else None, None))

    alike = [f"a{i} + beta{i}*b{i}" for i in range(40)]
    other = [f"c{i} * c{i}" for i in range(40)]
    for texts, cuts in ((alike, (1, 9, 30)), ([None, *alike[1:]], (1, 2)), (alike[:5] + other[:3] + alike[5:], (4, 6)),
                        ([None, *other[:4], None, *alike], (5, 6, 20))):
        parts = [texts[low:high] for low, high in zip((0, *cuts), (*cuts, len(texts)))]
        joined = StartColumns.joined([starts_of(part, known=i % 2 == 1) for i, part in enumerate(parts)])
        found = joined.text_shapes(False)
        want = shapes_of(texts)
        assert found is not None and want is not None
        assert [(id(t), [list(c) for c in columns], list(positions)) for t, columns, positions in found] == \
            [(id(t), [list(c) for c in columns], list(positions)) for t, columns, positions in want]
        for _, _, positions in found:
            in_a_row = list(positions) == list(range(positions[0], positions[-1] + 1))
            assert isinstance(positions, range) == in_a_row, (texts, positions)
