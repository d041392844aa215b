"""The built-in Fiat-Shamir schedule ``stepper-sha256/2``: one wide sample per challenge.

It absorbs exactly what ``stepper-sha256/1`` absorbs (:class:`~stepper.verify.fiatshamir.Sha256Schedule`,
whose framing and methods it inherits), under its own domain, and draws a challenge differently
(transcripts/FIAT-SHAMIR.md, section "stepper-sha256/2", is the normative text):

* L = ceil((bits(p^k) + 128) / 8) bytes and B = ceil(L / 32) blocks, k the extension degree;
* D0 = SHA-256 of the state (hashlib's ``digest()``: nothing is absorbed, no squeeze frame);
  D_j = SHA-256(D0 || u64le(j)) for j = 1 .. B-1;
* W = the first L bytes of D0 || D1 || ... as a little-endian integer; v = W mod p^k;
* the challenge's coefficients are v's k base-p digits, constant first; then the challenge frame
  is absorbed, as in ``/1``. A squeeze's n values are n such challenges after its draw frame.

One digest of the state per challenge for every named field and extension but BN254 and
BLS12-381, where B = 2.
"""

from __future__ import annotations

import hashlib
from typing import TYPE_CHECKING, Callable, Sequence

from stepper.verify.fiatshamir import ONE_DIGEST_SCHEDULE_NAME, SECURITY_BITS, Sha256Schedule
from stepper.verify.frames import u64

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element, Field

__all__ = ["OneDigestSchedule"]


class OneDigestSchedule(Sha256Schedule):
    """The ``stepper-sha256/2`` schedule: the framing of ``stepper-sha256/1``, its own domain, and one
    sample of L = ceil((bits(p^k) + 128) / 8) bytes per challenge, reduced mod p^k, whose base-p
    digits are the challenge's coefficients (constant first). The sample is D0 = SHA-256 of the state
    (hashlib's ``digest()`` leaves the running state as it is), then D_j = SHA-256(D0 || u64(j)) for
    j = 1 .. B-1, B = ceil(L / 32): one digest per challenge whenever L <= 32."""

    name = ONE_DIGEST_SCHEDULE_NAME
    whole_element = True
    _tails: tuple[bytes, ...] = ()  # u64(1) .. u64(B - 1), set with the field
    _order = 0  # p^k, set with the field

    def _set_sampling(self, field: Field) -> None:
        self._order = field.p ** field.degree
        self._wide = (self._order.bit_length() + SECURITY_BITS + 7) // 8
        self._tails = tuple(u64(j) for j in range(1, -(-self._wide // 32)))  # D_j = SHA-256(D0 || u64(j))

    def _draw(self, field: Field) -> Element:
        d0 = self._state.digest()
        stream = d0 + b"".join(hashlib.sha256(d0 + tail).digest() for tail in self._tails)
        value = int.from_bytes(stream[:self._wide], "little") % self._order
        if not field.is_extension:
            return value
        p, digits = field.p, []
        for _ in range(field.degree):
            value, digit = divmod(value, p)
            digits.append(digit)
        return tuple(digits)

    def absorb_pieces(self, pieces: Sequence[bytes | memoryview], digests: bytearray) -> None:
        """As :meth:`Sha256Schedule.absorb_pieces`, with each challenge's B blocks appended (32 bytes
        each): D0, one ``digest()`` of the running state, then D1 .. D(B-1), one-shot hashes of D0 made
        in the same loop (B = 2 for BN254 and BLS12-381, 1 for every other named field; hashed here
        rather than from the digests afterwards, which cost a slice of them per block besides)."""
        update, digest = self._state.update, self._state.digest
        out = digests
        update(pieces[0])
        tails = self._tails
        if not tails:
            for piece in pieces[1:]:
                out += digest()
                update(piece)
            return
        sha256 = hashlib.sha256
        if len(tails) == 1:
            tail, = tails
            for piece in pieces[1:]:
                first = digest()
                out += first
                out += sha256(first + tail).digest()
                update(piece)
            return
        for piece in pieces[1:]:
            first = digest()
            out += first
            for tail in tails:
                out += sha256(first + tail).digest()
            update(piece)

    @property
    def squeezes_per_challenge(self) -> int:
        """32-byte blocks :meth:`absorb_pieces` appends for one challenge: B, those of its sample."""
        return 1 + len(self._tails)

    def squeezed_rows(self, digests: bytes | bytearray, count: int) -> np.ndarray:
        """One row per challenge: its B blocks D0 .. D(B-1), as :meth:`absorb_pieces` appended them."""
        import numpy as np

        return np.frombuffer(digests, dtype=np.uint8).reshape(count, 32 * (1 + len(self._tails)))

    def _one_block_digest(self) -> Callable[[], bytes] | None:
        return self._state.digest if not self._tails else None
