"""The two separate questions about a recorded proof, in the same words everywhere.

*The file*: was it sealed by its writer (an end event with a digest) or cut off,
and does the digest match the bytes (``digest ok`` / ``digest mismatch``)? A
JSON-lines event stream is never sealed and carries no digest.

*The proof*: does every instance have all its rounds, or does it stop early?
One counting rule serves every command and the app: **a round counts once its
challenge is recorded**; a round polynomial sent without its challenge yet is
shown as sent but not counted.

A digest mismatch makes a file unusable input (exit 2) for every command and the
app alike: the bytes are not the ones the writer recorded, so no verdict is given
on them. ``check``, ``info`` and ``view`` say so with the same line.
"""

from __future__ import annotations

from typing import Iterable

__all__ = ["DIGEST_MISMATCH", "ROUND_RULE", "file_condition", "proof_condition", "rounds_counted"]

DIGEST_MISMATCH = "digest mismatch"
ROUND_RULE = "a round counts once its challenge is recorded"


def file_condition(kind: str, completeness: str, digest: str, truncated_at: int | None = None) -> str:
    """``sealed, digest ok`` / ``sealed, digest mismatch`` / ``cut off (no end event, so no digest)``
    for a transcript; ``event stream, not sealed (no digest)`` (or ``..., cut off mid-line``) for JSON lines;
    followed by ``; a cut-off last event at byte N (line N) was dropped`` when the reader dropped one
    (``truncated_at``: e.g. a note half-appended after the end of a sealed file)."""
    if kind != "transcript":
        line = "event stream, not sealed (no digest)" + ("" if completeness == "complete" else ", cut off mid-line")
    elif completeness != "complete":
        line = "cut off (no end event, so no digest)"
    else:
        line = f"sealed, {DIGEST_MISMATCH}" if digest == "mismatch" else "sealed, digest ok"
    if truncated_at is not None:
        line += f"; a cut-off last event at {'line' if kind == 'events' else 'byte'} {truncated_at} was dropped"
    return line


def rounds_counted(rounds_sent: int, challenges: int) -> int:
    """Rounds that count under :data:`ROUND_RULE`: those whose challenge is recorded."""
    return min(rounds_sent, challenges)


def proof_condition(instances: Iterable[tuple[int, str, int, int]]) -> str:
    """From ``(index, name, rounds counted, rounds expected)`` per instance: ``every instance has
    all its rounds`` or ``stops early: instance #i 'name' has k of n rounds`` (the first one short)."""
    listed = list(instances)
    if not listed:
        return "no instance yet"
    short = [(i, name, done, want) for i, name, done, want in listed if done < want]
    if not short:
        return "every instance has all its rounds"
    i, name, done, want = short[0]
    more = f" (and {len(short) - 1} more instance(s) short)" if len(short) > 1 else ""
    return f"stops early: instance #{i} {name!r} has {done} of {want} rounds{more}"
