"""A key that cannot act says why, and an empty pick list says what it searched."""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from pathlib import Path

from textual.pilot import Pilot
from textual.widgets import Input, Label, Static

from meltfix.heat import Heat
from meltfix.recipes import RecipeBook
from meltfix.tui.app import make_app
from meltfix.tui.screens.choice import ChoiceDialog

Settle = Callable[[Pilot], Awaitable[None]]


def _plain(widget: Static) -> str:
    return " ".join(str(widget.render()).split())


async def test_keys_that_cannot_act_say_why_in_the_status(demo_book: RecipeBook, demo_heat: Heat, tmp_path: Path,
                                                          settle: Settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        why = app.screen.query_one("#plan-why-not", Static)
        await pilot.press("f8")  # nothing accepted yet
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
