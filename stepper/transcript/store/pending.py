"""Who may write a transcript file, and notes made while a recording holds it.

A transcript being recorded belongs to its writer: :class:`TranscriptWriter` holds an
exclusive advisory lock (``flock``) on the file from creation until it closes. Nothing
else ever writes into a locked file. A note made meanwhile goes to the *pending-notes
file* ``FILE.pending-notes`` beside it (one JSON note per line, appended under that
file's own lock); readers show those notes after the file's own events, and the
writer folds them into the file (and removes the pending-notes file) when the
recording ends, whether it seals the file or leaves it incomplete. If the writer was
killed first, the next note made when the lock is free folds them.

Readers never take a lock, so nothing a reader does can stall a writer. Two ``note``
commands at once take turns on the file's lock (a note holds it for milliseconds).
On systems without ``fcntl`` locks are not available and these guarantees do not hold.
"""

from __future__ import annotations

import contextlib
import os
import time
from typing import IO, Any, Iterator

from stepper.errors import TranscriptError, Where

try:  # POSIX only
    import fcntl
except ImportError:  # pragma: no cover - not on the systems stepper is tested on
    fcntl = None  # type: ignore[assignment]

__all__ = ["PENDING_SUFFIX", "pending_path", "try_lock", "lock_within", "unlock", "read_pending", "add_pending",
           "take_pending", "MAX_PENDING_BYTES"]

PENDING_SUFFIX = ".pending-notes"
MAX_PENDING_BYTES = 16 << 20  # a pending-notes file larger than this is not read (notes are short)


def pending_path(path: str | os.PathLike[str]) -> str:
    return f"{os.fspath(path)}{PENDING_SUFFIX}"


def try_lock(handle: IO[Any]) -> bool:
    """Take the exclusive lock on an open file without waiting; False if someone holds it."""
    if fcntl is None:
        return True
    try:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    return True


def lock_within(handle: IO[Any], seconds: float) -> bool:
    """Take the exclusive lock, trying for up to ``seconds`` (another note holds it only briefly)."""
    deadline = time.monotonic() + seconds
    while not try_lock(handle):
        if time.monotonic() >= deadline:
            return False
        time.sleep(0.01)
    return True


def unlock(handle: IO[Any]) -> None:
    if fcntl is not None:
        with contextlib.suppress(OSError, ValueError):
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)


def read_pending(path: str | os.PathLike[str]) -> list[dict[str, Any]]:
    """The note payloads waiting beside the transcript ``path`` (complete lines only; a line
    cut off by a crash is skipped). No lock is taken."""
    side = pending_path(path)
    try:
        with open(side, "rb") as handle:
            data = handle.read(MAX_PENDING_BYTES + 1)
    except FileNotFoundError:
        return []
    except OSError as err:
        raise TranscriptError(f"could not read the pending notes: {err.strerror or err}", Where(file=side)) from None
    if len(data) > MAX_PENDING_BYTES:
        raise TranscriptError(f"expected a pending-notes file of at most {MAX_PENDING_BYTES} bytes, found more",
                              Where(file=side))
    import json  # only when a pending-notes file exists

    notes: list[dict[str, Any]] = []
    for number, line in enumerate(data.split(b"\n")[:-1], start=1):  # the part after the last newline is unfinished
        try:
            payload = json.loads(line)
        except (ValueError, UnicodeDecodeError):
            raise TranscriptError("expected one JSON note per line, found a line that is not JSON",
                                  Where(file=side, line=number)) from None
        if not isinstance(payload, dict) or payload.get("type") != "note":
            raise TranscriptError("expected only note events in the pending-notes file", Where(file=side, line=number))
        notes.append(payload)
    return notes


@contextlib.contextmanager
def _locked_pending(path: str | os.PathLike[str]) -> Iterator[IO[bytes]]:
    """The pending-notes file, open for appending under its lock, guaranteed still to be the file
    at that name (a writer folding it removes the name while holding the same lock)."""
    side = pending_path(path)
    while True:
        handle = open(side, "ab")
        try:
            if fcntl is not None:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
            try:
                current = os.stat(side)
            except FileNotFoundError:
                current = None
            if current is not None and os.path.samestat(current, os.fstat(handle.fileno())):
                break
        except BaseException:
            handle.close()
            raise
        handle.close()  # folded and removed while we waited: open the new one
    try:
        yield handle
    finally:
        unlock(handle)
        handle.close()


def add_pending(path: str | os.PathLike[str], payload: dict[str, Any]) -> str:
    """Append one note payload to the pending-notes file of ``path`` (flushed to disk); its name."""
    import json

    line = json.dumps(payload, ensure_ascii=False).encode("utf-8") + b"\n"
    try:
        with _locked_pending(path) as handle:
            handle.write(line)
            handle.flush()
            os.fsync(handle.fileno())
    except OSError as err:
        raise TranscriptError(f"could not keep the note beside the file: {err.strerror or err}",
                              Where(file=pending_path(path))) from None
    return pending_path(path)


@contextlib.contextmanager
def take_pending(path: str | os.PathLike[str]) -> Iterator[list[dict[str, Any]]]:
    """The pending notes of ``path``, for a caller that holds the transcript's lock and folds
    them into it: the pending-notes file is removed only if the ``with`` body succeeds."""
    side = pending_path(path)
    if not os.path.exists(side):
        yield []
        return
    with _locked_pending(path):
        notes = read_pending(path)
        yield notes
        os.unlink(side)
