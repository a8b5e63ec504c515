"""The logbook screen driven with Textual's pilot: shifts, a heat's history, its replay; no logbook yet."""

from __future__ import annotations

import io
from collections.abc import Awaitable, Callable
from pathlib import Path

import pytest
from rich.console import Console
from textual.pilot import Pilot
from textual.widgets import DataTable, OptionList, Static

from meltfix.records.logbook import Logbook
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.app import make_app
from meltfix.tui.screens.logbook import LogbookScreen
from meltfix.tui.screens.replay import ReplayScreen

Settle = Callable[[Pilot], Awaitable[None]]


def _text(screen: LogbookScreen, selector: str) -> str:
    console = Console(record=True, width=80, file=io.StringIO())
    console.print(screen.query_one(selector, Static).content)
    # Folded into one line: a long temporary path wraps at a different word on every machine.
    return " ".join(console.export_text().split())


async def test_lists_shifts_opens_a_heat_history_and_its_replay(
        demo_book: RecipeBook, demo_heat: Heat, one_day_logbook: Path, settle: Settle) -> None:
    with Logbook(one_day_logbook, create=False) as logbook:
        shifts = logbook.shifts()
        newest = logbook.list_heats(shift=shifts[-1])
    app = make_app(demo_book, demo_heat, logbook_path=one_day_logbook)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f10")  # the trim screen's key for the logbook
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, LogbookScreen) and screen.mode == "list"
        assert screen.shifts == tuple(reversed(shifts))  # newest first
        assert screen.query_one("#logbook-shifts", OptionList).option_count == len(shifts) == 3
        table = screen.query_one("#logbook-heats", DataTable)
        assert [table.get_row_at(k)[0] for k in range(table.row_count)] == [h.heat_id for h in newest]
        assert screen.focused is table

        await pilot.press("enter")
        await settle(pilot)
        assert screen.mode == "history" and screen.history is not None
        assert screen.history.heat_id == newest[0].heat_id
        events = _text(screen, "#logbook-events")
        assert "Sample S1" in events and "Added" in events

        await pilot.press("f9")  # replay, as on the trim screen
        await settle(pilot)
        replay = app.screen
        assert isinstance(replay, ReplayScreen) and replay.record is not None
        assert replay.record.heat_id == newest[0].heat_id
        assert len(replay.steps) == len(screen.history.samples)

        await pilot.press("escape", "escape")  # replay closed, then back from the history to the list
        assert app.screen is screen and screen.mode == "list"


async def test_no_logbook_yet_says_so_and_offers_the_demo_week(
        demo_book: RecipeBook, demo_heat: Heat, one_day_logbook: Path, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch, settle: Settle) -> None:
    # The demo key opens the one-day copy rather than building the whole week here.
    monkeypatch.setattr("meltfix.records.demo_logbook.demo_logbook_path", lambda book=None: one_day_logbook)
    screen = LogbookScreen(demo_book, tmp_path / "none-yet.sqlite")
    app = make_app(demo_book, demo_heat)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await app.push_screen(screen)
        await settle(pilot)
        assert screen.mode == "absent"
        assert "no logbook here yet" in _text(screen, "#logbook-message")
        assert not (tmp_path / "none-yet.sqlite").exists()  # looking never creates the file
        await pilot.press("d")
        await settle(pilot)
        assert screen.mode == "list" and screen.demo and len(screen.shifts) == 3
