"""The round table of the instance on screen: one row per round, built on demand.

Only the visible instance's rows exist (at most 64, the cap on ``num_vars``),
so changing instance rebuilds a handful of rows and stepping only moves the
cursor. Moving the cursor posts :class:`RoundTable.RoundChosen`.
"""

from __future__ import annotations

from rich.text import Text
from textual.message import Message
from textual.widgets import DataTable

from stepper.app.proof_model import ProofModel

__all__ = ["RoundTable", "COLUMNS"]

COLUMNS = ("round", "claim in", "g(0)+g(1)", "deg/bound", "challenge", "g(r)", "status")
_TONE_STYLE = {"good": "#6fb39a", "bad": "bold #f0a35e", "wait": "#8c8fa6"}


class RoundTable(DataTable[object]):
    """Rounds of one instance; the cursor row is the round in the detail pane."""

    class RoundChosen(Message):
        """The cursor now rests on ``round`` of the shown instance."""

        def __init__(self, instance: int, round_: int) -> None:
            self.instance = instance
            self.round = round_
            super().__init__()

    def __init__(self, model: ProofModel, **kwargs: object) -> None:
        super().__init__(cursor_type="row", zebra_stripes=True, **kwargs)  # type: ignore[arg-type]
        self.model = model
        self.instance = -1
        self._shown_generation = -1
        self._target_row = 0  # the row the app last asked for; its echo is not news

    def on_mount(self) -> None:
        self.add_columns(*COLUMNS)

    def show(self, instance: int, round_: int) -> None:
        """Show ``instance`` (rebuilding rows only when it or the model changed) and
        put the cursor on ``round_`` without echoing a RoundChosen back."""
        if instance != self.instance or self._shown_generation != self.model.generation:
            self._fill(instance)
        self._target_row = max(0, round_ - 1)
        if self.row_count and self.cursor_row != self._target_row:
            self.move_cursor(row=self._target_row, animate=False)

    def _fill(self, instance: int) -> None:
        self.instance = instance
        self._shown_generation = self.model.generation
        self.clear()
        if not 0 <= instance < len(self.model.instances):
            return
        width = max(8, (self.size.width or 100) // 7 - 1)
        rows = []
        for row in self.model.rows(instance, width):
            cells: list[object] = list(row.cells())
            cells[-1] = Text(cells[-1], style=_TONE_STYLE.get(row.tone, ""))  # type: ignore[arg-type]
            rows.append(cells)
        self.add_rows(rows)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        event.stop()
        if event.cursor_row == self._target_row:
            return
        self._target_row = event.cursor_row
        self.post_message(self.RoundChosen(self.instance, event.cursor_row + 1))
