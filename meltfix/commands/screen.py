"""`meltfix [HEAT.toml] [--recipes DIR] [--logbook PATH]`: open the terminal screen.

With no heat file the screen opens on the demo shop's first heat. Textual is imported only
inside run(), so the plain command line never loads it.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from meltfix.commands.logbook_args import LOGBOOK_HELP, given_logbook
from meltfix.errors import InputError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("heat", nargs="?", metavar="HEAT.toml",
                        help="heat to open (default: the demo shop's first heat)")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--logbook", metavar="PATH|URL", help="the " + LOGBOOK_HELP + " for accepted plans")
    parser.add_argument("--tickets", metavar="DIR", type=Path, help="folder for crew tickets (default: here)")
    parser.add_argument("--light", action="store_true", help="colours for a light terminal")


def first_demo_heat() -> Path:
    """The demo shop's first heat file (sorted by name)."""
    from meltfix.paths import demo_dir

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
    from meltfix.heat import load_heat
    from meltfix.recipes import load_recipes
    from meltfix.tui.app import make_app

    book = load_recipes(args.recipes)
    heat_path = Path(args.heat) if args.heat else first_demo_heat()
    heat = load_heat(heat_path, book)
    return make_app(book, heat, heat_path=heat_path, logbook_path=given_logbook(args.logbook),
                    tickets_dir=args.tickets, light=args.light)


def run(args: argparse.Namespace) -> int:
    app = build_app(args)
    app.run()
    # Textual sets a non-zero return code when the app stops on an unhandled error: pass it on, so a
    # crashed screen never looks like a clean exit to a script or a shell.
    return app.return_code or 0
