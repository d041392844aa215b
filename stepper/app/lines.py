"""One labelled line of a readout (pure): what the panels draw and the exports print."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Line"]


@dataclass(frozen=True, slots=True)
class Line:
    """One labelled line; ``tone`` is one of plain, good, bad, wait, unchecked, muted, note, head."""

    label: str
    value: str
    tone: str = "plain"

    def text(self) -> str:
        return f"{self.label}: {self.value}" if self.label else self.value
