"""Runs of rounds as the writer packs them, decoded and hashed by the block (no I/O).

The whole-file pass (:mod:`stepper.verify.sweep`) takes an instance's rounds, challenges and
final as one run of bytes when they follow its ``instance`` event laid out exactly as
:class:`~stepper.transcript.store.writer.TranscriptWriter` packs them. :class:`Layout`
holds the fixed bytes of one round, challenge and final event for a round size;
:class:`RunBlock` holds the runs of one layout read before a check: the packed rows, the
values decoded from them (:func:`stepper.verify.cells.decode_cells`), and the Fiat-Shamir
digests squeezed over frames built from the same bytes
(:meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_rows`). :class:`PlainRuns` holds
instances in a row whose events the sweep found in one chunk's bytes, as columns: a run of them
is settled and hashed in one step (:meth:`RunBlock.absorb_plain`: their statements' frames built
together, absorbed with their rounds in one pass), with no Python per instance. :class:`GluedRuns`
holds instances with a ``claim_expr`` or ``final_expr`` laid out alike, their glue after them, the
same way: :meth:`RunBlock.absorb_glued` hashes their statements, rows and glue in one call, the
pieces around each squeeze put in place by slice assignments. Whatever does not fit raises
:class:`GiveUp`: the caller then replays the file event by event.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass
from functools import lru_cache
from itertools import chain, repeat
from operator import attrgetter, getitem, itemgetter
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator, Sequence, Union

import msgpack

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field
    from stepper.field.kernels import Kernel
    from stepper.transcript.model import InstanceStart
    from stepper.verify.fiatshamir import Sha256Schedule
    from stepper.verify.roundblock import WideSamples

__all__ = ["GiveUp", "GluedRuns", "Layout", "layout_of", "PlainRuns", "Run", "RunBlock", "rederive", "packed_ints"]


class GiveUp(Exception):
    """The sweep does not apply here: replay event by event instead."""


@dataclass(frozen=True, slots=True, eq=False)
class Layout:
    """Bytes of one round event, one challenge event and one final event as the writer packs them
    (prefixes before the packed values; lengths precomputed: they are read per instance). Equal
    and hashed by identity: a sweep makes one per round size and looks its runs up by it twice
    per instance (hashing the fields cost about 3% of a BabyBear sweep)."""

    values: int
    width: int
    round_prefix: bytes
    challenge_prefix: bytes
    final_prefix: bytes
    round_len: int  # prefix and values of a round event
    stride: int  # a round event and its challenge event
    final_len: int


def layout_of(values: int, width: int) -> Layout:
    def prefix(payload: dict[str, Any], size: int) -> bytes:
        return msgpack.packb(payload, use_bin_type=True)[:-size]

    round_prefix = prefix({"type": "round", "evals": bytes(values * width)}, values * width)
    challenge_prefix = prefix({"type": "challenge", "value": bytes(width)}, width)
    final_prefix = prefix({"type": "final", "value": bytes(width)}, width)
    round_len = len(round_prefix) + values * width
    return Layout(values, width, round_prefix, challenge_prefix, final_prefix, round_len,
                   round_len + len(challenge_prefix) + width, len(final_prefix) + width)


@dataclass(frozen=True, slots=True, eq=False)
class _InstanceColumns:
    """Instances in a row read from one blob of bytes, held as columns (see :class:`PlainRuns` and
    :class:`GluedRuns`)."""

    first: int
    names: Sequence[str]
    num_vars: Sequence[int]
    degrees: Sequence[int]
    claims: Sequence[Element]
    packed_claims: bytes
    blob: memoryview

    def __len__(self) -> int:
        return len(self.names)


@dataclass(frozen=True, slots=True, eq=False)
class PlainRuns(_InstanceColumns):
    """Instances in a row, each an ``instance`` event with no optional key right followed by its run
    in ``layout``, read as one blob of bytes and held as columns: instance j has the index
    ``first + j``, ``names[j]``, ``num_vars[j]``, ``degrees[j]`` and the claim ``claims[j]`` (packed
    at ``packed_claims[j * width:]``); its rows start at ``rows_at[j]`` in ``blob``. The Sequencer
    has taken them (:meth:`~stepper.transcript.events.Sequencer.plain_runs`) and made the record of
    the last one, ``last``; :meth:`record` makes the others' on demand. ``period``, when not 0, is
    the bytes from one instance's event to the next (every instance laid out alike, one round count):
    the rows and finals are then cut from ``blob`` by numpy, not one view per instance."""

    rows_at: Sequence[int]
    layout: Layout
    last: InstanceStart
    period: int = 0

    def record(self, j: int) -> InstanceStart:
        """The record of instance j, as the Sequencer would have made it."""
        if j == len(self.names) - 1:
            return self.last
        from stepper.transcript.events import Sequencer

        return Sequencer.plain_record(self.first + j, self.names[j], self.num_vars[j], self.degrees[j], self.claims[j])

    def rounds_degree(self, j: int) -> int:
        """Sum of num_vars times degree over instances j, j + 1, ... (the soundness total)."""
        return sum(map(int.__mul__, self.num_vars[j:], self.degrees[j:]))

    def row_parts(self) -> list[Any]:
        """The rows of every run (its rounds and challenges), in order: a view each, or one array."""
        stride, blob = self.layout.stride, self.blob
        if self.period:
            at, size = self.rows_at[0], self.num_vars[0] * stride
            return [_periodic(blob, self.period)[:, at:at + size]]  # copied by RunBlock, once
        ends = [at + rounds * stride for at, rounds in zip(self.rows_at, self.num_vars)]
        return list(map(blob.__getitem__, map(slice, self.rows_at, ends)))

    def final_cells(self) -> list[Any]:
        """The final value of every run, its packed bytes, in order: one each, or one array."""
        layout, blob = self.layout, self.blob
        if self.period:
            end = self.rows_at[0] + self.num_vars[0] * layout.stride + layout.final_len
            return [_periodic(blob, self.period)[:, end - layout.width:end].copy()]
        ends = [at + rounds * layout.stride + layout.final_len for at, rounds in zip(self.rows_at, self.num_vars)]
        return list(map(blob.__getitem__, map(slice, [end - layout.width for end in ends], ends)))


@dataclass(frozen=True, slots=True, eq=False)
class GluedRuns(_InstanceColumns):
    """Instances in a row laid out alike (stepper.verify.sweep compared their bytes at once), each an
    ``instance`` event with a ``claim_expr`` or ``final_expr`` right followed by its run in ``layout``
    and its glue, held as columns: instance j has the index ``first + j``, ``names[j]``,
    ``num_vars[j]``, ``degrees[j]``, the claim ``claims[j]`` (packed at ``packed_claims[j * width:]``)
    and the texts ``claim_texts[j]``, ``final_texts[j]``; its event starts at ``j * period`` in
    ``blob``, its rows ``head_len`` bytes after that and its run ends ``run_end`` bytes after it, where
    its glue starts (the glue after the last instance is not in ``blob``: it is read as after any run).
    The Sequencer has taken them (:meth:`~stepper.transcript.events.Sequencer.glued_columns`) and made
    the record of the last one, ``last``; :meth:`record` makes the others' on demand."""

    claim_texts: Sequence[str | None]
    final_texts: Sequence[str | None]
    period: int
    head_len: int
    run_end: int
    layout: Layout
    last: InstanceStart
    shapes: tuple[Any, Any] = (None, None)  # of the claim_exprs and final_exprs: see glue_block.StartColumns

    def record(self, j: int) -> InstanceStart:
        """The record of instance j, as the Sequencer would have made it."""
        if j == len(self.names) - 1:
            return self.last
        from stepper.transcript.events import Sequencer

        return Sequencer.plain_record(self.first + j, self.names[j], self.num_vars[j], self.degrees[j], self.claims[j],
                                      self.claim_texts[j], self.final_texts[j])

    def _rows(self, at: int, size: int, count: int | None = None) -> np.ndarray:
        """``size`` bytes at ``at`` in each instance's period (of the first ``count``), as rows (a view)."""
        import numpy as np

        count = len(self.names) if count is None else count
        return _strided(np.frombuffer(self.blob, dtype=np.uint8), at, self.period, count, size)

    def row_parts(self) -> list[Any]:
        """The rows of every run (its rounds and challenges), in order: one array."""
        return [self._rows(self.head_len, self.num_vars[0] * self.layout.stride)]

    def final_cells(self) -> list[Any]:
        """The final value of every run, its packed bytes, in order: one array."""
        return [self._rows(self.run_end - self.layout.width, self.layout.width).copy()]

    def glue_blob(self) -> bytes:
        """The glue after every run but the last, one after another."""
        return self._rows(self.run_end, self.period - self.run_end, len(self.names) - 1).tobytes()


