"""The app's colours, read from the variables at the top of ``stepper.tcss``.

The stylesheet is the one place a colour is chosen; text that Python styles
(round statuses, chart bars, readout tones) takes its colours from here, so the
two cannot drift. ``TONES`` maps a readout tone to a Rich style string.
"""

from __future__ import annotations

import re
from pathlib import Path

__all__ = ["COLOURS", "TONES", "tone"]

_VARIABLE = re.compile(r"^\$hb-([a-z-]+):\s*(#[0-9a-fA-F]{6});", re.MULTILINE)


def _read() -> dict[str, str]:
    found = dict(_VARIABLE.findall((Path(__file__).with_name("stepper.tcss")).read_text(encoding="utf-8")))
    missing = {"deep", "panel", "frame", "lamp", "text", "label", "muted", "pass", "fail", "incomplete",
               "unchecked", "note"} - found.keys()
    if missing:  # a packaging fault, not bad input
        raise RuntimeError(f"expected the colour variables {sorted(missing)} in stepper.tcss, found none")
    return found


COLOURS: dict[str, str] = _read()

TONES: dict[str, str] = {
    "plain": "",
    "good": COLOURS["pass"],
    "bad": f"bold {COLOURS['fail']}",
    "wait": COLOURS["incomplete"],
    "unchecked": COLOURS["unchecked"],
    "muted": COLOURS["muted"],
    "note": f"italic {COLOURS['note']}",
    "head": f"bold {COLOURS['text']}",
    "label": COLOURS["label"],
    "frame": COLOURS["frame"],
    "accent": COLOURS["lamp"],
}


def tone(name: str) -> str:
    """The Rich style of a tone (``""`` for an unknown one: plain text)."""
    return TONES.get(name, "")
