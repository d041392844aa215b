"""The built-in Fiat-Shamir challenge schedules ``stepper-sha256/1`` and ``stepper-sha256/2``.

One object serves both sides: a prover ``observe``s every record it sends and
asks ``challenge()`` after each round; the verifier replay does the same with
the records it reads and compares. transcripts/FIAT-SHAMIR.md is the normative
description; this module is its executable form and the tests pin its bytes.

Rules kept here:

* The state is one running SHA-256 (hashlib). Everything absorbed is a frame
  ``len(tag) (1 byte) || tag || len(body) (8 bytes LE) || body``; integers in a
  body are 8-byte little-endian, strings are length-prefixed UTF-8, field
  elements are the field's canonical fixed-width little-endian bytes.
* Absorbed, in the order the records arrive: the domain frame (at creation),
  ``field``, ``schedule`` (name, label), ``batch``, ``instance`` (name, num_vars,
  degree, order, form, claim), ``round`` (the values in the form sent), each
  squeezed challenge, and the glue: ``value`` (name, whether a list, count,
  elements) and ``opening`` (name, table, element). Challenges, squeezes, finals,
  buckets, notes and unknown events that are *observed* are not absorbed (a
  challenge is absorbed by ``challenge()``; a squeeze by ``squeeze()``, which
  absorbs a ``draw`` frame (name, whether a list, count) and then draws that many
  challenges in a row). An instance's glue keys are not absorbed: to bind a
  point, send it as a ``value``.
* ``stepper-sha256/1`` (:class:`Sha256Schedule`): a challenge is k independent base
  samples (k = extension degree); sample s reads L = ceil((bits(p) + 128) / 8) bytes
  from SHA-256 blocks of ``state || frame("squeeze", s, j)``, j = 0, 1, ..., as a
  little-endian integer and reduces it mod p (wide reduction: bias below 2^-128).
* ``stepper-sha256/2`` (:class:`~stepper.verify.one_digest.OneDigestSchedule`, its own module): the same framing, another domain;
  a challenge is one sample of L = ceil((bits(p^k) + 128) / 8) bytes read from
  D0 = SHA-256 of the state (``digest()``: no squeeze frame, no copy) and, past 32
  bytes, D_j = SHA-256(D0 || u64(j)); it is reduced mod p^k and its base-p digits are
  the challenge's coefficients. One digest per challenge for every named field and
  extension but BN254 and BLS12-381 (two).

Only :meth:`Sha256Schedule._draw`, the loop of :meth:`Sha256Schedule.absorb_pieces`, the
rows of samples its digests make (:meth:`Sha256Schedule.squeezed_rows`) and the fused
prime-field step differ between the two; everything absorbed is framed by the same code.

The frames of many records at once (instance events and glue read from bytes by the whole-file
check) are built by :mod:`stepper.verify.frames`, the same bytes :meth:`Sha256Schedule.observe`
absorbs one record at a time.

``round_challenge`` / ``round_stepper`` do "observe a round, then challenge()" in
one step with the frame heads and ``struct`` packers cached: the same bytes, for
the replay's and provers' hot loops.
"""

from __future__ import annotations

import hashlib
import struct
from operator import itemgetter
from typing import TYPE_CHECKING, Callable, Sequence

from stepper.errors import InputError
from stepper.transcript.packed import GLUE_CODES, pack_elements
from stepper.transcript.records import BatchDecl, FieldDecl, InstanceStart, RoundMsg, ScheduleDecl
from stepper.transcript.glue_records import NamedValue, Opening
from stepper.verify.frames import INSTANCE_HEAD, OPENING_HEAD, flat_glue_stream, frame, glue_stream, instance_frames, text, u64

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field
    from stepper.transcript.model import Event

__all__ = ["SCHEDULE_NAME", "ONE_DIGEST_SCHEDULE_NAME", "BUILTIN_SCHEDULES", "SECURITY_BITS", "Sha256Schedule",
           "frame"]