_COLUMNS = (PlainRuns, GluedRuns)  # runs of several instances held as columns


def packed_ints(values: Iterable[int], width: int) -> bytes:
    """Canonical ints of a prime field packed as the writer packs them (``width`` bytes little-endian each),
    one after another."""
    return b"".join(map(int.to_bytes, values, repeat(width), repeat("little")))  # type: ignore[arg-type]


def _joined(parts: list[Any]) -> np.ndarray:
    """The bytes of ``parts`` (bytes-like, or two-dimensional uint8 arrays of rows, which need not be
    contiguous) one after another, copied once into one array."""
    import numpy as np

    if not any(part.__class__ is np.ndarray for part in parts):
        return np.frombuffer(b"".join(parts), dtype=np.uint8)
    out = np.empty(sum(part.size if part.__class__ is np.ndarray else len(part) for part in parts), dtype=np.uint8)
    at, pending = 0, []
    for part in [*parts, None]:
        if part is not None and part.__class__ is not np.ndarray:
            pending.append(part)  # bytes and views in a row: one join, one copy
            continue
        if pending:
            joined = b"".join(pending)
            out[at:at + len(joined)] = np.frombuffer(joined, dtype=np.uint8)
            at += len(joined)
            pending = []
        if part is not None:
            out[at:at + part.size].reshape(part.shape)[...] = part
            at += part.size
    return out


