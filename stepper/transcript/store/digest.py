"""The digest of a transcript as it is read: SHA-256 of every byte before the end event,
hashed chunk by chunk but holding back the bytes that may still turn out to be the end event."""

from __future__ import annotations

import hashlib

__all__ = ["HeldBackDigest"]


class HeldBackDigest:
    """SHA-256 of a file's bytes from offset 0, hashed as reading advances but held
    back: ``add(chunk, safe)`` keeps the chunk and hashes only what lies before
    offset ``safe``, so that bytes of an end event not yet recognised are never hashed."""

    def __init__(self, first: bytes) -> None:
        self._pending = [first]  # bytes read but not yet hashed, from offset _start
        self._start = 0
        self._hasher = hashlib.sha256()

    def add(self, chunk: bytes, safe: int) -> None:
        self._hash_upto(safe)
        self._pending.append(chunk)

    def digest_upto(self, offset: int) -> bytes:
        """The SHA-256 of bytes 0..offset (all read)."""
        self._hash_upto(offset)
        return self._hasher.digest()

    def drop(self) -> None:
        """Forget the bytes held back (reading goes on past the end event)."""
        self._pending = []

    def _hash_upto(self, offset: int) -> None:
        pending = self._pending
        while pending and offset > self._start:
            chunk = pending[0]
            take = min(len(chunk), offset - self._start)
            self._hasher.update(memoryview(chunk)[:take])
            if take == len(chunk):
                pending.pop(0)
            else:
                pending[0] = chunk[take:]
            self._start += take
