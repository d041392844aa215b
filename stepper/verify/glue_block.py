"""The glue of instances swept by the block, checked by columns (no I/O).

The sweep (:mod:`stepper.verify.sweep`) settles runs of rounds in bulk; an instance
there may carry ``claim_expr`` and ``final_expr`` (transcripts/FORMAT.md, "The
glue"). :class:`GlueChecks` gathers them and asks of a whole flush the question
:mod:`stepper.verify.roundblock` asks of rounds: *does every check pass?*

* link: ``claim_expr`` evaluated over the values sent before the instance equals
  its claim;
* evaluation: ``final_expr`` evaluated over the values, with the instance's own
  challenge point for ``eq(a)``, equals the reduced claim (the final value, which
  the block has already found equal to g_mu(r_mu)).

Expressions that differ only in their names share a template
(:func:`stepper.field.expr_syntax.template_of`: ``a7 + beta7*b7`` and ``a8 + beta8*b8``).
The instances of a flush are grouped by template (and, for an evaluation, by the
length of the point and the block that holds its challenges); each hole of the
template becomes a column of the values it names, instance by instance, and the
template is evaluated once per group with the block kernel: a numpy pass per node,
a few for an ``eq`` (every coordinate's factor at once, then their product by halves). Values are read from the replay's glue book; names
are unique in a proof and never change once sent, so reading them at the end of a
flush gives what the replay reads when it checks. The sweep flushes only where every
name an expression of the flush reads has come (before the next instance, or at the end);
:meth:`GlueChecks.check_names` checks the Sequencer's rules for those names (sent before
the expression may read them, element or list as used) by columns too.

``point(NAME)`` and ``final(NAME)`` read the instances of the flush, and those of the flush
right before when no instance was read one by one in between (:meth:`GlueChecks.instances`,
:meth:`GlueChecks.forget`): the last instance so named before the check's own, which the
replay must still keep (``MAX_POINT_ELEMENTS``), its challenges gathered from its block.

The answer is yes or no. On no, or on anything this module does not take (``point(NAME)``
or ``final(NAME)`` of an instance not found so, a text only the character parser reads, a
list where an element is wanted, points of different lengths), the sweep gives up and the
replay names what it finds. A passing check, here as there, is evidence about one run, not
a soundness proof.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from itertools import chain, islice, repeat
from operator import attrgetter, itemgetter, lt
from typing import TYPE_CHECKING, Any, Mapping, Sequence

import numpy as np

from stepper.field.field import power_by_squaring
from stepper.field.kernels import GoldilocksKernel, SmallPrimeKernel, Word64Kernel

if TYPE_CHECKING:
    from stepper.field.expr_syntax import Eq, Node, Template
    from stepper.field.field import Field
    from stepper.field.kernels import Kernel
    from stepper.transcript.model import InstanceStart

__all__ = ["GlueChecks", "StartColumns", "TextShape", "Unsupported", "shapes_of"]


class Unsupported(Exception):
    """A glue expression or value this module does not check by columns: the replay must."""


@dataclass(slots=True)
class _Group:
    """Checks sharing a template (and, for evaluations, the block of challenges, num_vars and
    order): the names filling each hole as columns, the values the checks must equal, the runs
    of their instances in the flush and, for evaluations, each instance's first row."""

    template: Template
    final: bool
    columns: list[Sequence[str]]
    expected: list[Any] | np.ndarray  # a list of elements, or a kernel array of them
    runs: np.ndarray
    challenges: Any = None
    first_rows: list[int] = dc_field(default_factory=list)
    num_vars: int = 0
    order: str = ""
    rows: dict[int, np.ndarray] = dc_field(default_factory=dict)  # by hole: each check's name's row in the flush, or -1
    uniform: dict[int, bool] = dc_field(default_factory=dict)  # by hole: whether every check names the same
    instances: _Instances | None = None  # for point(NAME) and final(NAME)


@dataclass(slots=True)
class _Instances:
    """The instances of a flush, each taken as a run, all in one block of challenges, for ``point(NAME)``
    and ``final(NAME)``: instance j (run j of the flush) has ``num_vars[j]`` rounds, order
    ``orders[j]``, its challenges from row ``first_rows[j]`` of ``challenges`` and its final value
    at ``finals[j]`` (a kernel array); ``last`` maps each instance's name to its last position and
    ``ends[j]`` is the rounds of instances 0 .. j - 1 (the replay keeps the points of recent instances
    up to ``MAX_POINT_ELEMENTS`` challenge elements). The instances of the flush before, when it came
    right before (no instance between them read one by one), stand first."""

    num_vars: np.ndarray
    orders: list[str]
    first_rows: np.ndarray
    finals: Any
    challenges: Any
    last: dict[str, int]
    ends: np.ndarray
    offset: int  # the position of the flush's run 0 (the instances of the flush before come first)


