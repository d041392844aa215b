"""The main screen: summary, status strip, round table and round detail of one proof.

State is one reactive ``position`` (instance 0-based, round 1-based); every
move sets it and ``watch_position`` updates the three views that depend on it
(the table moves its cursor or, on an instance change, rebuilds its few rows;
the strip redraws two lines; the detail pane redraws). Nothing here judges a
round: statuses and explanations come from the model, which quotes the replay.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Protocol

from rich.text import Text
from textual.app import ComposeResult
from textual.markup import escape
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.reactive import reactive
from textual.screen import Screen
from textual.widgets import Static

from stepper.app.help_screen import HelpScreen, KeyHint
from stepper.app.keymap import bindings
from stepper.app.proof_model import Position, ProofModel, mark_of, verdict_status
from stepper.app.readout import SHORT_CAUTION, Line, diagnosis_lines, round_lines, statement_lines, summary_lines
from stepper.app.round_detail import ReadoutPanel
from stepper.app.round_table import RoundTable
from stepper.app.status_strip import StatusStrip
from stepper.errors import StepperError
from stepper.field.display import ELIDE_LEGEND
from stepper.transcript.model import Note

__all__ = ["ProofScreen", "ProofHost", "parse_round_target"]


class ProofHost(Protocol):
    """What the proof screen asks of the app that shows it (:class:`stepper.app.app.StepperApp`)."""

    follow: bool
    diagnosis: Any

    @property
    def problem(self) -> str | None: ...

    def save_note(self, note: Note) -> None: ...

    def export_path(self, suffix: str, position: Position) -> Path: ...


# What the strip's symbols mean (its border title, and the glue marks under it).
STRIP_LEGEND = "instances  ■ pass ✕ fail ◌ pending ? unchecked · not sent ┆ final"
GLUE_LEGEND = "⊢ link (claim built from earlier glue)  ⊣ evaluation (final_expr)"

# The mouse, listed on the keys panel after the key map's rows.
MOUSE = (("click", "a row of the round table, or an instance's line in the strip"),)


def parse_round_target(text: str, current_instance: int) -> Position | None:
    """``N`` (round N of the current instance) or ``#I:N`` / ``I:N`` / ``I/N`` (instance #I, round N)."""
    cleaned = text.strip().removeprefix("#").replace("/", ":")
    parts = cleaned.split(":")
    try:
        numbers = [int(p) for p in parts]
    except ValueError:
        return None
    if len(numbers) == 1:
        return current_instance, numbers[0]
    if len(numbers) == 2:
        return numbers[0], numbers[1]
    return None


