"""The whole-file replay of ``stepper check``: rounds read and checked by the block.

On a large transcript, :class:`~stepper.transcript.store.reader.EventStream` plus
:meth:`~stepper.verify.replay.Replay.feed_all` spend their time turning every round and
challenge into a record and checking it alone. :func:`sweep` reads the same
file but takes the rounds, challenges and final of an instance, when they
follow its ``instance`` event laid out exactly as
:class:`~stepper.transcript.store.writer.TranscriptWriter` packs them, as one run of
bytes without decoding them, and checks runs by the block: Fiat-Shamir with
:meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_rows`, the sums, challenges
and finals with :func:`stepper.verify.roundblock.block_passes`. The glue events after
a run (values, squeezes, openings) are kept as bytes where the writer packed them
(:class:`~stepper.transcript.packed.GlueRun`), else as unpacked, and checked by columns
with it (:mod:`stepper.verify.glue_columns`), and so are the run's ``claim_expr`` and
``final_expr`` (:mod:`stepper.verify.glue_block`; the Sequencer defers them). Every
other event goes through the same :class:`~stepper.transcript.events.Sequencer` and
:meth:`~stepper.verify.replay.Replay.feed` as the reader would take it.

It either ends with the replay in exactly the state the event-by-event path
would reach (same report, byte for byte), or gives up and returns None, and
the caller replays the file event by event from the start, which then names
what is wrong. It gives up on any failing check in the runs it takes, any run
laid out otherwise (another producer's key order, annotations between rounds),
rounds of more evaluations than the field allows by the block (m > p or m > 2^12),
more than ``LOOSE_ROUNDS`` rounds outside runs, any file that
is not complete with a verified digest, and any error. Instances it does not
take as runs (compressed forms, batched claims, no rounds) go through
``Replay.feed``, which judges them as the event-by-event path does, failures
included. A rejected or damaged file costs the partial sweep on top of the usual
replay; an accepted one about a quarter of it (``python3 bench/check.py``). Runs
of different round sizes are grouped per size within a block, and settled and
hashed in stream order. Files under ``SMALL_FILE_BYTES`` are left to the
event-by-event replay, which there costs less than importing numpy, and so are
files with no end event in their last megabyte (still being written).
``STEPPER_SWEEP=off`` turns the sweep off, ``STEPPER_SWEEP=on`` applies it to
files of any size (tests).
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass
from bisect import bisect_right
from itertools import accumulate
from operator import itemgetter, mul
from typing import TYPE_CHECKING, Any, Callable, Iterator

import msgpack

from stepper.errors import Where
from stepper.transcript.packed import ROUND_HEAD, GlueRun, InstanceHead, instance_spans
from stepper.transcript.store.pending import pending_path
from stepper.transcript.events import GLUE_TYPES, KNOWN_TYPES, Sequencer
from stepper.transcript.store.reader import (
    HeldBackDigest, ReadLimits, appended_note, make_unpacker, read_header, unpacked,
)
from stepper.transcript.store.writer import END_MAX_BYTES, MAGIC
from stepper.verify.glue_texts import FixedTexts, holes_of, row_strings
from stepper.verify.packed_runs import (
    GiveUp as _GiveUp, GluedRuns, Layout, PlainRuns, Run, RunBlock, layout_of, packed_ints,
)
from stepper.transcript.records import (
    FORMAT_VERSION, GLUE_VERSION, BucketStats, Header, InstanceStart, Note, RoundMsg, UnknownEvent,
)

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Field
    from stepper.field.kernels import Kernel
    from stepper.field.expr_syntax import Template
    from stepper.verify.glue_block import GlueChecks, Settled, StartColumns, TextShape
    from stepper.verify.glue_columns import GlueColumns
    from stepper.verify.replay import Replay

__all__ = ["Swept", "sweep", "BLOCK_ROUNDS", "SMALL_FILE_BYTES"]

BLOCK_ROUNDS = 1 << 14  # rounds checked together: numpy arrays that stay in cache
LOOSE_ROUNDS = 1 << 12  # rounds outside runs before the sweep leaves the file to the usual replay
SMALL_FILE_BYTES = 1 << 20  # below this, event by event is about as fast as numpy's import alone
_GLUE_TYPES = frozenset(GLUE_TYPES)
_GLUE_AFTER_CHUNK = 1 << 16  # bytes of the next chunk searched for the rest of a glue run the chunk's end cut
_KNOWN_TYPES = frozenset(KNOWN_TYPES)
# the first bytes of an end event as the writer packs it (writer.end_payload): a map of 3, "type": "end", "events"
_END_KEYS = b"\x83" + b"".join(msgpack.packb(word) for word in ("type", "end", "events"))


@dataclass(frozen=True, slots=True)
class Swept:
    """What the store says of a file the sweep read to the end: always complete and verified."""

    header: Header
    appended: int
    completeness: str = "complete"
    digest: str = "verified"


def sweep(path: str | os.PathLike[str], replay: Replay, on_note: Callable[[Note], object] | None = None,
          limits: ReadLimits | None = None, *, min_bytes: int = 0) -> Swept | None:
    """Replay the whole transcript at ``path`` into ``replay`` (a summary replay: no round
    detail, no plug-in), or None when the sweep gives up (``replay`` is then spent: make
    a new one). ``on_note`` sees every note, in stream order. Files smaller than
    ``min_bytes`` are declined (``stepper check`` passes ``SMALL_FILE_BYTES``) unless
    ``STEPPER_SWEEP=on``; ``STEPPER_SWEEP=off`` declines every file. Anything but a regular file
    (a named pipe, a device) is declined too: what the sweep read there would be gone for the replay."""
    setting = os.environ.get("STEPPER_SWEEP", "").lower()
    if setting in ("0", "off", "no", "false"):
        return None
    try:
        status = os.stat(path)
        if not stat.S_ISREG(status.st_mode):
            return None  # a pipe or a device can be read once: the replay must be the one that reads it
        if setting not in ("1", "on", "yes", "true") and status.st_size < min_bytes:
            return None
        if os.path.exists(pending_path(path)):
            return None  # notes wait beside the file (a recording holds it): the reader shows them in order
        with open(path, "rb") as handle:
            if not _sealed(handle):
                return None  # incomplete (still being written?): the sweep would read it all, then give up
            return _Sweeper(handle, str(path), replay, on_note, limits or ReadLimits()).run()
    except Exception:  # noqa: BLE001 - any problem at all: the event-by-event replay judges and names it
        return None


def _sealed(handle: Any, tail: int = 1 << 20) -> bool:
    """Whether the last ``tail`` bytes hold the start of an end event as the writer packs it
    (a cheap look before a sweep; the sweep itself checks the end event in full). Notes
    appended after the end event that fill more than ``tail`` bytes make this say no: the
    event-by-event replay then reads the file, as it would anyway."""
    size = handle.seek(0, os.SEEK_END)
    handle.seek(max(0, size - tail))
    found = _END_KEYS in handle.read(tail)
    handle.seek(0)
    return found


def _alike(u8: np.ndarray, at: int, period: int, count: int, fixed: np.ndarray, degree_at: int, layout: Layout
           ) -> tuple[np.ndarray, np.ndarray]:
    """The starts and degree bytes of the periods from ``at`` that hold the first's bytes at ``fixed``
    (offsets in a period) and a degree (a positive fixint at ``degree_at``) that allows the layout's
    round size, up to the first that does not (of ``count``)."""
    import numpy as np

    periods = u8[at:at + period * count].reshape(count, period)  # one view
    if 2 * len(fixed) <= period:  # a plain instance's head and prefixes: gathered (40x faster at 24 rounds)
        columns = periods[:, fixed]
        same = (columns == columns[0]).all(axis=1)
    else:  # most of each period (glue after the runs): compared under a mask, no gather of every byte
        compared = np.zeros(period, dtype=bool)
        compared[fixed] = True
        differ = np.not_equal(periods, periods[0])
        differ &= compared  # in place: the expression's temporaries took 5x as long (0.5 -> 0.1 ms at 600 x 1 KB)
        flat = differ.reshape(-1)  # a view: row after row
        first = int(flat.argmax())  # the first True (booleans: a scan that stops there), 0 when none
        same = np.arange(count) < (first // period if flat[first] else count)  # a period alike up to the first that differs
    starts = at + period * np.arange(count)
    degrees = periods[:, degree_at]
    same &= (degrees < 0x80) & (degrees.astype(np.int64) + 1 >= layout.values)
    count = int(np.argmin(same)) if not same.all() else count
    return starts[:count], degrees[:count]


def _decoded(texts: list[bytes | None]) -> list[str | None]:
    """The UTF-8 texts (None stays None), decoded together when none is None and none holds a newline."""
    if None in texts:
        return [None if text is None else text.decode() for text in texts]
    joined = b"\n".join(texts)  # type: ignore[arg-type]
    if joined.count(b"\n") != len(texts) - 1:
        return [text.decode() for text in texts]  # type: ignore[union-attr]
    return joined.decode().split("\n")  # type: ignore[return-value]


class _Sweeper:
    def __init__(self, handle: Any, path: str, replay: Replay, on_note: Callable[[Note], object] | None,
                 limits: ReadLimits) -> None:
        self.handle = handle
        self.limits = limits
        self.replay = replay
        self.on_note = on_note
        from stepper.transcript.glue_names import GlueNames

        self.seq = Sequencer(Where(file=path))
        self.seq.defined = GlueNames()  # columns of counted names kept as templates (glue_columns)
        self.unpacker = make_unpacker(limits)
        self.digest: HeldBackDigest | None = None
        self.total = 0
        self.field: Field | None = None
        self.kernel: Kernel | None = None
        self.layout: Layout | None = None  # of the last run read
        self.layouts: dict[int, Layout] = {}  # by values per round
        self.runs: list[Run] = []  # (instance, first bytes, rest, layout), or instances in a row as columns
        # the glue after each run (payloads, or a blob of GlueRun's events; instances laid out alike stand for the
        # glue after each of their runs but the last), checked with them
        self.trailing: list[Any] = []
        self.glue_tail: list[Any] | None = None  # where glue payloads now go (None: the Sequencer)
        self.glue: GlueChecks | None = None  # set with the field
        self.due = False  # enough runs read: check them before the next instance
        self.rows = 0  # rounds in self.runs
        self.pending_bytes = 0  # bytes of rounds in self.runs
        self.loose_rounds = 0  # rounds fed one by one (instances not taken as runs)
        self.window: tuple[bytes, int] = (b"", 0)  # the chunk last fed to the unpacker, its unpacker offset
        self.fed = 0  # bytes fed to the unpacker
        self.glue_run: GlueRun | None = None  # set with the field
        self.instance_head: InstanceHead | None = None  # set with the field
        self.glue_event_max = 0  # the most bytes of one event glue_run reads
        self.glue_unpacked = False  # some glue event of the runs read so far was unpacked (not in a blob)

    # ----- reading --------------------------------------------------------------------
    def _offset(self) -> int:
        return len(MAGIC) + self.unpacker.tell()

    def _refill(self, size: int = 0) -> bool:
        chunk = self.handle.read(size or self.limits.chunk_bytes)
        if not chunk:
            return False
        self.total += len(chunk)
        if self.total > self.limits.max_total_bytes:
            raise _GiveUp("file too large")
        assert self.digest is not None  # set by run() before anything is read
        self.digest.add(chunk, self._offset() - END_MAX_BYTES)
        self.window = (chunk, self.fed)
        self.fed += len(chunk)
        self.unpacker.feed(chunk)
        return True

    def _payloads(self) -> Iterator[Any]:
        return unpacked(self.unpacker, self._refill)

    def _take(self, size: int) -> bytes:
        data = self.unpacker.read_bytes(size)
        while len(data) < size:
            if not self._refill():
                raise _GiveUp("the file ends inside a run")
            data += self.unpacker.read_bytes(size - len(data))
        return data

    # ----- the file -------------------------------------------------------------------
    def run(self) -> Swept:
        first = self.handle.read(self.limits.chunk_bytes)
        if not first.startswith(MAGIC):
            raise _GiveUp("not a transcript")
        self.total = len(first)
        self.digest = HeldBackDigest(first)
        self.window = (first[len(MAGIC):], 0)
        self.fed = len(first) - len(MAGIC)
        self.unpacker.feed(self.window[0])
        payloads = self._payloads()
        version = next(payloads)
        if version.__class__ is not int or not 1 <= version <= FORMAT_VERSION:
            raise _GiveUp("format version")
        self.seq.glue = version >= GLUE_VERSION
        header = read_header(next(payloads), version, self.seq.source)
        end = self._events(payloads)
        self._flush()
        size = len(msgpack.packb(end, use_bin_type=True))
        start = self._offset() - size
        if size > END_MAX_BYTES or end.get("sha256") != self.digest.digest_upto(start) \
                or end.get("events") != self.seq.count - 1:
            raise _GiveUp("digest")
        self.digest.drop()
        appended = 0
        for payload in payloads:
            note = appended_note(self.seq, payload)
            appended += 1
            if self.on_note is not None:
                self.on_note(note)
        self.unpacker.feed(b"\xc0")  # cut off? see stepper.transcript.store.reader
        if self.unpacker.unpack() is not None:
            raise _GiveUp("truncated")
        return Swept(header, appended)

    def _events(self, payloads: Iterator[Any]) -> dict[str, Any]:
        """Every event up to the end event (returned), runs taken and checked by the block, with the
        glue that follows them. The glue payloads after a run are kept as they are and checked by
        columns when the run is (:mod:`stepper.verify.glue_columns`), and so are its instance's
        claim_expr and final_expr (the Sequencer defers them): before the Sequencer sees any other
        event that could read the names they define, the runs read so far are checked."""
        seq, replay, instance_cls = self.seq, self.replay, InstanceStart
        passive = (Note, BucketStats, UnknownEvent)
        quiet = ("instance", "note", "buckets")  # events the Sequencer judges without the glue names
        glue_types, known_types = _GLUE_TYPES, _KNOWN_TYPES
        seq.defer_glue = True
        for payload in payloads:
            tail = self.glue_tail
            if tail is not None:
                kind = payload.get("type") if payload.__class__ is dict else None
                if kind in glue_types:
                    tail.append(payload)
                    self.glue_unpacked = True
                    seq.count += 1
                    continue
                if kind not in quiet or (kind == "instance" and ("eq_point" in payload or self.due)):
                    if kind in known_types:
                        self._flush()
            record = seq.feed(payload)
            cls = record.__class__
            if cls is instance_cls:
                if self._runnable(record):  # type: ignore[arg-type]
                    self._take_run(record)  # type: ignore[arg-type]
                    continue
                self._flush()
                if self.glue is not None:
                    self.glue.forget()  # the replay keeps this one's point: not the flush before's instances
                if record.claim_expr is not None or record.final_expr is not None:  # type: ignore[union-attr]
                    if record.eq_point is None:  # type: ignore[union-attr]
                        seq.check_deferred(record)  # type: ignore[arg-type]
            if cls in passive:
                if cls is UnknownEvent and record.kind == "end":  # type: ignore[union-attr]
                    if seq.finish_glue() is not None:
                        raise _GiveUp("a final_expr names a value never sent")
                    return payload  # type: ignore[no-any-return]
                if cls is Note and self.on_note is not None:
                    self.on_note(record)  # type: ignore[arg-type]
                continue
            self._flush()
            replay.feed(record)
            if cls is RoundMsg:
                self.loose_rounds += 1
                if self.loose_rounds > LOOSE_ROUNDS:  # mostly not runs: the event-by-event replay is faster
                    raise _GiveUp("too many rounds outside runs")
            elif self.field is None and seq.field is not None:
                self._set_field(seq.field)
        raise _GiveUp("no end event")

    def _set_field(self, field: Field) -> None:
        from stepper.field.kernels.base import steady_heap
        from stepper.verify.glue_block import GlueChecks
        from stepper.verify.roundblock import block_kernel, supports

        if not supports(field, 1) or self.replay.challenger is not None:
            raise _GiveUp("no runs in this field")  # every event one by one: the usual replay does that faster
        self.field = field
        self.kernel = block_kernel(field)
        self.glue = GlueChecks(field, self.kernel)
        self.glue_run = GlueRun(field.elem_bytes)
        self.instance_head = InstanceHead(field.elem_bytes)
        self.glue_event_max = 59 + field.elem_bytes  # a kind of 7 letters, a name of 31, the element
        steady_heap()  # numpy temporaries of a block: reuse freed memory, no page faults

    def _runnable(self, start: InstanceStart) -> bool:
        return self.kernel is not None and start.form == "evals" and start.batch is None and start.num_vars > 0

    def _take_run(self, start: InstanceStart) -> None:
        """Read an instance's rounds, challenges and final as bytes (they must follow it directly)."""
        layout = self.layout
        head = self._take(len(layout.round_prefix) if layout is not None else len(ROUND_HEAD) + 2)
        if layout is None or head != layout.round_prefix:
            head, layout = self._new_layout(head)
        if layout.values > start.degree + 1:
            raise _GiveUp("more values than the degree allows")  # the replay names the degree failure
        rest = self._take(start.num_vars * layout.stride + layout.final_len - len(head))
        if not rest.startswith(layout.final_prefix, len(rest) - layout.final_len):
            raise _GiveUp("no final after the rounds")
        self.seq.account_run(start.num_vars)
        self.runs.append((start, head, rest, layout))
        self._after_runs(start.num_vars, start.num_vars * layout.stride)
        if not self.due:
            self._take_instances()

    def _after_runs(self, rows: int, size: int) -> None:
        """Book ``rows`` rounds of ``size`` bytes just taken as runs (the last run's glue after it
        taken too), and check the block once it is full."""
        tail: list[Any] = []
        self.trailing.append(tail)
        self.glue_tail = tail if self.seq.glue else None
        if self.glue_tail is not None:
            self._take_glue(tail)
        self.rows += rows
        self.pending_bytes += size
        if self.rows >= BLOCK_ROUNDS or self.pending_bytes >= self.limits.chunk_bytes * 8:
            if self.glue_tail is None:
                self._flush()  # a file without glue events: nothing after the run waits to be checked with it
            else:
                self.due = True

    def _take_instances(self) -> None:
        """Take the instances that follow, each an ``instance`` event in the writer's plainest form
        (:class:`~stepper.transcript.packed.InstanceHead`, a ``claim_expr`` and a ``final_expr``
        allowed) right followed by its run in the last run's layout, and the glue after each run
        (:class:`~stepper.transcript.packed.GlueRun`), while they lie whole in the chunk last read
        and the block has room: found in the chunk's bytes and taken with one ``read_bytes``, no
        map per instance event. Each event's payload (the one msgpack would have made) still goes
        through the Sequencer, in order. The glue after the last run taken is left to
        :meth:`_take_glue`, which reads on into the next chunk. Instances laid out alike are taken
        together (:meth:`_take_uniform`, :meth:`_take_glued_alike`); where they are not (a name one
        character longer from here on shifts every byte after it), a few are taken one by one
        (:meth:`_take_found`), twice as many each time the comparison fails again right after."""
        most = 1
        while True:
            alike = False
            while self._take_uniform() or self._take_glued_alike():  # a flush in between (a file without glue)
                if self.due:  # starts the next block
                    return  # the block is full: the glue after the last run taken waits to be checked with it
                alike = True
            most = 1 if alike else most
            if not self._take_found(most) or self.due:
                return
            most *= 2

    def _take_found(self, most: int) -> bool:
        """Take up to ``most`` instances that follow, found one by one in the chunk's bytes (see
        :meth:`_take_instances`); returns whether any were taken."""
        layout, find = self.layout, self.instance_head
        data, data_at = self.window
        first = at = self.unpacker.tell() - data_at
        if layout is None or find is None or at < 0:
            return False
        glue = self.glue_run.match if self.glue_run is not None and self.seq.glue else None
        prefix, final_prefix, stride, final_len = layout.round_prefix, layout.final_prefix, layout.stride, layout.final_len
        ends, rows, size, limit = len(data), self.rows, self.pending_bytes, self.limits.chunk_bytes * 8
        found: list[tuple[int, bytes, int, int, bytes, bytes | None, bytes | None]] = []  # each event's end, fields
        glue_ends: list[int] = []  # where the glue after each run taken ends
        plain = True  # no claim_expr or final_expr, no glue between the runs: taken as columns
        head_at = at
        while rows < BLOCK_ROUNDS and size < limit and len(found) < most:
            head = find(data, head_at)
            if head is None:
                break
            head_end, _, num_vars, degree, _, claim_expr, final_expr = head
            end = head_end + num_vars * stride + final_len
            if (end > ends or num_vars == 0 or layout.values > degree + 1 or not data.startswith(prefix, head_end)
                    or not data.startswith(final_prefix, end - final_len)
                    or ((claim_expr is not None or final_expr is not None) and glue is None)):
                break  # the usual path takes it (and judges it)
            if head_at != at or claim_expr is not None or final_expr is not None:
                plain = False  # glue before this instance (after the last run, the flush takes it), or texts
            found.append(head)
            rows += num_vars
            size += num_vars * stride
            at = end
            head_at = end if glue is None else glue(data, end).end()  # type: ignore[union-attr]
            glue_ends.append(head_at)
        if not found:
            return False
        blob = memoryview(self.unpacker.read_bytes(at - first))
        try:
            if plain and len(found) > 1 and self._take_plain(
                    [head[1].decode() for head in found], [head[2] for head in found], [head[3] for head in found],
                    b"".join([head[4] for head in found]), lambda: blob, [head[0] - first for head in found], layout):
                self._after_runs(rows - self.rows, size - self.pending_bytes)
                return True
            seq, runs, trailing, last = self.seq, self.runs, self.trailing, len(found) - 1
            names, claim_texts, final_texts = (_decoded([head[1] for head in found]),
                                               _decoded([head[5] for head in found]),
                                               _decoded([head[6] for head in found]))
            starts = seq.glued_runs(names, [head[2] for head in found], [head[3] for head in found],  # type: ignore[arg-type]
                                    b"".join([head[4] for head in found]), claim_texts, final_texts)
            for j, (head_end, _, num_vars, degree, claim, _, _) in enumerate(found):
                if starts is not None:
                    start = starts[j]
                else:  # one at a time: the Sequencer judges what it did not take together
                    start = seq.plain_instance(names[j], num_vars, degree, claim, claim_texts[j], final_texts[j])  # type: ignore[arg-type]
                    seq.account_run(num_vars)
                run_at = head_end - first + len(prefix)
                run_end = run_at + num_vars * stride + final_len - len(prefix)
                runs.append((start, prefix, blob[run_at:run_end], layout))  # type: ignore[arg-type]
                if j < last:  # the glue after this run (none in a file without glue): up to the next instance
                    glue_end = glue_ends[j] - first
                    trailing.append([bytes(blob[run_end:glue_end])] if glue_end > run_end else [])
        except UnicodeDecodeError:
            raise _GiveUp("a text that is not UTF-8") from None  # the usual path names it
        self._after_runs(rows - self.rows, size - self.pending_bytes)
        return True

    def _take_plain(self, names: list[str], num_vars: list[int], degrees: list[int], packed_claims: bytes,
                    blob: Callable[[], memoryview], rows_at: list[int], layout: Layout, period: int = 0) -> bool:
        """Hand instances found with no claim_expr, no final_expr and no glue between their runs to
        the Sequencer in one step and keep them as columns (:class:`PlainRuns`; ``blob`` gives their
        bytes, read once the Sequencer has taken them), or return False (nothing done) when the
        Sequencer leaves them to be fed one by one."""
        index = len(self.seq.names)
        claims = self.seq.plain_runs(names, num_vars, degrees, packed_claims)
        if claims is None:
            return False
        last = self.seq.current
        assert last is not None
        self.runs.append(PlainRuns(index, names, num_vars, degrees, claims, packed_claims, blob(), rows_at, layout,
                                   last, period))
        return True

    def _take_uniform(self) -> bool:
        """Take the instances that follow as :meth:`_take_instances` would, when they are laid out
        alike: each event the bytes of the first but its name (of the same length), degree and
        claim, each run of the same number of rounds right after it, each next event right after
        that run's final. All of them are compared with numpy at once (no regular expression per
        instance), as far as the chunk, the block's room and the layout go; returns whether any
        were taken (two at least; :meth:`_take_instances` then goes on from there)."""
        layout, find = self.layout, self.instance_head
        data, data_at = self.window
        at = self.unpacker.tell() - data_at
        if layout is None or find is None or at < 0:
            return False
        head = find(data, at)
        if head is None or head[5] is not None or head[6] is not None or head[2] == 0:
            return False
        head_end, name, num_vars, _, _, _, _ = head
        head_len, stride, final_len, width = head_end - at, layout.stride, layout.final_len, layout.width
        period = head_len + num_vars * stride + final_len
        rows_left, size_left = BLOCK_ROUNDS - self.rows, self.limits.chunk_bytes * 8 - self.pending_bytes
        count = min((len(data) - at) // period, -(-rows_left // num_vars), -(-size_left // (num_vars * stride)))
        if count < 2:
            return False
        import numpy as np

        u8 = np.frombuffer(data, dtype=np.uint8)
        # the event ends: name, "num_vars", n, "degree", d, "claim", bin 8 of the claim (fixstr keys, fixint counts)
        degree_at = head_len - width - 2 - len(b"\xa5claim") - 1
        name_at = degree_at - len(b"\xa6degree") - 1 - len(b"\xa8num_vars") - len(name)
        fixed = np.concatenate((np.arange(name_at), np.arange(name_at + len(name), degree_at),
                                np.arange(degree_at + 1, head_len - width),
                                head_len + np.arange(len(layout.round_prefix)),
                                period - final_len + np.arange(len(layout.final_prefix))))
        starts, degrees = _alike(u8, at, period, count, fixed, degree_at, layout)
        count = len(starts)
        if count < 2:
            return False
        try:
            names = _fixed_texts(u8, starts, name_at, len(name))
        except UnicodeDecodeError:
            return False  # the usual path names it
        claims = u8[starts[:, None] + (head_len - width + np.arange(width))].tobytes()
        if not self._take_plain(names, [num_vars] * count, degrees[:count].tolist(), claims,
                                lambda: memoryview(self.unpacker.read_bytes(count * period)),
                                (starts - at + head_len).tolist(), layout, period):
            return False  # nothing read: the usual path takes them
        self._after_runs(count * num_vars, count * num_vars * stride)
        return True

    def _take_glued_alike(self, widen: bool = True) -> bool:
        """:meth:`_take_uniform` for instances with a ``claim_expr`` or a ``final_expr`` and the glue after
        their runs: each period the bytes of the first but what may differ (:func:`instance_spans`: the
        name, degree, claim and texts, each of the same length; the round values, challenges and final;
        the glue's names, of the same lengths, and elements), all compared with numpy at once; each run's
        glue is the first's in layout (its every byte is read again by the flush), the next event right
        after it. Where the chunk's end, not the block's room, would stop them, the next chunk is read
        first (``widen``, :meth:`_widen`), so that a block's instances are taken in few calls (each costs
        as much again in numpy calls and columns joined). Returns whether any were taken (two at least,
        the glue after the last left to :meth:`_take_glue`), or False having read nothing."""
        layout, find, glue_run = self.layout, self.instance_head, self.glue_run
        if layout is None or find is None or glue_run is None or not self.seq.glue:
            return False
        data, data_at = self.window
        at = self.unpacker.tell() - data_at
        if at < 0:
            return False
        head = find(data, at)
        if head is None or (head[5] is None and head[6] is None) or head[2] == 0:
            return False
        num_vars, stride, final_len, width = head[2], layout.stride, layout.final_len, layout.width
        head_len = head[0] - at
        run_end = head_len + num_vars * stride + final_len  # from ``at``
        if at + run_end > len(data) or not data.startswith(layout.round_prefix, head[0]) \
                or not data.startswith(layout.final_prefix, at + run_end - final_len):
            return False
        glue_len = glue_run(data, at + run_end)
        period = run_end + glue_len
        rows_left, size_left = BLOCK_ROUNDS - self.rows, self.limits.chunk_bytes * 8 - self.pending_bytes
        room = min(-(-rows_left // num_vars), -(-size_left // (num_vars * stride)))
        if not glue_len:
            return False
        if widen and (len(data) - at) // period < room and self._widen(room * period - (len(data) - at)):
            return self._take_glued_alike(widen=False)
        count = min((len(data) - at) // period, room)
        if count < 2:
            return False
        import numpy as np

        varying = instance_spans(head, at)
        text_spans = varying[3:]  # claim_expr's, final_expr's (those present)
        # a text whose words are names, numbers and call words: only its names may differ (the rest compared)
        holes = [holes_of(data[at + begin:at + end]) for begin, end in text_spans]
        varying[3:] = [(begin + low, begin + high) for (begin, end), found in zip(text_spans, holes)
                       for low, high in (found[1] if found is not None else [(0, end - begin)])]
        glue_at = run_end
        glue_names: list[tuple[int, int]] = []
        for kind, _, name, _ in glue_run.rows(data[at + run_end:at + period]):  # the glue's names and elements
            name_at = glue_at + len(b"\x83\xa4type") + 1 + len(kind) + len(b"\xa4name") + 1
            element_at = name_at + len(name) + len(b"\xa5value") + 2
            varying += [(name_at, name_at + len(name)), (element_at, element_at + width)]
            glue_names.append((name_at, name_at + len(name)))
            glue_at = element_at + width
        if glue_at != period:
            return False
        keep = np.ones(period, dtype=bool)
        for begin, end in varying:
            keep[begin:end] = False
        values_at = head_len + np.arange(num_vars)[:, None] * stride
        keep[(values_at + len(layout.round_prefix) + np.arange(layout.round_len - len(layout.round_prefix))).ravel()] = False
        keep[(values_at + stride - width + np.arange(width)).ravel()] = False  # the challenges
        keep[run_end - width:run_end] = False  # the final value
        fixed = np.flatnonzero(keep)
        u8 = np.frombuffer(data, dtype=np.uint8)
        starts, degrees = _alike(u8, at, period, count, fixed, varying[1][0], layout)
        count = len(starts)
        if count < 2:
            return False

        def texts(span: tuple[int, int] | None) -> list[str | None]:
            return [None] * count if span is None else _fixed_texts(u8, starts, span[0], span[1] - span[0])  # type: ignore[return-value]

        periods = u8[at:at + period * count].reshape(count, period)
        found = iter(zip(text_spans, holes))
        shapes = tuple(_text_shapes(periods, *next(found), glue_names) if present is not None else []
                       for present in head[5:7])
        spans = iter(text_spans)
        try:
            names = texts(varying[0])
            # the texts read by template stay bytes (ASCII: compared with the first's, names of name characters)
            claim_texts, final_texts = (
                texts(next(spans) if present is not None else None) if not shape
                else FixedTexts(periods[:, slice(*next(spans))].copy()) for present, shape in zip(head[5:7], shapes))
        except UnicodeDecodeError:
            return False  # the usual path names it
        claim_at = varying[2][0]
        claims = u8[starts[:, None] + (claim_at + np.arange(width))].tobytes()
        index = len(self.seq.names)
        counts, degree_list = [num_vars] * count, degrees[:count].tolist()
        values = self.seq.glued_columns(names, counts, degree_list, claims, claim_texts, final_texts)  # type: ignore[arg-type]
        if values is None:
            return False  # nothing read: the usual path takes them
        blob = memoryview(self.unpacker.read_bytes((count - 1) * period + run_end))  # the last glue: _take_glue
        glued = GluedRuns(index, names, counts, degree_list, values, claims, blob, claim_texts=claim_texts,  # type: ignore[arg-type]
                          final_texts=final_texts, period=period, head_len=head_len, run_end=run_end, layout=layout,
                          last=self.seq.current, shapes=shapes)  # type: ignore[arg-type]
        self.runs.append(glued)
        self.trailing.append(glued)  # stands for the glue after each of its runs but the last
        self._after_runs(count * num_vars, count * num_vars * stride)
        return True

    def _widen(self, more: int) -> bool:
        """Read the next ``more`` bytes (a chunk at least; at most eight, or what the unpacker may hold beyond
        one) and make the window the unread rest of the last chunk followed by them (the unpacker holds just
        those bytes); False, the window unchanged, at the file's end."""
        data, data_at = self.window
        at = self.unpacker.tell() - data_at
        chunk = self.limits.chunk_bytes
        if at < 0 or not self._refill(max(chunk, min(more, 8 * chunk, self.limits.max_event_bytes))):
            return False
        self.window = (data[at:] + self.window[0], data_at + at)
        return True

    def _take_glue(self, tail: list[Any]) -> None:
        """Take the glue events right after a run that are packed as the writer packs them
        (:class:`~stepper.transcript.packed.GlueRun`) from the chunk's bytes, as one blob (no map
        per event; the flush reads the blobs of all its runs at once); whatever follows them is
        unpacked as usual."""
        data, data_at = self.window
        at = self.unpacker.tell() - data_at
        if at < 0:
            return
        glue_run = self.glue_run
        assert glue_run is not None  # set with the field
        size = glue_run(data, at)
        if at + size + self.glue_event_max < len(data):  # the events stop before the chunk's end: all taken
            if size:
                tail.append(self.unpacker.read_bytes(size))  # counted as events when the flush reads them
            return
        # the chunk's end may cut an event: the rest of the chunk and the next one read as one, one blob still
        taken = self.unpacker.read_bytes(size)
        rest = data[at + size:]
        if self._refill():
            more = glue_run(rest + self.window[0][:_GLUE_AFTER_CHUNK], 0)
            if more:
                taken += self.unpacker.read_bytes(more)
        if taken:
            tail.append(taken)

    def _new_layout(self, head: bytes) -> tuple[bytes, Layout]:
        """The layout a run's first bytes announce."""
        from stepper.verify.roundblock import supports

        field = self.field
        assert field is not None
        if not head.startswith(ROUND_HEAD):
            raise _GiveUp("another event after the instance")
        marker, size = head[len(ROUND_HEAD)], head[len(ROUND_HEAD) + 1]
        if marker == 0xC5:
            head += self._take(len(ROUND_HEAD) + 3 - len(head))
            size = int.from_bytes(head[len(ROUND_HEAD) + 1:len(ROUND_HEAD) + 3], "big")
        elif marker != 0xC4:
            raise _GiveUp("round values not packed in one blob")
        values = size // field.elem_bytes
        if size % field.elem_bytes or not supports(field, values):
            raise _GiveUp("round size")
        layout = self.layouts.get(values)
        if layout is None:
            if len(self.layouts) >= 64:
                raise _GiveUp("too many round sizes")
            layout = self.layouts[values] = layout_of(values, field.elem_bytes)
        if not head.startswith(layout.round_prefix):
            raise _GiveUp("round header")
        self.layout = layout
        return head, layout

    def _settle_plain(self, plain: PlainRuns, block: RunBlock) -> bool:
        """Settle the instances of ``plain`` into the replay and run the schedule over them, as
        :meth:`_flush` does one run at a time: one at a time while the replay keeps their summaries,
        the rest in one step (:meth:`~stepper.verify.replay.Replay.settle_quietly`,
        :meth:`~stepper.verify.packed_runs.RunBlock.absorb_plain`). Returns whether the last one's
        summary is kept."""
        replay, count, j, kept = self.replay, len(plain), 0, False
        while j < count and not replay.settles_quietly():
            start = plain.record(j)
            first, final = block.next_run()
            kept = replay.settle(start, final)
            schedule = replay.schedule  # the first settle may start the default schedule
            if schedule is not None:
                block.absorb(schedule, first, start.num_vars)
            j += 1
        if j == count:
            return kept
        replay.settle_quietly(count - j, plain.rounds_degree(j))
        first = block.skip(count - j)
        schedule = replay.schedule
        if schedule is not None:
            block.absorb_plain(schedule, first, plain, j)
        return False

    def _settle_glued(self, block: RunBlock, starts: StartColumns, i: int, glue: GlueColumns, digests: bytearray
                      ) -> bool:
        """Settle the instances ``starts`` (the flush's from instance i on, each taken one by one or among
        instances laid out alike, low-first, with an int claim, followed by glue of one squeeze) into the
        replay in one step, while it keeps no summaries
        (:meth:`~stepper.verify.replay.Replay.settle_quietly`), and run the schedule over their
        statements, rows and glue in one pass (:meth:`~stepper.verify.packed_runs.RunBlock.absorb_glued`);
        the glue's digests go to ``digests``. Returns False, having done nothing, when they are not all so."""
        schedule = self.replay.schedule
        if set(starts.order) != {"low-first"} or set(map(type, starts.claim)) != {int}:
            return False
        cuts = None
        if schedule is not None:
            cuts = glue.one_squeeze_each(schedule, i)
            if cuts is None:
                return False
        self.replay.settle_quietly(len(starts), sum(map(mul, starts.num_vars, starts.degree)))
        first = block.skip(len(starts))
        if schedule is not None:
            assert cuts is not None and self.field is not None
            view, run_ends, _ = glue.stream(schedule)
            block.absorb_glued(schedule, first, starts.name, starts.num_vars, starts.degree,
                               packed_ints(starts.claim, self.field.elem_bytes), view, run_ends[i:], cuts, digests)
        return True

    def _settle_run(self, block: RunBlock, start: InstanceStart, glue: GlueColumns, i: int, digests: bytearray
                    ) -> tuple[int, Any, bool]:
        """Settle the flush's run i (``start``'s, the next of ``block``) into the replay, run the schedule
        over it and the glue after it; returns its first row, its final value and whether the replay keeps
        its summary."""
        first, final = block.next_run()
        kept = self.replay.settle(start, final)
        schedule = self.replay.schedule  # the first settle may start the default schedule
        if schedule is not None:
            block.absorb(schedule, first, start.num_vars)
        self._glue_after(glue, i, start, kept, digests)
        return first, final, kept

    def _glue_after(self, glue: GlueColumns, i: int, start: InstanceStart, kept: bool, digests: bytearray) -> None:
        """The schedule over the glue after the flush's run i, and its records into the replay when it
        keeps that instance's summary."""
        schedule = self.replay.schedule
        if schedule is not None and glue.size:
            after = glue.run_pieces(schedule, i)
            if after:
                schedule.absorb_pieces(after, digests)
        if kept:
            self.replay.settle_glue(glue.records(i, start.index))

    # ----- checking a block -----------------------------------------------------------
    def _flush(self) -> None:
        """Check the runs read so far, and the glue after them, and settle them into the replay, or
        give up. Runs are grouped by layout (one array per round size) but settled and hashed in
        stream order, the glue absorbed and squeezed after the run it follows."""
        runs, trailing = self.runs, self.trailing
        self.glue_tail = None
        if not runs:
            return
        import numpy as np

        from stepper.verify.glue_block import Unsupported
        from stepper.verify.glue_columns import GlueColumns
        from stepper.verify.roundblock import block_passes

        kernel, checks, field, seq = self.kernel, self.glue, self.field, self.seq
        assert kernel is not None and checks is not None and field is not None
        self.runs, self.trailing, self.rows, self.pending_bytes, self.due = [], [], 0, 0, False
        kinds = set(map(type, runs))
        plain_rows = PlainRuns in kinds  # some runs are instances in a row, held as columns
        layouts = set(map(itemgetter(3), runs)) if kinds == {tuple} else set(map(_layout, runs))  # type: ignore[arg-type]
        # the runs' claim_expr and final_expr: with one block of runs taken one by one or laid out alike, read
        # as columns after the loop (instance i is the block's run i); otherwise gathered run by run
        by_columns = seq.glue and len(layouts) == 1 and not plain_rows
        if GluedRuns in kinds and (not by_columns or self.glue_unpacked):
            runs, trailing = _each_a_run_of_its_own(runs, trailing)  # glue read otherwise
            kinds.discard(GluedRuns)
            kinds.add(tuple)
        glue = GlueColumns(field, trailing, seq.defined, blobs_only=not self.glue_unpacked)
        self.glue_unpacked = False
        seq.count += glue.from_bytes  # the events read as blobs, not counted as they were taken
        members: dict[Layout, list[Run]] = {}
        if len(layouts) == 1:  # the usual case: runs taken one by one or laid out alike, all of one round size
            members[layouts.pop()] = runs
        else:
            for run in runs:
                members.setdefault(_layout(run), []).append(run)
        blocks = {layout: RunBlock(layout, group, kernel, field) for layout, group in members.items()}
        replay = self.replay
        digests = bytearray()  # of the glue's squeezes
        glued: list[Settled] = []  # the runs with a claim_expr or final_expr, when not by columns
        unkept = glue.size  # the first glue event after a run whose summary is not kept
        bounds = glue.bounds
        try:
            if by_columns:
                block = next(iter(blocks.values()))
                listing = _Listing(runs)
                starts = listing.columns()
                for i in range(len(starts)):
                    if glue.size and replay.settles_quietly() and self._settle_glued(
                            block, starts.since(i), i, glue, digests):
                        if unkept == glue.size:
                            unkept = bounds[i]
                        break
                    _, _, kept = self._settle_run(block, listing.record(i), glue, i, digests)
                    if not kept and unkept == glue.size:
                        unkept = bounds[i]
                checks.instances(starts, block.first_rows, block.finals, block.challenges)
                checks.add_columns(np.arange(len(starts)), starts, block.finals, block.challenges,
                                   block.first_rows)
            else:
                for i, run in enumerate(runs):
                    if run.__class__ is PlainRuns:
                        kept = self._settle_plain(run, blocks[run.layout])  # type: ignore[arg-type, union-attr]
                        self._glue_after(glue, i, run.last, kept, digests)  # type: ignore[union-attr]
                    else:
                        start, _, _, layout = run  # type: ignore[misc]
                        block = blocks[layout]
                        first, final, kept = self._settle_run(block, start, glue, i, digests)
                        if start.claim_expr is not None or start.final_expr is not None:
                            glued.append((i, start, final, block.challenges, first))
                    if not kept and unkept == glue.size:
                        unkept = bounds[i]
                if glued:
                    checks.add(glued)
            if checks.groups:
                checks.check_names(glue.rows(), glue.lists(), seq.defined, glue.run_of_row(), glue.names)
        except Unsupported as err:
            raise _GiveUp(f"glue this pass does not check by the block: {err}") from None
        if unkept < glue.size:
            replay.settle_glue_values(glue.names[unkept:], glue.values[unkept:])
        for block in blocks.values():
            rederived = block.rederived(kernel, replay.schedule)
            if not block_passes(kernel, block.evals, block.challenges, block.starts, block.claims, block.finals,
                                rederived):
                raise _GiveUp("a check fails in this block")
        if digests and not glue.squeezes_pass(kernel, replay.schedule, digests):
            raise _GiveUp("a squeeze differs from the derived one")
        try:
            passes = checks.check(replay.glue_values(), glue.cells(kernel) if checks.groups else None)
        except Unsupported as err:
            raise _GiveUp(f"glue this pass does not check by the block: {err}") from None
        if not passes or replay.failed:
            raise _GiveUp("a glue check fails in this block")
        replay.forget_points()  # the settled instances keep no point: which earlier ones remain is unknown here


def _fixed_texts(u8: np.ndarray, starts: np.ndarray, begin: int, size: int) -> list[str]:
    """The UTF-8 texts of ``size`` bytes at ``begin`` from each of ``starts`` in ``u8`` (instances laid
    out alike), decoded at once when they are all ASCII (:func:`~stepper.verify.glue_texts.row_strings`);
    UnicodeDecodeError when one is not UTF-8."""
    import numpy as np

    return row_strings(u8[starts[:, None] + (begin + np.arange(size))])


def _text_shapes(periods: np.ndarray, span: tuple[int, int], holes: tuple[Template, list[tuple[int, int]]] | None,
                 glue_names: list[tuple[int, int]]) -> list[TextShape] | None:
    """The template of the texts at ``span`` of ``periods`` (instances laid out alike, every byte of the
    texts but the names in its ``holes`` compared with the first's), each hole's names placed among the
    glue names (:func:`~stepper.verify.glue_texts.placed_names`) and every text's position, as
    :func:`~stepper.verify.glue_block.shapes_of` gives them; None when they were not compared so, or
    some name does not read or stand so (the flush then reads the texts)."""
    if holes is None:
        return None
    from stepper.verify.glue_texts import placed_names

    template, spans = holes
    columns = placed_names(periods, [(span[0] + low, span[0] + high) for low, high in spans], glue_names)
    return None if columns is None else [(template, columns, range(len(periods)))]  # type: ignore[list-item]


def _layout(run: Run) -> Layout:
    return run[3] if run.__class__ is tuple else run.layout  # type: ignore[index, union-attr, no-any-return]


def _each_a_run_of_its_own(runs: list[Run], trailing: list[Any]) -> tuple[list[Run], list[Any]]:
    """``runs`` and ``trailing`` with the instances laid out alike (:class:`GluedRuns`) as runs of their
    own, each with its glue: for a flush whose glue or blocks the columns do not cover."""
    out: list[Run] = []
    tails: list[Any] = []
    for run in runs:
        if not isinstance(run, GluedRuns):
            out.append(run)
            continue
        prefix, blob, period = run.layout.round_prefix, run.blob, run.period
        at = run.head_len + len(prefix)
        out += [(run.record(j), prefix, blob[j * period + at:j * period + run.run_end], run.layout)  # type: ignore[misc]
                for j in range(len(run))]
    for tail in trailing:
        if tail.__class__ is GluedRuns:
            period, end = tail.period, tail.run_end
            tails += [[bytes(tail.blob[j * period + end:(j + 1) * period])] for j in range(len(tail) - 1)]
        else:
            tails.append(tail)
    return out, tails


class _Listing:
    """The instances of a flush whose runs are of one block: runs taken one by one and instances laid out
    alike (:class:`GluedRuns`), by their place among the flush's instances."""

    def __init__(self, runs: list[Run]) -> None:
        self.runs = runs
        self.firsts = list(accumulate((len(run) if run.__class__ is GluedRuns else 1 for run in runs),  # type: ignore[arg-type]
                                      initial=0))

    def record(self, i: int) -> InstanceStart:
        entry = bisect_right(self.firsts, i) - 1
        run = self.runs[entry]
        if run.__class__ is GluedRuns:
            return run.record(i - self.firsts[entry])  # type: ignore[union-attr]
        return run[0]  # type: ignore[index, return-value]

    def columns(self) -> StartColumns:
        """Every instance's fields as columns: records read where runs were taken one by one, the columns
        of instances laid out alike as they are."""
        from stepper.verify.glue_block import StartColumns

        parts: list[StartColumns] = []
        loose: list[InstanceStart] = []
        for run in self.runs:
            if run.__class__ is not GluedRuns:
                loose.append(run[0])  # type: ignore[index, arg-type]
                continue
            if loose:
                parts.append(StartColumns.of(loose))
                loose = []
            parts.append(StartColumns(run.names, run.num_vars, run.degrees, ["low-first"] * len(run),  # type: ignore[union-attr, arg-type]
                                      run.claims, run.claim_texts, run.final_texts, shapes=run.shapes))  # type: ignore[union-attr]
        if loose:
            parts.append(StartColumns.of(loose))
        return StartColumns.joined(parts)  # one part: itself
