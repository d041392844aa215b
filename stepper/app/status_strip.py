"""The status strip: every round of every instance at a glance, one line per instance.

A virtual list: only the lines on screen are drawn (``render_line``), so a proof
of thousands of instances costs no more to paint than a proof of ten. Each
round is one symbol of its own shape (see ``STATUS_MARKS``); a linked instance
starts with its link's symbol and ``⊢``, an instance with a final_expr ends with
``⊣`` and its evaluation's symbol, an eq-factored one is named with ``(eq)``, and a
failed instance ends with its first failure named as `stepper check` names it. The
instance under the cursor is marked with a pointer and its current round (or
link) is underlined.
Clicking a line posts :class:`StatusStrip.Picked`.
"""

from __future__ import annotations

from rich.segment import Segment
from rich.style import Style
from textual import events
from textual.geometry import Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip

from stepper.app.palette import tone
from stepper.app.proof_model import ProofModel, STATUS_MARKS
from stepper.app.round_rows import EVALUATION_MARK, LINK_MARK

__all__ = ["StatusStrip"]

_TONE_STYLE = {name: Style.parse(tone(name)) for name in ("good", "bad", "wait", "unchecked", "muted")}
_SYMBOL_TONE = {mark.symbol: mark.tone for mark in STATUS_MARKS.values()}
_SYMBOL_TONE["┆"] = "wait"
_SYMBOL_TONE[LINK_MARK] = _SYMBOL_TONE[EVALUATION_MARK] = "muted"
_NAME_WIDTH = 30


class StatusStrip(ScrollView, can_focus=False):
    """One line per instance: index, name, then a symbol per round."""

    class Picked(Message):
        """The user clicked the line of an instance."""

        def __init__(self, instance: int) -> None:
            self.instance = instance
            super().__init__()

    current: reactive[tuple[int, int]] = reactive((0, 1), repaint=False)

    def __init__(self, model: ProofModel, **kwargs: object) -> None:
        super().__init__(**kwargs)  # type: ignore[arg-type]
        self.model = model
        self._cache: dict[int, tuple[int, Strip]] = {}

    def sync(self) -> None:
        """Re-measure after the model grew; cached lines are redrawn lazily."""
        self._cache.clear()
        widest = max((len(v.rounds) for v in self.model.instances), default=0)
        self.virtual_size = Size(_NAME_WIDTH + 10 + max(widest, 1), len(self.model.instances))
        self.refresh()

    def on_mount(self) -> None:
        self.sync()

    def watch_current(self, old: tuple[int, int], new: tuple[int, int]) -> None:
        self._cache.pop(old[0], None)
        self._cache.pop(new[0], None)
        top = max(0, new[0] - self.size.height // 2)
        if top != self.scroll_offset.y:  # the instance under the cursor moved: every line shown changes
            self.scroll_to(y=top, animate=False, immediate=True)
            self.refresh()
        else:  # a step within the lines on screen: only the old and the new cursor line are redrawn
            self.refresh_line(old[0])
            self.refresh_line(new[0])

    def render_line(self, y: int) -> Strip:
        index = self.scroll_offset.y + y
        width = self.size.width
        if not 0 <= index < len(self.model.instances):
            return Strip.blank(width)
        generation = self.model.generation
        cached = self._cache.get(index)
        if cached is None or cached[0] != generation:
            cached = (generation, self._draw(index))
            self._cache[index] = cached
        return cached[1].crop(self.scroll_offset.x, self.scroll_offset.x + width).extend_cell_length(width)

    def _draw(self, index: int) -> Strip:
        model = self.model
        view = model.instances[index]
        here = index == self.current[0]
        name = view.name[:_NAME_WIDTH - 5] + " (eq)" if view.start.form == "eq-factored" else view.name[:_NAME_WIDTH]
        head = f"{'▸' if here else ' '}{index:>5} {name:<{_NAME_WIDTH}} "
        segments = [Segment(head, Style(bold=here))]
        line = model.strip_line(index)
        linked = model.first_round(index) == 0
        cursor = 0 if self.current[1] == 0 else self.current[1] - 1 + (2 if linked else 0)
        for at, symbol in enumerate(line):
            style = _TONE_STYLE.get(_SYMBOL_TONE.get(symbol, "wait"), _TONE_STYLE["wait"])
            if here and at == cursor:
                style = style + Style(underline=True, reverse=True)
            segments.append(Segment(symbol, style))
        failure = model.first_failure_of(index)
        if failure is not None:
            segments.append(Segment(f"  ✕ {model.failure_words(failure, named=False)}", _TONE_STYLE["bad"]))
        return Strip(segments)

    def on_click(self, event: events.Click) -> None:
        offset = event.get_content_offset(self)  # None on the border
        if offset is not None:
            index = self.scroll_offset.y + offset.y
            if 0 <= index < len(self.model.instances):
                self.post_message(self.Picked(index))
