"""What a replay tells a person beside its checks: a :class:`Finding` (a weak Fiat-Shamir
binding, a statement the challenges do not depend on).

A passing check of a file whose challenges are bound as they should be makes none, so this
module is imported by the code that makes one (a frozen dataclass costs about half a
millisecond of CPU to create at import).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["Finding"]


@dataclass(frozen=True, slots=True)
class Finding:
    """Something a person should know that is not a failed check (e.g. a weak
    Fiat-Shamir binding). ``severity`` is ``high``, ``medium`` or ``info``."""

    kind: str
    severity: str
    message: str
    instance: int | None = None
    round: int | None = None

    def to_json(self) -> dict[str, Any]:
        return {"kind": self.kind, "severity": self.severity, "message": self.message,
                "instance": self.instance, "round": self.round}