@dataclass(frozen=True, slots=True)
class StartColumns:
    """The fields of instance records the checks here read, as columns (entry k of each list is
    instance k's): made from records (:meth:`of`), or straight from the columns the sweep read
    instances into, with no record per instance."""

    name: Sequence[str]
    num_vars: Sequence[int]
    degree: Sequence[int]
    order: Sequence[str]
    claim: Sequence[Any]
    claim_expr: Sequence[str | None]
    final_expr: Sequence[str | None]
    # the claim_exprs' and the final_exprs' templates as shapes_of groups them (positions among these
    # instances, those without the text left out), where known already; None: read from the texts
    shapes: tuple[list[TextShape] | None, list[TextShape] | None] = dc_field(default=(None, None), kw_only=True)

    @staticmethod
    def of(starts: Sequence[InstanceStart]) -> StartColumns:
        return StartColumns(*(list(map(attrgetter(field), starts)) for field in _START_FIELDS))

    def __len__(self) -> int:
        return len(self.name)

    def take(self, chosen: Sequence[int]) -> StartColumns:
        """The instances at ``chosen``, in that order. Positions in a row (every instance but the first,
        whose claim has no claim_expr) are one slice of each column: a column of texts kept as bytes is
        not read text by text."""
        if _in_a_row(chosen):
            return StartColumns(*(column[chosen[0]:chosen[-1] + 1] for column in self._columns()))
        return StartColumns(*([column[i] for i in chosen] for column in self._columns()))

    def __add__(self, other: StartColumns) -> StartColumns:
        return StartColumns.joined([self, other])

    def _columns(self) -> tuple[Sequence[Any], ...]:
        return self.name, self.num_vars, self.degree, self.order, self.claim, self.claim_expr, self.final_expr

    def since(self, first: int) -> StartColumns:
        """The instances from ``first`` on."""
        return StartColumns(*(column[first:] for column in self._columns()))

    @staticmethod
    def joined(parts: Sequence[StartColumns]) -> StartColumns:
        """The instances of ``parts``, one part after another (their texts' templates joined when some part
        knows its own)."""
        shapes: tuple[list[TextShape] | None, list[TextShape] | None] = (None, None)
        if len(parts) == 1:
            return parts[0]
        if any(shape is not None for part in parts for shape in part.shapes):
            shapes = (_joined_shapes([(part.shapes[0], part.claim_expr) for part in parts]),
                      _joined_shapes([(part.shapes[1], part.final_expr) for part in parts]))
        from stepper.verify.glue_texts import joined_texts

        name, num_vars, degree, order, claim = (_concatenated(column)
                                                for column in zip(*(part._columns()[:5] for part in parts)))
        return StartColumns(name, num_vars, degree, order, claim, joined_texts([part.claim_expr for part in parts]),
                            joined_texts([part.final_expr for part in parts]), shapes=shapes)

    def text_shapes(self, final: bool) -> list[TextShape] | None:
        """The templates of the final_exprs (or the claim_exprs), as :func:`shapes_of` finds them."""
        known = self.shapes[final]
        return known if known is not None else shapes_of(self.final_expr if final else self.claim_expr)


_START_FIELDS = ("name", "num_vars", "degree", "order", "claim", "claim_expr", "final_expr")
# texts sharing a template: the template, the names filling each hole (a column, one entry per text) and the
# texts' positions
TextShape = tuple["Template", list[Sequence[str]], Sequence[int]]


def shapes_of(texts: Sequence[str | None]) -> list[TextShape] | None:
    """The texts (None: no text there, left out) grouped by template (:func:`templates_of`), with their
    positions in ``texts``; None when some text has no template."""
    kept = [i for i, text in enumerate(texts) if text is not None]
    if not kept:
        return []
    from stepper.field.expr_syntax import templates_of  # only for glue: a plain sweep builds no syntax classes

    whole = len(kept) == len(texts)
    found = templates_of(list(texts) if whole else [texts[i] for i in kept])  # type: ignore[arg-type, misc]
    if found is None:
        return None
    if whole:
        return found  # type: ignore[return-value]
    return [(template, columns, [kept[i] for i in positions]) for template, columns, positions in found]  # type: ignore[misc]


