"""The round detail pane and the summary panel: readout lines drawn as styled text.

Both widgets are thin: they take :class:`stepper.app.readout.Line` records and
style them by tone; what the lines say is decided in :mod:`stepper.app.readout`.
"""

from __future__ import annotations

from typing import Sequence

from rich.text import Text
from textual.widgets import Static

from stepper.app.palette import TONES, tone
from stepper.app.readout import Line

__all__ = ["ReadoutPanel", "render_lines", "TONE_STYLES"]

TONE_STYLES = TONES


def render_lines(lines: Sequence[Line], label_width: int = 16) -> Text:
    """Label column then value, one line each, styled by tone."""
    text = Text()
    for number, line in enumerate(lines):
        if number:
            text.append("\n")
        style = TONE_STYLES.get(line.tone, "")
        if line.label:
            text.append(f"{line.label:<{label_width}} ", style=tone("label"))
            text.append(line.value, style=style)
        else:
            text.append(line.value, style=style)
    return text


class ReadoutPanel(Static):
    """A block of readout lines (summary or round detail); ``show`` replaces them."""

    def __init__(self, label_width: int = 16, **kwargs: object) -> None:
        super().__init__(**kwargs)  # type: ignore[arg-type]
        self.label_width = label_width
        self.lines: list[Line] = []

    def show(self, lines: Sequence[Line]) -> None:
        """Draw ``lines``; the same lines again (a step within one instance, for the
        statement panel) cost nothing."""
        if self.lines == list(lines) and self.lines:
            return
        self.lines = list(lines)
        self.update(render_lines(self.lines, self.label_width), layout=False)
        # Re-lay out only when the wrapped text needs another height: stepping between
        # rounds of one instance then repaints just this panel.
        width = self.content_region.width
        if width and self.get_content_height(self.size, self.app.size, width) != self.content_region.height:
            self.refresh(layout=True)

    def plain(self) -> str:
        """The panel's text without styles (what a test or an export reads)."""
        return "\n".join(line.text() for line in self.lines)
