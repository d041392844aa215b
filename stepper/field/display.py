"""How a long value is shortened for a narrow column: always visibly.

A field element of a 254-bit prime has 77 digits and an extension element
several of those; a table cell holds a dozen characters. :func:`elide` keeps the
head and the tail, puts ``…`` where digits were left out and ends with the
length of the whole value in brackets, so a shortened value can never be taken
for a whole one (``1953…7902[10]``: ten characters in full). Screens that
shorten show the whole value elsewhere (the detail panel) and copy the whole.
"""

from __future__ import annotations

__all__ = ["elide", "ELIDE_LEGEND"]

ELIDE_LEGEND = "… digits left out, [n] length in full"


def elide(text: str, width: int) -> str:
    """``text`` if it fits in ``width`` characters, else head…tail[length] in about ``width``
    (never fewer than two kept characters, so a tiny width still shows the marker)."""
    if len(text) <= width:
        return text
    count = f"[{len(text)}]"
    keep = max(2, width - len(count) - 1)
    head = (keep + 1) // 2
    tail = keep - head
    return text[:head] + "…" + (text[len(text) - tail:] if tail else "") + count