def _periodic(blob: memoryview, period: int) -> np.ndarray:
    """``blob`` as rows of ``period`` bytes (uint8)."""
    import numpy as np

    return np.frombuffer(blob, dtype=np.uint8).reshape(-1, period)


# a run: (its instance, its first bytes, the rest of its bytes, its layout) or instances in a row as columns
Run = Union[tuple["InstanceStart", bytes, bytes, Layout], PlainRuns, "GluedRuns"]


class RunBlock:
    """The runs of one layout in a flush, as arrays (rows of packed bytes, decoded values),
    and the Fiat-Shamir digests squeezed for them so far."""

    def __init__(self, layout: Layout, runs: list[Run], kernel: Kernel, field: Field) -> None:
        import numpy as np

        from stepper.field.kernels.limbs import LimbKernel
        from stepper.verify.cells import decode_cells, decode_grid

        self.layout = layout
        self.kernel = kernel
        final_len, width = layout.final_len, layout.width
        parts: list[Any] = []  # the rows of each run (views, or an array of a run of them), copied once, by the join
        finals: list[Any] = []
        claims: list[bytes] = []  # packed, checked canonical by block_passes
        rounds: list[int] = []
        self._plain_rows = False  # some runs are instances in a row (settled in bulk)
        prime = not field.is_extension
        if prime and set(map(type, runs)).isdisjoint(_COLUMNS):  # runs taken one by one: their columns cut at once
            taken: list[Any] = runs
            starts = list(map(itemgetter(0), taken))
            claim_values = list(map(attrgetter("claim"), starts))  # ints, canonical (the Sequencer checked them)
            if set(map(type, claim_values)) == {int}:
                rests: list[memoryview] = list(map(memoryview, map(itemgetter(2), taken)))  # type: ignore[arg-type]
                parts += chain.from_iterable(zip(map(itemgetter(1), taken),
                                                 map(getitem, rests, repeat(slice(None, -final_len)))))
                finals += map(getitem, rests, repeat(slice(-width, None)))
                claims.append(packed_ints(claim_values, width))
                rounds += map(attrgetter("num_vars"), starts)
                runs = []
        for run in runs:
            if run.__class__ in _COLUMNS:
                self._plain_rows = True
                parts += run.row_parts()  # type: ignore[union-attr]
                finals += run.final_cells()  # type: ignore[union-attr]
                claims.append(run.packed_claims)  # type: ignore[union-attr]
                rounds += run.num_vars  # type: ignore[union-attr]
                continue
            start, head, rest, _ = run  # type: ignore[misc]
            parts += (head, memoryview(rest)[:-final_len])
            finals.append(rest[-width:])
            claim = start.claim  # an int in a prime field (canonical: the Sequencer checked it): packed directly
            claims.append(claim.to_bytes(width, "little") if claim.__class__ is int and prime else field.encode(claim))  # type: ignore[union-attr]
            rounds.append(start.num_vars)
        rows = _joined(parts).reshape(-1, layout.stride)
        round_at, challenge_at = len(layout.round_prefix), layout.round_len + len(layout.challenge_prefix)
        if not _prefixes_hold(rows, layout):
            raise GiveUp("events laid out otherwise")
        self.rows = rows
        if isinstance(kernel, LimbKernel):  # each g(j)'s limbs contiguous: the block check reads them by j
            self.evals = kernel.from_bytes_grid(rows[:, round_at:layout.round_len], layout.values)
        else:  # value-major columns (a view): evaluate_at's Newton form reads them without a copy
            self.evals = decode_grid(kernel, rows[:, round_at:layout.round_len], layout.values, width)
        self.challenges = decode_cells(kernel, rows[:, challenge_at:], width)
        self._final_cells = np.frombuffer(b"".join(finals), dtype=np.uint8).reshape(-1, width)
        self.finals = decode_cells(kernel, self._final_cells, width)
        self.claims = decode_cells(kernel, np.frombuffer(b"".join(claims), dtype=np.uint8), width)
        self.starts = np.zeros(len(rounds), dtype=np.int64)
        np.cumsum(rounds[:-1], out=self.starts[1:])
        self.first_rows: list[int] = self.starts.tolist()  # each run's first row, in stream order
        self._final_values: list[Element] | None = None  # made when runs are taken one by one
        self._next = 0  # the next run, in stream order
        self._view: memoryview | None = None
        self._round_len = self._frame_len = 0
        self.digests = bytearray()  # 32 bytes per squeezed digest, in the schedule's order

    def next_run(self) -> tuple[int, Element]:
        """The first row and the final value of the next run of this block, in stream order."""
        j = self._next
        self._next = j + 1
        return self.first_rows[j], self._final(j)

    def skip(self, count: int) -> int:
        """Pass over the next ``count`` runs (settled in bulk: their finals are not needed one by one);
        returns the first row of the first."""
        j = self._next
        self._next = j + count
        return self.first_rows[j]

    def _final(self, j: int) -> Element:
        values = self._final_values
        if values is not None:
            return values[j]
        if not self._plain_rows:  # every run taken one by one: all of them made at once
            return self.final_values()[j]
        from stepper.field.kernels.limbs import LimbKernel

        if isinstance(self.kernel, LimbKernel):  # a Python int straight from its bytes, not back from limbs
            return int.from_bytes(self._final_cells[j].tobytes(), "little")
        return self.kernel.to_list(self.finals[j:j + 1])[0]  # type: ignore[no-any-return]

    def final_values(self) -> list[Element]:
        """Every run's final value, in stream order (made once, for the whole block: one element at a
        time cost a slice and a conversion each)."""
        if self._final_values is None:
            from stepper.field.kernels.limbs import LimbKernel
            from stepper.verify.cells import words_to_ints

            if isinstance(self.kernel, LimbKernel):  # Python ints straight from their bytes, not back from limbs
                self._final_values = words_to_ints(self._final_cells).tolist()
            else:
                self._final_values = self.kernel.to_list(self.finals)
        return self._final_values

    def _frames_view(self, schedule: Sha256Schedule) -> memoryview:
        """The schedule's round and challenge frames of every row of the block (built once)."""
        if self._view is None:
            frames, self._round_len = _frames(schedule.row_heads(self.layout.values), self.rows, self.layout)
            self._view, self._frame_len = memoryview(frames.reshape(-1)), frames.shape[1]  # type: ignore[arg-type]
        return self._view

    def absorb(self, schedule: Sha256Schedule, first: int, rounds: int) -> None:
        """Run the schedule over the next run of this block (its statement already absorbed). In a block
        holding instances in a row, whose frames :meth:`absorb_plain` mostly builds itself, only this
        run's frames are built."""
        if self._view is None and self._plain_rows:
            frames, round_len = _frames(schedule.row_heads(self.layout.values), self.rows[first:first + rounds],
                                        self.layout)
            schedule.absorb_rows(memoryview(frames.reshape(-1)), 0, rounds, round_len,  # type: ignore[arg-type]
                                 frames.shape[1], self.digests)
            return
        view = self._frames_view(schedule)
        schedule.absorb_rows(view, first, rounds, self._round_len, self._frame_len, self.digests)

    def absorb_plain(self, schedule: Sha256Schedule, first: int, plain: PlainRuns, j: int) -> None:
        """Run the schedule over the statements and runs of instances j, j + 1, ... of ``plain``, whose
        rows are this block's from row ``first`` on: the state of ``observe`` of each statement then
        :meth:`absorb` of its run. The rows are cut into the pieces absorbed between two squeezes
        (:func:`_pieces`); each statement goes into the piece that holds its instance's first round,
        after the last challenge of the instance before: those pieces are built together by one
        gather (:func:`_with_statements`). Absorbed ``_ABSORB_INSTANCES`` instances per call, so
        that the pieces alive at once stay few (a block's would be a few MB of views)."""
        import numpy as np

        counts = plain.num_vars[j:]
        width = self.layout.width
        statements, ends = schedule.instance_frames(plain.names[j:], counts, plain.degrees[j:],
                                                    plain.packed_claims[j * width:])
        if plain.period and len(counts) > 1 and _one_length(ends):
            self._absorb_alike(schedule, first, counts[0], statements, ends[0])
            return
        view = self._frames_view(schedule)
        round_len, frame_len = self._round_len, self._frame_len
        starts = np.zeros(len(counts) + 1, dtype=np.int64)  # each instance's first row from ``first``, then the end
        np.cumsum(counts, out=starts[1:])
        frames = np.frombuffer(view, dtype=np.uint8).reshape(-1, frame_len)
        joined = _with_statements(frames, first + starts[1:-1], round_len, statements, np.array(ends)) \
            if len(counts) > 1 else []  # the piece of instance i's first round, i >= 1: joined[i - 1]
        places, opening = starts.tolist(), memoryview(statements)
        for low in range(0, len(counts), _ABSORB_INSTANCES):
            high = min(low + _ABSORB_INSTANCES, len(counts))
            top, bottom = places[low], places[high]
            pieces = _pieces(view[(first + top) * frame_len:(first + bottom) * frame_len], bottom - top, round_len,
                             frame_len)
            pieces[0] = b"".join((opening[ends[low - 1] if low else 0:ends[low]], pieces[0]))
            deque(map(pieces.__setitem__, [place - top for place in places[low + 1:high]], joined[low:high - 1]),
                  maxlen=0)
            schedule.absorb_pieces(pieces, self.digests)

    def _absorb_alike(self, schedule: Sha256Schedule, first: int, rounds: int, statements: bytes, said: int) -> None:
        """:meth:`absorb_plain` for instances of one round count whose statements' frames have one length
        ``said``: the bytes absorbed for them, each statement then its rows' frames, are laid out in one
        buffer by three assignments (:func:`_fill_frames`), so the pieces between two squeezes lie at the
        same offsets in every instance and one cached C call cuts ``_ABSORB_INSTANCES`` instances' pieces
        (:func:`_span_pieces`): no gather per instance, no frames of the block built first."""
        import numpy as np

        count = len(statements) // said
        for pieces in _span_pieces(schedule.row_heads(self.layout.values), self.layout,
                                   self.rows[first:first + count * rounds].reshape(count, rounds, -1),
                                   np.frombuffer(statements, dtype=np.uint8).reshape(count, said)):
            schedule.absorb_pieces(pieces, self.digests)

    def absorb_glued(self, schedule: Sha256Schedule, first: int, names: Sequence[str], counts: Sequence[int],
                     degrees: Sequence[int], claims: bytes, glue: memoryview, run_ends: np.ndarray, cuts: np.ndarray,
                     glue_digests: bytearray) -> None:
        """Run the schedule over instances settled in bulk whose rows are this block's from row ``first``
        on, each an instance of a prime field, low-first, with its claim packed in ``claims``, followed by
        glue holding one squeeze: instance i, named ``names[i]``, of ``counts[i]`` rounds of degree
        ``degrees[i]``, has its glue at ``glue[run_ends[i]:run_ends[i + 1]]``, its challenge squeezed at
        ``cuts[i]``. Each statement, its rows, then its glue, as ``observe``, :meth:`absorb` and the glue's
        ``absorb_pieces`` would one after another, in one ``absorb_pieces`` call. The digests of the
        rounds' squeezes are appended to :attr:`digests`, those of the glue's to ``glue_digests``."""
        import numpy as np

        counts = list(counts)
        rows = sum(counts)
        statements, ends = schedule.instance_frames(names, counts, degrees, claims)
        squeezed = bytearray()
        if counts.count(counts[0]) == len(counts):  # the usual case: instance by instance alike, one buffer a span
            for pieces in _glued_groups(self.rows[first:first + rows], self.layout,
                                        schedule.row_heads(self.layout.values), counts[0],
                                        np.frombuffer(statements, dtype=np.uint8), np.array(ends, dtype=np.int64),
                                        np.frombuffer(glue, dtype=np.uint8), run_ends, cuts):
                schedule.absorb_pieces(pieces, squeezed)
        else:
            view = self._frames_view(schedule)
            round_len, frame_len = self._round_len, self._frame_len
            frames = view[first * frame_len:(first + rows) * frame_len]
            cut = _pieces(frames, rows, round_len, frame_len)  # round 0; (challenge k, round k + 1)...; the last one
            schedule.absorb_pieces(_one_by_one(cut, counts, frames, round_len, frame_len, memoryview(statements), ends,
                                               glue, run_ends.tolist(), cuts.tolist()), squeezed)
        per = 32 * schedule.squeezes_per_challenge
        if len(squeezed) != (rows + len(counts)) * per:
            raise GiveUp("glue squeezes other than one after each run")
        table = np.frombuffer(squeezed, dtype=np.uint8).reshape(rows + len(counts), per)
        if counts.count(counts[0]) == len(counts):  # each instance's n rounds, then its squeeze: rows of n + 1
            by_instance = table.reshape(len(counts), counts[0] + 1, per)
            self.digests += by_instance[:, :-1].tobytes()
            glue_digests += by_instance[:, -1].tobytes()
            return
        of_glue = np.zeros(len(table), dtype=bool)
        of_glue[np.cumsum(np.array(counts, dtype=np.int64) + 1) - 1] = True  # each instance's rounds, then its squeeze
        self.digests += table[~of_glue].tobytes()
        glue_digests += table[of_glue].tobytes()

    def rederived(self, kernel: Kernel, schedule: Sha256Schedule | None) -> np.ndarray | WideSamples | None:
        """The challenges the schedule squeezed for every round of the block (None: no schedule);
        over rows of limbs the samples they are reduced from, unreduced
        (:class:`~stepper.verify.roundblock.WideSamples`: compared by a congruence)."""
        from stepper.field.kernels.limbs import LimbKernel
        from stepper.verify.roundblock import WideSamples

        if not self.digests and schedule is None:
            return None
        if isinstance(kernel, LimbKernel) and schedule is not None:
            return WideSamples(_squeezed(kernel, schedule, self.digests, len(self.rows))[:, :schedule.wide_bytes])
        return rederive(kernel, schedule, self.digests, len(self.rows), self.challenges.shape)


