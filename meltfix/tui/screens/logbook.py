"""The logbook screen: each shift's heats with what their additions cost, and one heat's history.

Shifts are listed newest first; moving through them shows that shift's heats (grade, bath,
corrections, planned and actual cost, cost per tonne). Enter opens a heat's history: samples,
plans and the additions actually made, in time order; from there R replays the heat beside the
plans meltfix would make. With no logbook yet, or an empty one, the screen says so and offers the
demo shop's week (D). Every read of the logbook runs in a thread worker and comes back as a
message; the file is only read, never written.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rich.text import Text
from textual import events, on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.message import Message
from textual.screen import Screen
from textual.widgets import DataTable, Footer, OptionList, Static
from textual.widgets.option_list import Option
from textual.worker import Worker, WorkerState, get_current_worker

from meltfix.base.errors import InputError
from meltfix.records.heat_record import record_from_history
from meltfix.records.logbook import HeatHistory, HeatSummary, Logbook, ServerURL, Shift, default_logbook_path
from meltfix.records.logbook.location import LogbookLocation
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.palette import ScreenActions
from meltfix.tui.screens.logbook_tables import count, events_table, heat_cells, number_cell, shift_totals
from meltfix.tui.screens.replay import ReplayScreen
from meltfix.tui.widgets.why_not import WhyNot, key_for, say_why_declined


@dataclass
class LogbookOpened(Message):
    """The worker opened ``logbook`` and read its shifts (newest first)."""

    logbook: Logbook
    shifts: tuple[Shift, ...]
    demo: bool


@dataclass
class LogbookAbsent(Message):
    """There is nothing to list at ``path``: no file yet, or a file with no heat in it."""

    path: Path
    reason: str


@dataclass
class LogbookFailed(Message):
    """The logbook could not be read; ``reason`` names the file and what is wrong."""

    reason: str


@dataclass
class ShiftRead(Message):
    """The heats of ``shift``, oldest first."""

    shift: Shift
    heats: tuple[HeatSummary, ...]


@dataclass
class HistoryRead(Message):
    """Everything recorded for one heat."""

    history: HeatHistory


class _HeatTable(DataTable[Any]):
    """The heat list; Enter (shown in the footer) opens the highlighted heat's history."""

    BINDINGS = [
        Binding("enter", "select_cursor", "History", tooltip="Open the heat's samples, plans and additions",
                id="logbook.heat-history"),
    ]


