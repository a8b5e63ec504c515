"""A key that cannot act says why (trim, replay and logbook screens), and an empty pick list says what it searched."""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from pathlib import Path

from textual.pilot import Pilot
from textual.screen import Screen
from textual.widgets import Input, Label, Static

from meltfix.base.paths import demo_dir
from meltfix.records.heat_record import load_record
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.app import make_app
from meltfix.tui.screens.choice import ChoiceDialog
from meltfix.tui.screens.logbook import LogbookScreen
from meltfix.tui.screens.replay import ReplayScreen

Settle = Callable[[Pilot], Awaitable[None]]


def _plain(widget: Static) -> str:
    return " ".join(str(widget.render()).split())


async def test_keys_that_cannot_act_say_why_in_the_status(demo_book: RecipeBook, demo_heat: Heat, tmp_path: Path,
                                                          settle: Settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f8")  # nothing accepted yet
        why = app.screen.query_one("#plan-why-not", Static)  # the line is there once it has something to say
        assert why.display and "F8 Added: accept a plan first (F6)" in _plain(why)
        app.screen.query_one("#bath", Input).value = "-5"  # the inputs no longer hold together
        await settle(pilot)
        assert not why.display  # a change of the plan clears the old remark
        await pilot.press("f6", "f7")
        assert why.display and "F7 Ticket: waits for a plan" in _plain(why)
        assert not list(tmp_path.glob("*-ticket.txt"))
        assert why.region.bottom <= 24 - 1  # on screen at the design size


async def test_empty_grade_picker_says_what_it_searched(demo_book: RecipeBook, demo_heat: Heat,
                                                        settle: Settle) -> None:
    app = make_app(demo_book, demo_heat)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f2", *"1054")
        await pilot.pause()
        assert isinstance(app.screen, ChoiceDialog)
        empty = app.screen.query_one("#choice-empty", Label)
        text = _plain(empty)
        assert empty.display and "“1054”" in text and f"all {len(demo_book.grades)} grades" in text
        assert "name, family and standard" in text
        await pilot.press("backspace", "backspace", "backspace", "backspace")
        assert not empty.display  # every grade listed again


async def _open(pilot: Pilot, settle: Settle, screen: Screen[None], line: str) -> Static:
    """Push ``screen`` over the trim screen, let it read what it shows, and give its why-not line."""
    await pilot.app.push_screen(screen)
    await settle(pilot)
    return screen.query_one(line, Static)


async def test_replay_keys_that_cannot_act_say_why(demo_book: RecipeBook, demo_heat: Heat, tmp_path: Path,
                                                   settle: Settle) -> None:
    record = load_record(demo_dir() / "records" / "KB-24211.toml", demo_book)
    app = make_app(demo_book, demo_heat)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        screen = ReplayScreen(record, demo_book)
        why = await _open(pilot, settle, screen, "#replay-why-not")
        assert not why.display
        await pilot.press("p")
        assert why.display and "p Previous: this is the first sample" in _plain(why)
        assert why.region.bottom <= 24 - 1  # on screen at the design size
        await pilot.press("n")
        assert not why.display  # another sample: the old remark is gone
        await pilot.press(*"nnn")
        assert why.display and f"n Next: this is the last sample of the heat ({len(screen.steps)} of" in _plain(why)

        # No heat chosen yet: training has nothing to train on.
        empty = ReplayScreen(None, demo_book, records_dir=tmp_path)
        line = await _open(pilot, settle, empty, "#replay-why-not")
        await pilot.press("ctrl+t")
        assert line.display and "Ctrl+T Training: choose a recorded heat first (Ctrl+O)" in _plain(line)
        assert not empty.training


async def test_logbook_keys_with_nothing_selected_say_why(demo_book: RecipeBook, demo_heat: Heat,
                                                          one_day_logbook: Path, tmp_path: Path,
                                                          settle: Settle) -> None:
    app = make_app(demo_book, demo_heat)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        screen = LogbookScreen(demo_book, one_day_logbook)
        why = await _open(pilot, settle, screen, "#logbook-why-not")
        assert screen.mode == "list"
        await pilot.press("f9")  # a heat highlighted in the list, but no history open
        assert why.display and "F9 Replay: no heat selected: open a heat's history first (Enter)" in _plain(why)
        assert not isinstance(app.screen, ReplayScreen)
        assert why.region.bottom <= 24 - 1

        nothing = LogbookScreen(demo_book, tmp_path / "none-yet.sqlite")
        line = await _open(pilot, settle, nothing, "#logbook-why-not")
        assert nothing.mode == "absent"
        await pilot.press("f9")
        said = _plain(line)
        assert line.display and "F9 Replay: no heat to select" in said and "d opens the demo week" in said


async def test_the_footer_presses_a_clicked_key_and_names_it(demo_book: RecipeBook, demo_heat: Heat, tmp_path: Path,
                                                             settle: Settle) -> None:
    """The footer draws every key on one line: a click on a key presses it, a greyed key stays greyed and
    does nothing, and the key under the mouse gives its tooltip."""
    from meltfix.tui.screens.help import KeysScreen
    from meltfix.tui.widgets.footer import KeysFooter

    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        footer = app.screen.query_one(KeysFooter)
        line = str(footer.render())
        assert line.startswith("F1 Help F2 Grade F3 Open") and "F8 Added" in line
        added = line.index("F8 Added")
        await pilot.hover(KeysFooter, offset=(added + 1, 0))
        assert footer.tooltip == "Record what actually went in (after accepting)"
        await pilot.click(KeysFooter, offset=(added + 1, 0))  # nothing accepted: F8 is greyed
        await settle(pilot)
        assert not isinstance(app.screen, KeysScreen) and not any(line.display for line in app.screen.query("#plan-why-not"))
        await pilot.click(KeysFooter, offset=(1, 0))
        await settle(pilot)
        assert isinstance(app.screen, KeysScreen)
