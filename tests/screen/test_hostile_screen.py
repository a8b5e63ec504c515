"""The trim screen under hostile text: markup, control characters and huge strings pasted into every
input, an id that looks like markup, an empty cell the grade needs. The app must keep running."""

from __future__ import annotations

import subprocess
import sys

from textual.events import Paste
from textual.widgets import Input

from meltfix.tui.app import make_app
from meltfix.tui.draft import NOT_MEASURED
from meltfix.tui.screens.trim import TrimScreen
from meltfix.tui.widgets.plan_view import PlanView


def _app(book, heat, folder):
    return make_app(book, heat, tickets_dir=folder, logbook_path=folder / "log.sqlite")


PASTES = ("[/] [bold red]x[/", "\x1b[2J\x1b]52;c;aGk=\x07\u202e0.40", "9" * 10_000)


async def test_pasting_hostile_text_into_every_input_leaves_the_app_running(demo_book, demo_heat, tmp_path,
                                                                            settle) -> None:
    app = _app(demo_book, demo_heat, tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, TrimScreen)
        inputs = list(screen.query(Input))
        assert len(inputs) > 10
        for text in PASTES:
            for widget in inputs:
                widget.focus()
                widget.value = ""
                widget.post_message(Paste(text))
            await settle(pilot)
            assert all(widget.value for widget in inputs)  # the paste went in
            assert app.is_running and app.screen is screen
            assert not screen.plannable  # nothing of that is a heat to plan
            assert screen.check_action("accept", ()) is None and screen.check_action("ticket", ()) is None
    assert app.return_code in (0, None)


async def test_an_id_that_looks_like_markup_shows_and_plans(demo_book, demo_heat, tmp_path, settle) -> None:
    heat = demo_heat.with_changes(heat_id="KB-1 [/] [bold]")
    app = _app(demo_book, heat, tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert screen.query_one(PlanView).is_current
        app.notify("heat KB-1 [/] recorded")  # a notification carrying an id is plain text too
        await pilot.pause()
        assert app.is_running


async def test_an_empty_needed_cell_is_marked_and_holds_accept_and_ticket(demo_book, demo_heat, tmp_path,
                                                                          settle) -> None:
    app = _app(demo_book, demo_heat, tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        app.screen.query_one("#cell-Cu", Input).focus()
        await pilot.press("ctrl+u")
        screen = app.screen
        await settle(pilot)
        assert not screen.plannable
        assert screen.check_action("accept", ()) is None and screen.check_action("ticket", ()) is None
        assert NOT_MEASURED.split(":")[0] in str(screen.query_one("#row-Cu").query_one("ReasonLine").render())
        await pilot.press(*"nm")
        await settle(pilot)
        assert screen.plannable and screen.query_one(PlanView).is_current
        assert screen.query_one(PlanView).plan.cautions[0].startswith("NOT MEASURED: Cu")


def test_demo_heats_go_to_a_demo_logbook_never_the_users(tmp_path, monkeypatch) -> None:
    import argparse
    import shutil

    from meltfix.base.paths import default_recipes_dir
    from meltfix.commands import screen

    monkeypatch.setenv("MELTFIX_LOGBOOK", str(tmp_path / "real.sqlite"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    args = argparse.Namespace(heat=None, recipes=None, logbook=None, tickets=tmp_path, light=False)
    assert screen.build_app(args).logbook_path == tmp_path / "cache" / "meltfix" / "demo-accepted.sqlite"
    own = tmp_path / "own"
    shutil.copytree(default_recipes_dir(), own)
    assert screen.build_app(argparse.Namespace(**{**vars(args), "recipes": str(own)})).logbook_path is None
    chosen = tmp_path / "chosen.sqlite"
    assert screen.build_app(argparse.Namespace(**{**vars(args), "logbook": chosen})).logbook_path == chosen


def test_a_screen_that_dies_of_an_error_exits_non_zero(monkeypatch) -> None:
    from meltfix.commands import screen

    class Crashed:
        return_code = 1

        def run(self) -> None:
            pass

    monkeypatch.setattr(screen, "build_app", lambda args: Crashed())
    monkeypatch.setattr(screen, "on_a_terminal", lambda: True)
    assert screen.run(None) == 1


def test_the_screen_without_a_terminal_says_so_and_exits_2() -> None:
    # `meltfix` in a script, its output to a file: one line pointing at `meltfix solve`, not a screen
    # drawn into the file waiting for keys that never come.
    done = subprocess.run([sys.executable, "-m", "meltfix"], stdin=subprocess.DEVNULL, capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr.startswith("meltfix: command line: screen: the screen needs a terminal")
    assert "meltfix solve" in done.stderr
