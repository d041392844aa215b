"""Runs of rounds hashed by the block (stepper.verify.packed_runs): the pieces that instances settled in
bulk hand the schedule, built by columns, are the pieces built instance by instance, cut at the same
places. The independent side is plain Python slicing and joining of the same parts (what absorbing the
records one at a time absorbs, between two squeezes). The fixed bytes of a block's rows are checked
against msgpack's own packing of a round and a challenge event of each size (``msgpack.packb`` of the
payload the writer writes, transcripts/FORMAT.md); a row is one round event and its challenge event."""

from __future__ import annotations

import random
from dataclasses import dataclass
from itertools import accumulate

import msgpack
import numpy as np
import pytest

from stepper.verify.packed_runs import (
    Layout, _glued_groups, _one_by_one, _one_length, _pieces, _prefixes_hold, _span_cut, layout_of,
)


HEADS = (b"\x05round-head", b"\x09challenge-head")  # any bytes: the schedule's frame heads go before the values


@dataclass(frozen=True)
class Parts:
    """Rows of packed round and challenge events (``layout``), statements ending at ``ends`` and glue
    (run i's from ``run_ends[i]`` to ``run_ends[i + 1]``, squeezed at ``cuts[i]``)."""

    rows: np.ndarray
    statements: bytes
    ends: list[int]
    glue: bytes
    run_ends: list[int]
    cuts: list[int]
    layout: Layout

    def frames(self) -> bytes:
        """Each row's round frame then its challenge frame, by plain slicing: a head, then the values or
        the challenge as packed."""
        layout, packed = self.layout, self.rows.tobytes()
        out = b""
        for at in range(0, len(packed), layout.stride):
            row = packed[at:at + layout.stride]
            out += HEADS[0] + row[len(layout.round_prefix):layout.round_len] + HEADS[1]
            out += row[layout.stride - layout.width:]
        return out

    @property
    def round_len(self) -> int:
        return len(HEADS[0]) + self.layout.values * self.layout.width

    @property
    def frame_len(self) -> int:
        return self.round_len + len(HEADS[1]) + self.layout.width


def parts(rng: random.Random, rows: int, said_lengths: list[int], glue_cuts: list[tuple[int, int]]) -> Parts:
    """Random rows of ``rows`` rounds (msgpack's own packing), statements of the lengths given and glue of
    (before the squeeze, after it) lengths per instance."""
    run_ends = [0, *accumulate(before + after for before, after in glue_cuts)]
    return Parts(packed_rows(3, 8, rows, rng), rng.randbytes(sum(said_lengths)), list(accumulate(said_lengths)),
                 rng.randbytes(run_ends[-1]), run_ends,
                 [run_ends[i] + before for i, (before, _) in enumerate(glue_cuts)], layout_of(3, 8))


def by_hand(p: Parts, counts: list[int]) -> list[bytes]:
    """The pieces between squeezes, instance by instance, with plain slicing: statement 0 and round 1; then
    per round boundary challenge k and round k + 1; at the end of an instance its last challenge and its
    glue up to the squeeze; then the rest of its glue, the next statement and the next first round."""
    frames = p.frames()
    stream, marks, row, said_at = b"", [], 0, 0
    for i, n in enumerate(counts):
        stream += p.statements[said_at:p.ends[i]]
        said_at = p.ends[i]
        for k in range(n):
            at = (row + k) * p.frame_len
            stream += frames[at:at + p.round_len]
            marks.append(len(stream))  # a squeeze after each round
            stream += frames[at + p.round_len:at + p.frame_len]
        row += n
        stream += p.glue[p.run_ends[i]:p.cuts[i]]
        marks.append(len(stream))  # the glue's squeeze
        stream += p.glue[p.cuts[i]:p.run_ends[i + 1]]
    bounds = [0, *marks, len(stream)]
    return [stream[a:b] for a, b in zip(bounds[:-1], bounds[1:])]