SCHEDULE_NAME = "stepper-sha256/1"
ONE_DIGEST_SCHEDULE_NAME = "stepper-sha256/2"
BUILTIN_SCHEDULES: tuple[str, ...] = (SCHEDULE_NAME, ONE_DIGEST_SCHEDULE_NAME)
SECURITY_BITS = 128  # the wide reduction: a sample is read with this many bits more than the field needs
_ROUND_HEAD = bytes([5]) + b"round"
_PAIR = struct.Struct("<QQ")  # two u64 of a frame body
_GLUE_CODES = {kind: code for code, kind in enumerate(GLUE_CODES)}


class Sha256Schedule:
    """The ``stepper-sha256/1`` schedule: ``observe(record)`` then ``challenge()``."""

    name = SCHEDULE_NAME
    whole_element = False  # a challenge is k base samples, each reduced mod p (not one sample mod p^k)

    def __init__(self) -> None:
        self._state = hashlib.sha256(frame(b"domain", self.name.encode()))
        self.field: Field | None = None
        self._wide = 0
        self._squeeze_frames: tuple[tuple[bytes, ...], ...] = ()
        self._squeezes: tuple[bytes, ...] = ()  # the squeeze frames of one challenge, sample by sample, in order
        self._challenge_head = b""
        self._element_packer: Callable[..., bytes] | None = None  # an extension element's k coefficients, packed
        self._stepper: tuple[Field, Callable[[tuple[Element, ...]], Element]] | None = None
        self._round_packers: dict[int, tuple[bytes, Callable[..., bytes] | None]] = {}
        self._shapes: dict[tuple[str, str], bytes] = {}  # text(order) + text(form), by (order, form)
        # itemgetters cutting a run of rows into its absorbed pieces, by (rounds, round frame, row length)
        self._row_cuts: dict[tuple[int, int, int], Callable[[memoryview], tuple[memoryview, ...]]] = {}

    @property
    def wide_bytes(self) -> int:
        """Bytes of squeezed output reduced for one sample (0 before the field): mod p for one base
        coefficient here, mod p^k for a whole challenge in :class:`~stepper.verify.one_digest.OneDigestSchedule`."""
        return self._wide

    def state_digest(self) -> bytes:
        """SHA-256 of everything absorbed so far (for test vectors and debugging)."""
        return self._state.copy().digest()

    def _absorb(self, tag: bytes, body: bytes) -> None:
        self._state.update(frame(tag, body))

    def _el(self, e: Element) -> bytes:
        field = self.field
        assert field is not None
        if e.__class__ is int and field.degree == 1 and 0 <= e < field.p:  # type: ignore[operator]
            return e.to_bytes(field.base_bytes, "little")  # type: ignore[union-attr]
        pack = self._element_packer
        if (pack is not None and e.__class__ is tuple and len(e) == field.degree  # type: ignore[arg-type]
                and max(e) < field.p and min(e) >= 0):  # type: ignore[arg-type, operator]
            return pack(*e)  # type: ignore[misc]  # an extension element of int coefficients
        return field.encode(e)

    def observe(self, record: Event) -> None:
        """Absorb a record the way the schedule defines (no-op for kinds it skips)."""
        cls = record.__class__
        if cls is RoundMsg:
            self._need_field("round")
            self._state.update(self._round_frame(record.values))  # type: ignore[union-attr]
        elif cls is InstanceStart:
            self._need_field("instance")
            name = record.name.encode("utf-8")  # type: ignore[union-attr]
            shape = self._shape(record.order, record.form)  # type: ignore[union-attr]
            counts = _PAIR.pack(record.num_vars, record.degree)  # type: ignore[union-attr]
            body = len(name).to_bytes(8, "little") + name + counts + shape + self._el(record.claim)  # type: ignore[union-attr]
            self._state.update(INSTANCE_HEAD + len(body).to_bytes(8, "little") + body)  # frame("instance", body)
        elif cls is FieldDecl:
            self._set_field(record.field)  # type: ignore[union-attr]
        elif cls is ScheduleDecl:
            if record.name != self.name:  # type: ignore[union-attr]
                raise InputError(f"expected the schedule {self.name}, found a declaration of "
                                 f"{record.name!r}")  # type: ignore[union-attr]
            self._absorb(b"schedule", text(record.name) + text(record.label))  # type: ignore[union-attr]
        elif cls is BatchDecl:
            field = self._need_field("batch")
            body = (self._el(record.coefficient) + u64(len(record.terms))  # type: ignore[union-attr]
                    + pack_elements(field, record.terms))  # type: ignore[union-attr]
            self._absorb(b"batch", body)
        elif cls is NamedValue or cls is Opening:
            self._state.update(self.glue_frame(record))  # type: ignore[arg-type]

    def instance_frames(self, names: Sequence[str], num_vars: Sequence[int], degrees: Sequence[int], claims: bytes,
                        order: str = "low-first", form: str = "evals") -> tuple[bytes, list[int]]:
        """The frames :meth:`observe` absorbs for instance events without a batch, one after another,
        built in one pass with numpy, and the offset where each ends: instance i has name ``names[i]``,
        ``num_vars[i]``, ``degrees[i]``, the round order and form given, and its claim's canonical
        packed bytes at ``claims[i * elem_bytes:]`` (the caller has checked them canonical)."""
        width = self._need_field("instance").elem_bytes
        return instance_frames(width, self._shape(order, form), names, num_vars, degrees, claims)

    def _shape(self, order: str, form: str) -> bytes:
        """text(order) + text(form) of an instance frame, made once per pair."""
        shape = self._shapes.get((order, form))
        if shape is None:
            shape = self._shapes[(order, form)] = text(order) + text(form)
        return shape

    def glue_frame(self, record: NamedValue | Opening) -> bytes:
        """The frame a value or an opening is absorbed as (frames absorbed one after another are
        their concatenation absorbed at once)."""
        if record.__class__ is Opening:
            self._need_field("opening")
            name, table = record.name.encode("utf-8"), record.table.encode("utf-8")  # type: ignore[union-attr]
            body = b"".join((u64(len(name)), name, u64(len(table)), table, self._el(record.value)))
            return b"".join((OPENING_HEAD, u64(len(body)), body))
        field = self._need_field("value")
        items = record.items()  # type: ignore[union-attr]
        return frame(b"value", text(record.name) + u64(int(record.listed)) + u64(len(items))  # type: ignore[union-attr]
                     + pack_elements(field, items))

    def glue_stream(self, kinds: Sequence[str], names: Sequence[str], tables: Sequence[str] | None,
                    data: Sequence[bytes], counts: Sequence[int], listed: Sequence[bool]
                    ) -> tuple[bytes, Sequence[int] | np.ndarray, Sequence[int] | np.ndarray]:
        """The bytes absorbed for glue events in stream order, built in one pass: a ``value`` or
        ``opening`` as :meth:`glue_frame` frames it, a ``squeeze`` as its draw frame (see
        :meth:`squeeze`) then the frame of each of its challenges, with the element sent standing
        in for the one squeezed. Event i has kind ``kinds[i]``, name ``names[i]`` (ASCII: a glue
        name), table ``tables[i]`` (openings; None: each its own name), its ``counts[i]`` elements packed in ``data[i]``
        and ``listed[i]`` (a list value). Returns the bytes, the offset where each event's frames
        end, and the offsets at which a challenge is squeezed (after a draw frame, and between
        two challenges of one squeeze): with :meth:`absorb_pieces` over the pieces between them,
        the schedule's state, when every squeezed element is the one sent."""
        field = self._need_field("value")
        width, head = field.elem_bytes, self._challenge_head
        if tables is None:  # every opening's table is its name
            if kinds and not any(listed):
                import numpy as np

                codes = np.fromiter(map(_GLUE_CODES.__getitem__, kinds), dtype=np.int8, count=len(kinds))
                return self.flat_glue_stream(codes, names, b"".join(data))
            tables = names
        return glue_stream(width, head, kinds, names, tables, data, counts, listed)

    def flat_glue_stream(self, codes: np.ndarray, names: Sequence[str], elements: bytes, period: int = 0,
                         spelled: tuple[np.ndarray, bytes] | None = None) -> tuple[bytes, np.ndarray, np.ndarray]:
        """:meth:`glue_stream` of glue events of one element each, every opening's table its own
        name, built with numpy: event i has kind ``codes[i]`` (0 value, 1 squeeze, 2 opening), name
        ``names[i]`` and its element's packed bytes at ``elements[i * elem_bytes:]``; ``period``, when
        not 0, the events after each run, and ``spelled`` the names' lengths and bytes when known (see
        :func:`~stepper.verify.frames.flat_glue_stream`)."""
        field = self._need_field("value")
        return flat_glue_stream(codes, names, elements, field.elem_bytes, self._challenge_head, period, spelled)

    def absorb_frames(self, frames: bytes) -> None:
        """Absorb frames made by :meth:`glue_frame`, in order."""
        self._state.update(frames)

    def squeeze(self, name: str, count: int | None = None) -> Element | tuple[Element, ...]:
        """Derive the squeeze ``name``: one element (``count`` None) or a tuple of
        ``count``. Absorbs frame("draw", name || u64(listed) || u64(n)), then draws n
        challenges as :meth:`challenge` does (each absorbed)."""
        self._need_field("a squeeze")
        n = 1 if count is None else count
        self._absorb(b"draw", text(name) + u64(int(count is not None)) + u64(n))
        values = tuple(self.challenge() for _ in range(n))
        return values[0] if count is None else values

    def _round_frame(self, values: tuple[Element, ...]) -> bytes:
        """``frame("round", u64(n) || packed values)``; head and packer cached per n."""
        head, pack = self._round_packers.get(len(values)) or self._round_packer(len(values))
        return head + (pack(*values) if pack is not None else pack_elements(self.field, values))  # type: ignore[arg-type]

    def _round_packer(self, n: int) -> tuple[bytes, Callable[..., bytes] | None]:
        """The frame head for n values and a ``struct`` packer (None: use :func:`pack_elements`)."""
        field = self.field
        assert field is not None
        head = _ROUND_HEAD + u64(8 + n * field.elem_bytes) + u64(n)
        pack = None
        if not field.is_extension and field.base_bytes in (4, 8):
            pack = struct.Struct(f"<{n}{'I' if field.base_bytes == 4 else 'Q'}").pack
        if len(self._round_packers) < 64:
            self._round_packers[n] = (head, pack)
        return head, pack

    def _set_field(self, field: Field) -> None:
        w = field.base_bytes
        q = field.irreducible if field.is_extension else ()
        body = u64(w) + field.p.to_bytes(w, "little") + u64(field.degree) + b"".join(c.to_bytes(w, "little") for c in q)
        self._absorb(b"field", body)
        self.field = field
        self._round_packers.clear()
        self._element_packer = (struct.Struct(f"<{field.degree}{'I' if w == 4 else 'Q'}").pack
                                if field.is_extension and w in (4, 8) else None)
        self._challenge_head = frame(b"challenge", b"")[:-8] + u64(field.elem_bytes)
        self._set_sampling(field)

    def _set_sampling(self, field: Field) -> None:
        """What a challenge is drawn from in ``field``: k samples of ``_wide`` bytes, each read from
        the blocks of its squeeze frames."""
        self._wide = (field.p.bit_length() + SECURITY_BITS + 7) // 8
        blocks = -(-self._wide // 32)
        self._squeeze_frames = tuple(tuple(frame(b"squeeze", u64(s) + u64(j)) for j in range(blocks))
                                     for s in range(field.degree))
        self._squeezes = tuple(squeeze for frames in self._squeeze_frames for squeeze in frames)

    def _need_field(self, kind: str) -> Field:
        if self.field is None:
            raise InputError(f"expected the field to be observed before `{kind}` in {self.name}")
        return self.field

    def challenge(self) -> Element:
        """Squeeze the challenge for the round just observed, and absorb it."""
        field = self._need_field("a challenge")
        value = self._draw(field)
        if field.is_extension:
            self._state.update(self._challenge_head + field.encode(value))
        else:
            self._state.update(self._challenge_head + value.to_bytes(field.base_bytes, "little"))  # type: ignore[union-attr]
        return value

    def _draw(self, field: Field) -> Element:
        """The challenge the state gives now (not absorbed): k samples, each its own squeeze frames."""
        p, wide, state = field.p, self._wide, self._state
        samples = []
        for frames in self._squeeze_frames:
            stream = b""
            for squeeze in frames:
                h = state.copy()
                h.update(squeeze)
                stream += h.digest()
            samples.append(int.from_bytes(stream[:wide], "little") % p)
        return tuple(samples) if field.is_extension else samples[0]

    def row_heads(self, n: int) -> tuple[bytes, bytes]:
        """The bytes absorbed before the packed values of a round of ``n`` values, and
        before a packed challenge: with the packed bytes after them, a round's and a
        challenge's frames (for :meth:`absorb_rows`)."""
        self._need_field("round")
        head, _ = self._round_packers.get(n) or self._round_packer(n)
        return head, self._challenge_head

    def absorb_rows(self, rows: memoryview, first: int, count: int, round_len: int, stride: int,
                    digests: bytearray) -> None:
        """Observe ``count`` rounds and absorb their challenges, squeezing after each round:
        the same state as ``observe(round)`` then ``challenge()`` per round, when every
        challenge is the one squeezed. ``rows`` holds rows of ``stride`` bytes; row ``first + i``
        is round i's frame (``round_len`` bytes) followed by its challenge's frame (heads from
        :meth:`row_heads`). The digests squeezed for each round are appended to ``digests``
        (32 bytes each): :attr:`squeezes_per_challenge` of them, as :meth:`absorb_pieces` appends
        them (``stepper-sha256/1``: sample by sample and block by block within a sample, the wide
        reduction of a sample's blocks that challenge coefficient; ``stepper-sha256/2``: the B
        blocks of the challenge's one sample); the caller compares them with the rows' challenges
        (:meth:`squeezed_rows` lays them out), and the state is that of the schedule only if all
        are equal. Any field and extension.

        The loop is the floor of re-deriving with hashlib from Python: per squeeze a copy of the
        state, an update and a digest. Each digest is appended to one growing byte buffer and
        dropped at once (a list of digest objects, joined later, cost about 15% more time and
        page faults on every block)."""
        self._need_field("round")
        key = (count, round_len, stride)
        cut = self._row_cuts.get(key)
        if cut is None:  # one C call slices a run into its absorbed pieces: round 1, then (challenge k, round k+1)...
            cut = itemgetter(slice(0, round_len),
                             *(slice(round_len + k * stride, round_len + (k + 1) * stride) for k in range(count - 1)),
                             slice(round_len + (count - 1) * stride, count * stride))
            if len(self._row_cuts) < 256:
                self._row_cuts[key] = cut
        self.absorb_pieces(cut(rows[first * stride:(first + count) * stride]), digests)

    def absorb_pieces(self, pieces: Sequence[bytes | memoryview], digests: bytearray) -> None:
        """Absorb ``pieces`` in order, squeezing one challenge between each two: the digests of
        every squeeze are appended to ``digests`` (as :meth:`absorb_rows` does); each piece after
        the first starts with the frame of the challenge squeezed before it, so the state is the
        schedule's only if each of those challenges is the one squeezed (the caller compares)."""
        update, copy = self._state.update, self._state.copy
        squeezes = self._squeezes
        out = digests  # appended in place: ``out += digest`` extends the caller's buffer
        update(pieces[0])
        if len(squeezes) == 1:
            squeeze = squeezes[0]
            for piece in pieces[1:]:
                h = copy()
                h.update(squeeze)
                out += h.digest()
                update(piece)
            return
        if len(squeezes) == 2:  # two blocks per sample (wide primes) or two samples: unrolled
            s0, s1 = squeezes
            for piece in pieces[1:]:
                h = copy()
                h.update(s0)
                out += h.digest()
                h = copy()
                h.update(s1)
                out += h.digest()
                update(piece)
            return
        if len(squeezes) == 4:  # four samples (quartic extensions): unrolled
            s0, s1, s2, s3 = squeezes
            for piece in pieces[1:]:
                h = copy()
                h.update(s0)
                out += h.digest()
                h = copy()
                h.update(s1)
                out += h.digest()
                h = copy()
                h.update(s2)
                out += h.digest()
                h = copy()
                h.update(s3)
                out += h.digest()
                update(piece)
            return
        for piece in pieces[1:]:
            for squeeze in squeezes:
                h = copy()
                h.update(squeeze)
                out += h.digest()
            update(piece)

    @property
    def squeezes_per_challenge(self) -> int:
        """SHA-256 digests :meth:`absorb_pieces` appends for one challenge: blocks per sample times
        the extension degree."""
        return sum(len(frames) for frames in self._squeeze_frames)

    def squeezed_rows(self, digests: bytes | bytearray, count: int) -> np.ndarray:
        """The samples of ``count`` challenges whose digests :meth:`absorb_pieces` appended, one row
        (uint8, its first :attr:`wide_bytes` bytes little-endian) per sample: k rows per challenge
        here, one per challenge in :class:`~stepper.verify.one_digest.OneDigestSchedule`."""
        import numpy as np

        return np.frombuffer(digests, dtype=np.uint8).reshape(count * self._need_field("a sample").degree, -1)

    def round_challenge(self, values: tuple[Element, ...]) -> Element:
        """``observe`` of a round with these values, then ``challenge()``: the same
        state and result, in one step (see :meth:`round_stepper` for the hot path)."""
        return self.round_stepper()(values)

    def round_stepper(self) -> Callable[[tuple[Element, ...]], Element]:
        """A function doing :meth:`round_challenge` with everything it needs bound once:
        the verifier's and the prover's hot path (a prime field squeezed in one block)."""
        field = self._need_field("round")
        if self._stepper is not None and self._stepper[0] is field:
            return self._stepper[1]
        first_block = self._one_block_digest()
        if field.is_extension or first_block is None:
            def general(values: tuple[Element, ...]) -> Element:
                self._state.update(self._round_frame(values))
                return self.challenge()

            self._stepper = (field, general)
            return general
        update, packers = self._state.update, self._round_packers
        wide, p, width = self._wide, field.p, field.base_bytes
        challenge_head, from_bytes, round_packer = self._challenge_head, int.from_bytes, self._round_packer

        def prime(values: tuple[Element, ...]) -> Element:
            head, pack = packers.get(len(values)) or round_packer(len(values))
            update(head + (pack(*values) if pack is not None else pack_elements(field, values)))
            sample = from_bytes(first_block()[:wide], "little") % p
            update(challenge_head + sample.to_bytes(width, "little"))
            return sample  # type: ignore[no-any-return]

        self._stepper = (field, prime)
        return prime

    def _one_block_digest(self) -> Callable[[], bytes] | None:
        """The digest a challenge of a prime field is read from when one block holds its sample (None
        otherwise): here the state copied, the squeeze frame absorbed, the copy finalised."""
        if len(self._squeeze_frames[0]) != 1:
            return None
        copy, squeeze = self._state.copy, self._squeeze_frames[0][0]

        def block() -> bytes:
            h = copy()
            h.update(squeeze)
            return h.digest()

        return block