def _joined_shapes(parts: list[tuple[list[TextShape] | None, Sequence[str | None]]]) -> list[TextShape] | None:
    """The shapes of texts given in parts, one part after another (a part's shapes, or its texts to
    read them from): the texts of one template, whichever part, in one group, its columns joined
    without making their names strings (:func:`~stepper.verify.glue_texts.joined_columns`)."""
    from stepper.verify.glue_texts import joined_columns

    groups: dict[int, tuple[Template, list[list[Sequence[str]]], list[Sequence[int]]]] = {}
    offset = 0
    for known, texts in parts:
        shapes = known if known is not None else shapes_of(texts)
        if shapes is None:
            return None
        for template, columns, positions in shapes:
            moved = range(positions[0] + offset, positions[-1] + offset + 1) if _in_a_row(positions) \
                else [offset + i for i in positions]
            group = groups.setdefault(id(template), (template, [[] for _ in columns], []))
            for pieces, column in zip(group[1], columns):
                pieces.append(column)
            group[2].append(moved)
        offset += len(texts)
    return [(template, [joined_columns(pieces) for pieces in columns], _joined_positions(positions))
            for template, columns, positions in groups.values()]


def _concatenated(columns: Sequence[Sequence[Any]]) -> list[Any]:
    """The entries of ``columns``, one column after another, in a list (each list extended in at once)."""
    entries: list[Any] = []
    for column in columns:
        entries += column
    return entries


def _in_a_row(positions: Sequence[int]) -> bool:
    """Whether ``positions`` (not empty) count up by one."""
    if positions.__class__ is range:
        return len(positions) > 0 and positions.step == 1  # type: ignore[attr-defined]
    return len(positions) > 0 and positions[-1] - positions[0] == len(positions) - 1 and all(
        map(lt, positions, islice(positions, 1, None)))


def _joined_positions(parts: list[Sequence[int]]) -> Sequence[int]:
    """Positions given in parts, one part after another: one range when every part is a range following
    on the one before, else a list."""
    if all(part.__class__ is range for part in parts) and all(
            before.stop == after.start for before, after in zip(parts, islice(parts, 1, None))):  # type: ignore[attr-defined]
        return range(parts[0].start, parts[-1].stop) if parts else []  # type: ignore[attr-defined]
    return list(chain.from_iterable(parts))
# an instance settled in bulk: its run in the flush, start, final value, the challenges of its block and
# its first row there
Settled = tuple[int, "InstanceStart", Any, Any, int]
# a flush's instances, every one a run of one block: their starts, first rows, finals and the block's challenges
_Given = tuple[StartColumns, list[int], Any, Any]


