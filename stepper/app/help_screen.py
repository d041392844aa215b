"""The keys panel and the one-line key hint, both drawn from the key map.

Rows come from :mod:`stepper.app.keymap`, the table the screens take their
bindings from, so the panel can never list a key the screen does not have.
"""

from __future__ import annotations

from typing import Iterable

from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from stepper.app.keymap import bindings, footer_hint, panel_rows

__all__ = ["HelpScreen", "KeyHint"]


class KeyHint(Static):
    """One line under a screen with its main keys, cut at a whole entry to the width."""

    def __init__(self, screen: str) -> None:
        super().__init__(footer_hint(screen), classes="key-hint", markup=False)
        self.screen_name = screen

    def on_resize(self) -> None:
        self.update(footer_hint(self.screen_name, max(20, self.size.width)))


class HelpScreen(ModalScreen[None]):
    """A modal list of the keys of ``screen``; escape, k or F1 closes it."""

    BINDINGS = bindings("keys")  # type: ignore[assignment]

    def __init__(self, screen: str, title: str = "Keys", extra: Iterable[tuple[str, str]] = ()) -> None:
        super().__init__()
        self.screen_name = screen
        self.entries = panel_rows(screen)
        self.entries.extend(extra)
        self.title_text = title

    def compose(self) -> ComposeResult:
        width = max((len(k) for k, _ in self.entries), default=4)
        body = "\n".join(f" {k:>{width}}  {d}" for k, d in self.entries)
        with VerticalScroll(id="help-box"):
            yield Static(self.title_text, id="help-title", markup=False)
            yield Static(body, id="help-body", markup=False)
            yield Static("Esc, k or F1 closes this list", id="help-foot", markup=False)

    def action_back(self) -> None:
        self.dismiss(None)
