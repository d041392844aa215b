"""A small modal question (round to go to, value to seek, note text).

Dismisses with the typed text, or ``None`` when the user backs out with escape.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

__all__ = ["AskScreen"]


class AskScreen(ModalScreen[str | None]):
    """One line of input under a one-line question."""

    BINDINGS = [Binding("escape", "back_out", "Cancel")]

    def __init__(self, question: str, hint: str = "", initial: str = "") -> None:
        super().__init__()
        self.question = question
        self.hint = hint
        self.initial = initial

    def compose(self) -> ComposeResult:
        with Vertical(id="ask-box"):
            yield Label(Text(self.question), id="ask-question")
            yield Input(value=self.initial, placeholder=self.hint, id="ask-input")

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss(event.value)

    def action_back_out(self) -> None:
        self.dismiss(None)