class GlueChecks:
    """The link and evaluation checks of swept instances, a flush at a time."""

    def __init__(self, field: Field, kernel: Kernel) -> None:
        self.field = field
        self.kernel = kernel
        self.groups: list[_Group] = []
        self._flush_instances: _Given | None = None
        self._previous: _Given | None = None  # the flush before's, when nothing came between
        self._table: _Instances | None = None  # made from _flush_instances when an expression needs it

    def forget(self) -> None:
        """An instance was read one by one (the replay keeps its point): the flush before's instances
        are no longer the ones right before the next flush's."""
        self._previous = None

    def instances(self, starts: StartColumns, first_rows: list[int], finals: Any, challenges: Any) -> None:
        """The flush's instances, every one taken as a run with its challenges in ``challenges`` from row
        ``first_rows[j]`` and its final value ``finals[j]`` (a kernel array), in stream order: the
        expressions added next may read ``point(NAME)`` and ``final(NAME)`` of those before them."""
        self._flush_instances, self._table = (starts, first_rows, finals, challenges), None

    def _instances_of(self, challenges: Any) -> _Instances:
        """The table of the flush's instances (:meth:`instances`), whose challenges must be ``challenges``;
        raises :class:`Unsupported` when there is none."""
        given = self._flush_instances
        if given is None or given[3] is not challenges:
            raise Unsupported("point(NAME) or final(NAME) where the instances are not all runs of one block")
        if self._table is None:
            previous = self._previous
            starts, first_rows, finals, _ = given
            rows = np.array(first_rows, dtype=np.int64)
            if previous is not None and len(previous[0]):
                before, before_rows, before_finals, before_challenges = previous
                starts = before + starts
                rows = np.concatenate((np.array(before_rows, dtype=np.int64), rows + len(before_challenges)))
                finals = np.concatenate((before_finals, finals))
                challenges = np.concatenate((before_challenges, challenges))
            offset = len(starts) - len(given[0])
            sizes = np.array(starts.num_vars, dtype=np.int64)
            names = starts.name
            self._table = _Instances(sizes, list(starts.order), rows, finals, challenges,
                                     dict(zip(names, range(len(names)))), np.concatenate(([0], np.cumsum(sizes))),
                                     offset)
        return self._table

    def add(self, settled: list[Settled]) -> None:
        """Instances settled in bulk with a claim_expr or final_expr: each claim against its
        claim_expr, each final value against its final_expr at the point whose challenges
        (round order) are rows ``first_row`` .. ``first_row + num_vars - 1`` of its block's
        challenges. :meth:`add_columns` per block of challenges."""
        by_block: dict[int, list[Settled]] = {}
        for entry in settled:
            by_block.setdefault(id(entry[3]), []).append(entry)
        for entries in by_block.values():
            self.add_columns(_runs_of(entries), StartColumns.of(list(map(itemgetter(1), entries))),
                             list(map(itemgetter(2), entries)),
                             entries[0][3], list(map(itemgetter(4), entries)))

    def add_columns(self, runs: np.ndarray, starts: StartColumns, finals: list[Any] | np.ndarray, challenges: Any,
                    first_rows: list[int]) -> None:
        """:meth:`add` for instances whose challenges are all in one block (``challenges``), given as
        columns: instance k follows run ``runs[k]`` of the flush, has start ``starts[k]``, final value
        ``finals[k]`` and its challenges from row ``first_rows[k]`` of the block on. Instances without
        either text are passed over. Texts are read by template all at once (:meth:`StartColumns.text_shapes`).
        Raises :class:`Unsupported` for an expression this module does not check (``point(NAME)`` or
        ``final(NAME)`` without :meth:`instances` of this block, a text only the character parser
        reads, eq(a) in a claim_expr)."""
        for final in (False, True):
            found = starts.text_shapes(final)
            if found is None:
                raise Unsupported("a text only the character parser reads")
            for template, columns, chosen in found:
                refs = template.refs
                if refs.own_point and not final:
                    raise Unsupported("eq(a) in a claim_expr")
                table = self._instances_of(challenges) if refs.points or refs.finals else None
                whole = len(chosen) == len(starts)
                picked = starts if whole else starts.take(chosen)
                picked_runs = runs if whole else _taken(runs, chosen)
                if not final:
                    self.groups.append(_Group(template, False, columns, list(picked.claim),
                                              picked_runs, instances=table))
                    continue
                picked_finals = finals if whole else _taken(finals, chosen)
                picked_firsts = first_rows if whole else _taken(first_rows, chosen)
                sizes, orders = list(picked.num_vars), list(picked.order)
                if sizes.count(sizes[0]) == len(sizes) and orders.count(orders[0]) == len(orders):
                    self.groups.append(_Group(template, True, columns, picked_finals, picked_runs, challenges,
                                              picked_firsts, sizes[0], orders[0], instances=table))
                    continue
                split: dict[tuple[int, str], list[int]] = {}
                for i, shape in enumerate(zip(sizes, orders)):
                    split.setdefault(shape, []).append(i)
                for (size, order), members in split.items():
                    self.groups.append(_Group(template, True, [[column[i] for i in members] for column in columns],
                                              _taken(picked_finals, members),
                                              picked_runs[np.array(members, dtype=np.int64)], challenges,
                                              [picked_firsts[i] for i in members], size, order, instances=table))

    def check_names(self, runs: Mapping[str, int], defined: Mapping[str, int | None],
                    earlier: Mapping[str, int | None], run_of_row: np.ndarray | None = None,
                    names: Sequence[str] | None = None) -> None:
        """The Sequencer's rules for the names an expression reads, by columns: a claim_expr's names
        were sent before its instance (after an earlier run of the flush, ``runs``, or before the
        flush, ``earlier``, which may also hold the flush's names), a final_expr's also after its
        own run; a name used as an element is one, a name used as a list (a point, ``NAME[i]``) is
        one (``defined``: a list's length or None, for the flush's names; elements may be left out).
        With ``run_of_row``, ``runs`` gives each name's row in the flush and ``run_of_row`` each
        row's run; with ``names`` too (the flush's names, by row), a column whose names stand at
        the same place after each check's run as the first's does is matched by place (compared
        with ``names``, no look-up per name), and the rows found are kept for :meth:`check`.
        Columns of names placed among the glue by the sweep (:class:`~stepper.verify.glue_texts.PlacedNames`)
        find their rows from their places (:func:`~stepper.verify.glue_texts.placed_rows`).
        Raises :class:`Unsupported` where one does not hold."""
        from stepper.verify.glue_texts import placed_rows

        lists_here = {name for name, length in defined.items() if length is not None} if any(
            length is not None for length in defined.values()) else set()  # the flush's list values
        by_place = names is not None and run_of_row is not None and len(run_of_row) > 0
        firsts = step = None
        if by_place:
            assert run_of_row is not None
            firsts = np.searchsorted(run_of_row, np.arange(int(run_of_row[-1]) + 2))  # each run's first row; the end
            step = _step_of(firsts)
        for group in self.groups:
            scalars, lists = group.template.plan[0], group.template.plan[1]
            group_runs = np.asarray(group.runs, dtype=np.int64)
            limits = group_runs if group.final else group_runs - 1
            for hole, listed in [*((h, False) for h in scalars), *((h, True) for h in lists)]:
                if not isinstance(hole, int):
                    raise Unsupported("a call word used as a name")
                column = group.columns[hole]
                group.uniform[hole] = uniform = _uniform(column)
                if uniform:  # one name for every check (a point, a public value)
                    column, bound = column[:1], limits.min(keepdims=True)
                else:
                    bound = limits
                if by_place and len(column) == len(group_runs):
                    assert names is not None and run_of_row is not None and firsts is not None
                    rows = placed_rows(column, group_runs, firsts, names, lambda part, part_runs: _rows_by_place(
                        part, part_runs, runs, names, run_of_row, firsts, step), step)  # type: ignore[arg-type]
                    if rows is None:
                        rows = _rows_by_place(column, group_runs, runs, names, run_of_row, firsts, step)
                    group.rows[hole] = rows
                    outside = np.flatnonzero(rows < 0)  # names sent before the flush
                    places = run_of_row[rows]  # each name's run (the rows of -1 read the last run: set below)
                    if len(outside):
                        places[outside] = -1
                else:
                    places = np.fromiter(map(runs.get, column, repeat(-1)), dtype=np.int64, count=len(column))
                    if run_of_row is not None and len(run_of_row):  # rows in the flush -> their runs
                        places = np.where(places < 0, -1, run_of_row[np.maximum(places, 0)])
                    outside = np.flatnonzero(places < 0)
                if (places > bound).any():
                    raise Unsupported("a name sent after the expression may read it")
                before = [column[i] for i in outside.tolist()]
                if not all(map(earlier.__contains__, before)) or any(
                        (earlier[name] is None) == listed for name in before):
                    raise Unsupported("a name not sent before, or of another kind")
                if len(before) < len(column) and (
                        (listed and not lists_here.issuperset(name for name in column if name in runs))
                        or (not listed and bool(lists_here) and not lists_here.isdisjoint(column))):
                    raise Unsupported("a name of another kind")

    def check(self, values: Mapping[str, Any], cells: tuple[Mapping[str, int], np.ndarray] | None = None) -> bool:
        """Whether every gathered check passes with the values sent (every name an expression reads
        has come: :meth:`check_names`). ``cells``, when given, holds the flush's elements already
        as a kernel array, and each one's row there by name (lists excepted): a column of them is
        then taken from it rather than made from the values. Raises :class:`Unsupported` for what
        only the replay checks."""
        groups, self.groups, self._table = self.groups, [], None
        self._previous, self._flush_instances = self._flush_instances, None
        return all(_Columns(self.field, self.kernel, values, group, cells).passes() for group in groups)