class ProofScreen(Screen[None]):
    """Summary on top, strip of every round, then table and detail side by side."""

    BINDINGS = bindings("proof")  # type: ignore[assignment]

    position: reactive[Position] = reactive((0, 1), init=False, repaint=False)
    live: reactive[bool] = reactive(False)

    def __init__(self, model: ProofModel) -> None:
        super().__init__()
        self.model = model
        self.last_message = ""
        self._ready = False
        self._write_up_waiting: Position | None = None  # a write-up asked for while the rounds were read
        self._shown: tuple[Position, int] | None = None  # position and instance version on screen
        self._moved = False  # still where the view opened (then `f` goes to the first failure)
        self._detail: list[Line] = []  # the round readout, whole (a short screen leaves out its first line)

    @property
    def stepper(self) -> ProofHost:
        return self.app  # type: ignore[return-value]

    def compose(self) -> ComposeResult:
        # Read top to bottom as the work goes: where you are, the round being checked
        # (table and detail: its polynomial and the claim it carries), the instance's
        # statement and final lines, every instance at a glance, the whole proof.
        yield Static(id="where-bar")
        yield Static(SHORT_CAUTION, id="caution")
        with Horizontal(id="work-row"):
            yield RoundTable(self.model, id="rounds")
            with Vertical(id="side-column"):
                with VerticalScroll(id="detail-box"):
                    yield ReadoutPanel(label_width=14, id="detail")
                with VerticalScroll(id="statement-box"):
                    yield ReadoutPanel(label_width=14, id="statement")
        yield StatusStrip(self.model, id="strip")
        with VerticalScroll(id="summary-box"):
            yield ReadoutPanel(id="summary")
        yield KeyHint("proof")

    def on_mount(self) -> None:
        self.query_one("#rounds").border_subtitle = escape(ELIDE_LEGEND)
        self.query_one("#detail-box").border_title = "round under check"
        self.query_one("#statement-box").border_title = "statement · final check"
        self.query_one("#strip").border_title = STRIP_LEGEND
        self.query_one("#strip").border_subtitle = GLUE_LEGEND
        self.query_one("#summary-box").border_title = "whole proof"
        self._ready = True
        self.model_changed()
        self._show(self.position)
        self.query_one(RoundTable).focus()

    # ----- state -------------------------------------------------------------------
    def model_changed(self) -> None:
        """Repaint what depends on the whole model (after the file grew or a note)."""
        if not self._ready or not self.app.is_running:
            return  # on_mount paints everything once the screen exists; a closing app paints nothing
        if self._write_up_waiting is not None and not self.model.loading:
            waiting, self._write_up_waiting = self._write_up_waiting, None
            self._write_up(waiting)  # asked for while the rounds were still read
        lines = summary_lines(self.model)
        if self.stepper.problem:
            lines.insert(0, Line("stopped reading", self.stepper.problem, "bad"))
        self.query_one("#summary", ReadoutPanel).show(lines)
        self.query_one(StatusStrip).sync()
        if self.live and self.model.instances:
            last = len(self.model.instances) - 1
            self.position = (last, max(1, self.model.rounds_in(last)))
        if self._shown != (self.position, self.model.version_of(self.position[0])):
            self._show(self.position)
        else:
            self._update_where(self.position)

    def watch_position(self, position: Position) -> None:
        self._moved = True
        self._show(position)

    def _show(self, position: Position) -> None:
        instance, number = position
        self.query_one(RoundTable).show(instance, number)
        self.query_one(StatusStrip).current = position
        lines = round_lines(self.model, position)
        lines.extend(diagnosis_lines(self.stepper.diagnosis, position))
        self._detail = lines
        if self.has_class("short") and lines and lines[0].label == "instance":
            lines = lines[1:]  # a short screen has the instance in the top line: room for the round's verdict
        self.query_one("#detail", ReadoutPanel).show(lines)
        self.query_one("#statement", ReadoutPanel).show(statement_lines(self.model, instance))
        self._update_where(position)
        self._shown = (position, self.model.version_of(instance))

    def _update_where(self, position: Position) -> None:
        self.query_one("#where-bar", Static).update(Text(self._where_text(position)), layout=False)

    def _where_text(self, position: Position) -> str:
        """The proof-wide state and where you are, fitted to the screen's width (the
        least needed parts go first; a cut name ends in an ellipsis)."""
        model = self.model
        verdict = model.verdict()
        head = f" {mark_of(verdict_status(verdict)).symbol} verdict {verdict}"
        if not model.instances:
            return f"{head}  ·  no instance yet  ·  {model.source}"
        instance, number = position
        view = model.instances[instance]
        width = max(40, self.size.width or 80)
        link = "" if number else (" (link)" if view.start.claim_expr is not None else " (glue)")
        tail = f"  ·  round {number}{link} of {view.start.num_vars}  ·  failures {len(model.failures)}"
        extras = [f"  ·  {len(model.instances)} instances"] + (["  ·  following"] if self.stepper.follow else [])
        if model.loading:  # the progress of the first read stays in view, first of the extras to show
            total = model.rounds_total
            extras.insert(0, f"  ·  checking, {model.round_count} rounds read" if total is None else
                          f"  ·  all checked, read {100 * model.round_count // max(1, total)}%")
        name = f"  ·  instance #{instance} {view.name}"
        while extras and len(head + name + tail + "".join(extras)) > width:
            extras.pop(0)
        room = width - len(head + tail + "".join(extras))
        if len(name) > room:
            name = name[: max(12, room - 1)] + "…"
        return head + name + tail + "".join(extras)

    def go(self, position: Position) -> None:
        """Move to a position (clamped to what exists)."""
        if not self.model.instances:
            return
        instance = min(max(position[0], 0), len(self.model.instances) - 1)
        number = min(max(position[1], self.model.first_round(instance)), max(1, self.model.rounds_in(instance)))
        self.position = (instance, number)

    def say(self, message: str, severity: str = "information") -> None:
        self.last_message = message
        self.notify(message, severity=severity, markup=False)  # type: ignore[arg-type]

    # ----- messages from the widgets --------------------------------------------------
    def on_round_table_round_chosen(self, message: RoundTable.RoundChosen) -> None:
        self.go((message.instance, message.round))

    def on_status_strip_picked(self, message: StatusStrip.Picked) -> None:
        self.go((message.instance, self.model.first_round(message.instance)))

    # ----- actions -------------------------------------------------------------------
    def action_step(self, delta: int) -> None:
        self.go(self.model.step(self.position, delta))

    def action_hop(self, delta: int) -> None:
        instance = min(max(self.position[0] + delta, 0), max(0, len(self.model.instances) - 1))
        self.go((instance, self.model.first_round(instance)))

    def action_edge(self, last: int) -> None:
        instance = self.position[0]
        self.go((instance, self.model.rounds_in(instance) if last and self.model.instances
                 else self.model.first_round(instance)))

    def action_failure(self, delta: int) -> None:
        """The next (or previous) failed check; from where the view opened, ``f`` goes to the
        first failure, which may be a glue check at round 0 (a link)."""
        model = self.model
        if delta > 0 and not self._moved:
            found = model.first_failure()
        else:
            found = model.next_failure(self.position) if delta > 0 else model.previous_failure(self.position)
        if found is None:
            self.say("no failed check so far")
            return
        self.go(found)
        self._moved = True
        order = model.failures.index(found) + 1
        self.say(f"failure {order} of {len(model.failures)}: {model.failure_words(found)}")

    def action_opening(self) -> None:
        if not self.model.instances:
            self.say("no instance yet")
            return
        instance = self.position[0]
        self.go((instance, self.model.rounds_in(instance)))
        view = self.model.instances[instance]
        if view.final_value is None:
            self.say(f"instance #{instance} {view.name!r} has not sent its final value yet")

    def action_ask_round(self) -> None:
        from stepper.app.ask_screen import AskScreen

        self.app.push_screen(AskScreen("Go to round", "N, or #I:N (instance #I as in the strip, round N)"),
                             self._goto_answer)

    def _goto_answer(self, answer: str | None) -> None:
        if not answer:
            return
        target = parse_round_target(answer, self.position[0])
        if target is None or not 0 <= target[0] < len(self.model.instances) or not (
            self.model.first_round(target[0]) <= target[1] <= max(1, self.model.rounds_in(target[0]))
        ):
            self.say(f"expected a round number that exists (or #instance:round), found {answer!r}", "warning")
            return
        self.go(target)

    def action_ask_value(self) -> None:
        from stepper.app.ask_screen import AskScreen

        self.app.push_screen(AskScreen("Seek value", "decimal or 0x hex; digits also match inside values"),
                             self._seek_answer)

    def _seek_answer(self, answer: str | None) -> None:
        if not answer:
            return
        from stepper.app.value_search import find_value

        found = find_value(self.model, answer, self.position)
        if found is None:
            self.say(f"{answer!r} appears in no round", "warning")
        else:
            self.go(found)
            self.say(f"{answer!r} found in {self.model.place(found)}")

    def action_ask_note(self) -> None:
        from stepper.app.ask_screen import AskScreen

        if not self.model.instances:
            self.say("no instance to attach a note to yet: a note belongs to a round of an instance")
            return
        instance, number = self.position
        self.app.push_screen(AskScreen(f"Note on {self.model.place((instance, number))}", "text kept with the file"),
                             self._note_answer)

    def _note_answer(self, answer: str | None) -> None:
        if not answer or not answer.strip():
            return
        instance, number = self.position
        note = Note(answer.strip(), instance, number)
        try:
            self.stepper.save_note(note)
        except StepperError as err:
            self.say(f"note not saved: {err}", "error")
            return
        self.model_changed()
        self.say(f"note saved on {self.model.place((instance, number))}")

    def action_buckets(self) -> None:
        from stepper.app.buckets_screen import BucketsScreen

        self.app.push_screen(BucketsScreen(self.model, self.position[0]))

    def action_picture(self) -> None:
        path = self.stepper.export_path("svg", self.position)
        if self._write_export(path, self.app.export_screenshot(), "picture"):
            self.say(f"picture written to {path}")

    def action_write_up(self) -> None:
        if self.model.loading:
            # Each instance's own verdict is known once its rounds are read: a write-up saved
            # now would list them as not replayed. It is saved, at this round, when the read ends.
            self._write_up_waiting = self.position
            self.say("the write-up is saved when every round is read (each instance's verdict is known then)")
            return
        self._write_up(self.position)

    def _write_up(self, position: Position) -> None:
        from stepper.app.export import markdown_report

        path = self.stepper.export_path("md", position)
        text = markdown_report(self.model, position, self.stepper.diagnosis)
        if self._write_export(path, text, "write-up"):
            self.say(f"write-up written to {path}")

    def _write_export(self, path: Path, text: str, what: str) -> bool:
        """Written whole beside its final name and renamed, never over an existing file."""
        from stepper.errors import StepperError
        from stepper.transcript.store.output import atomic_output

        try:
            with atomic_output(str(path), replace=False, what=f"the {what}") as out:
                out.write(text)
        except StepperError as err:
            self.say(f"{what} not written: {err}", "error")
            return False
        return True

    def action_copy(self) -> None:
        """Put the round's readout on the clipboard with every value whole (never a table's cut form)."""
        text = "\n".join(line.text() for line in self._detail)
        self.app.copy_to_clipboard(text)
        self.say(f"copied {self.model.place(self.position) if self.model.instances else 'the readout'} "
                 f"({len(text)} characters, values whole)")

    def action_toggle_live(self) -> None:
        self.live = not self.live
        self.say("staying on the newest round" if self.live else "staying where you are")
        if self.live:
            self.model_changed()

    def action_keys(self) -> None:
        self.app.push_screen(HelpScreen("proof", "Keys of the proof view", MOUSE))

    def on_resize(self) -> None:
        short = self.size.height < 34
        changed = short != self.has_class("short")
        self.set_class(short, "short")
        if self._ready:
            if changed:
                self._show(self.position)
            else:
                self._update_where(self.position)