def _squeezed(kernel: Kernel, schedule: Sha256Schedule | None, digests: bytearray, count: int) -> np.ndarray:
    """The samples of ``count`` challenges whose digests
    :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` appended, one row per sample
    (uint8; :meth:`~stepper.verify.fiatshamir.Sha256Schedule.squeezed_rows`)."""
    per = schedule.squeezes_per_challenge if schedule is not None else 0
    if schedule is None or len(digests) != count * per * 32:
        raise GiveUp("challenges re-derived for only part of the block")
    return schedule.squeezed_rows(digests, count)


def rederive(kernel: Kernel, schedule: Sha256Schedule | None, digests: bytearray, count: int,
             shape: tuple[int, ...]) -> np.ndarray:
    """The ``count`` challenges (an array of ``shape``) whose digests
    :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` appended to ``digests``: each
    base sample reduced mod p (``stepper-sha256/1``), or in an extension under ``stepper-sha256/2``
    each challenge's one sample reduced mod p^k and cut into its base-p digits."""
    from stepper.field.kernels import ExtensionKernel
    from stepper.verify.roundblock import reduce_wide, reduce_wide_digits

    squeezed = _squeezed(kernel, schedule, digests, count)
    wide = schedule.wide_bytes  # type: ignore[union-attr]
    if schedule.whole_element and isinstance(kernel, ExtensionKernel):  # type: ignore[union-attr]
        return reduce_wide_digits(kernel, squeezed, wide).reshape(shape)
    return reduce_wide(kernel, squeezed, wide).reshape(shape)


