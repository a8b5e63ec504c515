"""The Textual application: holds the shop's data; the trim screen is its first screen.

Other screens plug in by name: ``EXTRA_SCREENS`` maps a key to a module that defines
``make_screen(app: MeltfixApp) -> Screen``. The app offers them ``app.book``,
``app.logbook_path`` and ``app.tickets_dir``. They are imported when
first opened, which keeps them off the trim screen's start-up.
"""

from __future__ import annotations

import importlib
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING

from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.notifications import SeverityLevel
from textual.screen import Screen

from meltfix.base.errors import visible
from meltfix.base.paths import user_data_dir
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.keys import key_name
from meltfix.tui.screens.trim import TrimScreen
from meltfix.tui.toast_text import fit_paths

if TYPE_CHECKING:
    from meltfix.records.logbook.location import LogbookLocation

EXTRA_SCREENS = {
    "replay": "meltfix.tui.screens.replay",
    "logbook": "meltfix.tui.screens.logbook",
}


class MeltfixApp(App[None]):
    # The trim screen's CSS is read with the app's, at start: as the screen's own CSS_PATH it had
    # Textual parse every stylesheet again, its own defaults included, when the screen was pushed.
    CSS_PATH = ["app.tcss", "screens/trim.tcss"]
    TITLE = "meltfix"
    # Keys that mean the same on every screen (with the framework's Ctrl+Q quit and Ctrl+P palette).
    BINDINGS = [
        Binding("ctrl+l", "toggle_dark", "Light/dark", show=False, tooltip="Switch between light and dark colours",
                id="app.dark"),
    ]

    def __init__(self, book: RecipeBook, heat: Heat, *, heat_path: Path | None = None,
                 logbook_path: LogbookLocation | None = None, tickets_dir: Path | None = None, light: bool = False) -> None:
        super().__init__()
        self.book = book
        self.heat = heat
        self.heat_path = heat_path
        self.logbook_path = logbook_path
        """The logbook file; None = the logbook module's own default (its environment variable)."""
        # --tickets, else the shop's ticket_dir, else a folder of the user's data, never wherever
        # the program happened to be started.
        self.tickets_dir = tickets_dir if tickets_dir is not None else (
            Path(book.settings.ticket_dir) if book.settings.ticket_dir else user_data_dir() / "tickets")
        self.light = light
        if light:  # set only when asked, before any widget is styled: a theme change restyles every widget
            self.theme = "textual-light"

    def notify(self, message: str, *, title: str = "", severity: SeverityLevel = "information",
               timeout: float | None = None, markup: bool = True) -> None:
        # Messages carry ids, names and notes from files: always plain, visible text, never markup
        # (a heat "KB-1 [/]" would otherwise stop the app) and never a raw control character. A path
        # is shortened to fit a toast's text (Textual's Toast: 60 columns, at most half its rack,
        # which is the screen less a 2-column scrollbar; less its padding and left border), so the
        # wrapping moves it whole to a line of its own rather than breaking it mid-name.
        width = min(60, (self.size.width - 2) // 2) - 3
        super().notify(fit_paths(visible(message), width), title=visible(title), severity=severity, timeout=timeout,
                       markup=False)

    def get_default_screen(self) -> Screen:
        # The trim screen is the app's first screen itself, not pushed over the framework's empty
        # one: that one was styled, laid out and painted for nothing, and the push laid out the
        # trim screen once more after its first frame.
        return TrimScreen(self.book, self.heat, heat_path=self.heat_path, logbook_path=self.logbook_path,
                          tickets_dir=self.tickets_dir)

    def get_key_display(self, binding: Binding) -> str:
        """Every key in the house spelling (meltfix.tui.keys), in the footer, help and palette alike."""
        return binding.key_display or key_name(binding.key)

    def get_system_commands(self, screen: Screen) -> Iterator[SystemCommand]:
        # The framework's "Keys" panel repeats our own help (F1) in other words: leave it out.
        yield from (command for command in super().get_system_commands(screen) if command.title != "Keys")

    def action_toggle_dark(self) -> None:
        self.theme = "textual-light" if self.current_theme.dark else "textual-dark"

    def action_open_extra(self, name: str) -> None:
        """Open one of the ``EXTRA_SCREENS``."""
        label = name.capitalize()
        try:
            screen = importlib.import_module(EXTRA_SCREENS[name]).make_screen(self)
        except Exception as exc:  # a fault in another screen is reported, the trim screen stays usable
            self.notify(f"{type(exc).__name__}: {exc}", title=f"{label} could not open", severity="error")
            return
        self.push_screen(screen)


def make_app(book: RecipeBook, heat: Heat, *, heat_path: Path | None = None, logbook_path: LogbookLocation | None = None,
             tickets_dir: Path | None = None, light: bool = False) -> MeltfixApp:
    """The one way the command line, the tests and the benchmark build the app."""
    return MeltfixApp(book, heat, heat_path=heat_path, logbook_path=logbook_path, tickets_dir=tickets_dir,
                      light=light)