def built(p: Parts, counts: list[int], by_columns: bool) -> list[bytes]:
    if by_columns:  # groups absorbed one after another: no squeeze between a group's last piece and the next's first
        out: list[bytes] = []
        for group in _glued_groups(p.rows, p.layout, HEADS, counts[0],
                                   np.frombuffer(p.statements, dtype=np.uint8), np.array(p.ends, dtype=np.int64),
                                   np.frombuffer(p.glue, dtype=np.uint8), np.array(p.run_ends, dtype=np.int64),
                                   np.array(p.cuts, dtype=np.int64)):
            pieces = [bytes(piece) for piece in group]
            if out:
                pieces[0] = out.pop() + pieces[0]
            out += pieces
        return out
    frames = memoryview(p.frames())
    cut = _pieces(frames, sum(counts), p.round_len, p.frame_len)
    out_one = _one_by_one(cut, counts, frames, p.round_len, p.frame_len, memoryview(p.statements), p.ends,
                          memoryview(p.glue), p.run_ends, p.cuts)
    return [bytes(piece) for piece in out_one]


@pytest.mark.parametrize("n", [1, 2, 5])
@pytest.mark.parametrize("shape", ["alike", "names grow", "every one its own", "more than a group"])
def test_pieces_built_by_columns_are_those_built_instance_by_instance(n: int, shape: str) -> None:
    # instances of n rounds; statements and glue of one length ("alike"; past one group of instances cut
    # together, "more than a group"), of a length that grows twice, as names do from sailing.9 to sailing.10
    # and sailing.100 ("names grow"), or of a length each
    rng = random.Random(n * 7 + len(shape))
    count = 150 if shape == "more than a group" else 40
    if shape in ("alike", "more than a group"):
        said, glue = [23] * count, [(31, 9)] * count
    elif shape == "names grow":
        said = [23] * 10 + [24] * 25 + [25] * 5
        glue = [(31, 9)] * 12 + [(34, 10)] * 20 + [(37, 11)] * 8
    else:
        said = [rng.randrange(20, 30) for _ in range(count)]
        glue = [(rng.randrange(25, 40), rng.randrange(8, 12)) for _ in range(count)]
    p = parts(rng, count * n, said, glue)
    expected = by_hand(p, [n] * count)
    assert len(expected) == count * (n + 1) + 1  # n squeezes of rounds and one of glue per instance
    assert built(p, [n] * count, by_columns=True) == expected
    assert built(p, [n] * count, by_columns=False) == expected


def test_pieces_of_instances_of_different_round_counts_are_built_one_by_one() -> None:
    rng = random.Random(5)
    counts = [rng.randrange(1, 6) for _ in range(30)]
    p = parts(rng, sum(counts), [22] * 30, [(30, 9)] * 30)
    assert built(p, counts, by_columns=False) == by_hand(p, counts)


def test_a_single_instance_is_its_own_span() -> None:
    p = parts(random.Random(2), 3, [23], [(31, 9)])
    assert built(p, [3], by_columns=True) == by_hand(p, [3])


def packed_rows(values: int, width: int, count: int, rng: random.Random) -> np.ndarray:
    """``count`` rows of a round of ``values`` random elements of ``width`` bytes and its challenge, each
    event packed by msgpack itself."""
    rows = []
    for _ in range(count):
        round_event = msgpack.packb({"type": "round", "evals": rng.randbytes(values * width)}, use_bin_type=True)
        challenge = msgpack.packb({"type": "challenge", "value": rng.randbytes(width)}, use_bin_type=True)
        rows.append(round_event + challenge)
    return np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(count, -1)


@pytest.mark.parametrize("width", [1, 4, 8, 16, 32, 48])  # F_97, 31-bit primes, Goldilocks, extensions, BN254, ...
@pytest.mark.parametrize("values", [1, 2, 3, 4, 5])
def test_prefixes_hold_for_msgpacks_own_rows_and_fail_for_any_prefix_byte_changed(values, width):
    rng = random.Random(values * 100 + width)
    layout = layout_of(values, width)
    rows = packed_rows(values, width, 40, rng)
    assert rows.shape[1] == layout.stride
    assert _prefixes_hold(rows, layout)
    round_end = layout.round_len
    fixed = [*range(len(layout.round_prefix)), *range(round_end, round_end + len(layout.challenge_prefix))]
    free = [*range(len(layout.round_prefix), round_end), *range(round_end + len(layout.challenge_prefix),
                                                                 layout.stride)]
    for at in fixed:
        changed = rows.copy()
        changed[rng.randrange(len(rows)), at] ^= 1 << rng.randrange(8)
        assert not _prefixes_hold(changed, layout), at
    for at in free:  # the values and the challenge are not the prefixes' business
        changed = rows.copy()
        changed[rng.randrange(len(rows)), at] ^= 0xFF
        assert _prefixes_hold(changed, layout), at


