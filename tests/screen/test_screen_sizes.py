"""Every screen at the design size (80x24) and at a roomy one (120x40).

A snapshot of each screen at both sizes, and pilot checks that at 80x24 the plan's status and
every gauge of the grade are on screen for each of the demo shop's heats.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from pathlib import Path

import pytest
from textual.app import App
from textual.pilot import Pilot
from textual.widgets import Input

from meltfix.base.paths import demo_dir
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.app import make_app
from meltfix.tui.screens.logbook import LogbookScreen
from meltfix.tui.widgets.gauge import ChemistryGauges, gauge_rows
from meltfix.tui.widgets.plan_view import PlanView

Settle = Callable[[Pilot], Awaitable[None]]
SIZES = [(80, 24), (120, 40)]


def _screen_lines(app: App) -> list[str]:
    """The whole terminal as plain text lines, as the user sees it."""
    return [strip.text for strip in app.screen._compositor.render_strips()]


def _still(app: App) -> None:
    """No blinking cursor: the picture must not depend on the clock."""
    for field in app.screen.query(Input):
        field.cursor_blink = False


@pytest.mark.parametrize("heat_file", sorted((demo_dir() / "heats").glob("*.toml")), ids=lambda p: p.stem)
async def test_status_and_every_gauge_on_screen_at_80x24(demo_book: RecipeBook, heat_file: Path,
                                                          settle: Settle) -> None:
    heat = load_heat(heat_file, demo_book)
    app = make_app(demo_book, heat, tickets_dir=Path("."))
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        view = app.screen.query_one(PlanView)
        assert view.is_current and view.plan is not None
        lines = _screen_lines(app)
        assert any("● current" in line or "▲ current" in line for line in lines)
        gauges = app.screen.query_one(ChemistryGauges)
        rows = gauge_rows(demo_book.grade(heat.grade), heat.analysis.pct, view.plan.predicted_pct)
        top, left = gauges.content_region.y, gauges.content_region.x
        assert gauges.content_region.bottom <= 24 - 1  # above the footer
        for k, row in enumerate(rows):
            assert lines[top + k][left:].startswith(row.symbol + " "), (row.symbol, lines[top + k])
        assert any("○ now ● after" in line for line in lines)  # the legend, in the gauges' border


async def _trim(pilot: Pilot, settle: Settle) -> None:
    await settle(pilot)


async def _materials(pilot: Pilot, settle: Settle) -> None:
    await settle(pilot)
    await pilot.press("f5")
    await pilot.pause()


async def _help(pilot: Pilot, settle: Settle) -> None:
    await settle(pilot)
    await pilot.press("f1")
    await pilot.pause()


async def _replay(pilot: Pilot, settle: Settle) -> None:
    await settle(pilot)
    await pilot.press("f9")
    await settle(pilot)
    await pilot.press("enter")  # the first recorded heat
    await settle(pilot)


def _logbook_steps(book: RecipeBook, path: Path) -> Callable[[Pilot, Settle], Awaitable[None]]:
    async def steps(pilot: Pilot, settle: Settle) -> None:
        await settle(pilot)
        # No logbook file yet; d opens the demo's (here: one day of it), so no temporary path is shown.
        await pilot.app.push_screen(LogbookScreen(book, path))
        await settle(pilot)
        await pilot.press("d")
        await settle(pilot)
    return steps


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
@pytest.mark.parametrize("screen", ["trim", "materials", "help", "replay", "logbook"])
def test_screen_snapshot(screen: str, size: tuple[int, int], demo_book: RecipeBook, demo_heat: Heat,
                         demo_heat_path: Path, one_day_logbook: Path, tmp_path: Path,
                         monkeypatch: pytest.MonkeyPatch, snap_compare, settle: Settle) -> None:
    monkeypatch.setattr("meltfix.records.demo_logbook.demo_logbook_path", lambda book=None: one_day_logbook)
    app = make_app(demo_book, demo_heat, heat_path=demo_heat_path, tickets_dir=Path("."))
    steps = {"trim": _trim, "materials": _materials, "help": _help, "replay": _replay,
             "logbook": _logbook_steps(demo_book, tmp_path / "none-yet.sqlite")}[screen]

    async def ready(pilot: Pilot) -> None:
        await steps(pilot, settle)
        _still(pilot.app)
        await pilot.pause()

    assert snap_compare(app, terminal_size=size, run_before=ready)
