"""Bucket occupancy of one instance as three text charts (see :mod:`bucket_charts`).

Keys move between instances; escape or ``b`` returns to the proof. Charts are
redrawn only when the instance changes.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.reactive import reactive
from textual.screen import Screen
from textual.widgets import Static

from stepper.app.bucket_charts import ChartRow, against_bound, against_remaining, size_distribution
from stepper.app.help_screen import HelpScreen, KeyHint
from stepper.app.keymap import bindings
from stepper.app.palette import tone
from stepper.app.proof_model import ProofModel

__all__ = ["BucketsScreen", "bucket_text"]

_BAR_WIDTH = 36


def _chart(title: str, explain: str, rows: list[ChartRow]) -> Text:
    text = Text()
    text.append(title + "\n", style=tone("head"))
    text.append(explain + "\n", style=tone("muted"))
    if not rows:
        text.append("  nothing sent for this chart\n", style=tone("wait"))
    for row in rows:
        text.append(f"  {row.label} ", style=tone("label"))
        text.append("│", style=tone("frame"))
        text.append(row.bar, style=tone("bad") if row.over else tone("good"))
        text.append("│ ", style=tone("frame"))
        text.append(row.figure + ("  ▲ above" if row.over else "") + "\n",
                    style=tone("bad") if row.over else "")
    return text


def bucket_text(model: ProofModel, instance: int) -> Text:
    """The three charts of one instance as styled text."""
    if not 0 <= instance < len(model.instances):
        return Text("no instance yet")
    view = model.instances[instance]
    head = Text(f"instance #{instance} {view.name}: {len(view.buckets)} bucket events\n\n", style="bold")
    if not view.buckets:
        head.append("This instance sent no bucket events (only bucketing provers send them).\n", style=tone("muted"))
        return head
    stats = view.buckets
    head.append_text(_chart("Buckets in use against the bound",
                            "count / 2^bound_log2 per round (r) and group (g); ▲ marks a count above the bound",
                            against_bound(stats, _BAR_WIDTH)))
    head.append("\n")
    head.append_text(_chart("Buckets in use against the remaining table",
                            "count / entries still unbound; near 100% bucketing saves nothing in that round; ▲ marks more buckets than entries",
                            against_remaining(stats, _BAR_WIDTH)))
    head.append("\n")
    head.append_text(_chart("Entries per bucket", "how many buckets hold how many entries (every round)",
                            size_distribution(stats, _BAR_WIDTH)))
    head.append("\n")
    head.append_text(_analysis(model, instance))
    return head


def _analysis(model: ProofModel, instance: int) -> Text:
    """The occupancy analysis of :mod:`stepper.provers.buckets` for one instance, as text."""
    from stepper.provers.buckets import occupancy
    from stepper.transcript.model import InstanceRecord, Transcript

    view = model.instances[instance]
    assert model.field is not None
    single = Transcript(model.header, model.field, (InstanceRecord(view.start, buckets=tuple(view.buckets)),))
    text = Text("What the occupancy says\n", style=tone("head"))
    text.append("fill = count / min(bound, remaining); entries per bucket = remaining / count\n", style=tone("muted"))
    for row in occupancy(single):
        fill = "-" if row.fill is None else f"{row.fill:.0%}"
        per = "-" if row.savings is None else f"{row.savings:.1f}"
        used = "" if row.used is None else ("  used" if row.used else "  not used")
        text.append(f"  r{row.round:>2} g{row.chunk:<3} fill {fill:>5}  entries per bucket {per:>6}{used}\n")
        for problem in row.problems:
            text.append(f"      ▲ {problem}\n", style=tone("bad"))
    return text


class BucketsScreen(Screen[None]):
    """Occupancy charts of one instance at a time."""

    BINDINGS = bindings("buckets")  # type: ignore[assignment]

    instance: reactive[int] = reactive(0, init=False)

    def __init__(self, model: ProofModel, instance: int) -> None:
        super().__init__()
        self.model = model
        self.set_reactive(BucketsScreen.instance, instance)

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="charts-box"):
            yield Static(id="charts")
        yield KeyHint("buckets")

    def on_mount(self) -> None:
        self.query_one("#charts-box").border_title = "bucket occupancy"
        self.watch_instance(self.instance)

    def watch_instance(self, instance: int) -> None:
        self.query_one("#charts", Static).update(bucket_text(self.model, instance))

    def action_hop(self, delta: int) -> None:
        self.instance = min(max(self.instance + delta, 0), max(0, len(self.model.instances) - 1))

    def action_back(self) -> None:
        self.dismiss(None)

    def action_keys(self) -> None:
        self.app.push_screen(HelpScreen("buckets", "Keys of the bucket charts"))
