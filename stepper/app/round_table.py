"""The round table of the instance on screen: one row per round, built on demand.

Only the visible instance's rows exist (at most 64, the cap on ``num_vars``, and
a ``0 link`` row first for an instance whose claim is linked to earlier glue),
so changing instance rebuilds a handful of rows and stepping only moves the
cursor. A cursor move by the user (keys or mouse on the table) posts
:class:`RoundTable.RoundChosen`; a move the app asked for through ``show`` does
not echo back, so the two can never chase each other.
"""

from __future__ import annotations

from rich.text import Text
from textual.message import Message
from textual.widgets import DataTable

from stepper.app.palette import tone
from stepper.app.proof_model import ProofModel

__all__ = ["RoundTable", "COLUMNS", "NARROW_COLUMNS"]

COLUMNS = ("round", "status", "claim in", "g(0)+g(1)", "deg/bound", "challenge", "g(r)")
# Under 70 columns the table keeps what tells rounds apart; the claim carried in and
# g(r) (each equal to a neighbour's g(0)+g(1) when the round passes) and the degree are
# in the round panel beside it.
NARROW_COLUMNS = ("round", "status", "g(0)+g(1)", "challenge")
_NARROW_BELOW = 70


class RoundTable(DataTable[object], inherit_bindings=False):
    """Rounds of one instance; the cursor row is the round in the detail pane. The
    table has no keys of its own: the screen's key map moves it (arrows included)."""

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
        self._shown_version = -1
        self._by_user = False  # the next highlight comes from a key or click on the table

    def on_mount(self) -> None:
        self.columns_shown: tuple[str, ...] = ()
        self._set_columns()

    def _set_columns(self) -> bool:
        """Choose the columns for the width; True when they changed (rows then rebuilt)."""
        wanted = NARROW_COLUMNS if (self.size.width or 100) < _NARROW_BELOW else COLUMNS
        if wanted == self.columns_shown:
            return False
        self.clear(columns=True)
        self.add_columns(*wanted)
        self.columns_shown = wanted
        return True

    def show(self, instance: int, round_: int) -> None:
        """Show ``instance`` (rebuilding rows only when it or the model changed) and
        put the cursor on ``round_`` without echoing a RoundChosen back."""
        if instance != self.instance or self._shown_version != self.model.version_of(instance):
            self._fill(instance)
        self._by_user = False
        target = max(0, round_ - self.first)
        if self.row_count and self.cursor_row != target:
            self.move_cursor(row=target, animate=False)

    @property
    def first(self) -> int:
        """The round of the first row: 0 when the instance has a link row, else 1."""
        return self.model.first_round(self.instance)

    def _fill(self, instance: int) -> None:
        self.instance = instance
        self._shown_version = self.model.version_of(instance)
        self.clear()
        if not 0 <= instance < len(self.model.instances):
            return
        form = self.model.instances[instance].start.form
        self.border_title = "rounds · eq-factored: q sent, g rebuilt" if form == "eq-factored" else "rounds"
        # the value columns share what round, status, degree, cell padding and border leave
        narrow = self.columns_shown == NARROW_COLUMNS
        width = max(8, ((self.size.width or 88) - (21 if narrow else 37)) // (2 if narrow else 5))
        rows = []
        for row in self.model.rows(instance, width):
            cells: list[object] = list(row.cells())
            status = Text(f"{row.symbol} {row.status}", style=tone(row.tone))
            if row.glue:
                status.append(" ")
                status.append(row.glue, style=tone(row.glue_tone))
            cells[1] = status
            if narrow:
                cells = [cells[0], cells[1], cells[3], cells[5]]
            rows.append(cells)
        self.add_rows(rows)

    def on_resize(self) -> None:
        """Cells are cut to the width available: rebuild the rows for the new width."""
        self._set_columns()
        if self.instance >= 0:
            row = self.cursor_row
            self._fill(self.instance)
            if self.row_count:
                self.move_cursor(row=min(row, self.row_count - 1), animate=False)

    def _user(self) -> None:
        self._by_user = True

    def on_mouse_down(self) -> None:
        self._user()

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        event.stop()
        if not self._by_user:
            return  # the echo of a move the app asked for: not news
        self._by_user = False
        self.post_message(self.RoundChosen(self.instance, event.cursor_row + self.first))
