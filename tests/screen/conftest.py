"""Shared pieces of the trim-screen tests: the demo shop, and waiting for the planner worker."""

from __future__ import annotations

import asyncio
from collections.abc import Awaitable, Callable
from pathlib import Path

import pytest
from textual.app import App
from textual.pilot import Pilot

from meltfix.commands.screen import first_demo_heat
from meltfix.records.demo_logbook import build_demo_logbook
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.recipes import RecipeBook, load_recipes


@pytest.fixture(scope="session")
def demo_book() -> RecipeBook:
    return load_recipes()


@pytest.fixture(scope="session")
def demo_heat_path() -> Path:
    return first_demo_heat()


@pytest.fixture(scope="session")
def demo_heat(demo_book: RecipeBook, demo_heat_path: Path) -> Heat:
    return load_heat(demo_heat_path, demo_book)


@pytest.fixture(scope="session")
def one_day_logbook(tmp_path_factory: pytest.TempPathFactory, demo_book: RecipeBook) -> Path:
    """The demo shop's first day (three shifts): quicker to build than the whole week."""
    path = tmp_path_factory.mktemp("logbook") / "demo-day.sqlite"
    build_demo_logbook(path, demo_book, days=1)
    return path


async def _settle(pilot: Pilot) -> None:
    """Wait until every planner worker has finished and its message has been shown."""
    app: App = pilot.app
    for _ in range(3):  # a message handled may start a new worker; a couple of rounds is plenty
        # An exclusive worker cancels the one before it: that is expected, not a failure.
        await asyncio.gather(*(worker.wait() for worker in list(app.workers)), return_exceptions=True)
        await pilot.pause()


@pytest.fixture
def settle() -> Callable[[Pilot], Awaitable[None]]:
    return _settle
