"""The plain command line. It never loads the terminal screen unless asked to open it.

Each command lives in ``meltfix.commands.<name>`` with ``add_arguments(parser)`` and
``run(args) -> int``; this module only dispatches and turns bad input into exit status 2.
"""

from __future__ import annotations

import argparse
import gc
import importlib
import os
import sys
from collections.abc import Collection, Sequence
from pathlib import Path
from typing import NoReturn

from meltfix import __version__
from meltfix.base.errors import InputError
from meltfix.commands.exits import EXIT_BAD_INPUT, EXIT_INTERRUPTED, EXIT_PIPE_CLOSED

# Commands that print tables take --width; the narrowest width their long layouts are made for.
TABLE_COMMANDS = ("solve", "import", "report", "replay", "recoveries")
MIN_WIDTH = 40

# command -> (module under meltfix.commands, one-line summary)
COMMANDS = {
    "solve": ("solve", "plan the additions for one or more heat files"),
    "import": ("import_export", "read a spectrometer export (burns averaged, outliers flagged)"),
    "report": ("report", "the supervisor's cost report from the logbook"),
    "replay": ("replay", "step through a recorded heat beside the plans meltfix would make"),
    "recoveries": ("recoveries", "learn each material's real recoveries from the logbook and propose updates"),
    "logbook": ("logbook", "copy a shop's history from one logbook to another (SQLite, PostgreSQL)"),
    "screen": ("screen", "open the terminal screen (the default when no command is given)"),
}


class _OneLineParser(argparse.ArgumentParser):
    """argparse's parser, but a mistake on the command line is one line like any other bad input
    (argparse prints the usage too, and exits from deep inside parse_args)."""

    def error(self, message: str) -> NoReturn:
        raise InputError("command line", self.prog, f"{message} ({self.prog} --help lists the options)")


def build_parser(detailed: Collection[str] = tuple(COMMANDS), listed: Collection[str] = tuple(COMMANDS)
                 ) -> argparse.ArgumentParser:
    """The command line's parser, with the commands in ``listed``. Only those in ``detailed`` get their
    options, which imports their modules: `meltfix --help` lists the commands from their summaries and
    imports none; a run of one command needs only that command (each parser costs argparse a few
    translation and terminal-size look-ups)."""
    parser = _OneLineParser(
        prog="meltfix",
        description="Plan the cheapest additions that bring a heat of steel or iron into its grade. "
        "Run with no command (or with a HEAT.toml) to open the terminal screen.",
        epilog="meltfix advises; a qualified person decides, under local codes and the shop's own procedures.",
    )
    parser.add_argument("--version", action="version", version=f"meltfix {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module_name, summary) in COMMANDS.items():
        if name not in listed:
            continue
        command = sub.add_parser(name, help=summary, description=summary[0].upper() + summary[1:] + ".")
        if name in detailed:
            importlib.import_module(f"meltfix.commands.{module_name}").add_arguments(command)
            if name in TABLE_COMMANDS:
                command.add_argument("--width", metavar="COLUMNS", type=int,
                                     help="width of the tables in characters (default: the terminal's, or $COLUMNS); "
                                     "narrow tables fold or list one element per row")
    return parser


# A run builds tens of thousands of objects that live to its end (modules, the recipe book, hot
# models); at the collector's default, a pass every 700 new objects, a one-heat `meltfix solve`
# spends a sixth of its CPU walking them. Cycles are still collected, in passes ~14x rarer.
COLLECT_EVERY = 10_000


def set_up_process() -> None:
    """What the `meltfix` program sets before it imports anything heavy (the benchmarks' children too)."""
    gc.set_threshold(COLLECT_EVERY)
    # NumPy's OpenBLAS starts a thread per core as it loads, for matrix products far larger than a
    # recipe book's; one thread spares each process (and each of `solve --jobs N`) that start-up and
    # leaves the cores to HiGHS and the screen. A user's own setting is kept.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def program() -> int:
    """`meltfix` as a process of its own (the console script): main() in a process set up for it."""
    set_up_process()
    try:
        return main()
    except BrokenPipeError:
        # The reader went away (`meltfix solve ... | head`): stop quietly, as a writer to a closed
        # pipe does, and point stdout at nothing so Python's own last flush does not fail again.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_PIPE_CLOSED
    finally:
        # The process ends here: Python's last collections would walk every object only to free
        # memory the operating system is about to take back.
        gc.freeze()


def main(argv: Sequence[str] | None = None) -> int:
    args_list = list(sys.argv[1:] if argv is None else argv)
    # `meltfix` alone, `meltfix HEAT.toml` or `meltfix --recipes DIR` (any screen option) opens the screen.
    if not args_list or (args_list[0] not in COMMANDS and args_list[0] not in ("-h", "--help", "--version")):
        unknown = _unknown_command(args_list[0]) if args_list else None
        if unknown is not None:
            print(f"meltfix: {unknown}", file=sys.stderr)
            return EXIT_BAD_INPUT
        args_list.insert(0, "screen")
    columns = os.environ.get("COLUMNS")
    try:
        listed = args_list[:1] if args_list[0] in COMMANDS else tuple(COMMANDS)  # else --help or --version
        args = build_parser(detailed=args_list[:1], listed=listed).parse_args(args_list)
        module = importlib.import_module(f"meltfix.commands.{COMMANDS[args.command][0]}")
        width = getattr(args, "width", None)
        if width is not None:
            if width < MIN_WIDTH:
                raise InputError("command line", "--width", f"must be at least {MIN_WIDTH} columns, got {width}")
            # Every table is printed by a rich Console, which takes its width from $COLUMNS.
            os.environ["COLUMNS"] = str(width)
        return int(module.run(args))
    except InputError as exc:
        print(f"meltfix: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        return EXIT_INTERRUPTED
    finally:  # main() may be called again in the same process (the tests do)
        if columns is None:
            os.environ.pop("COLUMNS", None)
        else:
            os.environ["COLUMNS"] = columns


def _unknown_command(word: str) -> str | None:
    """What to say when ``word`` looks like a mistyped command rather than a heat file to open."""
    if word.startswith("-") or word.endswith(".toml") or Path(word).exists():
        return None
    import difflib  # only for a mistyped command: every run pays for what the top imports

    near = difflib.get_close_matches(word, COMMANDS, n=1, cutoff=0.6)
    if near:
        return f"command line: '{word}' is not a command; did you mean '{near[0]}'? (meltfix --help lists them)"
    if "/" in word or "." in word:
        return None  # a path: the screen says the file is not there
    return f"command line: '{word}' is not a command (meltfix --help lists them: {', '.join(COMMANDS)})"


if __name__ == "__main__":  # pragma: no cover
    sys.exit(program())