class LogbookScreen(Screen[None]):
    """A shift's heats and their costs; Enter opens one heat's history, F9 replays it."""

    CSS_PATH = "logbook.tcss"
    COMMANDS = {ScreenActions}
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="Back to the heat list, or close the logbook", id="logbook.back"),
        Binding("enter", "open_heat", "History", show=False, tooltip="Open the highlighted heat's history",
                id="logbook.history"),
        # F9 and F10 mean here what they mean on the trim screen (replay, the logbook's shifts);
        # the letters s and r stay with the materials dialog (stock, reset).
        Binding("f10", "focus_shifts", "Shifts", tooltip="Choose another shift", id="logbook.shifts"),
        Binding("f9", "replay", "Replay", tooltip="Step through this heat beside the plans meltfix would make",
                id="logbook.replay"),
        Binding("d", "open_demo", "Demo week", tooltip="Open the demo shop's week of heats (built on first use)",
                id="logbook.demo"),
    ]

    def __init__(self, book: RecipeBook, logbook_path: LogbookLocation | None = None) -> None:
        super().__init__()
        self.book = book
        self.path = logbook_path if logbook_path is not None else default_logbook_path()
        self.logbook: Logbook | None = None
        self.demo = False
        self.mode = "reading"
        """"reading", "absent" (nothing to list), "list" (shifts and heats) or "history" (one heat)."""
        self.shifts: tuple[Shift, ...] = ()
        self.shift: Shift | None = None
        self.heats: tuple[HeatSummary, ...] = ()
        self.history: HeatHistory | None = None
        self.list_title = ""

    def compose(self) -> ComposeResult:
        yield Static(id="logbook-title")
        yield WhyNot(id="logbook-why-not")
        yield Static(id="logbook-message")
        with Vertical(id="logbook-list"):
            shifts = OptionList(id="logbook-shifts")
            shifts.border_title = "Shifts, newest first"
            yield shifts
            heats = _HeatTable(id="logbook-heats", cursor_type="row", zebra_stripes=True)
            heats.border_title = "Heats"
            yield heats
            yield Static(id="logbook-totals")
        with VerticalScroll(id="logbook-history"):
            yield Static(id="logbook-events")
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#logbook-heats", DataTable)
        table.add_column("Heat", key="heat")
        table.add_column("Grade", key="grade")
        ton = self.book.settings.units.ton_unit
        for label, key in ((f"Bath {ton}", "bath"), ("Corr.", "corrections"), ("Planned", "planned"),
                           ("Actual", "actual"), (f"per {ton}", "per_t")):
            table.add_column(number_cell(label), key=key)
        self._show_mode("reading")
        self._title(f"Reading the logbook {self.path} …")
        self._open(self.path, demo=False)

    def on_unmount(self) -> None:
        if self.logbook is not None:
            self.logbook.close()

    # -- reading (thread workers; widgets are never touched there) --------------------------
    @work(thread=True, exclusive=True, exit_on_error=False, group="logbook-open")
    def _open(self, path: Path, demo: bool) -> None:
        try:
            if demo:
                from meltfix.records.demo_logbook import demo_logbook_path

                path = demo_logbook_path(self.book)
            elif isinstance(path, ServerURL):
                pass  # a server's logbook: opening it says whether it holds one
            elif not path.exists():
                self.post_message(LogbookAbsent(path, "no logbook here yet (one is made when the first plan "
                                                      "is accepted on the trim screen with F6)"))
                return
            elif path.is_file() and path.stat().st_size == 0:
                self.post_message(LogbookAbsent(path, "the logbook file is empty: no heat recorded yet"))
                return
            logbook = Logbook(path, create=False)
            try:
                shifts = tuple(reversed(logbook.shifts()))
            except BaseException:
                logbook.close()
                raise
        except (InputError, ValueError) as exc:  # ValueError: a recipe book without the demo shop's grades
            self.post_message(LogbookFailed(str(exc)))
            return
        self.post_message(LogbookOpened(logbook, shifts, demo))

    @work(thread=True, exclusive=True, exit_on_error=False, group="logbook-shift")
    def _read_shift(self, logbook: Logbook, shift: Shift) -> None:
        try:
            heats = tuple(logbook.list_heats(shift=shift))
        except InputError as exc:
            self.post_message(LogbookFailed(str(exc)))
            return
        if not get_current_worker().is_cancelled:
            self.post_message(ShiftRead(shift, heats))

    @work(thread=True, exclusive=True, exit_on_error=False, group="logbook-heat")
    def _read_history(self, logbook: Logbook, heat_id: str) -> None:
        try:
            history = logbook.heat_history(heat_id)
        except InputError as exc:
            self.post_message(LogbookFailed(str(exc)))
            return
        if not get_current_worker().is_cancelled:
            self.post_message(HistoryRead(history))

    # -- results ------------------------------------------------------------------------------
    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        # A fault the workers do not expect (not bad input) is still shown, never left as "reading …".
        if event.state == WorkerState.ERROR:
            error = event.worker.error
            self.post_message(LogbookFailed(f"{self.path}: {type(error).__name__}: {error}"))

    def on_logbook_opened(self, message: LogbookOpened) -> None:
        if self.logbook is not None and self.logbook is not message.logbook:
            self.logbook.close()
        self.logbook, self.demo, self.shifts = message.logbook, message.demo, message.shifts
        self.shift, self.heats, self.history = None, (), None
        self.path = message.logbook.path
        if not self.shifts:
            self._absent(self.path, "the logbook holds no heat yet")
            return
        shop = message.logbook.shop_name or self.book.settings.shop_name
        self.list_title = f"Logbook · {shop} · {'the demo week' if self.demo else self.path}"
        self._title(self.list_title)
        shifts = self.query_one("#logbook-shifts", OptionList)
        shifts.clear_options()
        shifts.add_options([Option(f"{s.shift_date:%a %Y-%m-%d} {s.name}") for s in self.shifts])
        shifts.highlighted = 0
        self._show_mode("list")
        self._choose_shift(self.shifts[0])
        self.query_one("#logbook-heats").focus()

    def on_logbook_absent(self, message: LogbookAbsent) -> None:
        self._absent(message.path, message.reason)

    def on_logbook_failed(self, message: LogbookFailed) -> None:
        if self.mode in ("list", "history"):  # what is on screen stays usable
            self.notify(message.reason, title="Logbook not read", severity="error", timeout=10)
            if self.mode == "list":
                self._title(self.list_title)
            return
        self._show_mode("absent")
        self._title("The logbook could not be read", error=True)
        self.query_one("#logbook-message", Static).update(
            Text.assemble(message.reason, "\n\nPress d to open the demo shop's week instead, Esc to go back."))

    def _absent(self, path: LogbookLocation, reason: str) -> None:
        self._show_mode("absent")
        self._title(f"Logbook · {path}")
        self.query_one("#logbook-message", Static).update(Text.assemble(
            ("Nothing to list yet. ", "bold"), f"{path}: {reason}.\n\n",
            "Press d to open the demo shop's week of heats (Kestrel Bend, an invented shop; built on "
            "first use, a few seconds), or Esc to go back."))

    @on(OptionList.OptionHighlighted, "#logbook-shifts")
    def _shift_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        if event.option_index < len(self.shifts):
            self._choose_shift(self.shifts[event.option_index])

    @on(OptionList.OptionSelected, "#logbook-shifts")
    def _shift_selected(self) -> None:
        self.query_one("#logbook-heats").focus()

    def _choose_shift(self, shift: Shift) -> None:
        if shift == self.shift or self.logbook is None:
            return
        self.shift = shift
        self.query_one("#logbook-heats").border_title = f"Heats of {shift.label} · reading …"
        self._read_shift(self.logbook, shift)

    def on_shift_read(self, message: ShiftRead) -> None:
        if message.shift != self.shift:
            return  # the user has moved on to another shift
        self.heats = message.heats
        currency = self._currency(message.heats)
        table = self.query_one("#logbook-heats", DataTable)
        table.border_title = f"Heats of {message.shift.label} · costs in {currency}"
        table.clear()
        for heat in message.heats:
            table.add_row(*heat_cells(heat, self.book.settings.units), key=heat.heat_id)
        self.query_one("#logbook-totals", Static).update(shift_totals(message.heats, currency, self.book.settings.units))
        self.refresh_bindings()

    @on(DataTable.RowSelected, "#logbook-heats")
    def _heat_selected(self, event: DataTable.RowSelected) -> None:
        if event.row_key.value is not None:
            self._open_history(event.row_key.value)

    def _open_history(self, heat_id: str) -> None:
        if self.logbook is not None:
            self._title(f"Reading heat {heat_id} …")
            self._read_history(self.logbook, heat_id)

    def on_history_read(self, message: HistoryRead) -> None:
        history = self.history = message.history
        self._show_mode("history")
        units = self.book.settings.units
        bath = "" if history.bath_kg is None else f" · bath {units.tons(history.bath_kg / 1000):,.1f} {units.ton_unit}"
        self._title(f"Heat {history.heat_id} · {history.grade or 'never planned'} · {history.shift.label}{bath} · "
                    f"{count(history.corrections, 'correction')}")
        self.query_one("#logbook-events", Static).update(
            events_table(history, self._currency(self.heats), units))
        scroll = self.query_one("#logbook-history", VerticalScroll)
        scroll.scroll_home(animate=False)
        scroll.focus()

    # -- actions ------------------------------------------------------------------------------
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "replay":
            return self.mode == "history"
        if action == "open_demo":
            return self.mode == "absent"
        if action == "focus_shifts":
            return self.mode == "list"
        if action == "open_heat":
            return self.mode == "list" and bool(self.heats)
        return True

    def on_key(self, event: events.Key) -> None:
        """A key whose action cannot run now reaches here (its binding declined it): say why."""
        say_why_declined(self, event, self.query_one(WhyNot), self._why_not)

    def _why_not(self, action: str, parameters: tuple[object, ...]) -> str:
        if self.mode == "reading":
            return "waits for the logbook to be read"
        if action == "open_demo":
            return "the demo week is offered only when there is no logbook to list"
        if self.mode == "absent":
            return f"no heat to select: the logbook lists none ({key_for(self, 'open_demo')} opens the demo week)"
        back = key_for(self, "back")
        if action == "replay":
            return f"no heat selected: open a heat's history first ({key_for(self, 'open_heat')}), then replay it"
        if action == "open_heat":
            return ("no heat selected: this shift has no heats" if self.mode == "list"
                    else f"this heat's history is open; {back} goes back to the heat list")
        return f"the shifts are beside the heat list; {back} goes back to it"

    def action_back(self) -> None:
        if self.mode == "history":
            self._show_mode("list")
            self._title(self.list_title)
            self.query_one("#logbook-heats").focus()
        else:
            self.dismiss(None)

    def action_open_heat(self) -> None:
        table = self.query_one("#logbook-heats", DataTable)
        if self.heats and 0 <= table.cursor_row < len(self.heats):
            self._open_history(self.heats[table.cursor_row].heat_id)

    def action_focus_shifts(self) -> None:
        self.query_one("#logbook-shifts").focus()

    def action_open_demo(self) -> None:
        self._show_mode("reading")
        self._title("Building the demo shop's week of heats (the first time takes a few seconds) …")
        self._open(self.path, demo=True)

    def action_replay(self) -> None:
        if self.history is None:
            return
        try:
            record = record_from_history(self.history, self.book)
        except InputError as exc:
            self.notify(str(exc), title="Cannot replay this heat", severity="error", timeout=10)
            return
        self.app.push_screen(ReplayScreen(record, self.book))

    # -- drawing ------------------------------------------------------------------------------
    def _show_mode(self, mode: str) -> None:
        self.mode = mode
        self.query_one(WhyNot).say(None)  # what it explained has moved on
        self.query_one("#logbook-message").display = mode in ("reading", "absent")
        self.query_one("#logbook-list").display = mode == "list"
        self.query_one("#logbook-history").display = mode == "history"
        if mode == "reading":
            self.query_one("#logbook-message", Static).update("")
        self.refresh_bindings()

    def _title(self, text: str, error: bool = False) -> None:
        self.query_one("#logbook-title", Static).update(Text(text, style="bold red" if error else "bold"))

    def _currency(self, heats: tuple[HeatSummary, ...]) -> str:
        return next((h.currency for h in heats if h.currency), self.book.settings.currency)


def make_screen(app: Any) -> LogbookScreen:
    """The screen as the main app's extra-screen hook opens it (F10 on the trim screen)."""
    return LogbookScreen(app.book, app.logbook_path)