_CUT_ROWS = 256  # rows cut by one cached C call (:func:`_pieces`)
_ABSORB_INSTANCES = 64  # instances whose pieces RunBlock.absorb_plain hands to the schedule at once


@lru_cache(maxsize=8)
def _row_cut(count: int, stride: int) -> Callable[[memoryview], tuple[memoryview, ...]]:
    """One C call cutting ``count`` pieces of ``stride`` bytes each from a buffer's start."""
    return itemgetter(*(slice(k * stride, (k + 1) * stride) for k in range(count)))


def _one_length(ends: Sequence[int]) -> bool:
    """Whether the statements that end at ``ends`` (cumulative byte offsets) all have the length
    of the first: every end is a multiple of it in order, not just the last (lengths 10, 9, 11
    sum like three of 10)."""
    step = ends[0]
    return step > 0 and list(ends) == list(range(step, step * len(ends) + 1, step))


def _pieces(view: memoryview, rows: int, round_len: int, stride: int) -> list[bytes | memoryview]:
    """``rows`` rows of frames (each a round's frame of ``round_len`` bytes, then its challenge's,
    ``stride`` in all) cut into the pieces absorbed between two squeezes: the first round, then each
    challenge with the next round, then the last challenge (:func:`_cut_rows`)."""
    middle = rows - 1  # challenge k with round k + 1
    return [view[:round_len], *_cut_rows(view[round_len:round_len + middle * stride], middle, stride),
            view[round_len + middle * stride:rows * stride]]