def _taken(values: Any, chosen: Sequence[int]) -> Any:
    """The entries of ``values`` (a list, or a kernel array with one row per entry) at ``chosen``: a slice
    when they are in a row."""
    if _in_a_row(chosen):
        return values[chosen[0]:chosen[-1] + 1]
    if values.__class__ is np.ndarray:
        return values[np.array(chosen, dtype=np.int64)]  # type: ignore[index, no-any-return]
    return [values[i] for i in chosen]


def _runs_of(picked: list[Settled]) -> np.ndarray:
    """The runs of settled instances, in order."""
    return np.fromiter(map(itemgetter(0), picked), dtype=np.int64, count=len(picked))


def _step_of(firsts: np.ndarray) -> int | None:
    """The number of rows every run holds when each holds as many (``firsts``: each run's first
    row, then the end), else None."""
    if len(firsts) < 2:
        return None
    step = int(firsts[1])
    if step <= 0 or int(firsts[0]) != 0 or not np.array_equal(firsts, np.arange(len(firsts), dtype=np.int64) * step):
        return None
    return step


def _rows_by_place(column: Sequence[str], runs: np.ndarray, index: Mapping[str, int], names: Sequence[str],
                   run_of_row: np.ndarray, firsts: np.ndarray | None = None, step: int | None = None) -> np.ndarray:
    """Each check's name's row in the flush (-1: sent before it), check k's instance following run
    ``runs[k]``. Where the first name the flush holds stands at offset o after run r + s, r its
    check's run, every other check's name is looked for at offset o after its own run + s and
    compared with ``names`` there; the names found elsewhere (or not at all) are looked up in
    ``index``. ``firsts`` (each run's first row, then the end) and ``step`` (the rows of every run
    when each holds as many, see :func:`_step_of`) may be given when known: with a ``step`` and
    checks of consecutive runs, the names at those places are one slice of ``names``."""
    count = len(column)
    anchor, row = 0, index.get(column[0], -1) if count and len(run_of_row) else -1
    if count == 1 and len(run_of_row):  # the one name looked up already
        return np.full(1, row, dtype=np.int64)
    if row < 0 and count > 1 and len(run_of_row):
        anchor, row = 1, index.get(column[1], -1)
    if row < 0:
        return np.fromiter(map(index.get, column, repeat(-1)), dtype=np.int64, count=count)
    if firsts is None:
        firsts = np.searchsorted(run_of_row, np.arange(int(run_of_row[-1]) + 2))
    shift = int(run_of_row[row]) - int(runs[anchor])
    offset = row - int(firsts[run_of_row[row]])
    if step is not None and count and int(runs[-1]) - int(runs[0]) == count - 1 and (
            count == 1 or bool((np.diff(runs) == 1).all())):
        return _rows_by_slice(column, int(runs[0]) + shift, len(firsts) - 1, step, offset, index, names)
    target = runs + shift
    inside = (target >= 0) & (target < len(firsts) - 1)
    clipped = np.clip(target, 0, len(firsts) - 2)
    predicted = firsts[clipped] + offset
    inside &= predicted < firsts[clipped + 1]
    chosen = np.flatnonzero(inside)
    rows = np.where(inside, predicted, -1)
    if len(chosen) > 1:
        if itemgetter(*rows[chosen].tolist())(names) != itemgetter(*chosen.tolist())(column):
            return np.fromiter(map(index.get, column, repeat(-1)), dtype=np.int64, count=count)
    elif len(chosen) == 1 and names[int(rows[chosen[0]])] != column[int(chosen[0])]:
        return np.fromiter(map(index.get, column, repeat(-1)), dtype=np.int64, count=count)
    for k in np.flatnonzero(~inside).tolist():  # a name before the flush, or one the place did not predict
        rows[k] = index.get(column[k], -1)
    return rows


