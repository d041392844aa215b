"""The compare screen: two runs side by side, the first divergence marked.

Opened by ``stepper view A --compare B`` (or pushed with a ready
:class:`~stepper.compare.diff.Comparison`). State is one reactive ``pair`` (the index
of the aligned instance pair on screen); ``watch_pair`` refills both round
tables. Each table shows the claim, the instance's link keys (claim_expr,
eq_point, final_expr) where either side has them, every round (values sent,
challenge), the final value and the glue that follows the instance (values,
squeezes, openings, by position); a mark column says what differs on that line
(``g`` values, ``r`` challenge, ``c`` claim, ``f`` final, ``x`` a link key, ``u``
glue, ``-`` missing on the other side) and ``>>`` points at the first divergence. Judging is done by :mod:`stepper.compare.diff`; this
module only lays it out. A file that cannot be read shows its one-line error.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from rich.text import Text
from textual.app import ComposeResult
from textual.markup import escape
from textual.containers import Horizontal, Vertical
from textual.reactive import reactive
from textual.screen import Screen
from textual.widgets import DataTable, Static

from stepper.app.help_screen import HelpScreen, KeyHint
from stepper.app.keymap import bindings
from stepper.app.palette import tone
from stepper.errors import StepperError
from stepper.field.display import ELIDE_LEGEND, elide

if TYPE_CHECKING:
    from stepper.compare.alignment import Divergence
    from stepper.compare.diff import Comparison, InstancePair
    from stepper.field.field import Element, Field
    from stepper.transcript.model import InstanceRecord

__all__ = ["CompareScreen", "side_rows"]

COLUMNS = ("", "line", "values sent", "challenge")
_DIFF_STYLE = tone("bad")
_SAME_STYLE = ""


def _short(field: Field, value: Element, limit: int = 20) -> str:
    return elide(field.fmt(value), limit)


def side_rows(c: Comparison, pair: InstancePair, side: str, width: int = 60) -> list[tuple[str, str, str, str, bool]]:
    """Rows (mark, line, values, challenge, differs) of one side of an instance pair:
    the claim, each round, the final value. ``width`` is what the values and the
    challenge may take together; a value that does not fit is visibly shortened."""
    values_width = max(10, width * 2 // 3)
    chal_width = max(8, width - values_width - 2)
    field = c.field_a if side == "a" else c.field_b
    inst: InstanceRecord | None = pair.a if side == "a" else pair.b
    other: InstanceRecord | None = pair.b if side == "a" else pair.a
    d = c.divergence
    here = d is not None and (d.instance_a, d.instance_b) == (pair.pairing.a, pair.pairing.b)
    rows: list[tuple[str, str, str, str, bool]] = []
    if inst is None:
        return [("-", "instance", "(absent on this side)", "", True)]
    claim_differs = other is None or field.lift(inst.start.claim) != field.lift(other.start.claim)
    statement_here = here and d is not None and d.element == "statement" and d.detail in _LINK_KEYS
    claim_mark = ">>" if here and d is not None and d.round == 0 and not statement_here else (
        "c" if claim_differs else "")
    rows.append((claim_mark, "claim", _short(field, inst.start.claim, values_width), "", claim_differs))
    rows.extend(_key_rows(field, inst, other, ("claim_expr", "eq_point"), d if statement_here else None,
                          values_width))
    for rp in pair.rounds:
        rnd = rp.a if side == "a" else rp.b
        marks = ("g" if rp.same_values is False else "") + ("r" if rp.same_challenge is False else "")
        if rp.a is None or rp.b is None:
            marks = "-"
        if here and d is not None and d.round == rp.number and d.element in ("value", "challenge", "round") and marks:
            marks = ">>" + marks
        if rnd is None:
            rows.append((marks, f"round {rp.number}", "(not sent)", "", True))
            continue
        each = max(6, (values_width - 2 * (len(rnd.values) - 1)) // max(1, len(rnd.values)))
        values = ", ".join(_short(field, v, each) for v in rnd.values)
        chal = "(none)" if rnd.challenge is None else _short(field, rnd.challenge, chal_width)
        rows.append((marks, f"round {rp.number}", values, chal, bool(marks)))
    if inst.final is not None or (other is not None and other.final is not None):
        final_differs = other is None or inst.final is None or other.final is None or (
            field.lift(inst.final) != field.lift(other.final))
        mark = ">>" if here and d is not None and d.element == "final" else ("f" if final_differs else "")
        shown = "(none)" if inst.final is None else _short(field, inst.final, values_width)
        rows.append((mark, "final", shown, "", final_differs))
    rows.extend(_key_rows(field, inst, other, ("final_expr",), d if statement_here else None, values_width))
    rows.extend(_glue_rows(field, inst, other, d if here and not any(row[0].startswith(">>") for row in rows)
                           else None, values_width))
    return rows


_LINK_KEYS = ("claim_expr", "eq_point", "final_expr")
_LEGEND = "marks: g values  r challenge  c claim  f final  x link key  u glue  - one side only  >> first divergence"
_LEGEND_NARROW = "g values r challenge c claim f final x key u glue - absent >> first"  # fits 80 columns


def _key_text(field: Field, value: object) -> str | None:
    if isinstance(value, tuple):
        return "[" + ", ".join(field.fmt(field.lift(v)) for v in value) + "]"
    return None if value is None else str(value)


def _key_rows(field: Field, inst: InstanceRecord, other: InstanceRecord | None, keys: tuple[str, ...],
              d: Divergence | None, width: int) -> list[tuple[str, str, str, str, bool]]:
    """The link keys either side declares: the text of each, marked ``x`` where they differ."""
    rows = []
    for key in keys:
        mine = _key_text(field, getattr(inst.start, key, None))
        theirs = None if other is None else _key_text(field, getattr(other.start, key, None))
        if mine is None and theirs is None:
            continue
        differs = mine != theirs
        mark = ">>" if d is not None and d.detail == key else ("x" if differs else "")
        rows.append((mark, key.replace("_", " "), elide(mine, width) if mine is not None else "(none)", "", differs))
    return rows


def _glue_rows(field: Field, inst: InstanceRecord, other: InstanceRecord | None, d: Divergence | None,
               width: int) -> list[tuple[str, str, str, str, bool]]:
    """The glue after the instance, by position against the other side's: ``u`` where it
    differs (kind, name, table or value), ``-`` where one side sends nothing there, ``>>``
    on the first divergence when it lies in this glue."""
    from stepper.compare.glue_divergence import glue_items, glue_kind, glue_text

    theirs = () if other is None else other.glue
    rows = []
    for j in range(max(len(inst.glue), len(theirs))):
        mine = inst.glue[j] if j < len(inst.glue) else None
        their = theirs[j] if j < len(theirs) else None
        if mine is None:
            assert their is not None
            rows.append(("-", f"{glue_kind(their)} {their.name}", "(not sent)", "", True))
            continue
        kind, table = glue_kind(mine), getattr(mine, "table", None)
        text = glue_text(field, glue_items(field, mine))
        shown = elide(text, width) if table is None else f"{table}: " + elide(text, max(8, width - len(table) - 2))
        same = their is not None and (glue_kind(their), their.name, getattr(their, "table", None)) == (
            kind, mine.name, table) and glue_items(field, their) == glue_items(field, mine)
        mark = "-" if their is None else ("" if same else "u")
        if d is not None and d.element in ("value", "squeeze", "opening") and d.index == j and not same:
            mark = ">>" + mark
        rows.append((mark, f"{kind} {mine.name}", shown, "", not same))
    return rows


class SideTable(DataTable[object], inherit_bindings=False):
    """One side's rows; no keys of its own (the screen's key map moves both sides)."""


class CompareScreen(Screen[None]):
    """A and B side by side for one aligned instance pair at a time."""

    BINDINGS = bindings("compare")  # type: ignore[assignment]

    pair: reactive[int] = reactive(0, init=False)

    def __init__(self, path_a: str | Path | None = None, path_b: str | Path | None = None, *,
                 comparison: Comparison | None = None) -> None:
        super().__init__()
        self.path_a = None if path_a is None else Path(path_a)
        self.path_b = None if path_b is None else Path(path_b)
        self.comparison = comparison
        self.problem: str | None = None

    def compose(self) -> ComposeResult:
        yield Static(id="compare-head")
        yield Static(id="compare-verdict")
        with Horizontal(id="compare-sides"):
            with Vertical(id="side-a"):
                yield SideTable(id="table-a", cursor_type="row", zebra_stripes=True)
            with Vertical(id="side-b"):
                yield SideTable(id="table-b", cursor_type="row", zebra_stripes=True)
        yield KeyHint("compare")

    def on_mount(self) -> None:
        for key in ("a", "b"):
            self.query_one(f"#table-{key}", DataTable).add_columns(*COLUMNS)
        if self.comparison is None:
            self.comparison = self._load()
        self._head()
        if self.comparison is not None:
            self.pair = self._divergent_pair()
            self._fill(self.pair)
        self.query_one("#table-a", DataTable).focus()

    def _load(self) -> Comparison | None:
        from stepper.compare.diff import compare
        from stepper.transcript.store import load

        if self.path_a is None or self.path_b is None:
            self.problem = "expected two files to compare, found fewer"
            return None
        try:
            return compare(load(self.path_a), load(self.path_b))
        except StepperError as err:
            self.problem = str(err)
            return None

    def _divergent_pair(self) -> int:
        c = self.comparison
        if c is None or c.divergence is None:
            return 0
        d = c.divergence
        for k, p in enumerate(c.pairs):
            if (p.pairing.a, p.pairing.b) == (d.instance_a, d.instance_b):
                return k
        return 0

    def _head(self) -> None:
        head = self.query_one("#compare-head", Static)
        verdict = self.query_one("#compare-verdict", Static)
        c = self.comparison
        if c is None:
            head.update(Text(f" cannot compare: {self.problem}", style=_DIFF_STYLE))
            verdict.update("")
            return
        a = self.path_a.name if self.path_a else "A"
        b = self.path_b.name if self.path_b else "B"
        head.update(f" A {a} ({c.field_a.describe()}, {c.completeness_a})   B {b} "
                    f"({c.field_b.describe()}, {c.completeness_b})")
        verdict.border_subtitle = _LEGEND_NARROW if self.size.width and self.size.width < 120 else _LEGEND
        self.query_one("#side-b").border_subtitle = escape(ELIDE_LEGEND)
        lines = Text()
        if c.divergence is None:
            lines.append("identical", style="bold " + tone("good"))
            lines.append(f": {c.classification.explanation}")
        else:
            lines.append(c.classification.kind, style=_DIFF_STYLE)
            lines.append(f" at {c.divergence.place()}\n{c.classification.explanation}")
            lines.append(f"\nA {c.divergence.a or '(absent)'}   B {c.divergence.b or '(absent)'}")
        for remark in c.remarks:
            lines.append(f"\n{remark}", style="italic")
        verdict.update(lines)

    def watch_pair(self, index: int) -> None:
        self._fill(index)

    def _fill(self, index: int) -> None:
        c = self.comparison
        if c is None or not c.pairs:
            return
        pair = c.pairs[index]
        for key in ("a", "b"):
            table = self.query_one(f"#table-{key}", DataTable)
            table.clear()
            for mark, line, values, chal, differs in side_rows(c, pair, key, self._value_width()):
                style = _DIFF_STYLE if differs else _SAME_STYLE
                table.add_row(Text(mark, style=_DIFF_STYLE), line, Text(values, style=style), Text(chal, style=style))
            which = pair.pairing.a if key == "a" else pair.pairing.b
            label = "absent" if which is None else f"#{which}"
            self.query_one(f"#side-{key}").border_title = f"{key.upper()} {label} {pair.pairing.name}"
        self.call_after_refresh(self._focus_divergence, pair)

    def _value_width(self) -> int:
        """What a side's values and challenge may take: half the screen less the border,
        the mark and line columns and the cell padding."""
        width = self.size.width or 160
        return max(18, (width if width < 120 else width // 2) - 24)

    def _focus_divergence(self, pair: InstancePair) -> None:
        c = self.comparison
        assert c is not None
        rows = side_rows(c, pair, "a", self._value_width())
        target = next((k for k, row in enumerate(rows) if row[0].startswith(">>")), None)
        if target is None:
            return
        for key in ("a", "b"):
            table = self.query_one(f"#table-{key}", DataTable)
            if target < table.row_count:
                table.move_cursor(row=target, animate=False)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        """Keep both sides on the line the person moved to (only the focused table leads)."""
        if not event.data_table.has_focus:
            return
        other = "#table-b" if event.data_table.id == "table-a" else "#table-a"
        table = self.query_one(other, DataTable)
        if table.row_count and table.cursor_row != event.cursor_row and event.cursor_row < table.row_count:
            table.move_cursor(row=event.cursor_row, animate=False)

    def action_hop(self, delta: int) -> None:
        if self.comparison is not None and self.comparison.pairs:
            self.pair = (self.pair + delta) % len(self.comparison.pairs)

    def action_divergence(self) -> None:
        if self.comparison is None or self.comparison.divergence is None:
            self.notify("the two runs do not diverge")
            return
        target = self._divergent_pair()
        if target != self.pair:
            self.pair = target
        else:
            self._focus_divergence(self.comparison.pairs[target])

    def action_step(self, delta: int) -> None:
        """Move both sides one line down or up (the rows are the claim, the rounds, the final value)."""
        table = self.query_one("#table-a", DataTable)
        if table.row_count:
            table.move_cursor(row=min(max(table.cursor_row + delta, 0), table.row_count - 1), animate=False)
            other = self.query_one("#table-b", DataTable)
            if table.cursor_row < other.row_count:
                other.move_cursor(row=table.cursor_row, animate=False)

    def action_keys(self) -> None:
        self.app.push_screen(HelpScreen("compare", "Keys of the comparison"))

    def on_resize(self) -> None:
        self.set_class(self.size.height < 34, "short")
        self.set_class(self.size.width < 120, "narrow")
        if self.comparison is not None and self.is_mounted:
            self._head()  # the legend follows the width
        if self.comparison is not None and self.comparison.pairs and self.is_mounted:
            self._fill(self.pair)  # the value columns follow the width

    def action_back(self) -> None:
        if len(self.app.screen_stack) > 1:
            self.app.pop_screen()
        else:
            self.app.exit()