def _cut_rows(view: memoryview, count: int, stride: int) -> list[memoryview]:
    """The first ``count`` pieces of ``stride`` bytes of ``view``, cut ``_CUT_ROWS`` at a time by one
    cached C call (its slices made once per size)."""
    pieces: list[memoryview] = []
    whole, left = divmod(count, _CUT_ROWS)
    at = 0
    if whole:
        cut = _row_cut(_CUT_ROWS, stride)
        span = _CUT_ROWS * stride
        for _ in range(whole):
            pieces += cut(view[at:at + span])
            at += span
    if left:
        pieces += _row_cut(left, stride)(view[at:at + left * stride]) if left > 1 else (view[at:at + stride],)
    return pieces


def _one_by_one(cut: list[bytes | memoryview], counts: list[int], frames: memoryview, round_len: int, frame_len: int,
                said: memoryview, ends: list[int], glue: memoryview, run_ends: list[int], cuts: list[int]
                ) -> list[bytes | memoryview]:
    """The pieces :meth:`RunBlock.absorb_glued` absorbs, put together instance by instance (instances of
    different round counts): ``cut`` the rows' pieces (:func:`_pieces`), ``said[ends[i - 1]:ends[i]]``
    instance i's statement, ``glue[run_ends[i]:run_ends[i + 1]]`` its glue squeezed at ``cuts[i]``."""
    out: list[bytes | memoryview] = [b"".join((said[:ends[0]], cut[0]))]
    at, last = 0, len(counts) - 1
    for i, n in enumerate(counts):
        out += cut[at + 1:at + n]  # the instance's own (challenge, round) pieces
        at += n
        out.append(b"".join((frames[at * frame_len - (frame_len - round_len):at * frame_len],
                             glue[run_ends[i]:cuts[i]])))
        after = glue[cuts[i]:run_ends[i + 1]]
        out.append(after if i == last else b"".join((after, said[ends[i]:ends[i + 1]],
                                                     frames[at * frame_len:at * frame_len + round_len])))
    return out