def _rows_by_slice(column: Sequence[str], target: int, run_count: int, step: int, offset: int,
                   index: Mapping[str, int], names: Sequence[str]) -> np.ndarray:
    """:func:`_rows_by_place` when every run of the flush holds ``step`` rows and check k reads the
    name at ``offset`` after run ``target + k`` (of ``run_count``): the checks whose run is in the
    flush find their names in one slice of ``names``, compared as a whole; the others are looked up."""
    count = len(column)
    low, high = max(0, -target), min(count, run_count - target)
    rows = np.full(count, -1, dtype=np.int64)
    if low < high:
        begin = (target + low) * step + offset
        end = begin + (high - low) * step
        if names[begin:end:step] != column[low:high]:  # type: ignore[index]
            return np.fromiter(map(index.get, column, repeat(-1)), dtype=np.int64, count=count)
        rows[low:high] = np.arange(begin, end, step, dtype=np.int64)
    else:
        low = high = count
    for k in (*range(low), *range(high, count)):  # a name before the flush, or one the place did not predict
        rows[k] = index.get(column[k], -1)
    return rows


def _uniform(names: Sequence[str]) -> bool:
    """Whether every entry is the first (names differing per check usually differ at once)."""
    return len(names) < 2 or (names[1] == names[0] and names.count(names[0]) == len(names))


