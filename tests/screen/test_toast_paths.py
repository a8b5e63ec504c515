"""Toasts that name a file: the path never broken in the middle of a name."""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from pathlib import Path

from textual.geometry import Region
from textual.pilot import Pilot
from textual.widgets._toast import Toast

from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.app import make_app
from meltfix.tui.toast_text import fit_paths, shorten_path

Settle = Callable[[Pilot], Awaitable[None]]


def test_a_long_path_is_shortened_keeping_its_file_name() -> None:
    message = "Cannot read /srv/melt-shop/kestrel-bend/heats/2026/KB-24101.toml: grade: unknown"
    assert fit_paths(message, 30) == "Cannot read /srv/melt-shop…/KB-24101.toml: grade: unknown"
    assert len("/srv/melt-shop…/KB-24101.toml:") == 30  # the colon that hugs it counted in
    assert fit_paths("Cannot read demo/heats/KB-24101.toml: grade: unknown", 40) == \
        "Cannot read demo/heats/KB-24101.toml: grade: unknown"  # fits: the wrapping moves it whole
    long = "/srv/melt-shop/kestrel-bend/tickets/2026/december/KB-24101-ticket.txt"
    short = shorten_path(long, 37)
    assert len(short) == 37 and short.endswith("…/KB-24101-ticket.txt") and long.startswith(short[:15])
    # Not paths: a unit, and the text a heat id may carry.
    assert fit_paths("21.39 EUR/t for heat KB-1 [/]", 30) == "21.39 EUR/t for heat KB-1 [/]"


async def test_ticket_toast_never_breaks_its_path(demo_book: RecipeBook, demo_heat: Heat, tmp_path: Path,
                                                  settle: Settle) -> None:
    tickets = tmp_path / "a-deep-folder-for-the-tickets-of-the-melt-shop" / "furnace-two"
    tickets.mkdir(parents=True)
    app = make_app(demo_book, demo_heat, tickets_dir=tickets)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await settle(pilot)
        await pilot.press("f7")
        await settle(pilot)
        written = next(tickets.glob("*-ticket.txt"))
        await pilot.pause(0.2)  # the toast is mounted after the refresh that follows the key
        toast = next(iter(app.screen.query(Toast)))
        shown = [strip.text.strip() for strip in toast.render_lines(Region(0, 0, *toast.outer_size))]
        # The file name whole at the end of one line (the path shortened in its middle to fit).
        assert any(line.endswith(f"…/{written.name}") for line in shown), shown