def _glued_groups(rows: np.ndarray, layout: Layout, heads: tuple[bytes, bytes], n: int, statements: np.ndarray,
                  ends: np.ndarray, glue: np.ndarray, run_ends: np.ndarray, cuts: np.ndarray
                  ) -> Iterator[Sequence[bytes | memoryview]]:
    """:func:`_one_by_one` for instances of ``n`` rounds each (``rows``: their packed round and challenge
    events, ``n`` a instance; ``heads`` the schedule's round and challenge frame heads), with no Python per
    instance, in groups that one ``absorb_pieces`` call each takes in turn (no squeeze between two
    groups). The instances are cut where a statement's length or the glue's cut changes (names of
    another length) into spans laid out alike; each span's absorbed bytes, instance by instance its
    statement, its rows' frames and its glue, are laid out in one buffer by a few assignments, so the
    squeezes fall at the same offsets in every instance, and one cached C call cuts the pieces of
    ``_ABSORB_INSTANCES`` instances (:func:`_span_pieces`)."""
    import numpy as np

    said_at = np.concatenate(([0], ends[:-1]))
    shapes = np.stack((ends - said_at, cuts - run_ends[:-1], run_ends[1:] - cuts))
    changes = np.flatnonzero((shapes[:, 1:] != shapes[:, :-1]).any(axis=0)) + 1
    bounds = [0, *changes.tolist(), len(cuts)]
    for low, high in zip(bounds[:-1], bounds[1:]):
        count = high - low
        said, before, after = (int(size) for size in shapes[:, low])
        yield from _span_pieces(heads, layout, rows[low * n:high * n].reshape(count, n, -1),
                                _strided(statements, int(said_at[low]), said, count, said),
                                (_strided(glue, int(run_ends[low]), before + after, count, before + after), before))


