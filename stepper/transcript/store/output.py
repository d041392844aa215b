"""Files stepper writes for a user: never half-written over a good one, never over a file it did not make.

Every output (a transcript from import, prove or the demo; an export; a report; a
witness) is written to a temporary file in the destination's own folder and renamed
into place only when it is whole, so a crash, a full disk, SIGKILL or Ctrl-C leaves
either the old file or the new one, never a mix (a rename within one file system is
atomic on POSIX). Before any work, and again at the rename, an existing destination
is refused unless the caller passes ``replace`` (the commands' ``--force``): the final
step links the temporary file to the name, which fails if the name appeared meanwhile,
so a file another program created during the run is not clobbered either.

A temporary file left by a killed run is named ``.NAME.<random>.partial`` beside NAME.
"""

from __future__ import annotations

import contextlib
import os
from typing import IO, Any, Iterator

from stepper.errors import InputError, UsageError, Where

__all__ = ["OutputExists", "refuse_existing", "temp_beside", "publish", "atomic_output", "write_failed"]


class OutputExists(UsageError):
    """The destination exists and the user did not ask to replace it (exit 2)."""


def refuse_existing(path: str, replace: bool, flag: str = "--force") -> None:
    """Raise :class:`OutputExists` when ``path`` exists and ``replace`` is false (a folder: always)."""
    if os.path.isdir(path):
        raise OutputExists(f"expected a file to write, found {path} is a folder; it was left as it was")
    if not replace and os.path.lexists(path):
        raise OutputExists(f"expected a new file to write, found {path} already exists; it was left as it was "
                           f"(add {flag} to replace it)")


def write_failed(err: OSError, path: str, what: str = "the output") -> InputError:
    """The error for a write that failed part-way (full disk, permissions ...): the destination is untouched."""
    return InputError(f"could not write {what}: {(err.strerror or str(err)).lower()}; {path} was left as it was "
                      "(nothing half-written)", Where(file=path))


def temp_beside(path: str, binary: bool = True) -> tuple[IO[Any], str]:
    """A new temporary file in ``path``'s folder, open for writing, and its name."""
    import tempfile  # a file is written here: a command that only reads (check) never loads it

    folder = os.path.dirname(os.path.abspath(path))
    handle, temp = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.", suffix=".partial", dir=folder)
    try:
        return (os.fdopen(handle, "wb", buffering=0) if binary else os.fdopen(handle, "w", encoding="utf-8")), temp
    except BaseException:
        os.close(handle)
        os.unlink(temp)
        raise


def publish(temp: str, path: str, replace: bool, flag: str = "--force") -> None:
    """Give the finished ``temp`` the name ``path`` (same folder): with the permissions a new
    file gets, refusing an existing ``path`` unless ``replace``. ``temp`` is gone afterwards."""
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temp, 0o666 & ~umask)
        if replace:
            os.replace(temp, path)
            return
        try:
            os.link(temp, path)  # fails if path exists: no window in which another file is clobbered
        except FileExistsError:
            refuse_existing(path, False, flag)
        except OSError:  # a file system without hard links: check, then rename
            refuse_existing(path, False, flag)
            os.replace(temp, path)
            return
        os.unlink(temp)
    finally:
        with contextlib.suppress(OSError):
            os.unlink(temp)


@contextlib.contextmanager
def atomic_output(path: str, *, replace: bool, binary: bool = False, what: str = "the output",
                  flag: str = "--force") -> Iterator[IO[Any]]:
    """Write ``path`` whole or not at all: yields a temporary file beside it; on a clean exit
    it is flushed to disk and renamed to ``path``; on any exception it is removed and
    ``path`` is left as it was. OS errors become one :class:`InputError` naming ``path``."""
    refuse_existing(path, replace, flag)
    try:
        out, temp = temp_beside(path, binary)
    except OSError as err:
        raise write_failed(err, path, what) from None
    try:
        with out:
            yield out
            out.flush()
            os.fsync(out.fileno())
        publish(temp, path, replace, flag)
    except OSError as err:
        raise write_failed(err, path, what) from None
    finally:
        with contextlib.suppress(OSError):
            os.unlink(temp)