class _Columns:
    """One group of checks: the template evaluated over columns, one entry per check."""

    def __init__(self, field: Field, kernel: Kernel, values: Mapping[str, Any], group: _Group,
                 cells: tuple[Mapping[str, int], np.ndarray] | None = None) -> None:
        self.cells = cells
        self.field = field
        self.kernel = kernel
        self.values = values
        self.group = group
        self.n = len(group.expected)
        self.template: Template = group.template
        self.words = isinstance(kernel, (SmallPrimeKernel, GoldilocksKernel, Word64Kernel))  # one uint64 each

    def passes(self) -> bool:
        expected = self.eval(self.template.root)
        return bool(np.array_equal(expected, self.array(self.group.expected)))

    # ----- columns ------------------------------------------------------------------------
    def names(self, name: str) -> Sequence[str]:
        """The name a template's name stands for, per check (a hole ``#i``, or a word kept as is)."""
        if name[0] != "#":
            return [name] * self.n
        return self.group.columns[int(name[1:])]

    def uniform(self, name: str, names: Sequence[str]) -> bool:
        """Whether every check names the same (``names``: :meth:`names` of ``name``), as check_names found."""
        known = self.group.uniform.get(int(name[1:])) if name[0] == "#" else True
        return _uniform(names) if known is None else known

    def array(self, items: list[Any] | np.ndarray) -> np.ndarray:
        """Canonical elements (the Sequencer and the block checked them) as a kernel array (given as one,
        kept)."""
        if isinstance(items, np.ndarray):
            return items
        if self.words:
            return np.array(items, dtype=np.uint64)
        return self.kernel.array(items)

    def repeated(self, one: np.ndarray) -> np.ndarray:
        """An array of one check's value (a leading axis of length 1) repeated for every check."""
        return np.repeat(one, self.n, axis=0)

    def constant(self, c: int) -> np.ndarray:
        return self.repeated(self.array([self.field.embed(c)]))

    def elements(self, name: str) -> np.ndarray:
        """The column of one element per check."""
        names = self.names(name)
        values = self.values
        if self.uniform(name, names):
            value = values[names[0]]
            if value.__class__ is list:
                raise Unsupported(f"{names[0]!r} is a list where an element is wanted")
            return self.repeated(self.array([value]))
        if self.cells is not None:
            known = self.group.rows.get(int(name[1:])) if name[0] == "#" else None  # found by check_names
            rows = known if known is not None else np.fromiter(map(self.cells[0].get, names, repeat(-1)),
                                                               dtype=np.int64, count=len(names))
            outside = np.flatnonzero(rows < 0).tolist()  # names sent before the flush
            if len(outside) <= len(names) // 8:
                taken = self.cells[1][rows]
                if outside:
                    before = [values[names[i]] for i in outside]
                    if list in set(map(type, before)):
                        raise Unsupported("a list where an element is wanted")
                    taken[outside] = self.array(before)
                return taken
        column = list(map(values.__getitem__, names))
        if list in set(map(type, column)):
            raise Unsupported("a list where an element is wanted")
        return self.array(column)

    def lists(self, name: str) -> list[Any]:
        """The list value per check (one list for all when every check names the same one)."""
        names = self.names(name)
        column = [self.values[names[0]]] if self.uniform(name, names) else [self.values[n] for n in names]
        if any(v.__class__ is not list for v in column):
            raise Unsupported("an element where a list is wanted")
        return column

    def point(self, side: Any) -> np.ndarray:
        """A side of eq(...) as a matrix, one row of coordinates x_1..x_m per check."""
        from stepper.field.expr_syntax import Table

        kernel = self.kernel
        if side is None:  # the instance's own point
            group = self.group
            rows = np.array(group.first_rows, dtype=np.int64)[:, None] + np.arange(group.num_vars)
            matrix = group.challenges[rows]
            return matrix[:, ::-1] if group.order == "high-first" else matrix
        if not isinstance(side, Table):  # point(NAME): the challenge points of the instances named
            positions = self.earlier(side.name)
            table = self.group.instances
            assert table is not None  # add_columns refused the template without one
            sizes = table.num_vars[positions]
            if len(sizes) and int(sizes.min()) != int(sizes.max()):
                raise Unsupported("points of different lengths")
            length = int(sizes[0]) if len(sizes) else 0
            matrix = table.challenges[table.first_rows[positions][:, None] + np.arange(length)]
            high = np.array([table.orders[j] == "high-first" for j in positions.tolist()], dtype=bool)
            if high.any():  # the challenge point in variable order: high-first binds x_mu first
                matrix[high] = matrix[high][:, ::-1]
            return matrix
        column = self.lists(side.name)
        length = len(column[0])
        if any(len(v) != length for v in column):
            raise Unsupported("points of different lengths")
        if length == 0:
            empty = kernel.zeros(0)
            return np.zeros((self.n, 0, *empty.shape[1:]), dtype=empty.dtype)
        flat = self.array([x for v in column for x in v])
        matrix = flat.reshape(len(column), length, *flat.shape[1:])
        return self.repeated(matrix) if len(column) < self.n else matrix

    # ----- evaluation ---------------------------------------------------------------------
    def eval(self, node: Node) -> np.ndarray:
        from stepper.field.expr_syntax import Add, Const, Eq, FinalOf, Index, Mul, Neg, Pow, Sub, Table

        kernel = self.kernel
        if isinstance(node, Table):
            return self.elements(node.name)
        if isinstance(node, Const):
            return self.constant(node.value)
        if isinstance(node, Add):
            return kernel.add(self.eval(node.left), self.eval(node.right))
        if isinstance(node, Sub):
            return kernel.sub(self.eval(node.left), self.eval(node.right))
        if isinstance(node, Mul):
            return kernel.mul(self.eval(node.left), self.eval(node.right))
        if isinstance(node, Neg):
            return kernel.neg(self.eval(node.operand))
        if isinstance(node, Pow):
            return self.power(self.eval(node.base), node.exponent)
        if isinstance(node, Index):
            column = self.lists(node.name)
            if any(node.index >= len(v) for v in column):
                raise Unsupported("an index past the end of a list")
            picked = self.array([v[node.index] for v in column])
            return self.repeated(picked) if len(column) < self.n else picked
        if isinstance(node, Eq):
            return self.eq(node)
        if isinstance(node, FinalOf):
            table = self.group.instances
            assert table is not None  # add_columns refused the template without one
            return table.finals[self.earlier(node.name)]
        raise Unsupported(f"{type(node).__name__} outside eq(...)")

    def earlier(self, name: str) -> np.ndarray:
        """The position in the flush of the instance each check's ``point(NAME)`` or ``final(NAME)``
        reads: the last instance so named before the check's own, which the replay still keeps then
        (its point and final are kept while the points closed since hold at most
        ``MAX_POINT_ELEMENTS`` elements, the last closed always). Raises :class:`Unsupported` when
        that instance is not in the flush (sent earlier, or not at all: the replay judges)."""
        from stepper.verify.glue import MAX_POINT_ELEMENTS

        table = self.group.instances
        assert table is not None
        runs = self.group.runs + table.offset  # each check's own instance in the table
        names = self.names(name)
        positions = np.fromiter(map(table.last.get, names, repeat(-1)), dtype=np.int64, count=len(names))
        if ((positions < 0) | (positions >= runs)).any():
            raise Unsupported("point(NAME) or final(NAME) of an instance not among the earlier ones of this pass")
        held = table.ends[runs] - table.ends[positions]  # the points closed since, the instance's own included
        if ((held > MAX_POINT_ELEMENTS) & (positions != runs - 1)).any():
            raise Unsupported("point(NAME) or final(NAME) of an instance the replay no longer keeps")
        return positions

    def power(self, base: np.ndarray, e: int) -> np.ndarray:
        """base^e by repeated squaring."""
        return power_by_squaring(self.kernel.mul, base, e, self.constant(1))

    def eq(self, node: Eq) -> np.ndarray:
        """prod_j (a_j b_j + (1 - a_j)(1 - b_j)) = prod_j (1 - a_j - b_j + 2 a_j b_j), per check."""
        if self.words:
            return self._eq_words(self.coordinates(node.left), self.coordinates(node.right))
        kernel = self.kernel
        a, b = self.point(node.left), self.point(node.right)
        if a.shape[1] != b.shape[1]:
            raise Unsupported("points of different lengths in eq(...)")
        one = self.constant(1)
        acc = one
        for j in range(a.shape[1]):
            x, y = a[:, j], b[:, j]
            xy = kernel.mul(x, y)
            term = kernel.sub(kernel.add(one, kernel.add(xy, xy)), kernel.add(x, y))
            acc = kernel.mul(acc, term)
        return acc

    def coordinates(self, side: Any) -> np.ndarray:
        """A side of eq(...) for a kernel of one uint64 per element, coordinate-major: row j holds
        x_(j+1) of every check, or of all checks at once (one column) when they all name one list."""
        from stepper.field.expr_syntax import Table

        if side is None:  # the instance's own point: its challenges in variable order
            group = self.group
            steps = np.arange(group.num_vars, dtype=np.int64)
            if group.order == "high-first":
                steps = steps[::-1]
            firsts = np.fromiter(group.first_rows, dtype=np.int64, count=len(group.first_rows))
            return group.challenges[steps[:, None] + firsts]  # type: ignore[no-any-return]
        if isinstance(side, Table):
            column = self.lists(side.name)
            if len(column) == 1:
                return self.array(column[0]).reshape(-1, 1)
        return np.ascontiguousarray(self.point(side).T)

    def _eq_words(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """:meth:`eq` of two points given by :meth:`coordinates`: the factors of every coordinate at once,
        then their product down the coordinates by halves (rows of contiguous memory)."""
        if len(a) != len(b):
            raise Unsupported("points of different lengths in eq(...)")
        if not len(a):
            return self.constant(1)
        kernel = self.kernel
        if a.shape[1] > b.shape[1]:
            a, b = b, a
        one = np.ones_like(a)
        if a.shape[1] == 1:  # one point a for every check: each factor (1 - a_j) + (2 a_j - 1) b_j is linear in b_j
            factors = kernel.add(kernel.mul(b, kernel.sub(kernel.add(a, a), one)), kernel.sub(one, a))
        else:
            ab = kernel.mul(a, b)
            factors = kernel.sub(kernel.add(kernel.add(ab, ab), one), kernel.add(a, b))
        while len(factors) > 1:
            half = len(factors) // 2
            paired = kernel.mul(factors[:half], factors[half:2 * half])
            factors = np.concatenate((paired, factors[2 * half:])) if len(factors) % 2 else paired
        product = factors[0]
        return self.repeated(product) if len(product) < self.n else product
