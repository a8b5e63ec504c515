"""Replay a recorded heat sample by sample, with a training mode.

At each sample: the analysis against the window, the plan meltfix makes there, the additions
actually made, the chemistry they should have given against the next sample, and every element's
path through the heat. In training mode the plan, the actual additions and the outcome stay hidden
until the trainee has entered their own additions; then the score shows (in spec or not, cost
against the plan meltfix makes at that sample, the one the screen shows).

Open it with ``app.push_screen(ReplayScreen(record, book))``; with ``record=None`` the screen
first lists the demo shop's recorded heats to choose from. Planning runs in a thread worker.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rich import box
from rich.console import Group, RenderableType
from rich.table import Table
from rich.text import Text
from textual import events, on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Container, Vertical, VerticalScroll
from textual.content import Content
from textual.message import Message
from textual.screen import Screen
from textual.widgets import Footer, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from meltfix.base.errors import InputError, visible
from meltfix.base.paths import demo_dir
from meltfix.base.units import Units
from meltfix.plan.numbers import mass_text, temperature_text
from meltfix.present.replay_render import (additions_table, chemistry_table, cost_line, fitted_path_chart, hints_table,
                                           plan_renderable, score_renderable)
from meltfix.records.heat_record import HeatRecord, load_record
from meltfix.records.replay import ReplayStep, element_paths, replay
from meltfix.records.training import TrainingScore, parse_entry, score_entry
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.palette import ScreenActions
from meltfix.tui.widgets.why_not import WhyNot, key_for, say_why_declined


@dataclass
class ReplayReady(Message):
    """The worker replayed ``record``: one step per sample."""

    record: HeatRecord
    steps: tuple[ReplayStep, ...]


@dataclass
class ReplayFailed(Message):
    """The record could not be read or replayed; ``reason`` names the file and field."""

    reason: str


@dataclass
class ScoreReady(Message):
    """The trainee's entry at step ``index`` has been scored."""

    index: int
    score: TrainingScore


@dataclass
class ScoreFailed(Message):
    """The entry could not be scored (no cheapest plan to compare with)."""

    reason: str


