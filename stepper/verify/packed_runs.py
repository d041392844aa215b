"""Runs of rounds as the writer packs them, decoded and hashed by the block (no I/O).

The whole-file pass (:mod:`stepper.verify.sweep`) takes an instance's rounds, challenges and
final as one run of bytes when they follow its ``instance`` event laid out exactly as
:class:`~stepper.transcript.store.writer.TranscriptWriter` packs them. :class:`Layout`
holds the fixed bytes of one round, challenge and final event for a round size;
:class:`RunBlock` holds the runs of one layout read before a check: the packed rows, the
values decoded from them (:func:`stepper.verify.cells.decode_cells`), and the Fiat-Shamir
digests squeezed over frames built from the same bytes
(:meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_rows`). Whatever does not fit
raises :class:`GiveUp`: the caller then replays the file event by event.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import msgpack

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element
    from stepper.field.kernels import Kernel
    from stepper.transcript.model import InstanceStart
    from stepper.verify.fiatshamir import Sha256Schedule
    from stepper.verify.roundblock import WideSamples

__all__ = ["GiveUp", "Layout", "layout_of", "RunBlock", "rederive"]


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


class RunBlock:
    """The runs of one layout in a flush, as arrays (rows of packed bytes, decoded values),
    and the Fiat-Shamir digests squeezed for them so far."""

    def __init__(self, layout: Layout, runs: list[tuple[InstanceStart, bytes, bytes, Layout]],
                 kernel: Kernel) -> None:
        import numpy as np

        from stepper.field.kernels.limbs import LimbKernel
        from stepper.verify.cells import decode_cells, words_to_ints

        self.layout = layout
        self.kernel = kernel
        final_len, width = layout.final_len, layout.width
        # memoryview slices: the rounds of each run are copied once, by the join
        rows = np.frombuffer(b"".join([part for _, head, rest, _ in runs
                                       for part in (head, memoryview(rest)[:-final_len])]),
                             dtype=np.uint8).reshape(-1, layout.stride)
        round_at, challenge_at = len(layout.round_prefix), layout.round_len + len(layout.challenge_prefix)
        if not (np.array_equal(rows[:, :round_at], _bytes_row(layout.round_prefix, len(rows)))
                and np.array_equal(rows[:, layout.round_len:challenge_at],
                                   _bytes_row(layout.challenge_prefix, len(rows)))):
            raise GiveUp("events laid out otherwise")
        self.rows = rows
        if isinstance(kernel, LimbKernel):  # each g(j)'s limbs contiguous: the block check reads them by j
            self.evals = kernel.from_bytes_grid(rows[:, round_at:layout.round_len], layout.values)
        else:
            evals = decode_cells(kernel, rows[:, round_at:layout.round_len], width)
            self.evals = evals.reshape(len(rows), layout.values, *evals.shape[1:])
        self.challenges = decode_cells(kernel, rows[:, challenge_at:], width)
        final_cells = np.frombuffer(b"".join([rest[-width:] for _, _, rest, _ in runs]), dtype=np.uint8)
        self.finals = decode_cells(kernel, final_cells, width)
        self.claims = _claims(kernel, [start.claim for start, _, _, _ in runs])
        self.starts = np.zeros(len(runs), dtype=np.int64)
        np.cumsum([start.num_vars for start, _, _, _ in runs[:-1]], out=self.starts[1:])
        # the finals as Python ints straight from their bytes (not back from limbs: n object passes)
        finals = words_to_ints(final_cells.reshape(-1, width)) if isinstance(kernel, LimbKernel) else self.finals
        self._finals = iter(finals.tolist() if isinstance(kernel, LimbKernel) else kernel.to_list(finals))
        self._firsts = iter(self.starts.tolist())
        self._view: memoryview | None = None
        self._round_len = self._frame_len = 0
        self.digests = bytearray()  # 32 bytes per squeezed digest, in the schedule's order

    def next_run(self) -> tuple[int, Element]:
        """The first row and the final value of the next run of this block, in stream order."""
        return next(self._firsts), next(self._finals)

    def absorb(self, schedule: Sha256Schedule, first: int, rounds: int) -> None:
        """Run the schedule over the next run of this block (its statement already absorbed)."""
        if self._view is None:
            frames, self._round_len = _frames(schedule.row_heads(self.layout.values), self.rows, self.layout)
            self._view, self._frame_len = memoryview(frames.reshape(-1)), frames.shape[1]  # type: ignore[arg-type]
        schedule.absorb_rows(self._view, first, rounds, self._round_len, self._frame_len, self.digests)

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
    """The digests :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` appended for
    ``count`` challenges, one row per base sample (uint8)."""
    import numpy as np

    from stepper.field.kernels import ExtensionKernel

    per = schedule.squeezes_per_challenge if schedule is not None else 0
    if schedule is None or len(digests) != count * per * 32:
        raise GiveUp("challenges re-derived for only part of the block")
    samples = kernel.k if isinstance(kernel, ExtensionKernel) else 1  # limb rows have two axes too
    return np.frombuffer(digests, dtype=np.uint8).reshape(count * samples, -1)


def rederive(kernel: Kernel, schedule: Sha256Schedule | None, digests: bytearray, count: int,
             shape: tuple[int, ...]) -> np.ndarray:
    """The ``count`` challenges (an array of ``shape``) whose digests
    :meth:`~stepper.verify.fiatshamir.Sha256Schedule.absorb_pieces` appended to ``digests``."""
    from stepper.verify.roundblock import reduce_wide

    squeezed = _squeezed(kernel, schedule, digests, count)
    return reduce_wide(kernel, squeezed, schedule.wide_bytes).reshape(shape)  # type: ignore[union-attr]


def _claims(kernel: Kernel, claims: list[Element]) -> np.ndarray:
    """The claims as a kernel array; over an extension with uint64 coefficients in one numpy call
    from the coefficient tuples (``kernel.array`` walks them in Python). Not checked canonical here:
    :func:`~stepper.verify.roundblock.block_passes` checks them."""
    import numpy as np

    from stepper.field.kernels import ExtensionKernel

    if isinstance(kernel, ExtensionKernel) and kernel.dtype is not object:
        try:
            values = np.array(claims, dtype=np.uint64)
        except (OverflowError, TypeError, ValueError):  # not k integers each, or out of uint64's range
            return kernel.array(claims)
        if values.shape == (len(claims), kernel.k):
            return values
    return kernel.array(claims)


def _bytes_row(data: bytes, count: int) -> np.ndarray:
    import numpy as np

    return np.broadcast_to(np.frombuffer(data, dtype=np.uint8), (count, len(data)))


def _frames(heads: tuple[bytes, bytes], rows: np.ndarray, layout: Layout) -> tuple[np.ndarray, int]:
    """Per round, the schedule's round frame then its challenge frame, built from the packed
    bytes (one row each), and the length of the round frame."""
    import numpy as np

    round_head, challenge_head = heads
    round_len = len(round_head) + layout.values * layout.width
    frames = np.empty((len(rows), round_len + len(challenge_head) + layout.width), dtype=np.uint8)
    frames[:, :len(round_head)] = np.frombuffer(round_head, dtype=np.uint8)
    frames[:, len(round_head):round_len] = rows[:, len(layout.round_prefix):layout.round_len]
    frames[:, round_len:round_len + len(challenge_head)] = np.frombuffer(challenge_head, dtype=np.uint8)
    frames[:, round_len + len(challenge_head):] = rows[:, layout.stride - layout.width:]
    return frames, round_len
