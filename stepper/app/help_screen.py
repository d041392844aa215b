"""The key list: every binding of the screen underneath, with what it does.

Built from the bindings themselves, so the list can never fall behind the keys.
"""

from __future__ import annotations

from typing import Iterable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

__all__ = ["HelpScreen", "key_label"]

_KEY_NAMES = {
    "full_stop": ".",
    "comma": ",",
    "greater_than_sign": ">",
    "less_than_sign": "<",
    "exclamation_mark": "!",
    "question_mark": "?",
    "plus": "+",
    "minus": "-",
    "f1": "F1",
    "escape": "esc",
}


def key_label(key: str) -> str:
    """How a key name reads on screen (``full_stop`` -> ``.``)."""
    return " or ".join(_KEY_NAMES.get(k.strip(), k.strip()) for k in key.split(","))


class HelpScreen(ModalScreen[None]):
    """A modal list of keys; any of escape, k or F1 closes it."""

    BINDINGS = [Binding("escape,k,f1", "close", "Close")]

    def __init__(self, bindings: Iterable[Binding], title: str = "Keys",
                 extra: Iterable[tuple[str, str]] = ()) -> None:
        super().__init__()
        self.entries = [(key_label(b.key), b.description) for b in bindings if b.description]
        self.entries.extend(extra)
        self.title_text = title

    def compose(self) -> ComposeResult:
        width = max((len(k) for k, _ in self.entries), default=4)
        body = "\n".join(f"  {k:>{width}}   {d}" for k, d in self.entries)
        with VerticalScroll(id="help-box"):
            yield Static(self.title_text, id="help-title")
            yield Static(body, id="help-body")
            yield Static("escape, k or F1 closes this list", id="help-foot")

    def action_close(self) -> None:
        self.dismiss(None)