@pytest.mark.parametrize("count, rounds, said", [(1, 1, 5), (1, 4, 0), (3, 1, 9), (5, 3, 7), (64, 24, 40)])
def test_instances_laid_out_alike_are_cut_where_plain_slicing_cuts_them(count, rounds, said):
    # each instance a statement of ``said`` bytes then its rows' frames, in one buffer cut by one cached
    # call; by hand: a squeeze after every round's frame, the pieces what lies between two squeezes
    rng = random.Random(count * 1000 + rounds)
    round_len, frame_len = 11, 17
    stream, marks = b"", []
    for _ in range(count):
        stream += rng.randbytes(said)
        for _ in range(rounds):
            stream += rng.randbytes(round_len)
            marks.append(len(stream))
            stream += rng.randbytes(frame_len - round_len)
    bounds = [0, *marks, len(stream)]
    got = _span_cut(count, said, rounds, round_len, frame_len)(memoryview(stream))
    assert [bytes(piece) for piece in got] == [stream[a:b] for a, b in zip(bounds, bounds[1:])]


def test_glued_runs_cut_each_instance_s_rows_final_and_glue_where_its_period_holds_them() -> None:
    # instances laid out alike, held as columns: rows, finals and the glue after each but the last are cut
    # from the periods by numpy; the reference is plain slicing of each period; the records made on demand
    # are those the Sequencer makes for the same fields
    from stepper.transcript.events import Sequencer
    from stepper.transcript.model import InstanceStart
    from stepper.verify.packed_runs import GluedRuns

    layout = layout_of(4, 8)
    rng = random.Random(11)
    count, n, head_len = 5, 3, 40
    run_end = head_len + n * layout.stride + layout.final_len
    period = run_end + 57  # the glue after a run
    blob = rng.randbytes((count - 1) * period + run_end)  # the last instance's glue is read as after any run
    claims = [rng.randrange(1 << 60) for _ in range(count)]
    last = InstanceStart(9 + count - 1, "sailing.4", n, 3, claims[-1], final_expr="eq(tau) * c4")
    glued = GluedRuns(9, [f"sailing.{j}" for j in range(count)], [n] * count, [3] * count, claims,
                      b"".join(claim.to_bytes(8, "little") for claim in claims), memoryview(blob),
                      claim_texts=[None] + [f"a{j - 1}" for j in range(1, count)],
                      final_texts=[f"eq(tau) * c{j}" for j in range(count)], period=period, head_len=head_len,
                      run_end=run_end, layout=layout, last=last)
    assert bytes(glued.row_parts()[0].tobytes()) == b"".join(
        blob[j * period + head_len:j * period + head_len + n * layout.stride] for j in range(count))
    assert glued.final_cells()[0].tobytes() == b"".join(
        blob[j * period + run_end - 8:j * period + run_end] for j in range(count))
    assert glued.glue_blob() == b"".join(blob[j * period + run_end:(j + 1) * period] for j in range(count - 1))
    assert glued.record(count - 1) is last
    assert glued.record(2) == Sequencer.plain_record(11, "sailing.2", n, 3, claims[2], "a1", "eq(tau) * c2")
    assert glued.record(0).claim_expr is None and glued.record(0).index == 9


def test_statements_are_one_length_only_when_every_end_steps_by_the_first() -> None:
    # The cut at fixed offsets is right only if every statement has the first one's length; a sum
    # that matches (10 + 9 + 11 = 3 x 10) must not pass for it.
    assert _one_length([10, 20, 30])
    assert _one_length([7])
    assert not _one_length([10, 19, 30])
    assert not _one_length([10, 20, 31])
    assert not _one_length([0, 0])