class ReplayScreen(Screen[None]):
    """Walk a recorded heat sample by sample; Ctrl+T switches training mode on and off."""

    CSS_PATH = "replay.tcss"
    COMMANDS = {ScreenActions}
    # Below 120 columns the panels stack (replay.tcss): side by side they need about 116.
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (120, "-wide")]
    BINDINGS = [
        # Letters only: the F-keys keep the trim screen's meanings. While the trainee's entry has
        # focus the letters type into it; scoring the entry hands the focus back to the body.
        Binding("n", "step(1)", "Next", tooltip="Go on to the next sample", id="replay.next"),
        Binding("p", "step(-1)", "Previous", tooltip="Go back to the sample before", id="replay.previous"),
        Binding("ctrl+t", "toggle_training", "Training", tooltip="Enter your own additions before seeing the plan",
                id="replay.training"),
        Binding("ctrl+o", "pick_record", "Other heat", tooltip="Choose another recorded heat", id="replay.open"),
        Binding("escape", "close", "Back", tooltip="Close the replay", id="replay.back"),
    ]

    def __init__(self, record: HeatRecord | None, book: RecipeBook, records_dir: Path | None = None) -> None:
        super().__init__()
        self.book = book
        self.record = record
        self.records_dir = records_dir or demo_dir() / "records"
        self.steps: tuple[ReplayStep, ...] = ()
        self.index = 0
        self.training = False
        self.scores: dict[int, TrainingScore] = {}

    def compose(self) -> ComposeResult:
        yield Static(id="replay-title")
        yield WhyNot(id="replay-why-not")
        yield OptionList(id="replay-records")
        with VerticalScroll(id="replay-body"):
            # First in the body: the entry and the score show with the analysis right under them.
            with Vertical(id="replay-training") as training:
                training.border_title = "Training: your additions first"
                mass = self.book.settings.units.mass_unit
                yield Label(f"Your additions at this sample: material then {mass}, ';' between "
                            "(e.g. HC FeMn 120; FeSi 75 40). Enter scores them.")
                yield Input(placeholder="HC FeMn 120; FeSi 75 40", id="replay-entry", compact=True)
                yield Static(id="replay-score")
            # Stacked or side by side by the screen's width: the layouts are in replay.tcss.
            with Container(id="replay-top"):
                yield Static(id="replay-chemistry")
                with Container(id="replay-side"):
                    yield Static(id="replay-plan")
                    yield Static(id="replay-actual")
            yield Static(id="replay-notes")
            yield Static(id="replay-chart")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one("#replay-training").display = False
        if self.record is None:
            self.action_pick_record()
        else:
            self._start(self.record)

    # -- choosing and computing -------------------------------------------------------------
    def action_pick_record(self) -> None:
        records = self.query_one("#replay-records", OptionList)
        records.clear_options()
        files = sorted(self.records_dir.glob("*.toml")) if self.records_dir.is_dir() else []
        records.add_options([Option(Content(visible(f"{p.stem}  {_story(p)}")), id=str(p)) for p in files])
        self.query_one("#replay-body").display = False
        records.display = True
        self._title(f"Choose a recorded heat ({self.records_dir})" if files
                    else f"No recorded heats (*.toml) in {self.records_dir}")
        if files:
            records.highlighted = 0
        records.focus()

    @on(OptionList.OptionSelected, "#replay-records")
    def _picked(self, event: OptionList.OptionSelected) -> None:
        self._title(f"Replaying {event.option.prompt} …")
        self._compute(Path(str(event.option.id)))

    def _start(self, record: HeatRecord) -> None:
        self._title(f"Replaying heat {record.heat_id} …")
        self._compute(record)

    @work(thread=True, exclusive=True, exit_on_error=False, group="replay")
    def _compute(self, source: HeatRecord | Path) -> None:
        # Widgets are never touched here: the result goes back to the screen as a message.
        try:
            record = load_record(source, self.book) if isinstance(source, Path) else source
            self.post_message(ReplayReady(record, replay(record, self.book)))
        except InputError as exc:
            self.post_message(ReplayFailed(str(exc)))

    def on_replay_ready(self, message: ReplayReady) -> None:
        self.record, self.steps = message.record, message.steps
        self.index, self.scores = 0, {}
        self.query_one("#replay-records").display = False
        self.query_one("#replay-body").display = True
        self._show()

    def on_replay_failed(self, message: ReplayFailed) -> None:
        self._title(message.reason, error=True)

    # -- walking ----------------------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "step":
            if not self.steps:
                return False
            target = self.index + int(parameters[0])  # type: ignore[call-overload]
            return True if 0 <= target < len(self.steps) else None
        if action == "toggle_training":
            return bool(self.steps)
        return True

    def on_key(self, event: events.Key) -> None:
        """A key whose action cannot run now reaches here (its binding declined it): say why."""
        say_why_declined(self, event, self.query_one(WhyNot), self._why_not)

    def _why_not(self, action: str, parameters: tuple[object, ...]) -> str:
        if not self.steps:
            return f"choose a recorded heat first ({key_for(self, 'pick_record')}), then wait for its replay"
        if int(parameters[0]) > 0:  # type: ignore[call-overload]
            return f"this is the last sample of the heat ({len(self.steps)} of {len(self.steps)})"
        return "this is the first sample of the heat"

    def action_step(self, delta: int) -> None:
        target = self.index + delta
        if self.steps and 0 <= target < len(self.steps):
            self.index = target
            self.query_one("#replay-entry", Input).value = ""
            self._show()

    def action_toggle_training(self) -> None:
        self.training = not self.training
        self._show()

    def action_close(self) -> None:
        self.dismiss(None)

    @on(Input.Submitted, "#replay-entry")
    def _entered(self, event: Input.Submitted) -> None:
        try:
            entry = parse_entry(event.value, self.book)
        except InputError as exc:
            self.query_one("#replay-score", Static).update(Text(str(exc), style="bold red"))
            return
        self._score(self.index, entry)

    @work(thread=True, exclusive=True, exit_on_error=False, group="score")
    def _score(self, index: int, entry: tuple[tuple[str, float], ...]) -> None:
        try:
            self.post_message(ScoreReady(index, score_entry(self.steps[index], entry, self.book)))
        except InputError as exc:
            self.post_message(ScoreFailed(str(exc)))

    def on_score_failed(self, message: ScoreFailed) -> None:
        self.query_one("#replay-score", Static).update(Text(f"Cannot score: {message.reason}", style="bold red"))

    def on_score_ready(self, message: ScoreReady) -> None:
        self.scores[message.index] = message.score
        self._show()
        body = self.query_one("#replay-body")
        body.focus()  # answered: the letter keys walk the heat again
        body.scroll_home(animate=False)  # the score, at the top

    # -- drawing ----------------------------------------------------------------------------
    def _title(self, text: str, error: bool = False) -> None:
        self.query_one("#replay-title", Static).update(Text(text, style="bold red" if error else "bold"))

    @property
    def revealed(self) -> bool:
        """Whether the plan, the actual additions and the outcome may be seen at this sample."""
        return not self.training or self.index in self.scores

    def _show(self) -> None:
        if not self.steps or self.record is None:
            return
        self.query_one(WhyNot).say(None)  # what it explained has moved on
        record, step = self.record, self.steps[self.index]
        grade = self.book.grade(record.grade)
        currency = self.book.settings.currency
        sample = step.sample
        mode = " · TRAINING" if self.training else ""
        units = self.book.settings.units
        temperature = "" if sample.temperature_c is None else f" · {temperature_text(sample.temperature_c, units)}"
        self._title(f"Heat {record.heat_id} · {grade.name} · sample {sample.sample_id} "
                    f"({self.index + 1} of {len(self.steps)}) · {sample.clock}{temperature} · "
                    f"bath {mass_text(step.bath_kg, units)}{mode}")
        revealed = self.revealed
        self.query_one("#replay-chemistry", Static).update(
            _framed_lightly(chemistry_table(step, dict(grade.window_pct), outcome=revealed)))
        hidden = Text("hidden until you enter your additions", style="dim italic")
        self.query_one("#replay-plan", Static).update(
            _framed_lightly(plan_renderable(step, currency, units)) if revealed else Group("Plan meltfix makes", hidden))
        self.query_one("#replay-actual", Static).update(
            _framed_lightly(additions_table("Actually added", step.actual, currency, units)) if revealed
            else Group("Actually added", hidden))
        training = self.query_one("#replay-training")
        training.display = self.training
        score = self.scores.get(self.index)
        self.query_one("#replay-score", Static).update(
            score_renderable(score, dict(grade.window_pct), currency) if score else "")
        if self.training and not revealed:
            self.query_one("#replay-entry", Input).focus()
            self.query_one("#replay-body").scroll_home(animate=False)  # the instructions too, not just the entry
        self.query_one("#replay-notes", Static).update(self._notes(step, currency, units) if revealed else "")
        self._draw_chart()
        self.refresh_bindings()

    def _draw_chart(self) -> None:
        """Every element's path, its bars shortened until the chart fits across the body."""
        if not self.steps or self.record is None:
            return
        last = len(self.steps) - 1
        upto = min(self.index + 1, last) if self.revealed else self.index
        paths = element_paths(self.steps, self.book.grade(self.record.grade))
        sample_ids = [s.sample.sample_id for s in self.steps]
        body = self.query_one("#replay-body")
        # From the screen's width: the body may not be laid out yet when it has just been shown.
        room = self.size.width - body.styles.gutter.width - body.styles.scrollbar_size_vertical
        self.query_one("#replay-chart", Static).update(
            fitted_path_chart(paths, sample_ids, self.app.console, room, upto=upto, current=self.index))

    def on_resize(self) -> None:
        self._draw_chart()

    @staticmethod
    def _notes(step: ReplayStep, currency: str, units: Units) -> Group:
        lines: list[Any] = [_framed_lightly(hints_table(step, units))] if step.recovery_hints else []
        if step.measured_misses:
            lines.append(Text("Next sample misses: " + "; ".join(step.measured_misses), style="red"))
        elif step.next_sample is not None:
            lines.append(Text(f"Next sample {step.next_sample.sample_id} meets the grade.", style="green"))
        lines.append(cost_line(step, currency))
        return Group(*lines)


def _framed_lightly(renderable: RenderableType) -> RenderableType:
    """A table shared with the command line, drawn as the trim screen draws its own: a rule under
    the header and no frame, which leaves each column a few characters more at 80 columns."""
    if isinstance(renderable, Table):
        renderable.box, renderable.show_edge, renderable.pad_edge = box.SIMPLE_HEAD, False, False
    return renderable


def _story(path: Path) -> str:
    """The first sentence of a record's "# Story:" comment, to choose a heat by what happened in it."""
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return ""
    story = next((line[len("# Story:"):].strip() for line in lines if line.startswith("# Story:")), "")
    return story.split(". ")[0].rstrip(".")


def make_screen(app: Any) -> ReplayScreen:
    """The screen as the main app's extra-screen hook opens it: choose a recorded heat first."""
    return ReplayScreen(None, app.book)
