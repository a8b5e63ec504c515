"""`meltfix [HEAT.toml] [--recipes DIR] [--logbook PATH]`: open the terminal screen.

With no heat file the screen opens on the demo shop's first heat. Textual is imported only
inside run(), so the plain command line never loads it.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from meltfix.base.errors import InputError
from meltfix.commands.logbook_args import LOGBOOK_HELP, given_logbook

if TYPE_CHECKING:
    from meltfix.shop.recipes import RecipeBook


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("heat", nargs="?", metavar="HEAT.toml",
                        help="heat to open (default: the demo shop's first heat)")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--logbook", metavar="PATH|URL", help="the " + LOGBOOK_HELP + " for accepted plans (on the built-in demo "
                        "shop: a demo logbook of its own)")
    parser.add_argument("--tickets", metavar="DIR", type=Path, help="folder for crew tickets (default: shop.toml ticket_dir, else tickets/ in "
                        "the user's meltfix data folder)")
    parser.add_argument("--light", action="store_true", help="colours for a light terminal")


def on_a_terminal() -> bool:
    """Whether the keys come from a terminal and the screen goes to one."""
    return sys.stdin.isatty() and sys.stdout.isatty()


def first_demo_heat() -> Path:
    """The demo shop's first heat file (sorted by name)."""
    from meltfix.base.paths import demo_dir

    try:
        folder = demo_dir() / "heats"
    except FileNotFoundError as exc:
        raise InputError("demo", "heats", str(exc)) from None
    heats = sorted(folder.glob("*.toml"))
    if not heats:
        raise InputError(folder, "", "holds no heat file (*.toml); give a HEAT.toml to open")
    return heats[0]


def build_app(args: argparse.Namespace):  # -> MeltfixApp, typed loosely to keep Textual out of this module
    """Load the recipe book and the heat (raising InputError for bad input) and make the app."""
    from meltfix.shop.heat import load_heat
    from meltfix.shop.recipes import load_recipes
    from meltfix.tui.app import make_app

    book = load_recipes(args.recipes)
    heat_path = Path(args.heat) if args.heat else first_demo_heat()
    heat = load_heat(heat_path, book)
    logbook = given_logbook(args.logbook)
    if logbook is None and is_demo_shop(book):
        logbook = demo_accepted_path()
    return make_app(book, heat, heat_path=heat_path, logbook_path=logbook, tickets_dir=args.tickets,
                    light=args.light)


def is_demo_shop(book: RecipeBook) -> bool:
    """Whether ``book`` is the built-in demo shop's recipe book."""
    from meltfix.base.paths import default_recipes_dir

    try:
        return book.folder is not None and book.folder.resolve() == default_recipes_dir().resolve()
    except FileNotFoundError:
        return False


def demo_accepted_path() -> Path:
    """Where plans accepted on the built-in demo shop are recorded: a logbook of its own in meltfix's
    cache folder, never the user's ($MELTFIX_LOGBOOK or the default), so demo heats neither mix with
    a real shop's in its reports nor teach `meltfix recoveries` (--logbook still chooses)."""
    from meltfix.base.paths import cache_dir

    return cache_dir() / "demo-accepted.sqlite"


def run(args: argparse.Namespace) -> int:
    app = build_app(args)  # first: a bad heat file or recipe book is named whatever the terminal
    if not on_a_terminal():
        # Without one Textual would draw into the pipe or file and wait for keys that never come.
        raise InputError("command line", "screen", "the screen needs a terminal to draw on and read keys from; "
                         "in a script or a pipe use `meltfix solve HEAT.toml` (--json for other programs)")
    app.run()
    # Textual sets a non-zero return code when the app stops on an unhandled error: pass it on, so a
    # crashed screen never looks like a clean exit to a script or a shell.
    return app.return_code or 0