def _span_pieces(heads: tuple[bytes, bytes], layout: Layout, rows: np.ndarray, statements: np.ndarray,
                 glue: tuple[np.ndarray, int] | None = None) -> Iterator[Sequence[bytes | memoryview]]:
    """The pieces absorbed between two squeezes for instances laid out alike, in groups of
    ``_ABSORB_INSTANCES`` that one ``absorb_pieces`` call each takes in turn: ``rows`` (count, n, stride)
    their packed round and challenge events, ``statements`` (count, said) their statement frames,
    ``glue`` (if any) their glue (count, its length) and where in it the squeeze falls. Each instance's
    bytes, its statement, its rows' frames (``heads``: the schedule's round and challenge frame heads),
    then its glue, are laid out in one buffer by a few assignments, so the squeezes fall at the same
    offsets in every instance, and one cached C call (:func:`_span_cut`) cuts a group's pieces."""
    import numpy as np

    count, n = rows.shape[:2]
    said = statements.shape[1]
    round_len = len(heads[0]) + layout.values * layout.width
    frame_len = round_len + len(heads[1]) + layout.width
    glue_len, before = (glue[0].shape[1], glue[1]) if glue is not None else (0, 0)
    period, most = said + n * frame_len + glue_len, _ABSORB_INSTANCES
    stream = np.empty((-(-count // most) * most, period), dtype=np.uint8)  # whole groups: one cut for all
    stream[:count, :said] = statements
    _fill_frames(heads, rows, layout, stream[:count, said:said + n * frame_len].reshape(count, n, frame_len))
    if glue is not None:
        stream[:count, said + n * frame_len:] = glue[0]
    view = memoryview(stream.reshape(-1))  # type: ignore[arg-type]
    cut = _span_cut(most, said, n, round_len, frame_len, None if glue is None else (before, glue_len - before))
    per, last = (n, frame_len - round_len) if glue is None else (n + 1, glue_len - before)
    for low in range(0, count, most):
        pieces = cut(view[low * period:(low + most) * period])
        group = count - low
        if group < most:  # the last group: its last piece cut after its challenge's frame, or where its glue ends
            pieces = (*pieces[:group * per], pieces[group * per][:last])
        yield pieces


@lru_cache(maxsize=16)
def _span_cut(count: int, said: int, rounds: int, round_len: int, frame_len: int,
              glue: tuple[int, int] | None = None) -> Callable[[memoryview], tuple[memoryview, ...]]:
    """One C call cutting the bytes absorbed for ``count`` instances laid out alike (each a statement
    frame of ``said`` bytes, then ``rounds`` rows of frames: a round's of ``round_len`` bytes, then its
    challenge's, ``frame_len`` in all; then, with ``glue`` = (before, after), its glue, squeezed
    ``before`` bytes in and ``after`` bytes from its end) into the pieces absorbed between two squeezes:
    the first statement with its first round, each challenge with what follows it up to the next
    squeeze (the next statement too, after an instance's last challenge or its glue's squeeze), then
    what follows the last squeeze."""
    before, after = glue if glue is not None else (0, 0)
    period = said + rounds * frame_len + before + after
    marks = [round_len + k * frame_len for k in range(rounds)]
    if glue is not None:
        marks.append(rounds * frame_len + before)
    squeezes = [i * period + said + at for i in range(count) for at in marks]
    bounds = [0, *squeezes, count * period]
    return itemgetter(*(slice(low, high) for low, high in zip(bounds, bounds[1:])))


def _strided(source: np.ndarray, start: int, step: int, count: int, size: int) -> np.ndarray:
    """The ``count`` rows of ``size`` bytes of ``source`` from ``start``, ``step`` bytes apart (a view)."""
    from numpy.lib.stride_tricks import as_strided

    if count and start + (count - 1) * step + size > len(source):
        raise GiveUp("rows past the end of their source")
    return as_strided(source[start:], shape=(count, size), strides=(step, 1), writeable=False)


def _with_statements(frames: np.ndarray, rows: np.ndarray, round_len: int, statements: bytes,
                     ends: np.ndarray) -> list[memoryview]:
    """For each row r of ``rows`` (row r - 1 the last of the instance before), the piece absorbed
    between the squeeze of row r - 1 and that of row r with instance i's statement put before its
    first round: row r - 1's challenge frame, ``statements[ends[i] .. ends[i + 1])`` (the first
    ``ends[0]`` bytes are the first instance's, not put here), row r's round frame. Built by one
    gather per part; returned as views of one buffer."""
    import numpy as np

    stride = frames.shape[1]
    tail = stride - round_len  # a challenge's frame
    lengths = np.diff(ends)
    sizes = stride + lengths
    offsets = np.cumsum(sizes) - sizes
    out = np.empty(int(sizes.sum()), dtype=np.uint8)
    flat = frames.reshape(-1)
    out[offsets[:, None] + np.arange(tail)] = flat[(rows * stride - tail)[:, None] + np.arange(tail)]
    out[(offsets + tail + lengths)[:, None] + np.arange(round_len)] = flat[(rows * stride)[:, None]
                                                                           + np.arange(round_len)]
    named = int(lengths.sum())
    shift = np.repeat(offsets + tail - ends[:-1], lengths)  # statement byte b goes to b + shift
    out[np.arange(ends[0], ends[0] + named) + shift] = np.frombuffer(statements, dtype=np.uint8)[ends[0]:]
    view = memoryview(out)  # type: ignore[arg-type]
    return list(map(view.__getitem__, map(slice, offsets.tolist(), (offsets + sizes).tolist())))


def _prefixes_hold(rows: np.ndarray, layout: Layout) -> bool:
    """Whether every row (uint8, shape (n, stride)) starts with the layout's round prefix and holds its
    challenge prefix after the round's values (compared byte by byte: masked 32-bit words measured
    slower, a strided column of words costing about what one of bytes does)."""
    import numpy as np

    return all(bool((rows[:, at:at + len(fixed)] == np.frombuffer(fixed, dtype=np.uint8)).all())
               for at, fixed in ((0, layout.round_prefix), (layout.round_len, layout.challenge_prefix)))


def _frames(heads: tuple[bytes, bytes], rows: np.ndarray, layout: Layout) -> tuple[np.ndarray, int]:
    """Per round, the schedule's round frame then its challenge frame, built from the packed
    bytes (one row each), and the length of the round frame."""
    import numpy as np

    round_len = len(heads[0]) + layout.values * layout.width
    frames = np.empty((len(rows), round_len + len(heads[1]) + layout.width), dtype=np.uint8)
    _fill_frames(heads, rows, layout, frames)
    return frames, round_len


def _fill_frames(heads: tuple[bytes, bytes], rows: np.ndarray, layout: Layout, out: np.ndarray) -> None:
    """Write into ``out`` (last axis a round's frame then its challenge's) the frames of ``rows`` (the
    same leading axes, last axis a round and challenge event's packed bytes)."""
    import numpy as np

    round_head, challenge_head = heads
    round_len = len(round_head) + layout.values * layout.width
    out[..., :len(round_head)] = np.frombuffer(round_head, dtype=np.uint8)
    out[..., len(round_head):round_len] = rows[..., len(layout.round_prefix):layout.round_len]
    out[..., round_len:round_len + len(challenge_head)] = np.frombuffer(challenge_head, dtype=np.uint8)
    out[..., round_len + len(challenge_head):] = rows[..., layout.stride - layout.width:]
